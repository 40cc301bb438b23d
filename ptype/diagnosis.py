"""``ptype.diagnose``: from one profile to the type at the ground, its probability and its reasons.

Pipeline (each stage its own module)::

    read/validate (readers, profile) -> Columns -> layers -> methods -> consensus
        -> Monte-Carlo probabilities (probability) -> explanation (explain)

:func:`diagnose_columns` is the vectorised core used for grids, timelines,
verification and the Monte-Carlo members; :func:`diagnose` wraps it for one
profile and returns a :class:`Diagnosis` with the full trace.
"""

from __future__ import annotations

import os
from collections.abc import Iterable, Mapping
from datetime import datetime
from math import isfinite
from typing import Any

import numpy as np

from . import CAUTION
from .codes import GRIB2_4201, Code
from .columns import Columns
from .consensus import consensus
from .errors import OptionError
from .layers import zero_height_m
from .methods import METHOD_NAMES, get_method
from .methods.base import Context, MethodResult
from .probability import (
    DEFAULT_MEMBERS,
    check_members,
    confidence_word,
    perturb,
    probabilities_from_codes,
)
from .profile import Profile

WETBULB_KINDS = ("isobaric", "adiabatic")


def _method_names(methods: Iterable[str] | str | None) -> tuple[str, ...]:
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


def run_methods(ctx: Context, methods=None) -> dict[str, MethodResult]:
    """Run the named methods (default: all) on a context; results keyed by name."""
    return {name: get_method(name).run(ctx) for name in _method_names(methods)}


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


def consensus_methods(methods=None) -> tuple[str, ...]:
    """The methods the consensus of ``methods`` (default all) actually reads: its voters
    (:data:`ptype.consensus.VOTERS`).  ``thickness`` and ``jennings`` never vote; the surface
    humidity check and the no-vote fallback compute Jennings et al. (2018) inside the
    consensus itself.  When none of ``methods`` votes the consensus is that fallback, and the
    methods are returned unchanged (the list of methods may not be empty)."""
    from .consensus import VOTERS
    names = _method_names(methods)
    voting = tuple(m for m in names if m in VOTERS)
    return voting or names


def diagnose_columns(columns: Columns, methods=None, *, return_context: bool = False,
                     consensus_only: bool = False) -> dict[str, Any]:
    """Vectorised diagnosis of many columns.

    Returns a dict of ``(n,)`` arrays: ``ptype`` (consensus :class:`Code` values), one code array
    per method name (:data:`ptype.codes.NO_RESULT` where it abstains), ``warm_area_j_kg``,
    ``cold_area_j_kg``, ``wetbulb_zero_height_m``, ``freezing_level_m``.  With
    ``return_context=True`` also ``_context``, ``_results`` and ``_consensus``.

    ``consensus_only=True`` runs only the methods the consensus reads
    (:func:`consensus_methods` of ``methods``) and returns ``ptype`` alone (with the
    ``_context``/``_results``/``_consensus`` entries when asked): the consensus codes are
    the same as a full run's (``tests/test_engine_regression.py`` checks it), at a lower
    cost.  The Monte-Carlo members (:func:`ptype.probability.member_probabilities`) use it.
    """
    ctx = Context(columns)
    if consensus_only:
        results = run_methods(ctx, consensus_methods(methods))
        cons = consensus(ctx, results)
        out: dict[str, Any] = {"ptype": cons.code}
        if return_context:
            out.update(_context=ctx, _results=results, _consensus=cons)
        return out
    results = run_methods(ctx, methods)
    cons = consensus(ctx, results)
    warm, cold = warm_cold_energies(ctx)
    out: dict[str, Any] = {"ptype": cons.code}
    for name, res in results.items():
        out[name] = res.code
    out["warm_area_j_kg"] = warm
    out["cold_area_j_kg"] = cold
    out["wetbulb_zero_height_m"] = zero_height_m(ctx.wetbulb_layers)
    out["freezing_level_m"] = zero_height_m(ctx.air_layers)
    if return_context:
        out["_context"] = ctx
        out["_results"] = results
        out["_consensus"] = cons
    return out


def _to_profile(source) -> Profile:
    if isinstance(source, Profile):
        return source
    if isinstance(source, Mapping):
        return Profile.from_document(source)
    if isinstance(source, (str, os.PathLike, bytes)):
        from .readers import read_profile
        return read_profile(source)
    raise OptionError(f"cannot diagnose a {type(source).__name__}: expected a Profile, a profile "
                      "document (dict) or a path", field="source")


