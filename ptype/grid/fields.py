"""Which variable of a model dataset is what: CF standard names and units -> :class:`GridFields`.

Inputs are recognised by CF ``standard_name`` (CF standard-name table v94); see
:mod:`ptype.grid` for the list.  Unit conversions are read from the ``units`` attributes.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Callable, Mapping
from typing import TYPE_CHECKING

import numpy as np

from ptype.errors import ReaderError

if TYPE_CHECKING:
    import xarray as xr

#: Tolerance for "2 m" in the height coordinate of screen-level fields, m.
SCREEN_HEIGHT_M = (1.0, 3.0)

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


def _by_standard_name(ds) -> dict[str, list[str]]:
    """Data variable names grouped by CF standard name, in dataset order."""
    by_name: dict[str, list[str]] = {}
    for name, var in ds.data_vars.items():
        by_name.setdefault(_std(var), []).append(name)
    return by_name


def _describe(ds) -> str:
    """The data variables with their standard names, for error messages."""
    found = [f"{n} ({_std(v) or 'no standard_name'})" for n, v in ds.data_vars.items()]
    return ", ".join(found) if found else "none"


def _find_temperature(ds, by_name: Mapping[str, list[str]],
                      source: str) -> tuple[str, str, float]:
    """The first air temperature on pressure levels: its name, its level dimension and the
    factor from that coordinate to hPa."""
    for name in by_name.get("air_temperature", []):
        for dim in ds[name].dims:
            f = _pressure_coord(ds, dim)
            if f is not None:
                return name, dim, f
    if by_name.get("air_temperature"):
        raise ReaderError(
            f"{source}: air_temperature found ({', '.join(by_name['air_temperature'])}) but "
            "none has a vertical coordinate with standard_name air_pressure or units Pa/hPa",
            field="air_temperature")
    raise ReaderError(f"{source}: no variable with standard_name air_temperature on pressure "
                      f"levels; variables present: {_describe(ds)}", field="air_temperature")


def _find_humidity(ds, by_name: Mapping[str, list[str]], on_levels: Callable[[str], bool],
                   source: str) -> tuple[str, str]:
    """The humidity on the temperature's levels and its kind, in the order of
    :data:`HUMIDITY_KINDS`."""
    for kind in HUMIDITY_KINDS:
        cands = [n for n in by_name.get(kind, []) if on_levels(n)]
        if cands:
            return cands[0], kind
    raise ReaderError(f"{source}: no humidity on pressure levels; expected a variable with "
                      f"standard_name {', '.join(HUMIDITY_KINDS)}; variables present: "
                      f"{_describe(ds)}", field="humidity")


def _check_units(ds, fields: GridFields) -> None:
    """Every unit of the chosen variables understood, so a bad file fails before any
    computing starts."""
    temperature, humidity, kind = fields.temperature, fields.humidity, fields.humidity_kind
    _lookup(TEMPERATURE_UNITS, ds[temperature], temperature, "a temperature")
    screen = (fields.temperature_2m, fields.dewpoint_2m)
    for name in screen + ((humidity,) if kind == "dew_point_temperature" else ()):
        if name:
            _lookup(TEMPERATURE_UNITS, ds[name], name, "a temperature")
    if kind == "relative_humidity":
        _lookup(RH_UNITS, ds[humidity], humidity, "a relative humidity")
    elif kind in ("specific_humidity", "humidity_mixing_ratio"):
        _lookup(FRACTION_UNITS, ds[humidity], humidity, "a mass fraction")
    if fields.surface_pressure:
        _lookup(PRESSURE_UNITS, ds[fields.surface_pressure], fields.surface_pressure,
                "a pressure")
    for name in (fields.height, fields.surface_altitude):
        if name:
            _lookup(HEIGHT_UNITS, ds[name], name, "a height")


def find_fields(ds: xr.Dataset, source: str = "input") -> GridFields:
    """Identify the fields of a dataset by CF standard name.

    The temperature on pressure levels fixes the level, time and horizontal dimensions;
    the humidity and geopotential height must share its levels; surface fields (surface
    pressure and altitude, 2 m temperature and dew point) its other dimensions.

    Raises :class:`ReaderError` naming what is missing and what was found, or the first
    variable whose units are not understood.
    """
    by_name = _by_standard_name(ds)
    temperature, level_dim, to_hpa = _find_temperature(ds, by_name, source)
    t_dims = ds[temperature].dims
    time_dim = next((d for d in t_dims if d != level_dim and _is_time(ds, d)), None)
    horizontal = tuple(d for d in t_dims if d not in (level_dim, time_dim))

    def on_levels(name):
        return level_dim in ds[name].dims and set(ds[name].dims) <= set(t_dims)

    def surface(name):
        return level_dim not in ds[name].dims and set(ds[name].dims) <= set(t_dims)

    def first(standard_name, accept):
        return next((n for n in by_name.get(standard_name, []) if accept(n)), None)

    def screen(name):
        return surface(name) and _is_screen_level(ds, ds[name])

    humidity, kind = _find_humidity(ds, by_name, on_levels, source)
    fields = GridFields(temperature=temperature, humidity=humidity, humidity_kind=kind,
                        level_dim=level_dim, level_to_hpa=to_hpa, horizontal_dims=horizontal,
                        time_dim=time_dim, height=first("geopotential_height", on_levels),
                        surface_pressure=first("surface_air_pressure", surface),
                        surface_altitude=first("surface_altitude", surface),
                        temperature_2m=first("air_temperature", screen),
                        dewpoint_2m=first("dew_point_temperature", screen))
    _check_units(ds, fields)
    return fields


def unit_conversions(ds: xr.Dataset, fields: GridFields) -> dict[str, float]:
    """The constants the column kernel applies to reach degC, hPa, m, % and kg/kg: offsets
    (temperatures) and scales (the rest), keyed as :func:`ptype.grid.kernel.column_kernel`
    reads them; an unknown unit raises :class:`~ptype.errors.ReaderError` naming it."""
    def lookup(table, name, what):
        return _lookup(table, ds[name], name, what)

    consts = {"_t_offset": lookup(TEMPERATURE_UNITS, fields.temperature, "a temperature")}
    if fields.humidity_kind == "dew_point_temperature":
        consts["_h_scale"] = lookup(TEMPERATURE_UNITS, fields.humidity, "a temperature")
    elif fields.humidity_kind == "relative_humidity":
        consts["_h_scale"] = lookup(RH_UNITS, fields.humidity, "RH")
    else:
        consts["_h_scale"] = lookup(FRACTION_UNITS, fields.humidity, "a mass fraction")
    optional = (("_z_scale", HEIGHT_UNITS, fields.height, "a height"),
                ("_ps_scale", PRESSURE_UNITS, fields.surface_pressure, "a pressure"),
                ("_zs_scale", HEIGHT_UNITS, fields.surface_altitude, "a height"),
                ("_t2_offset", TEMPERATURE_UNITS, fields.temperature_2m, "a temperature"),
                ("_td2_offset", TEMPERATURE_UNITS, fields.dewpoint_2m, "a temperature"))
    for key, table, name, what in optional:
        if name:
            consts[key] = lookup(table, name, what)
    return consts
