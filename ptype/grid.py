"""Gridded diagnosis: CF NetCDF model output on pressure levels in, CF-1.13 NetCDF out.

Layers (each only calls downward)::

    open_grid (files -> one xarray.Dataset, lazily chunked with dask)
    find_fields (CF standard names -> which variable is what, in which units)
    diagnose_dataset (xarray.apply_ufunc over chunks of columns -> output Dataset)
        column_kernel ((n_columns, n_levels) numpy arrays -> packed results;
                       calls ptype.diagnosis.diagnose_columns and
                       ptype.probability.member_probabilities)
    write_grid (CF attributes, zlib compression, chunked NetCDF-4)

Inputs are recognised by CF ``standard_name`` (CF standard-name table v94):
``air_temperature`` on pressure levels (required); humidity as
``dew_point_temperature``, ``relative_humidity``, ``specific_humidity`` or
``humidity_mixing_ratio`` (one required, first found wins in that order);
``geopotential_height`` (optional); ``surface_air_pressure``, ``surface_altitude``
and screen-level ``air_temperature`` / ``dew_point_temperature`` (a 2 m ``height``
coordinate, or no vertical dimension; optional).  The vertical coordinate is the
dimension coordinate of the temperature whose standard name is ``air_pressure``
or whose units are a pressure (Pa, hPa, mbar, kPa).  Dimension names and order
are free; the time dimension is the one whose coordinate has standard name
``time``, axis ``T`` or a datetime type; every other dimension is horizontal.

Column construction (common practice for model soundings): levels below the
ground (pressure above the surface pressure) are dropped; when the surface
pressure and the 2 m temperature and dew point are all known, the screen-level
air is added as the lowest level at the surface pressure (its height the
surface altitude when given, else hypsometric from the level above).  The
resulting column is exactly what :func:`ptype.diagnose` would get from a profile
document with the same levels, which ``tests/test_grid.py`` checks.
"""

from __future__ import annotations

import dataclasses
import functools
import math
import os
import sys
from collections.abc import Iterable, Mapping, Sequence
from datetime import UTC, datetime

import numpy as np

from .codes import GRIB2_4201_MEANINGS, LABELS, NO_RESULT, Code, to_grib2
from .errors import OptionError, ReaderError

#: Column diagnoses per dask chunk when no chunks are given (a chunk of ``c`` columns with
#: ``m`` members makes ``c (1 + m)``).  Large, so that the whole grid is a few dozen tasks:
#: every task is a round trip through the scheduler's thread, and with 4,096-column chunks
#: the 1.9 M-column run had 14,000 tasks and its two worker threads waited for work 15 % of
#: the time (measured, docs/performance.md).
DEFAULT_CHUNK_WORK = 32768
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
#: Tolerance for "2 m" in the height coordinate of screen-level fields, m.
SCREEN_HEIGHT_M = (1.0, 3.0)
#: Missing value of the integer type variables (GRIB2 code table 4.201 "missing").
TYPE_FILL = 255

TEMPERATURE_UNITS = {"K": 273.15, "kelvin": 273.15, "degK": 273.15, "degrees_K": 273.15,
                     "degC": 0.0, "celsius": 0.0, "Celsius": 0.0, "C": 0.0, "deg_C": 0.0,
                     "degree_Celsius": 0.0, "degrees_Celsius": 0.0, "degreeC": 0.0}
PRESSURE_UNITS = {"Pa": 0.01, "pa": 0.01, "hPa": 1.0, "hpa": 1.0, "mbar": 1.0, "millibar": 1.0,
                  "mb": 1.0, "kPa": 10.0}
FRACTION_UNITS = {"1": 1.0, "": 1.0, "kg kg-1": 1.0, "kg/kg": 1.0, "kg kg**-1": 1.0,
                  "g kg-1": 1e-3, "g/kg": 1e-3, "g kg**-1": 1e-3}
RH_UNITS = {"%": 1.0, "percent": 1.0, "1": 100.0, "": 100.0, "fraction": 100.0}
HEIGHT_UNITS = {"m": 1.0, "gpm": 1.0, "metre": 1.0, "meter": 1.0, "metres": 1.0, "meters": 1.0,
                "km": 1000.0}
HUMIDITY_KINDS = ("dew_point_temperature", "relative_humidity", "specific_humidity",
                  "humidity_mixing_ratio")


# --------------------------------------------------------------------------------------------
# Reading
# --------------------------------------------------------------------------------------------