class Diagnosis:
    """The full result for one profile; :meth:`to_dict` is the JSON contract."""

    def __init__(self, profile: Profile, columns: Columns, core: dict, probabilities: np.ndarray,
                 members: int, seed, wetbulb: str):
        self.profile = profile
        self.columns = columns
        self.context: Context = core["_context"]
        self.results: dict[str, MethodResult] = core["_results"]
        self.consensus_result: MethodResult = core["_consensus"]
        self.code = Code(int(core["ptype"][0]))
        self.core = core
        self.members = members
        self.seed = seed
        self.wetbulb = wetbulb
        self.probability_vector = probabilities
        self.probabilities = ({} if members == 0 else
                              {Code(k).name: float(probabilities[k]) for k in range(len(Code))
                               if probabilities[k] > 0})
        p_cons = self.probabilities.get(self.code.name, 0.0) if members else float("nan")
        self.probability = p_cons
        self.confidence = confidence_word(p_cons) if members else "not assessed"

    @property
    def ptype(self) -> str:
        return self.code.name

    def to_dict(self) -> dict:
        from .explain import narrative
        ctx = self.context
        c = self.columns
        pr = self.profile
        tw = c.wetbulb_c[0] if self.wetbulb == "isobaric" else c.wetbulb_adiabatic_c[0]
        k = pr.n_levels

        def clean(a):
            # tolist() gives Python floats: math.isfinite and round on them skip a numpy
            # scalar call per level.
            return [round(x, 2) if isfinite(x) else None for x in a[:k].tolist()]

        methods = {}
        for name, res in self.results.items():
            mod = get_method(name)
            code = int(res.code[0])
            methods[name] = {"ptype": None if code < 0 else Code(code).name,
                             "title": mod.TITLE, "reference": mod.REFERENCE,
                             "wetbulb": getattr(mod, "WETBULB", None),
                             "rule": None if res.rule is None else _rule_name(mod, res, 0),
                             "steps": [s.to_dict() for s in res.steps(0)]}
        fl = self.core["freezing_level_m"][0]
        wbz = self.core["wetbulb_zero_height_m"][0]
        return {
            "ptype": self.code.name,
            "ptype_label": self.code.label,
            "grib2_code": GRIB2_4201[self.code],
            "probability": None if not self.members else round(self.probability, 4),
            "probabilities": {k: round(v, 4) for k, v in sorted(self.probabilities.items(),
                                                                key=lambda kv: -kv[1])},
            "confidence": self.confidence,
            "members": self.members,
            "seed": self.seed,
            "methods": methods,
            "consensus": {"rule": _rule_name(__import__("ptype.consensus", fromlist=["RULES"]),
                                             self.consensus_result, 0),
                          "steps": [s.to_dict() for s in self.consensus_result.steps(0)]},
            "layers": ctx.air_layers.column(0),
            "wetbulb_layers": ctx.wetbulb_layers.column(0),
            "cloud_layers": ctx.cloud_layers.column(0),
            "freezing_level_m": None if not np.isfinite(fl) else round(float(fl), 0),
            "wetbulb_zero_height_m": None if not np.isfinite(wbz) else round(float(wbz), 0),
            "warm_area_j_kg": round(float(self.core["warm_area_j_kg"][0]), 1),
            "cold_area_j_kg": round(float(self.core["cold_area_j_kg"][0]), 1),
            "surface": {"temperature_c": round(float(c.surface_temperature_c[0]), 2),
                        "dewpoint_c": round(float(c.surface_dewpoint_c[0]), 2),
                        "wetbulb_c": round(float(c.surface_wetbulb_c[0]), 2),
                        "relative_humidity_pct": round(float(c.surface_relative_humidity_pct[0]), 1)},
            "profile": {"pressure_hpa": clean(c.pressure_hpa[0]), "height_m": clean(c.height_m[0]),
                        "temperature_c": clean(c.temperature_c[0]), "dewpoint_c": clean(c.dewpoint_c[0]),
                        "relative_humidity_pct": clean(c.relative_humidity_pct[0]),
                        "wetbulb_c": clean(tw), "wetbulb_kind": self.wetbulb},
            "explanation": narrative(self),
            "caution": CAUTION,
            "warnings": list(pr.warnings),
            "site": None if pr.site is None else pr.site.model_dump(exclude_none=True),
            "valid_time": None if pr.valid_time is None else _iso(pr.valid_time),
        }


def _iso(t: datetime) -> str:
    return t.isoformat().replace("+00:00", "Z")


