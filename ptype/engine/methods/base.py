"""What every diagnosis method returns, and the context it reads.

A method module (``ptype/methods/<name>.py``) defines

* ``NAME`` - the key used in results (``"bourgouin"``),
* ``TITLE`` and ``REFERENCE`` (a citation key of ``docs/references.md``),
* ``WETBULB`` - which wet-bulb it uses: ``"isobaric"``, ``"adiabatic"`` or ``None``,
* ``run(ctx: Context) -> MethodResult`` - vectorised over all columns, no Python loop per column,
* ``explain(result: MethodResult, i: int) -> list[Step]`` - the trace of column ``i`` built
  only from the numbers in ``result.values`` (so the explanation cannot drift from the computation).

``result.code`` holds :class:`ptype.codes.Code` integers, :data:`ptype.codes.NO_RESULT` (-1)
where the method reaches no decision (outside its domain, or its own "unknown").
"""

from __future__ import annotations

import dataclasses
import functools
import math
from collections.abc import Callable, Sequence

import numpy as np
from numpy.typing import ArrayLike

from ptype.engine.columns import Columns
from ptype.engine.layers import (
    CloudLayers,
    LayerSet,
    analyse_layers,
    cloud_mask,
    dry_mask,
    level_runs,
    without_thin_runs,
)


@dataclasses.dataclass(frozen=True)
class Step:
    """One step of a method's reasoning.

    ``rule`` is a short stable identifier (``"case_A_refreeze"``); ``text`` a sentence with the
    numbers in it; ``values`` the numbers compared; ``thresholds`` the limits they were compared
    with; ``source`` where the rule or threshold comes from.
    """

    rule: str
    text: str
    values: dict = dataclasses.field(default_factory=dict)
    thresholds: dict = dataclasses.field(default_factory=dict)
    source: str = ""

    def to_dict(self) -> dict:
        """The step as JSON-ready data (floats rounded to 3 decimals, NaN as None)."""
        return {"rule": self.rule, "text": self.text,
                "values": {k: _round(v) for k, v in self.values.items()},
                "thresholds": {k: _round(v) for k, v in self.thresholds.items()},
                "source": self.source}


def _round(v):
    if isinstance(v, (float, np.floating)):
        v = float(v)
        return round(v, 3) if math.isfinite(v) else None
    if isinstance(v, (np.integer,)):
        return int(v)
    return v


def select_first(conditions: Sequence[ArrayLike], choices: Sequence[ArrayLike],
                 default: ArrayLike) -> np.ndarray:
    """``np.select(conditions, choices, default)`` (the first true condition wins) as a chain of
    ``np.where`` from the last condition back: same values and dtype for the rule tables of the
    methods, without np.select's per-call set-up (it runs several times per diagnosis)."""
    out = np.where(conditions[-1], choices[-1], default)
    for cond, choice in zip(conditions[-2::-1], choices[-2::-1]):
        out = np.where(cond, choice, out)
    return out


@dataclasses.dataclass(eq=False)
class MethodResult:
    """Vectorised outcome of one method over ``n`` columns."""

    name: str
    code: np.ndarray                      # (n,) int, Code or NO_RESULT
    rule: np.ndarray                      # (n,) int index into the method's RULES tuple
    values: dict[str, np.ndarray]         # per-column numbers, each (n,) (or (n, k))
    explainer: Callable[[MethodResult, int], list[Step]] | None = None

    def steps(self, i: int) -> list[Step]:
        """The explanation of column ``i`` (none without an explainer)."""
        return self.explainer(self, i) if self.explainer else []

    def value(self, key: str, i: int) -> float:
        """``values[key]`` of column ``i`` as a float."""
        return float(self.values[key][i])


class Context:
    """Shared, lazily computed analysis of a batch of columns.

    Methods read the layer analyses from here so each is computed once per batch.
    """

    def __init__(self, columns: Columns):
        self.columns = columns

    @functools.cached_property
    def air_layers(self) -> LayerSet:
        """Layers of the air temperature (the Bourgouin areas)."""
        c = self.columns
        return analyse_layers(c.pressure_hpa, c.height_m, c.temperature_c)

    @functools.cached_property
    def wetbulb_layers(self) -> LayerSet:
        """Layers of the isobaric wet-bulb temperature."""
        c = self.columns
        return analyse_layers(c.pressure_hpa, c.height_m, c.wetbulb_c)

    @functools.cached_property
    def cloud_mask(self) -> np.ndarray:
        """Saturated levels (:func:`ptype.engine.layers.cloud_mask`), ``(n, L)``."""
        c = self.columns
        return cloud_mask(c.temperature_c, c.dewpoint_c, c.relative_humidity_pct)

    @functools.cached_property
    def cloud_layers(self) -> CloudLayers:
        """Runs of saturated levels at least :data:`ptype.engine.layers.MIN_CLOUD_DEPTH_M` deep:
        the cloud layers."""
        c = self.columns
        return without_thin_runs(level_runs(self.cloud_mask, c.pressure_hpa, c.height_m,
                                            c.temperature_c))

    @functools.cached_property
    def dry_layers(self) -> CloudLayers:
        """Runs of dry levels (:func:`ptype.engine.layers.dry_mask`)."""
        c = self.columns
        return level_runs(self.dry_mask, c.pressure_hpa, c.height_m, c.temperature_c)

    @functools.cached_property
    def dry_mask(self) -> np.ndarray:
        """Dry levels (:func:`ptype.engine.layers.dry_mask`), ``(n, L)``."""
        c = self.columns
        return dry_mask(c.temperature_c, c.dewpoint_c, c.relative_humidity_pct)