@dataclasses.dataclass(frozen=True)
class GridFields:
    """Which variable of a dataset is what (names), with unit conversions found from attributes."""

    temperature: str
    humidity: str
    humidity_kind: str            # one of HUMIDITY_KINDS
    level_dim: str
    level_to_hpa: float           # multiply the level coordinate by this to get hPa
    horizontal_dims: tuple[str, ...]
    time_dim: str | None = None
    height: str | None = None
    surface_pressure: str | None = None
    surface_altitude: str | None = None
    temperature_2m: str | None = None
    dewpoint_2m: str | None = None


def _units(var) -> str:
    return str(var.attrs.get("units", "")).strip()


def _std(var) -> str:
    return str(var.attrs.get("standard_name", "")).strip()


def _lookup(table: Mapping[str, float], var, name: str, what: str) -> float:
    u = _units(var)
    if u in table:
        return table[u]
    raise ReaderError(f"variable {name!r}: units {u!r} not understood for {what}; expected one of "
                      f"{', '.join(repr(k) for k in table if k)}", field=name)


def _is_time(ds, dim: str) -> bool:
    if dim not in ds.coords:
        return False
    c = ds[dim]
    return (_std(c) == "time" or str(c.attrs.get("axis", "")).upper() == "T"
            or np.issubdtype(c.dtype, np.datetime64) or c.dtype == object)


def _pressure_coord(ds, dim: str) -> float | None:
    if dim not in ds.coords or ds[dim].ndim != 1:
        return None
    c = ds[dim]
    if _std(c) == "air_pressure" or _units(c) in PRESSURE_UNITS:
        if _units(c) not in PRESSURE_UNITS:
            raise ReaderError(f"vertical coordinate {dim!r}: units {_units(c)!r} are not a "
                              "pressure; expected Pa or hPa", field=dim)
        return PRESSURE_UNITS[_units(c)]
    return None


def _is_screen_level(ds, var) -> bool:
    """True for a 2 m field: a ``height`` coordinate of about 2 m (CF practice)."""
    for cname in var.coords:
        c = ds[cname]
        if _std(c) == "height" or cname == "height":
            if c.size != 1:
                return False
            scale = HEIGHT_UNITS.get(_units(c) or "m", 1.0)
            h = float(c.values.ravel()[0]) * scale
            return SCREEN_HEIGHT_M[0] <= h <= SCREEN_HEIGHT_M[1]
    return True  # no height coordinate: accepted as the screen level


def find_fields(ds, source: str = "input") -> GridFields:
    """Identify the fields of a dataset by CF standard name.

    Raises :class:`ReaderError` naming what is missing and what was found.
    """
    by_name: dict[str, list[str]] = {}
    for name, var in ds.data_vars.items():
        by_name.setdefault(_std(var), []).append(name)

    def describe() -> str:
        found = [f"{n} ({_std(v) or 'no standard_name'})" for n, v in ds.data_vars.items()]
        return ", ".join(found) if found else "none"

    # The temperature on pressure levels and its vertical dimension.
    temperature = level_dim = None
    to_hpa = None
    for name in by_name.get("air_temperature", []):
        for dim in ds[name].dims:
            f = _pressure_coord(ds, dim)
            if f is not None:
                temperature, level_dim, to_hpa = name, dim, f
                break
        if temperature:
            break
    if temperature is None:
        if by_name.get("air_temperature"):
            raise ReaderError(
                f"{source}: air_temperature found ({', '.join(by_name['air_temperature'])}) but "
                "none has a vertical coordinate with standard_name air_pressure or units Pa/hPa",
                field="air_temperature")
        raise ReaderError(f"{source}: no variable with standard_name air_temperature on pressure "
                          f"levels; variables present: {describe()}", field="air_temperature")
    t_dims = ds[temperature].dims
    time_dim = next((d for d in t_dims if d != level_dim and _is_time(ds, d)), None)
    horizontal = tuple(d for d in t_dims if d not in (level_dim, time_dim))

    def on_levels(name):
        return level_dim in ds[name].dims and set(ds[name].dims) <= set(t_dims)

    def surface(name):
        return level_dim not in ds[name].dims and set(ds[name].dims) <= set(t_dims)

    humidity = kind = None
    for k in HUMIDITY_KINDS:
        cands = [n for n in by_name.get(k, []) if on_levels(n)]
        if cands:
            humidity, kind = cands[0], k
            break
    if humidity is None:
        raise ReaderError(f"{source}: no humidity on pressure levels; expected a variable with "
                          f"standard_name {', '.join(HUMIDITY_KINDS)}; variables present: "
                          f"{describe()}", field="humidity")
    height = next((n for n in by_name.get("geopotential_height", []) if on_levels(n)), None)
    psfc = next((n for n in by_name.get("surface_air_pressure", []) if surface(n)), None)
    zsfc = next((n for n in by_name.get("surface_altitude", []) if surface(n)), None)
    t2 = next((n for n in by_name.get("air_temperature", [])
               if surface(n) and _is_screen_level(ds, ds[n])), None)
    td2 = next((n for n in by_name.get("dew_point_temperature", [])
                if surface(n) and _is_screen_level(ds, ds[n])), None)
    fields = GridFields(temperature=temperature, humidity=humidity, humidity_kind=kind,
                        level_dim=level_dim, level_to_hpa=to_hpa, horizontal_dims=horizontal,
                        time_dim=time_dim, height=height, surface_pressure=psfc,
                        surface_altitude=zsfc, temperature_2m=t2, dewpoint_2m=td2)
    # Check every unit now, so a bad file fails before any computing starts.
    _lookup(TEMPERATURE_UNITS, ds[temperature], temperature, "a temperature")
    for name in (t2, td2) + ((humidity,) if kind == "dew_point_temperature" else ()):
        if name:
            _lookup(TEMPERATURE_UNITS, ds[name], name, "a temperature")
    if kind == "relative_humidity":
        _lookup(RH_UNITS, ds[humidity], humidity, "a relative humidity")
    elif kind in ("specific_humidity", "humidity_mixing_ratio"):
        _lookup(FRACTION_UNITS, ds[humidity], humidity, "a mass fraction")
    if psfc:
        _lookup(PRESSURE_UNITS, ds[psfc], psfc, "a pressure")
    for name in (height, zsfc):
        if name:
            _lookup(HEIGHT_UNITS, ds[name], name, "a height")
    return fields


