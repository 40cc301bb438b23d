"""Single-profile NetCDF files, found through CF standard names (CF Conventions 1.13).

Variables are identified by their ``standard_name`` attribute, never by their
variable name, so any CF-conforming file works:

============================  ========================================  ===========================
standard_name                 role                                      units understood
============================  ========================================  ===========================
air_pressure                  pressure (data variable or the vertical   Pa, hPa, mbar, mb, kPa
                              coordinate); required
air_temperature               temperature; required                     K, degC (and spellings)
dew_point_temperature         dew point; this or relative humidity      K, degC
relative_humidity             relative humidity over water              1 (fraction), %
geopotential_height,          height above mean sea level; optional     m, km
altitude
latitude, longitude           site position (scalar); optional          degrees_north / _east
surface_altitude              station elevation (scalar); optional      m
time                          valid time (scalar); optional             CF time units
============================  ========================================  ===========================

A variable with ``cf_role = "profile_id"`` names the site.  Exactly one column is
accepted: a variable with a second dimension longer than one is refused,
naming that dimension.
"""

from __future__ import annotations

import io
import math
import os
from pathlib import Path

import numpy as np

from ptype.errors import ReaderError

_PRESSURE_TO_HPA = {"pa": 0.01, "hpa": 1.0, "mbar": 1.0, "mb": 1.0, "millibar": 1.0,
                    "hectopascal": 1.0, "hectopascals": 1.0, "kpa": 10.0, "pascal": 0.01,
                    "pascals": 0.01}
_KELVIN = {"k", "kelvin", "degk", "deg_k", "degrees_k"}
_CELSIUS = {"degc", "deg_c", "celsius", "degree_celsius", "degrees_celsius", "c", "°c",
            "degree_c", "degrees_c"}
_HEIGHT_TO_M = {"m": 1.0, "meter": 1.0, "meters": 1.0, "metre": 1.0, "metres": 1.0,
                "km": 1000.0, "gpm": 1.0}


def _units(var) -> str | None:
    u = var.attrs.get("units")
    return None if u is None else str(u).strip()


def _open(source):
    import xarray as xr
    try:
        if isinstance(source, (bytes, bytearray)):
            import netCDF4
            nc = netCDF4.Dataset("in-memory.nc", mode="r", memory=bytes(source))
            return xr.open_dataset(xr.backends.NetCDF4DataStore(nc), decode_times=True)
        return xr.open_dataset(source, decode_times=True)
    except (OSError, ValueError, RuntimeError, TypeError) as exc:
        raise ReaderError(f"{_name(source)}: not a readable NetCDF file ({exc})") from None


def _name(source) -> str:
    if isinstance(source, (bytes, bytearray, io.IOBase)):
        return "<bytes>"
    return str(source)


def _find(ds, standard_name: str):
    """The variables or coordinates carrying ``standard_name`` (data variables first)."""
    found = [ds[k] for k in ds.data_vars if ds[k].attrs.get("standard_name") == standard_name]
    found += [ds[k] for k in ds.coords if ds[k].attrs.get("standard_name") == standard_name
              and all(k != f.name for f in found)]
    return found


def _column(var, name: str, vertical_dim: str | None) -> np.ndarray:
    """A variable as one 1-D column; refuses a second dimension longer than one."""
    extra = [d for d in var.dims if d != vertical_dim and var.sizes[d] > 1]
    if extra:
        dim = extra[0]
        raise ReaderError(
            f"{name}: variable {var.name!r} ({var.attrs.get('standard_name')}) has "
            f"{var.sizes[dim]} entries along dimension {dim!r}; expected a single profile "
            "(one column); select one with xarray before reading")
    values = np.asarray(var.squeeze().values, dtype=float)
    return np.atleast_1d(values)


def _convert(var, name: str, values: np.ndarray, kind: str) -> np.ndarray:
    units = _units(var)
    key = units.lower().replace(" ", "_") if units else None
    sn = var.attrs.get("standard_name")
    label = f"variable {var.name!r} ({sn})"
    if kind == "pressure":
        if key not in _PRESSURE_TO_HPA:
            raise ReaderError(f"{name}: {label} has units {units!r}; expected Pa, hPa, mbar or kPa")
        return values * _PRESSURE_TO_HPA[key]
    if kind == "temperature":
        if key in _KELVIN:
            return values - 273.15
        if key in _CELSIUS:
            return values
        raise ReaderError(f"{name}: {label} has units {units!r}; expected K or degC")
    if kind == "humidity":
        if units is None:
            raise ReaderError(f"{name}: {label} has no units attribute; expected '1' "
                              "(fraction) or '%'")
        if key in ("1", "fraction"):
            return values * 100.0
        if key in ("%", "percent"):
            return values
        raise ReaderError(f"{name}: {label} has units {units!r}; expected '1' (fraction) or '%'")
    if kind == "height":
        if key not in _HEIGHT_TO_M:
            raise ReaderError(f"{name}: {label} has units {units!r}; expected m or km")
        return values * _HEIGHT_TO_M[key]
    raise AssertionError(kind)  # pragma: no cover