def _rule_name(module, result: MethodResult, i: int):
    rules = getattr(module, "RULES", None)
    r = int(result.rule[i])
    if rules is None or not 0 <= r < len(rules):
        return None
    rule = rules[r]
    return rule if isinstance(rule, str) else getattr(rule, "id", str(rule))


def diagnose(source, *, members: int = DEFAULT_MEMBERS, seed=None, methods=None,
             wetbulb: str = "isobaric") -> Diagnosis:
    """Diagnose the precipitation type at the ground for one profile.

    Parameters
    ----------
    source : Profile, dict or path
        A validated profile, a profile document, or a file path / text in any supported format.
    members : int
        Monte-Carlo members for the probabilities (0 disables them).
    seed : int, optional
        Random seed, for reproducible probabilities.
    methods : iterable of str or comma-separated str, optional
        Restrict to these methods (default: all of :data:`ptype.methods.METHOD_NAMES`).
    wetbulb : {"isobaric", "adiabatic"}
        Which wet-bulb to report in ``profile.wetbulb_c`` and the wet-bulb layers.  Each
        method always uses the wet-bulb its authors used (recorded in its ``wetbulb`` field).

    Returns
    -------
    Diagnosis
        ``.ptype`` (code string), ``.probabilities``, ``.confidence`` and ``.to_dict()``.
    """
    if wetbulb not in WETBULB_KINDS:
        raise OptionError(f"wetbulb = {wetbulb!r}: expected one of {', '.join(WETBULB_KINDS)}",
                          field="wetbulb")
    members = check_members(members)
    if seed is not None and (isinstance(seed, bool) or not isinstance(seed, (int, np.integer)) or seed < 0):
        raise OptionError(f"seed = {seed!r}: expected a non-negative whole number", field="seed")
    names = _method_names(methods)
    profile = _to_profile(source)
    columns = Columns.from_profiles([profile])
    # The control (row 0) and the members (rows 1..) go through the pipeline in one pass;
    # the explanation reads row 0 only.
    batch = Columns.concat([columns, perturb(columns, members, seed)]) if members else columns
    core = diagnose_columns(batch, names, return_context=True)
    if wetbulb == "adiabatic":
        from .layers import analyse_layers
        ctx = core["_context"]
        ctx.__dict__["wetbulb_layers"] = analyse_layers(columns.pressure_hpa, columns.height_m,
                                                        columns.wetbulb_adiabatic_c)
        core["wetbulb_zero_height_m"] = zero_height_m(ctx.wetbulb_layers)
    probs = (probabilities_from_codes(core["ptype"][1:], 1, members)[0] if members
             else np.full(len(Code), np.nan))
    return Diagnosis(profile, columns, core, probs, members, seed, wetbulb)


#: Profiles whose Monte-Carlo members :func:`diagnose_many` diagnoses in one vectorised pass
#: (bounds memory: profiles x members x levels values per array).
MANY_MEMBER_BATCH = 64


def diagnose_many(sources: Iterable, *, members: int = DEFAULT_MEMBERS, seed=None,
                  methods=None, wetbulb: str = "isobaric") -> list[Diagnosis]:
    """Diagnose several profiles; each result as :func:`diagnose` gives it.

    ``sources`` are what :func:`diagnose` accepts (profiles, documents, paths).  The
    deterministic part runs per profile; the Monte-Carlo members of up to
    :data:`MANY_MEMBER_BATCH` profiles go through
    :func:`ptype.probability.member_probabilities` together, about half the cost per profile
    of one call each (measured by ``bench/load_diagnose.py``'s stage timings).  With a seed the
    batch is reproducible as a whole; its probabilities are not those of the same profiles
    diagnosed one by one (the random draws are shared out differently).
    """
    from .probability import member_probabilities
    sources = list(sources)
    members = check_members(members)
    if len(sources) < 2 or members == 0:
        return [diagnose(s, members=members, seed=seed, methods=methods, wetbulb=wetbulb)
                for s in sources]
    base = [diagnose(s, members=0, seed=seed, methods=methods, wetbulb=wetbulb)
            for s in sources]
    names = list(base[0].results)
    out = []
    for start in range(0, len(base), MANY_MEMBER_BATCH):
        part = base[start:start + MANY_MEMBER_BATCH]
        part_seed = None if seed is None else seed + start
        probs = member_probabilities(Columns.from_profiles([d.profile for d in part]),
                                     members, part_seed, names)
        out.extend(Diagnosis(d.profile, d.columns, d.core, vector, members, seed, wetbulb)
                   for d, vector in zip(part, probs))
    return out