def parse_chunks(text: str | None) -> dict[str, int]:
    """``"y=256,x=256"`` -> ``{"y": 256, "x": 256}``; raises :class:`OptionError`."""
    if not text:
        return {}
    out: dict[str, int] = {}
    for part in text.split(","):
        part = part.strip()
        if not part:
            continue
        name, sep, value = part.partition("=")
        try:
            size = int(value)
        except ValueError:
            size = 0
        if not sep or not name.strip() or size <= 0:
            raise OptionError(f"chunks: {part!r} is not NAME=SIZE with a positive whole SIZE "
                              "(example: y=256,x=256)", field="chunks")
        out[name.strip()] = size
    return out


def default_chunks(ds, fields: GridFields, members: int = 0) -> dict:
    """Chunks of about ``DEFAULT_CHUNK_WORK / (1 + members)`` columns that follow how the
    temperature is stored: whole multiples of its file chunks when it is chunked, and when it
    is contiguous, whole rows of the inner horizontal dimensions (bands along the outermost),
    so that every chunk is read as a few long runs of the file.  One time step per chunk; the
    level dimension whole."""
    chunks: dict[str, int] = {fields.level_dim: -1}
    if fields.time_dim:
        chunks[fields.time_dim] = 1
    var = ds[fields.temperature]
    stored = var.encoding.get("chunksizes") or (1,) * var.ndim
    unit = {d: max(1, int(c)) for d, c in zip(var.dims, stored)}
    remaining = float(max(1, DEFAULT_CHUNK_WORK // (1 + int(members))))
    # Innermost (fastest varying in the file) first: it is taken whole when it fits.
    for dim in reversed([d for d in var.dims if d in fields.horizontal_dims]):
        size, u = ds.sizes[dim], unit.get(dim, 1)
        if u > 2.0 * remaining:
            # A file chunk much larger than the work wanted (a whole variable stored as one
            # chunk, say) is split rather than making one task of it; HDF5's chunk cache
            # keeps the repeated reads of one file chunk cheap.
            u = 1
        units = max(1, min(-(-size // u), round(remaining / u)))
        chunks[dim] = min(size, units * u)
        remaining = max(1.0, remaining / chunks[dim])
    return chunks


def open_grid(paths: str | os.PathLike | Sequence, chunks: Mapping[str, int] | None = None,
              members: int = 0):
    """Open one or more NetCDF files as one dask-backed dataset, combined along time.

    ``chunks`` maps dimension names to chunk sizes (the level dimension is always whole); the
    dimensions not given follow :func:`default_chunks`, sized for ``members`` Monte-Carlo
    members per column (the work of a chunk grows with them).
    """
    import xarray as xr

    from .probability import check_members
    members = check_members(members)
    if isinstance(paths, (str, os.PathLike)):
        paths = [paths]
    paths = [os.fspath(p) for p in paths]
    if not paths:
        raise OptionError("no input file given", field="input")
    def _open(path, file_chunks):
        try:
            return xr.open_dataset(path, engine="netcdf4", chunks=file_chunks,
                                   decode_timedelta=False)
        except (OSError, ValueError, TypeError) as exc:
            reason = (str(exc).strip().splitlines() or [type(exc).__name__])[0]
            raise ReaderError(f"{path}: not a readable NetCDF file ({reason})",
                              field="input") from None

    datasets = []
    for path in paths:
        if not os.path.exists(path):
            raise FileNotFoundError(2, "No such file or directory", path)
        datasets.append((path, _open(path, {})))
    fields = find_fields(datasets[0][1], datasets[0][0])
    for path, ds in datasets[1:]:
        other = find_fields(ds, path)
        if (other.temperature, other.level_dim, other.horizontal_dims) != \
                (fields.temperature, fields.level_dim, fields.horizontal_dims):
            raise ReaderError(f"{path}: its variables or dimensions differ from {datasets[0][0]} "
                              f"(temperature {other.temperature!r} on {other.horizontal_dims}, "
                              f"expected {fields.temperature!r} on {fields.horizontal_dims})",
                              field="input")
    ds = _combine(datasets, fields)
    want = dict(chunks or {})
    unknown = sorted(set(want) - set(ds.dims))
    if unknown:
        raise OptionError(f"chunks: unknown dimension(s) {', '.join(unknown)}; the input has "
                          f"{', '.join(map(str, ds.dims))}", field="chunks")
    full = default_chunks(ds, fields, members)
    full.update(want)
    full[fields.level_dim] = -1
    full = {d: c for d, c in full.items() if d in ds.dims}
    if all(d[fields.temperature].encoding.get("contiguous") for _, d in datasets):
        # A contiguous (unchunked) variable opens as one dask chunk: its whole array would be
        # read by one task, under the HDF5 lock, before any column could be diagnosed.  It is
        # reopened in bands instead: the working chunk along the outermost horizontal
        # dimension (as stored) and every dimension after it whole, so that each read is a
        # few long runs of the file; the bands are then split into the working chunks (same
        # values, same chunks).  Measured on 1.9 M columns x 40 levels, three variables:
        # whole arrays 4.2 s, slabs of 64 x 64 columns 8.8 s (short strided reads), bands
        # 2.8 s, and the bands interleave with the computing.
        t_dims = datasets[0][1][fields.temperature].dims
        outer = next((k for k in t_dims if k in fields.horizontal_dims), None)
        whole = set(t_dims[t_dims.index(outer) + 1:]) if outer else set()
        for _, d in datasets:
            d.close()
        datasets = [(path, _open(path, {k: (-1 if k in whole else v) for k, v in full.items()
                                        if k in d.dims}))
                    for path, d in datasets]
        ds = _combine(datasets, fields)
    ds = ds.chunk(full)
    ds.attrs["_ptype_sources"] = " ".join(os.path.basename(p) for p in paths)
    return ds


def _combine(datasets, fields: GridFields):
    """One dataset from the opened files, along time (checked by :func:`open_grid`)."""
    import xarray as xr
    if len(datasets) == 1:
        ds = datasets[0][1]
    else:
        if fields.time_dim is None:
            raise ReaderError(f"{datasets[0][0]}: several input files are combined along time, "
                              "but the temperature has no time dimension", field="input")
        for path, d in datasets[1:]:
            for dim in fields.horizontal_dims + (fields.level_dim,):
                if d.sizes.get(dim) != datasets[0][1].sizes[dim]:
                    raise ReaderError(f"{path}: dimension {dim!r} has size {d.sizes.get(dim)}, "
                                      f"expected {datasets[0][1].sizes[dim]} as in "
                                      f"{datasets[0][0]}", field=dim)
        ds = xr.concat([d for _, d in datasets], dim=fields.time_dim, data_vars="minimal",
                       coords="minimal", compat="override", join="override",
                       combine_attrs="override")
        ds = ds.sortby(fields.time_dim)
    return ds


# --------------------------------------------------------------------------------------------
# The column kernel
# --------------------------------------------------------------------------------------------

def _to_celsius(a, offset):
    return np.asarray(a, dtype=np.float64) - offset


def dewpoint_from_humidity_c(kind: str, values, pressure_hpa, temperature_c):
    """Dew point, degC, from any of :data:`HUMIDITY_KINDS` (already in degC, %, kg/kg)."""
    from . import thermo
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
    #: consensus reads are run (:func:`ptype.diagnosis.consensus_methods`, same consensus).
    per_method: bool = True

    @property
    def method_fields(self) -> tuple[str, ...]:
        return self.methods if self.per_method else ()

    @property
    def names(self) -> tuple[str, ...]:
        probs = tuple(f"p_{c.name}" for c in Code) if self.members else ()
        return (("ptype",) + tuple(f"m_{m}" for m in self.method_fields)
                + ("warm_area_j_kg", "cold_area_j_kg", "wetbulb_zero_height_m",
                   "freezing_level_m") + probs)


def build_columns(pressure_hpa, temperature_c, dewpoint_c, height_m=None, surface_pressure_hpa=None,
                  surface_altitude_m=None, temperature_2m_c=None, dewpoint_2m_c=None):
    """Model levels (``(n, L)``, any order) plus surface fields (``(n,)``) -> :class:`Columns`.

    Levels below the ground are dropped; the screen-level air becomes the lowest level when
    surface pressure, 2 m temperature and 2 m dew point are all known (see the module notes).
    """
    from .columns import Columns
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


def diagnose_block(columns, layout: KernelLayout, seed=None) -> np.ndarray:
    """Run the engine on columns; returns ``(n, len(layout.names))`` float32 (NaN = missing)."""
    from .diagnosis import consensus_methods, diagnose_columns
    from .probability import member_probabilities
    n = columns.n_columns
    out = np.full((n, len(layout.names)), np.nan, dtype=np.float32)
    ok = columns.n_levels >= MIN_LEVELS
    if not ok.any():
        return out
    sub = columns if ok.all() else columns.take(ok)
    # The energies and heights come from the layer analysis, whichever methods run.
    run = layout.methods if layout.per_method else consensus_methods(layout.methods)
    res = diagnose_columns(sub, methods=run)
    cols = [res["ptype"]] + [res[m] for m in layout.method_fields] + [
        res["warm_area_j_kg"], res["cold_area_j_kg"], res["wetbulb_zero_height_m"],
        res["freezing_level_m"]]
    block = np.column_stack([np.asarray(c, dtype=np.float64) for c in cols])
    # Method abstentions are missing values, not a code.
    k = len(layout.method_fields)
    block[:, 1:1 + k] = np.where(block[:, 1:1 + k] == NO_RESULT, np.nan, block[:, 1:1 + k])
    if layout.members:
        # Members multiply the columns: diagnose them in batches so memory stays bounded.
        step = max(1, MEMBER_BATCH_COLUMNS // layout.members)
        probs = np.empty((sub.n_columns, len(Code)))
        for b, start in enumerate(range(0, sub.n_columns, step)):
            part = sub.take(slice(start, start + step))
            part_seed = (None if seed is None
                         else np.random.SeedSequence([int(seed), b]).generate_state(1)[0])
            probs[start:start + step] = member_probabilities(part, layout.members, part_seed,
                                                             layout.methods)
        block = np.concatenate([block, probs], axis=1)
    out[ok] = block
    return out


#: Inputs of :func:`column_kernel` on the levels (the others are per column).
_LEVEL_INPUTS = ("pressure", "temperature", "humidity", "height")


def column_kernel(*arrays, names: tuple[str, ...], consts: Mapping[str, float],
                  fields: GridFields, layout: KernelLayout, seed=None):
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


# --------------------------------------------------------------------------------------------
# Dataset -> Dataset
# --------------------------------------------------------------------------------------------

def _flag_attrs() -> tuple[np.ndarray, str]:
    values = np.array(sorted(GRIB2_4201_MEANINGS), dtype=np.uint8)
    return values, " ".join(GRIB2_4201_MEANINGS[int(v)] for v in values)


def _label_name(code: Code) -> str:
    return LABELS[code].replace(" ", "_")


def diagnose_dataset(ds, members: int = 0, seed=None, methods=None, per_method: bool = False,
                     fields: GridFields | None = None):
    """Diagnose every column of a model dataset; lazy when ``ds`` holds dask arrays.

    Parameters
    ----------
    ds : xarray.Dataset
        CF model output on pressure levels (see the module notes for what is recognised).
    members : int
        Monte-Carlo members per column for the probabilities (0: none).
    seed : int, optional
        Seed of the members (reproducible for the same seed and chunking).
    methods : iterable of str, optional
        Methods to run (default all of :data:`ptype.methods.METHOD_NAMES`).
    per_method : bool
        Also return one type variable per method.

    Returns
    -------
    xarray.Dataset
        ``precipitation_type`` (GRIB2 code table 4.201 values), ``warm_layer_energy`` and
        ``cold_layer_energy`` (J kg-1), ``wet_bulb_zero_height`` and ``freezing_level_height``
        (m), ``probability_of_<type>`` when ``members > 0`` and
        ``precipitation_type_<method>`` when ``per_method``; CF-1.13 attributes throughout.
    """
    import xarray as xr

    from . import CAUTION, __version__
    from .diagnosis import _method_names
    from .probability import check_members

    members = check_members(members)
    if seed is not None and (isinstance(seed, bool) or not isinstance(seed, (int, np.integer))
                             or seed < 0):
        raise OptionError(f"seed = {seed!r}: expected a non-negative whole number", field="seed")
    names_m = _method_names(methods)
    fields = fields or find_fields(ds)
    layout = KernelLayout(methods=names_m, members=members, per_method=bool(per_method))
    lev = fields.level_dim
    hdims = fields.horizontal_dims
    col_dims = ((fields.time_dim,) if fields.time_dim else ()) + hdims

    inputs = {"pressure": ds[lev], "temperature": ds[fields.temperature],
              "humidity": ds[fields.humidity]}
    if fields.height:
        inputs["height"] = ds[fields.height]
    for key in ("surface_pressure", "surface_altitude", "temperature_2m", "dewpoint_2m"):
        name = getattr(fields, key)
        if name:
            inputs[key] = ds[name]
    # A global column index, chunked like the data, seeds each chunk's members.
    shape = tuple(ds.sizes[d] for d in col_dims)
    index = xr.DataArray(np.arange(int(np.prod(shape)), dtype=np.int64).reshape(shape),
                         dims=col_dims)
    inputs["column_index"] = index

    consts = {"_t_offset": _lookup(TEMPERATURE_UNITS, ds[fields.temperature],
                                   fields.temperature, "a temperature")}
    if fields.humidity_kind == "dew_point_temperature":
        consts["_h_scale"] = _lookup(TEMPERATURE_UNITS, ds[fields.humidity], fields.humidity,
                                     "a temperature")
    elif fields.humidity_kind == "relative_humidity":
        consts["_h_scale"] = _lookup(RH_UNITS, ds[fields.humidity], fields.humidity, "RH")
    else:
        consts["_h_scale"] = _lookup(FRACTION_UNITS, ds[fields.humidity], fields.humidity,
                                     "a mass fraction")
    if fields.height:
        consts["_z_scale"] = _lookup(HEIGHT_UNITS, ds[fields.height], fields.height, "a height")
    if fields.surface_pressure:
        consts["_ps_scale"] = _lookup(PRESSURE_UNITS, ds[fields.surface_pressure],
                                      fields.surface_pressure, "a pressure")
    if fields.surface_altitude:
        consts["_zs_scale"] = _lookup(HEIGHT_UNITS, ds[fields.surface_altitude],
                                      fields.surface_altitude, "a height")
    if fields.temperature_2m:
        consts["_t2_offset"] = _lookup(TEMPERATURE_UNITS, ds[fields.temperature_2m],
                                       fields.temperature_2m, "a temperature")
    if fields.dewpoint_2m:
        consts["_td2_offset"] = _lookup(TEMPERATURE_UNITS, ds[fields.dewpoint_2m],
                                        fields.dewpoint_2m, "a temperature")

    t_chunks = ds[fields.temperature].chunksizes if ds[fields.temperature].chunks else {}
    if t_chunks:
        if len(t_chunks[lev]) > 1:
            raise OptionError(f"chunks: the level dimension {lev!r} must be one chunk",
                              field="chunks")
        inputs = {k: (v.chunk({d: t_chunks[d] for d in v.dims if d in t_chunks})
                      if k != "pressure" else v) for k, v in inputs.items()}
    kernel = functools.partial(column_kernel, names=tuple(inputs), consts=consts, fields=fields,
                               layout=layout, seed=seed)
    nf = len(layout.names)
    packed = xr.apply_ufunc(
        kernel, *inputs.values(),
        input_core_dims=[[lev] if lev in v.dims else [] for v in inputs.values()],
        output_core_dims=[["ptype_field"]],
        dask="parallelized",
        output_dtypes=[np.float32],
        dask_gufunc_kwargs={"output_sizes": {"ptype_field": nf}},
        keep_attrs=False,
    )
    # Keep only the dimension coordinates; the others are chosen below.
    packed = packed.transpose(*col_dims, "ptype_field").reset_coords(drop=True)
    field_index = {name: i for i, name in enumerate(layout.names)}

    def field(name):
        return packed.isel(ptype_field=field_index[name]).drop_vars("ptype_field", errors="ignore")

    flag_values, flag_meanings = _flag_attrs()
    grid_mapping = ds[fields.temperature].attrs.get("grid_mapping")
    out = xr.Dataset()

    def type_var(values, long_name):
        codes = _grib2_codes(values)
        attrs = {"standard_name": "predominant_precipitation_type_at_surface",
                 "long_name": long_name, "flag_values": flag_values,
                 "flag_meanings": flag_meanings,
                 "comment": "values follow WMO GRIB2 code table 4.201; 255 = not diagnosed "
                            "(fewer than 3 levels above ground or missing input). " + CAUTION}
        if grid_mapping:
            attrs["grid_mapping"] = grid_mapping
        return xr.DataArray(codes, dims=col_dims, attrs=attrs)

    out["precipitation_type"] = type_var(
        field("ptype"), f"predominant precipitation type at the surface, consensus of "
                        f"{len(names_m)} methods ({', '.join(names_m)})")
    if per_method:
        for m in names_m:
            out[f"precipitation_type_{m}"] = type_var(
                field(f"m_{m}"), f"precipitation type at the surface by the {m} method")
    floats = {
        "warm_layer_energy": ("warm_area_j_kg", "J kg-1",
                              ("melting energy: area between the temperature profile and 0 degC "
                               "summed over the warm layers below 250 hPa (Bourgouin 2000)")),
        "cold_layer_energy": ("cold_area_j_kg", "J kg-1",
                              ("refreezing energy: area of the cold layers below the highest "
                               "warm layer aloft (Bourgouin 2000)")),
        "wet_bulb_zero_height": ("wetbulb_zero_height_m", "m",
                                 ("geopotential height of the highest wet-bulb 0 degC crossing "
                                  "(isobaric wet-bulb)")),
        "freezing_level_height": ("freezing_level_m", "m",
                                  ("geopotential height of the highest 0 degC crossing of the "
                                   "air temperature")),
    }
    for var, (key, units, long_name) in floats.items():
        attrs = {"long_name": long_name, "units": units}
        if grid_mapping:
            attrs["grid_mapping"] = grid_mapping
        out[var] = field(key).assign_attrs(attrs)
    if members:
        for code in Code:
            attrs = {"long_name": f"probability of {LABELS[code]}", "units": "1",
                     "valid_range": np.array([0.0, 1.0], dtype=np.float32),
                     "comment": f"fraction of {members} Monte-Carlo members (perturbed "
                                "temperature and humidity profiles) whose consensus type is "
                                f"{code.name}"}
            if grid_mapping:
                attrs["grid_mapping"] = grid_mapping
            out[f"probability_of_{_label_name(code)}"] = field(f"p_{code.name}").assign_attrs(attrs)
    # Coordinates: the column dimensions and auxiliary coordinates on them (latitude, ...).
    for name, c in ds.coords.items():
        if name == lev or lev in c.dims or not set(c.dims) <= set(col_dims):
            continue
        if not c.dims and (_std(c) == "height" or name == "height"):
            continue  # the screen level's 2 m: the output is at the surface
        out = out.assign_coords({name: c.variable})
    if grid_mapping and grid_mapping in ds.variables:
        out[grid_mapping] = ds[grid_mapping].variable
    out.attrs.update({
        "Conventions": "CF-1.13",
        "title": "Precipitation type at the surface diagnosed from model pressure-level profiles",
        "source": f"ptype {__version__} gridded diagnosis ({', '.join(names_m)}) applied to "
                  f"{ds.attrs.get('_ptype_sources') or ds.attrs.get('source') or 'model output'}",
        "ptype_version": __version__,
        "ptype_methods": " ".join(names_m),
        "ptype_members": np.int32(members),
        "ptype_seed": "none" if seed is None else str(int(seed)),
        "comment": CAUTION,
    })
    hist = ds.attrs.get("history")
    if hist:
        out.attrs["history"] = str(hist)
    return out


def _grib2_codes(values):
    """Float ptype codes (NaN missing) -> uint8 GRIB2 4.201 values (255 missing), lazily."""
    def conv(a):
        a = np.asarray(a)
        codes = np.where(np.isfinite(a), a, NO_RESULT).astype(np.int64)
        return to_grib2(codes)
    return values.copy(data=_map_array(values.data, conv, np.uint8))


def _map_array(data, func, dtype):
    try:
        import dask.array as da
        if isinstance(data, da.Array):
            return data.map_blocks(func, dtype=dtype)
    except ImportError:  # pragma: no cover
        pass
    return func(data)


# --------------------------------------------------------------------------------------------
# Writing
# --------------------------------------------------------------------------------------------

def encoding_for(out, complevel: int = 4) -> dict:
    """zlib-compressed, chunked NetCDF-4 encoding matching the dask chunks."""
    enc = {}
    for name, var in out.data_vars.items():
        e = {"zlib": True, "complevel": complevel, "shuffle": True}
        if var.chunks:
            e["chunksizes"] = tuple(int(c[0]) for c in var.chunks)
        if var.dtype == np.uint8:
            e["_FillValue"] = np.uint8(TYPE_FILL)
        elif np.issubdtype(var.dtype, np.floating):
            e["_FillValue"] = np.float32(np.nan)
            e["dtype"] = "float32"
        else:
            e["_FillValue"] = None
        if var.ndim == 0:
            e = {"_FillValue": None}
        enc[name] = e
    return enc


#: glibc ``mallopt`` parameters (malloc.h): M_TRIM_THRESHOLD and M_MMAP_THRESHOLD.
_M_TRIM_THRESHOLD, _M_MMAP_THRESHOLD = -1, -3


def retain_freed_memory(mmap_threshold_bytes: int = 32 << 20,
                        trim_threshold_bytes: int = 128 << 20) -> bool:
    """Let the C allocator keep freed memory for reuse instead of handing it back to the
    operating system after every batch (glibc ``mallopt``; a process-wide setting, used by
    ``ptype grid`` for its own process).

    The engine allocates and frees the same megabyte-sized arrays batch after batch; by
    default glibc returns such memory to the kernel and takes it back on the next batch,
    page by page.  With 20 members that cost 1.4-1.9 us of system time per member column
    (about 9 % of the work) and nothing with these settings (measured, docs/performance.md).
    Resident memory stays bounded: at most ``trim_threshold_bytes`` of free memory is kept
    per allocator arena.  Returns False where it does not apply (no glibc).
    """
    import ctypes
    try:
        mallopt = ctypes.CDLL("libc.so.6").mallopt
    except (OSError, AttributeError):
        return False
    mallopt.argtypes = [ctypes.c_int, ctypes.c_int]
    return bool(mallopt(_M_MMAP_THRESHOLD, int(mmap_threshold_bytes))
                and mallopt(_M_TRIM_THRESHOLD, int(trim_threshold_bytes)))


def history_line(argv: Iterable[str] | None = None) -> str:
    """CF ``history`` entry: UTC time stamp and the command line (or the API call)."""
    from . import __version__
    now = datetime.now(UTC).strftime("%Y-%m-%dT%H:%M:%SZ")
    if argv is None:
        return f"{now}: ptype.grid.write_grid (ptype {__version__})"
    return f"{now}: ptype grid {' '.join(argv)}".rstrip()


def write_grid(out, path, *, progress: bool = False, client=None, argv=None) -> None:
    """Compute (with a progress bar when asked) and write a diagnosed dataset to NetCDF-4."""
    line = history_line(argv)
    prior = out.attrs.get("history")
    out.attrs["history"] = f"{line}\n{prior}" if prior else line
    tmp = f"{path}.part"
    delayed = out.to_netcdf(tmp, engine="netcdf4", format="NETCDF4", encoding=encoding_for(out),
                            compute=False)
    try:
        if client is not None:
            future = client.compute(delayed)
            if progress:
                import contextlib

                from distributed import progress as dist_progress
                with contextlib.redirect_stdout(sys.stderr):  # the bar, like dask's, on stderr
                    dist_progress(future)
                print(file=sys.stderr)
            future.result()
        elif progress:
            from dask.diagnostics import ProgressBar
            with ProgressBar(out=sys.stderr):
                delayed.compute()
        else:
            delayed.compute()
        os.replace(tmp, path)  # never leave a half-written file under the requested name
    finally:
        if os.path.exists(tmp):
            os.remove(tmp)


def summary(path) -> dict:
    """Counts of each type in a written file (for the command's closing lines)."""
    import xarray as xr
    # engine named: letting xarray guess imports every installed backend (1.5 s measured).
    with xr.open_dataset(path, engine="netcdf4") as ds:
        v = ds["precipitation_type"].values
        meanings = ds["precipitation_type"].attrs["flag_meanings"].split()
        values = list(np.atleast_1d(ds["precipitation_type"].attrs["flag_values"]))
    finite = v[np.isfinite(v)] if v.dtype.kind == "f" else v
    counts = {}
    for val, meaning in zip(values, meanings):
        k = int(np.count_nonzero(finite == val))
        if k:
            counts[meaning] = k
    missing = int(v.size - sum(counts.values()))
    if missing:
        counts["not_diagnosed"] = missing
    return counts


def _fmt_seconds(s: float) -> str:
    return f"{s:.1f} s" if s < 120 else f"{math.floor(s / 60)} min {s % 60:.0f} s"