def _scalar(ds, standard_name: str) -> float | None:
    for var in _find(ds, standard_name):
        if var.size == 1:
            value = float(np.asarray(var.values, dtype=float).ravel()[0])
            if math.isfinite(value):
                return value
    return None


def read_netcdf_document(path_or_bytes: str | os.PathLike | bytes) -> dict:
    """Read one vertical profile from a CF NetCDF file (path) or its bytes.

    Returns a profile document dict (levels with ``pressure_hpa``, ``temperature_c``,
    ``dewpoint_c`` or ``relative_humidity_pct``, and ``height_m`` when present).

    Raises
    ------
    ptype.errors.ReaderError
        Naming the file and the missing ``standard_name``, a unit that cannot be
        converted, or the dimension that holds more than one profile.
    """
    source = path_or_bytes
    if isinstance(source, Path):
        source = str(source)
    name = _name(source)
    ds = _open(source)
    try:
        return _read(ds, name)
    finally:
        ds.close()


def _read(ds, name: str) -> dict:
    """The profile document of an open dataset: levels, site, valid time and source."""
    p_var, t_var, td_var, rh_var, z_var = _variables(ds, name)
    vertical = _vertical_dimension(p_var, t_var, name)
    columns = _level_columns(name, vertical, p_var, t_var, td_var, rh_var, z_var)
    doc: dict = {"levels": _levels(columns)}
    site = _site(ds)
    if site:
        doc["site"] = site
    valid_time = _valid_time(ds)
    if valid_time is not None:
        doc["valid_time"] = valid_time
    source = ds.attrs.get("source") or ds.attrs.get("title")
    doc["source"] = (f"NetCDF {Path(name).name}" + (f": {source}" if source else ""))[:200]
    return doc


def _one(ds, name: str, standard_name: str, required: bool, hint: str = ""):
    """The one variable with ``standard_name`` (None when absent and not required)."""
    found = _find(ds, standard_name)
    if not found:
        if required:
            raise ReaderError(f"{name}: no variable or coordinate with standard_name "
                              f"'{standard_name}'{hint}")
        return None
    if len(found) > 1:
        names = ", ".join(repr(v.name) for v in found)
        raise ReaderError(f"{name}: several variables have standard_name '{standard_name}' "
                          f"({names}); expected one")
    return found[0]


def _variables(ds, name: str) -> tuple:
    """Pressure, temperature, dew point or relative humidity, and height (CF standard names:
    ``air_pressure``, ``air_temperature``, ``dew_point_temperature``, ``relative_humidity``,
    ``geopotential_height`` or ``altitude``)."""
    p_var = _one(ds, name, "air_pressure", True, " (the pressure levels); expected a variable "
                                                 "or the vertical coordinate")
    t_var = _one(ds, name, "air_temperature", True)
    td_var = _one(ds, name, "dew_point_temperature", False)
    rh_var = None if td_var is not None else _one(ds, name, "relative_humidity", False)
    if td_var is None and rh_var is None:
        raise ReaderError(f"{name}: no variable with standard_name 'dew_point_temperature' or "
                          "'relative_humidity'; expected one of them for the humidity")
    z_var = _one(ds, name, "geopotential_height", False)
    if z_var is None:
        z_var = _one(ds, name, "altitude", False)
    return p_var, t_var, td_var, rh_var, z_var


def _vertical_dimension(p_var, t_var, name: str) -> str:
    """The dimension pressure runs along (the longest one it has, else temperature's)."""
    p_dims = [d for d in p_var.dims if p_var.sizes[d] > 1]
    if not p_dims:
        raise ReaderError(f"{name}: variable {p_var.name!r} (air_pressure) has a single value; "
                          "expected a profile of several levels")
    vertical = max(p_dims, key=lambda d: p_var.sizes[d])
    if t_var.sizes.get(vertical, 0) <= 1 and t_var.ndim:
        vertical = max((d for d in t_var.dims), key=lambda d: t_var.sizes[d])
    return vertical


