"""The engine's one entry point: a batch of columns in; types, energies and member
probabilities out.

:func:`run_columns` is what every path calls — one profile (:func:`ptype.diagnose`), several
(:func:`ptype.diagnose_many`), a model grid (:mod:`ptype.grid`), a site timeline
(:mod:`ptype.roads.nowcast`) and verification (:mod:`ptype.verify`).  It runs

1. the **control**: the methods on the columns as given, then their consensus
   (:func:`diagnose_columns`), and
2. the **members**: Monte-Carlo perturbations of the columns
   (:func:`ptype.engine.probability.perturb`) through the methods the consensus reads, in
   batches that bound memory; the probability of a type is the fraction of a column's members
   that give it.

Everything is vectorised over columns; nothing here loops per column.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Callable, Iterable
from typing import Any

import numpy as np

from ptype.codes import Code
from ptype.engine import deadline
from ptype.engine.calibration import Calibration, features
from ptype.engine.columns import Columns
from ptype.engine.consensus import VOTERS, consensus
from ptype.engine.layers import zero_height_m
from ptype.engine.methods import METHOD_NAMES, get_method
from ptype.engine.methods.base import Context, MethodResult
from ptype.engine.probability import (
    SeedLike,
    check_members,
    perturb_members,
    possible_code_map,
    probabilities_from_codes,
    supported_codes,
)
from ptype.errors import OptionError

#: Method names: an iterable, a comma-separated string, or None for all of them.
MethodsLike = Iterable[str] | str | None

#: The particle model's classes of mass at the ground (``fraction_<class>`` in the fields).
PARTICLE_FRACTIONS = ("snow", "melting", "liquid", "refrozen")
#: Columns x members diagnosed in one vectorised pass when the caller sets no batch size.
DEFAULT_MEMBER_BATCH = 20_000


def method_names(methods: Iterable[str] | str | None) -> tuple[str, ...]:
    """The method names to run, in :data:`METHOD_NAMES` order; ``None`` means all.

    Accepts an iterable or a comma-separated string; an unknown name raises
    :class:`~ptype.errors.OptionError` naming it."""
    if methods is None:
        return METHOD_NAMES
    if isinstance(methods, str):
        methods = [m.strip() for m in methods.split(",") if m.strip()]
    names = tuple(methods)
    if not names:
        raise OptionError("methods: expected at least one method name", field="methods")
    for name in names:
        get_method(name)  # raises OptionError naming the bad one
    return tuple(m for m in METHOD_NAMES if m in names)


def run_methods(ctx: Context, methods: MethodsLike = None) -> dict[str, MethodResult]:
    """Run the named methods (default: all) on a context; results keyed by name."""
    return {name: get_method(name).run(ctx) for name in method_names(methods)}


def consensus_methods(methods: MethodsLike = None) -> tuple[str, ...]:
    """The methods the consensus of ``methods`` (default all) actually reads: its voters
    (:data:`ptype.engine.consensus.VOTERS`).  ``thickness`` and ``jennings`` never vote; the
    surface humidity check and the no-vote fallback compute Jennings et al. (2018) inside the
    consensus itself.  When none of ``methods`` votes the consensus is that fallback, and the
    methods are returned unchanged (the list of methods may not be empty)."""
    names = method_names(methods)
    voting = tuple(m for m in names if m in VOTERS)
    return voting or names


def warm_cold_energies(ctx: Context) -> tuple[np.ndarray, np.ndarray]:
    """Total melting energy (every warm layer below 250 hPa) and refreezing energy (cold area
    below the highest warm layer aloft), J/kg, from the air-temperature layers."""
    lay = ctx.air_layers
    _, K = lay.kind.shape
    area = np.where(lay.kind != 0, lay.area_j_kg, 0.0)
    warm = lay.kind > 0
    k_idx = np.arange(K)[None, :]
    aloft = warm & (k_idx > 0)
    highest = np.where(aloft.any(axis=1), K - 1 - np.argmax(aloft[:, ::-1], axis=1), 0)
    cold = np.where((lay.kind < 0) & (k_idx < highest[:, None]), area, 0.0).sum(axis=1)
    return np.where(warm, area, 0.0).sum(axis=1), cold


def diagnose_columns(columns: Columns, methods: MethodsLike = None, *,
                     return_context: bool = False, consensus_only: bool = False,
                     voter_weights: np.ndarray | None = None) -> dict[str, Any]:
    """The control pass: methods and consensus on ``columns`` as given (no members).

    Returns a dict of ``(n,)`` arrays: ``ptype`` (consensus :class:`Code` values), one code array
    per method name (:data:`ptype.codes.NO_RESULT` where it abstains), ``warm_area_j_kg``,
    ``cold_area_j_kg``, ``wetbulb_zero_height_m``, ``freezing_level_m``.  With
    ``return_context=True`` also ``_context``, ``_results`` and ``_consensus``.

    ``consensus_only=True`` runs only the methods the consensus reads
    (:func:`consensus_methods` of ``methods``) and returns ``ptype`` alone (with the
    ``_context``/``_results``/``_consensus`` entries when asked): the consensus codes are
    the same as a full run's (``tests/test_engine_regression.py`` checks it), at a lower
    cost.  The Monte-Carlo members use it.  ``voter_weights`` (``(n, len(VOTERS))``) are the
    members' method weights (:func:`ptype.engine.probability.voter_weights`).
    """
    ctx = Context(columns)
    if consensus_only:
        results = run_methods(ctx, consensus_methods(methods))
        cons = consensus(ctx, results, voter_weights)
        out: dict[str, Any] = {"ptype": cons.code}
        if return_context:
            out.update(_context=ctx, _results=results, _consensus=cons)
        return out
    results = run_methods(ctx, methods)
    cons = consensus(ctx, results, voter_weights)
    warm, cold = warm_cold_energies(ctx)
    out = {"ptype": cons.code}
    for name, res in results.items():
        out[name] = res.code
    out["warm_area_j_kg"] = warm
    out["cold_area_j_kg"] = cold
    out["wetbulb_zero_height_m"] = zero_height_m(ctx.wetbulb_layers)
    out["freezing_level_m"] = zero_height_m(ctx.air_layers)
    out["possible"] = cons.values["possible"]
    # What a calibration reads (ptype.engine.calibration.features).
    counts = cons.values["counts"]
    total = counts.sum(axis=1, keepdims=True)
    out["vote_share"] = counts / np.where(total > 0, total, 1.0)
    out["melt_aloft_j_kg"] = cons.values["melt_aloft_j_kg"]
    out["melt_surface_j_kg"] = cons.values["melt_surface_j_kg"]
    out["surface_temperature_c"] = columns.surface_temperature_c
    out["surface_wetbulb_c"] = columns.surface_wetbulb_c
    if "particles" in results:
        # The particle model's mass at the ground, for grids and timelines.
        for part in PARTICLE_FRACTIONS:
            out[f"fraction_{part}"] = results["particles"].values[part]
    if return_context:
        out.update(_context=ctx, _results=results, _consensus=cons)
    return out


def member_probabilities(columns: Columns, members: int, seed: SeedLike = None,
                         methods: MethodsLike = None,
                         code_map: np.ndarray | None = None) -> np.ndarray:
    """Probability of every code per column, ``(n, len(Code))``, rows summing to 1.

    All ``n * members`` perturbed columns are diagnosed in one vectorised pass, running only
    the methods the consensus reads (the same codes as a full run).  ``code_map``
    (:func:`ptype.engine.probability.possible_code_map` of the columns) counts each member's
    type as one its column's phase path allows.  With ``members == 0`` the result is all NaN.
    """
    members = check_members(members)
    n = columns.n_columns
    if members == 0 or n == 0:
        return np.full((n, len(Code)), np.nan)
    pert, weights = perturb_members(columns, members, seed)
    codes = diagnose_columns(pert, methods=methods, consensus_only=True,
                             voter_weights=weights)["ptype"]
    if code_map is not None:
        codes = np.repeat(code_map, members, axis=0)[np.arange(n * members), codes]
    return probabilities_from_codes(codes, n, members)


@dataclasses.dataclass(eq=False)
class EngineRun:
    """What :func:`run_columns` returns.

    ``fields``: the control's ``(n,)`` arrays as :func:`diagnose_columns` gives them
    (one code array per method, energies and heights) with ``ptype`` the **reported** code:
    the control's consensus (``control_ptype``) unless too few members support it
    (:func:`ptype.engine.probability.supported_codes`; ``support_reason`` says which case);
    ``probabilities``: ``(n, len(Code))`` member probabilities, or None without members;
    ``context``, ``results``, ``consensus``: the control's full trace when asked
    (``trace=True``), else None.
    """

    fields: dict[str, np.ndarray]
    probabilities: np.ndarray | None = None
    context: Context | None = None
    results: dict[str, MethodResult] | None = None
    consensus: MethodResult | None = None

    @property
    def codes(self) -> np.ndarray:
        """The reported code of every column, ``(n,)``."""
        return self.fields["ptype"]


def run_columns(columns: Columns, members: int = 0, seed: SeedLike = None,
                methods: MethodsLike = None, *, trace: bool = False,
                batch_columns: int | None = None,
                batch_seed: Callable[[int, int], Any] | None = None,
                calibration: Calibration | None = None) -> EngineRun:
    """Diagnose a batch of columns: the control, and member probabilities when ``members``.

    Parameters
    ----------
    columns : Columns
        The profiles, ``(n, L)`` NaN-padded arrays.
    members : int
        Monte-Carlo members per column (0: no probabilities).
    seed : int, optional
        Seed of the members' random draws.
    methods : iterable of str or comma-separated str, optional
        The methods to run (default all); the members run the ones the consensus reads.
    trace : bool
        Keep the control's context, method results and consensus (for explanations).
    batch_columns : int, optional
        Columns whose members go through the engine together (bounds memory: columns x
        members x levels values per array).  Default: :data:`DEFAULT_MEMBER_BATCH` member
        columns per pass.
    batch_seed : callable, optional
        ``batch_seed(k, first_column) -> seed`` of member batch ``k``; default ``seed`` for
        the first batch and a stream derived from ``seed`` and ``k`` for the others.
    calibration : Calibration, optional
        Turns the member frequencies into calibrated probabilities
        (:mod:`ptype.engine.calibration`); the raw frequencies stay in
        ``fields["member_frequencies"]``.

    Returns
    -------
    EngineRun
    """
    members = check_members(members)
    names = method_names(methods)
    n = columns.n_columns
    per_batch = batch_columns or max(1, DEFAULT_MEMBER_BATCH // max(members, 1))
    core = diagnose_columns(columns, names, return_context=trace)
    probs = None
    if members:
        probs = np.empty((n, len(Code)))
        code_map = possible_code_map(core["ptype"], core["possible"])
        for k, start in enumerate(range(0, n, per_batch)):
            deadline.check()  # a caller's time limit stops the work between batches
            part = columns.take(slice(start, start + per_batch)) if n > per_batch else columns
            probs[start:start + per_batch] = member_probabilities(
                part, members, _seed_of_batch(seed, k, start, batch_seed), names,
                code_map[start:start + per_batch])
    return _engine_run(core, probs, n, calibration)


def _seed_of_batch(seed, k: int, start: int, batch_seed):
    if batch_seed is not None:
        return batch_seed(k, start)
    if seed is None or k == 0:
        return seed
    return [int(seed), k]


def _engine_run(core: dict[str, Any], probabilities, n: int,
                calibration: Calibration | None = None) -> EngineRun:
    # The trace keeps every row it was computed on (members included, after the control's
    # rows); the fields are the control's.
    fields = {k: v[:n] for k, v in core.items() if not k.startswith("_")}
    control = np.asarray(fields["ptype"], dtype=np.int64)
    fields["control_ptype"] = control
    if probabilities is not None and calibration is not None:
        fields["member_frequencies"] = probabilities
        probabilities = calibration.apply(features(fields, probabilities), fields["possible"])
    if probabilities is None:
        fields["support_reason"] = np.zeros(n, dtype=np.int64)
    else:
        fields["ptype"], fields["support_reason"] = supported_codes(control, probabilities,
                                                                    fields["possible"])
    return EngineRun(fields=fields, probabilities=probabilities, context=core.get("_context"),
                     results=core.get("_results"), consensus=core.get("_consensus"))
