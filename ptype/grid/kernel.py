"""The column kernel: model columns as ``(n, L)`` numpy arrays -> packed engine results.

:func:`column_kernel` is the function mapped over the chunks of a grid; it converts units,
builds :class:`~ptype.engine.columns.Columns` (:func:`build_columns`, levels below ground
dropped, the screen-level air added) and runs :func:`ptype.engine.run.run_columns`.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Mapping
from typing import TYPE_CHECKING, Any

import numpy as np

from ptype import thermo
from ptype.codes import NO_RESULT, Code
from ptype.engine.run import PARTICLE_FRACTIONS
from ptype.grid.fields import GridFields

if TYPE_CHECKING:
    from numpy.typing import ArrayLike

    from ptype.engine.columns import Columns

#: Columns the engine diagnoses at once inside a chunk.  Small enough that its (n, L) float64
#: temporaries (1.3 MB each at 40 levels) are recycled by the allocator instead of being
#: mapped and unmapped from the kernel for every array: with 32,768 columns at once the system
#: time of a run exceeded its user time and two threads ran slower than one (measured,
#: docs/performance.md); 4,096 keeps the per-batch Python overhead negligible.
ENGINE_BATCH_COLUMNS = 4096
#: Member columns diagnosed at once (columns x members), for the same reason and for
#: bounded memory (the engine holds about 20 kB per 40-level column while it works).
MEMBER_BATCH_COLUMNS = 4096
#: A column needs at least this many levels above ground to be diagnosed (as a profile does).
MIN_LEVELS = 3


def _to_celsius(a, offset):
    return np.asarray(a, dtype=np.float64) - offset


def dewpoint_from_humidity_c(kind: str, values: ArrayLike, pressure_hpa: ArrayLike,
                             temperature_c: ArrayLike) -> np.ndarray:
    """Dew point, degC, from any of :data:`HUMIDITY_KINDS` (already in degC, %, kg/kg)."""
    if kind == "dew_point_temperature":
        return np.asarray(values, dtype=np.float64)
    if kind == "relative_humidity":
        rh = np.clip(np.asarray(values, dtype=np.float64), 1e-3, 100.0)
        return thermo.dewpoint_from_relative_humidity_c(temperature_c, rh)
    q = np.clip(np.asarray(values, dtype=np.float64), 1e-9, 0.2)
    w = q / (1.0 - q) if kind == "specific_humidity" else q  # mixing ratio w = q / (1 - q)
    return thermo.dewpoint_from_mixing_ratio_c(pressure_hpa, 1000.0 * w)


@dataclasses.dataclass(frozen=True)
class KernelLayout:
    """Names of the packed output fields of :func:`column_kernel`, in order."""

    methods: tuple[str, ...]
    members: int
    #: Pack one type per method too (``per_method``); without them only the methods the
    #: consensus reads are run (:func:`ptype.engine.run.consensus_methods`, same consensus).
    per_method: bool = True
    #: Pack the particle model's mass fractions at the ground (snow, melting, liquid,
    #: refrozen) too.
    fractions: bool = False
    #: A :class:`ptype.engine.calibration.Calibration` for the probabilities, or None.
    calibration: Any = None

    @property
    def method_fields(self) -> tuple[str, ...]:
        """The methods packed one type each (none without ``per_method``)."""
        return self.methods if self.per_method else ()

    @property
    def names(self) -> tuple[str, ...]:
        """Every packed field: consensus, per-method types, diagnostics, probabilities."""
        probs = tuple(f"p_{c.name}" for c in Code) if self.members else ()
        fractions = tuple(f"fraction_{k}" for k in PARTICLE_FRACTIONS) if self.fractions else ()
        return (("ptype",) + tuple(f"m_{m}" for m in self.method_fields)
                + ("warm_area_j_kg", "cold_area_j_kg", "wetbulb_zero_height_m",
                   "freezing_level_m") + probs + fractions)


def build_columns(pressure_hpa: ArrayLike, temperature_c: ArrayLike, dewpoint_c: ArrayLike,
                  height_m: ArrayLike | None = None,
                  surface_pressure_hpa: ArrayLike | None = None,
                  surface_altitude_m: ArrayLike | None = None,
                  temperature_2m_c: ArrayLike | None = None,
                  dewpoint_2m_c: ArrayLike | None = None) -> Columns:
    """Model levels (``(n, L)``, any order) plus surface fields (``(n,)``) -> :class:`Columns`.

    Levels below the ground are dropped; the screen-level air becomes the lowest level when
    surface pressure, 2 m temperature and 2 m dew point are all known (see the module notes).
    """
    from ptype.engine.columns import Columns
    p = np.asarray(pressure_hpa, dtype=np.float64)
    t = np.asarray(temperature_c, dtype=np.float64)
    td = np.asarray(dewpoint_c, dtype=np.float64)
    p = np.broadcast_to(p, t.shape)
    n = t.shape[0]
    z = None if height_m is None else np.asarray(height_m, dtype=np.float64)

    def col(a):
        return None if a is None else np.broadcast_to(np.asarray(a, dtype=np.float64), (n,))

    psfc, zsfc, t2, td2 = (col(a) for a in (surface_pressure_hpa, surface_altitude_m,
                                            temperature_2m_c, dewpoint_2m_c))
    add_surface = None
    if psfc is not None:
        add_surface = np.isfinite(psfc)
        if t2 is not None and td2 is not None:
            add_surface = add_surface & np.isfinite(t2) & np.isfinite(td2)
        else:
            add_surface = np.zeros(n, dtype=bool)
        # At or below the ground: dropped (a level at the surface pressure is replaced by the
        # screen-level air when that is added, else kept).
        below = np.where(add_surface[:, None], p >= psfc[:, None], p > psfc[:, None])
        below &= np.isfinite(psfc)[:, None]
        t = np.where(below, np.nan, t)
        if add_surface.any():
            sp = np.where(add_surface, psfc, np.nan)[:, None]
            p = np.concatenate([sp, p], axis=1)
            t = np.concatenate([np.where(add_surface, t2, np.nan)[:, None], t], axis=1)
            td = np.concatenate([np.where(add_surface, np.minimum(td2, t2), np.nan)[:, None],
                                 td], axis=1)
            if z is not None or zsfc is not None:
                zl = np.full(t.shape[:1] + (t.shape[1] - 1,), np.nan) if z is None else z
                zs = np.full(n, np.nan) if zsfc is None else zsfc
                z = np.concatenate([zs[:, None], zl], axis=1)
    base = None
    if zsfc is not None:
        base = np.where(np.isfinite(zsfc), zsfc, 0.0)
    return Columns.from_arrays(p, t, np.minimum(td, t), z, surface_height_m=base,
                               surface_temperature_c=t2, surface_dewpoint_c=td2)


def diagnose_block(columns: Columns, layout: KernelLayout,
                   seed: int | None = None) -> np.ndarray:
    """Run the engine on columns; returns ``(n, len(layout.names))`` float32 (NaN = missing)."""
    from ptype.engine.run import consensus_methods, run_columns
    n = columns.n_columns
    out = np.full((n, len(layout.names)), np.nan, dtype=np.float32)
    ok = columns.n_levels >= MIN_LEVELS
    if not ok.any():
        return out
    sub = columns if ok.all() else columns.take(ok)
    # The energies and heights come from the layer analysis, whichever methods run.
    methods = layout.methods if layout.per_method else consensus_methods(layout.methods)
    if layout.fractions and "particles" not in methods:
        methods = (*methods, "particles")
    # Members multiply the columns: they go through the engine in batches so memory stays
    # bounded, one random stream per batch derived from the seed and the batch number.
    run = run_columns(sub, layout.members, seed, methods,
                      batch_columns=max(1, MEMBER_BATCH_COLUMNS // max(layout.members, 1)),
                      batch_seed=lambda b, start: _batch_seed(seed, b),
                      calibration=layout.calibration)
    res = run.fields
    cols = [res["ptype"]] + [res[m] for m in layout.method_fields] + [
        res["warm_area_j_kg"], res["cold_area_j_kg"], res["wetbulb_zero_height_m"],
        res["freezing_level_m"]]
    block = np.column_stack([np.asarray(c, dtype=np.float64) for c in cols])
    # Method abstentions are missing values, not a code.
    k = len(layout.method_fields)
    block[:, 1:1 + k] = np.where(block[:, 1:1 + k] == NO_RESULT, np.nan, block[:, 1:1 + k])
    if layout.members:
        block = np.concatenate([block, run.probabilities], axis=1)
    if layout.fractions:
        block = np.concatenate([block, np.column_stack(
            [res[f"fraction_{k}"] for k in PARTICLE_FRACTIONS])], axis=1)
    out[ok] = block
    return out


def _batch_seed(seed, b: int):
    return None if seed is None else np.random.SeedSequence([int(seed), b]).generate_state(1)[0]


#: Inputs of :func:`column_kernel` on the levels (the others are per column).
_LEVEL_INPUTS = ("pressure", "temperature", "humidity", "height")


def column_kernel(*arrays: np.ndarray, names: tuple[str, ...], consts: Mapping[str, float],
                  fields: GridFields, layout: KernelLayout,
                  seed: int | None = None) -> np.ndarray:
    """The function mapped over chunks: arrays ``(..., level)`` (level inputs) and ``(...)``
    (surface inputs and the column index), named by ``names``; ``consts`` holds the unit
    conversions; returns ``(..., n_fields)`` float32.  The columns go through the engine in
    batches of :data:`ENGINE_BATCH_COLUMNS`."""
    a = dict(zip(names, arrays))
    shape = a["temperature"].shape[:-1]
    L = a["temperature"].shape[-1]
    n = int(np.prod(shape, dtype=np.int64))
    flat = {}
    for key, x in a.items():
        if key == "pressure":
            flat[key] = np.asarray(x).reshape(1, L)  # the level coordinate, shared
        elif key in _LEVEL_INPUTS:
            flat[key] = np.broadcast_to(x, shape + (L,)).reshape(n, L)
        else:
            flat[key] = np.broadcast_to(x, shape).reshape(n)
    out = np.empty((n, len(layout.names)), dtype=np.float32)
    for start in range(0, n, ENGINE_BATCH_COLUMNS):
        part = {k: (v if k == "pressure" else v[start:start + ENGINE_BATCH_COLUMNS])
                for k, v in flat.items()}
        out[start:start + ENGINE_BATCH_COLUMNS] = _kernel_batch(part, consts, fields, layout,
                                                                seed)
    return out.reshape(shape + (len(layout.names),))


def _kernel_batch(a, consts, fields: GridFields, layout: KernelLayout, seed=None):
    """:func:`column_kernel` on one batch: ``(n, L)`` level inputs, ``(n,)`` surface inputs."""
    n = a["temperature"].shape[0]
    p = np.broadcast_to(np.asarray(a["pressure"], dtype=np.float64) * fields.level_to_hpa,
                        a["temperature"].shape)
    t = a["temperature"] - consts["_t_offset"]
    hum = a["humidity"]
    if fields.humidity_kind == "dew_point_temperature":
        hum = hum - consts["_h_scale"]
    else:
        hum = hum * consts["_h_scale"]
    td = dewpoint_from_humidity_c(fields.humidity_kind, hum, p, t)

    def scaled(key, const, offset=False):
        if key not in a:
            return None
        return a[key] - consts[const] if offset else a[key] * consts[const]

    columns = build_columns(p, t, td, scaled("height", "_z_scale"),
                            scaled("surface_pressure", "_ps_scale"),
                            scaled("surface_altitude", "_zs_scale"),
                            scaled("temperature_2m", "_t2_offset", offset=True),
                            scaled("dewpoint_2m", "_td2_offset", offset=True))
    batch_seed = None
    if seed is not None and layout.members:
        # One stream per batch, derived from the user's seed and the batch's first column,
        # so that a run is reproducible for the same seed and chunking.
        first = int(a["column_index"][0]) if n else 0
        batch_seed = np.random.SeedSequence([int(seed), first]).generate_state(1)[0]
    return diagnose_block(columns, layout, batch_seed)