def _level_columns(name: str, vertical: str, p_var, t_var, td_var, rh_var,
                   z_var) -> dict[str, np.ndarray]:
    """The profile's columns in ptype's units, all of one length along ``vertical``."""
    def column(var, kind):
        return _convert(var, name, _column(var, name, vertical), kind)

    columns = {"pressure_hpa": column(p_var, "pressure"),
               "temperature_c": column(t_var, "temperature")}
    if td_var is not None:
        columns["dewpoint_c"] = column(td_var, "temperature")
    else:
        columns["relative_humidity_pct"] = column(rh_var, "humidity")
    if z_var is not None and z_var.size > 1:
        columns["height_m"] = column(z_var, "height")
    n = columns["pressure_hpa"].size
    for key, values in columns.items():
        if values.size != n:
            raise ReaderError(f"{name}: {key} has {values.size} values but air_pressure has "
                              f"{n}; expected both along dimension {vertical!r}")
    return columns


def _levels(columns: dict[str, np.ndarray]) -> list[dict]:
    """One level per finite pressure and temperature; fill values of the others are left out."""
    p, t = columns["pressure_hpa"], columns["temperature_c"]
    levels = []
    for i in range(p.size):
        if not (math.isfinite(p[i]) and math.isfinite(t[i])):
            continue  # a fill value in pressure or temperature: no level there
        levels.append({key: float(columns[key][i]) for key in _LEVEL_KEYS
                       if key in columns and math.isfinite(columns[key][i])})
    return levels


_LEVEL_KEYS = ("pressure_hpa", "height_m", "temperature_c", "dewpoint_c",
               "relative_humidity_pct")


def _site(ds) -> dict:
    """The site: ``cf_role = profile_id``, latitude, longitude, ``surface_altitude``, or the
    ``station_name`` attribute (CF 1.13, discrete sampling geometries)."""
    site: dict = {}
    for var in ds.variables.values():
        if var.attrs.get("cf_role") == "profile_id" and var.size == 1:
            value = var.values.ravel()[0]
            site["id"] = value.decode() if isinstance(value, bytes) else str(value)
    lat, lon = _scalar(ds, "latitude"), _scalar(ds, "longitude")
    if lat is not None and lon is not None:
        site["latitude"], site["longitude"] = lat, lon
    elevation = _scalar(ds, "surface_altitude")
    if elevation is not None:
        site["elevation_m"] = elevation
    if not site.get("id") and ds.attrs.get("station_name"):
        site["name"] = str(ds.attrs["station_name"])[:200]
    return site


def _valid_time(ds) -> str | None:
    """The single ``time`` value as ISO 8601 UTC, or None."""
    stamp = None
    for var in _find(ds, "time"):
        if var.size == 1 and np.issubdtype(var.dtype, np.datetime64):
            text = np.datetime_as_string(var.values.ravel()[0], unit="s")
            if not text.startswith("NaT"):
                stamp = text + "Z"
    return stamp


def _member_dimension(ds) -> str | None:
    """The ensemble member dimension: a coordinate with CF standard name ``realization``,
    else a dimension named ``realization``, ``member`` or ``number``."""
    for name in ds.dims:
        if name in ds.coords and ds[name].attrs.get("standard_name") == "realization":
            return str(name)
    return next((str(d) for d in ds.dims if d in ("realization", "member", "number")), None)


def member_count(path: str | os.PathLike) -> int:
    """The number of ensemble members in a single-profile NetCDF file (0: no member
    dimension)."""
    ds = _open(os.fspath(path))
    try:
        dim = _member_dimension(ds)
        return 0 if dim is None else int(ds.sizes[dim])
    finally:
        ds.close()


def read_member_documents(path: str | os.PathLike) -> list[dict]:
    """One profile document per ensemble member of a NetCDF file holding one sounding with a
    member dimension (CF ``realization``); each names its member in ``source``."""
    name = os.fspath(path)
    ds = _open(name)
    try:
        dim = _member_dimension(ds)
        if dim is None:
            return [_read(ds, name)]
        labels = ds[dim].values if dim in ds.coords else range(ds.sizes[dim])
        docs = []
        for k, label in enumerate(labels):
            doc = _read(ds.isel({dim: k}), name)
            doc["source"] = f"{doc['source']} (member {label})"[:200]
            docs.append(doc)
        return docs
    finally:
        ds.close()
