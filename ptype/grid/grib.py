"""GRIB2 model output in and the diagnosed type out, through ecCodes.

Reading (:func:`open_grib_dataset`): every GRIB2 message of one or more files is decoded
with ecCodes (ECMWF's reference decoder, PyPI ``eccodes``) and the fields ptype reads are
gathered into one CF dataset whose variables carry the CF standard names that
:func:`ptype.grid.find_fields` recognises, so the rest of the grid path is the one used for
CF NetCDF.  A field is known by its WMO product discipline, parameter category and
parameter number (GRIB2 code tables 0.0, 4.1 and 4.2, WMO Manual on Codes, WMO-No. 306
Vol. I.2) and its first fixed surface (code table 4.5):

==========  ================================  =========================  =================
d/c/n       parameter (code table 4.2)        surface (code table 4.5)   CF standard name
==========  ================================  =========================  =================
0/0/0       temperature, K                    100 isobaric               air_temperature
0/0/0       temperature, K                    103 at 2 m                 air_temperature
0/0/6       dew point temperature, K          100 or 103 at 2 m          dew_point_temperature
0/1/1       relative humidity, %              100 isobaric               relative_humidity
0/1/0       specific humidity, kg kg-1        100 isobaric               specific_humidity
0/3/5       geopotential height, gpm          100 isobaric               geopotential_height
0/3/5       geopotential height, gpm          1 ground surface           surface_altitude
0/3/4       geopotential, m2 s-2 (/ g0)       100 or 1                   as 0/3/5
0/3/0       pressure, Pa                      1 ground surface           surface_air_pressure
0/1/52      total precipitation rate,         1 ground surface           precipitation_flux
            kg m-2 s-1
==========  ================================  =========================  =================

Other messages are skipped.  Times: the valid time (``validityDate``/``validityTime``) is the
``time`` dimension and the reference time of each step is the ``forecast_reference_time``
coordinate.  A perturbation number (product definition templates 4.1 and 4.11) makes a
``realization`` dimension: the members of an ensemble.  Grids: a regular latitude/longitude
grid gives ``latitude``/``longitude`` dimensions; any other grid ecCodes can locate
(Lambert, polar stereographic, rotated...) gives ``y``/``x`` dimensions with 2-D latitude
and longitude coordinates.  Every message must be on the grid of the first.

Writing (:func:`write_type_grib2`): the diagnosed type as GRIB2 product discipline 0,
category 1 (moisture), parameter 19 "precipitation type", whose values are code table
4.201, on the ground surface, one message per valid time (and member).
"""

from __future__ import annotations

import dataclasses
import os
from collections.abc import Iterable, Iterator, Sequence
from datetime import UTC, datetime
from typing import TYPE_CHECKING, Any

import numpy as np

from ptype.errors import ReaderError

if TYPE_CHECKING:
    import xarray as xr

#: Standard gravity, m s-2 (WMO: geopotential metre = geopotential / g0).
G0 = 9.80665
#: GRIB2 code table 4.5: first fixed surface types read.
SURFACE_GROUND, SURFACE_ISOBARIC, SURFACE_ABOVE_GROUND = 1, 100, 103
#: The first bytes of a GRIB message.
GRIB_MAGIC = b"GRIB"
#: File extensions taken as GRIB without looking inside.
GRIB_EXTENSIONS = (".grib2", ".grb2", ".grib", ".grb")

#: (discipline, category, number) -> (short variable name, CF standard name, units, scale).
PARAMETERS = {
    (0, 0, 0): ("t", "air_temperature", "K", 1.0),
    (0, 0, 6): ("td", "dew_point_temperature", "K", 1.0),
    (0, 1, 1): ("r", "relative_humidity", "%", 1.0),
    (0, 1, 0): ("q", "specific_humidity", "kg kg-1", 1.0),
    (0, 3, 5): ("gh", "geopotential_height", "m", 1.0),
    (0, 3, 4): ("gh", "geopotential_height", "m", 1.0 / G0),
    (0, 3, 0): ("p", "surface_air_pressure", "Pa", 1.0),
    (0, 1, 52): ("prate", "precipitation_flux", "kg m-2 s-1", 1.0),
}
#: The type product: discipline 0, category 1, parameter 19 (values: code table 4.201).
TYPE_PARAMETER = (0, 1, 19)


@dataclasses.dataclass
class _Message:
    """One decoded GRIB2 message reduced to what the dataset needs."""

    key: tuple[int, int, int]
    surface: int
    level: float          # hPa on isobaric surfaces, m above ground on type 103, else 0
    reference: datetime
    valid: datetime
    member: int | None
    values: np.ndarray    # (ny * nx,) float32 (what the dataset stores)


def is_grib(path: str | os.PathLike) -> bool:
    """True for a file named like GRIB or starting with the GRIB magic bytes."""
    name = os.fspath(path)
    if name.lower().endswith(GRIB_EXTENSIONS):
        return True
    try:
        with open(name, "rb") as f:
            return f.read(4) == GRIB_MAGIC
    except OSError:
        return False


def _eccodes():
    try:
        import eccodes
    except ImportError:
        raise ReaderError("GRIB2 needs the 'eccodes' package: pip install 'ptype[formats]'",
                          field="input") from None
    return eccodes


def _time(date: int, hhmm: int) -> datetime:
    d, t = int(date), int(hhmm)
    return datetime(d // 10000, d // 100 % 100, d % 100, t // 100, t % 100, tzinfo=UTC)


def _level(ec, h, surface: int) -> float:
    """The first fixed surface's value in hPa (isobaric) or m (above ground)."""
    if surface not in (SURFACE_ISOBARIC, SURFACE_ABOVE_GROUND):
        return 0.0
    scaled = ec.codes_get_double(h, "scaledValueOfFirstFixedSurface")
    factor = ec.codes_get_long(h, "scaleFactorOfFirstFixedSurface")
    value = scaled / 10.0 ** factor
    return value / 100.0 if surface == SURFACE_ISOBARIC else value


def _geometry(ec, h) -> dict[str, Any]:
    """The grid of a message: type, shape, latitudes and longitudes ``(ny, nx)``."""
    grid_type = ec.codes_get(h, "gridType")
    nx, ny = ec.codes_get_long(h, "Nx" if ec.codes_is_defined(h, "Nx") else "Ni"), \
        ec.codes_get_long(h, "Ny" if ec.codes_is_defined(h, "Ny") else "Nj")
    lat = ec.codes_get_double_array(h, "latitudes").reshape(ny, nx)
    lon = ec.codes_get_double_array(h, "longitudes").reshape(ny, nx)
    lon = np.where(lon > 180.0, lon - 360.0, lon)
    return {"grid_type": grid_type, "shape": (ny, nx), "latitude": lat, "longitude": lon}


def _decode(ec, h, name: str, index: int, shape: tuple[int, int] | None) -> _Message | None:
    """One message as a :class:`_Message`, or None when it is not a field ptype reads."""
    edition = ec.codes_get_long(h, "edition")
    if edition != 2:
        raise ReaderError(f"{name}: message {index} is GRIB edition {edition}; expected "
                          "GRIB2", field="input")
    key = (ec.codes_get_long(h, "discipline"), ec.codes_get_long(h, "parameterCategory"),
           ec.codes_get_long(h, "parameterNumber"))
    surface = ec.codes_get_long(h, "typeOfFirstFixedSurface")
    if key not in PARAMETERS:
        return None
    level = _level(ec, h, surface)
    values = ec.codes_get_values(h).astype(np.float64)
    if ec.codes_get_long(h, "bitmapPresent"):
        values[values == ec.codes_get_double(h, "missingValue")] = np.nan
    if shape is not None and values.size != shape[0] * shape[1]:
        raise ReaderError(f"{name}: message {index} has {values.size} grid points; expected "
                          f"{shape[0] * shape[1]} as in the first message (one grid per file)",
                          field="input")
    member = (ec.codes_get_long(h, "perturbationNumber")
              if ec.codes_is_defined(h, "perturbationNumber") else None)
    return _Message(key=key, surface=surface, level=level,
                    reference=_time(ec.codes_get_long(h, "dataDate"),
                                    ec.codes_get_long(h, "dataTime")),
                    valid=_time(ec.codes_get_long(h, "validityDate"),
                                ec.codes_get_long(h, "validityTime")),
                    member=member,
                    values=(values * PARAMETERS[key][3]).astype(np.float32))


def read_messages(path: str | os.PathLike) -> tuple[list[_Message], dict[str, Any]]:
    """Every message ptype reads from one GRIB2 file, and the grid of the first."""
    ec = _eccodes()
    name = os.fspath(path)
    messages: list[_Message] = []
    geometry: dict[str, Any] | None = None
    index = 0
    with open(name, "rb") as f:
        while True:
            index += 1
            try:
                h = ec.codes_grib_new_from_file(f)
            except (ec.CodesInternalError, ValueError, OSError) as exc:
                raise ReaderError(f"{name}: message {index} cannot be decoded "
                                  f"({_reason(exc)})", field="input") from None
            if h is None:
                break
            try:
                if geometry is None:
                    geometry = _geometry(ec, h)
                msg = _decode(ec, h, name, index, geometry["shape"])
            except ReaderError:
                raise
            except (ec.CodesInternalError, ValueError, OSError) as exc:
                raise ReaderError(f"{name}: message {index} cannot be decoded "
                                  f"({_reason(exc)})", field="input") from None
            finally:
                ec.codes_release(h)
            if msg is not None:
                messages.append(msg)
    if geometry is None:
        raise ReaderError(f"{name}: no GRIB message found", field="input")
    return messages, geometry


def _reason(exc: Exception) -> str:
    return (str(exc).strip().splitlines() or [type(exc).__name__])[0]


def _role(msg: _Message) -> str | None:
    """Which dataset variable a message belongs to (None: not used)."""
    short = PARAMETERS[msg.key][0]
    if msg.surface == SURFACE_ISOBARIC:
        return short if short != "p" else None
    if msg.surface == SURFACE_ABOVE_GROUND and abs(msg.level - 2.0) < 1e-6:
        return {"t": "t2m", "td": "td2m"}.get(short)
    if msg.surface == SURFACE_GROUND:
        return {"gh": "orog", "p": "sp", "prate": "prate"}.get(short)
    return None


_CF = {"t": ("ta", "air_temperature", "K"), "td": ("tda", "dew_point_temperature", "K"),
       "r": ("hur", "relative_humidity", "%"), "q": ("hus", "specific_humidity", "kg kg-1"),
       "gh": ("zg", "geopotential_height", "m"), "t2m": ("tas", "air_temperature", "K"),
       "td2m": ("tds", "dew_point_temperature", "K"), "sp": ("ps", "surface_air_pressure", "Pa"),
       "orog": ("orog", "surface_altitude", "m"),
       "prate": ("pr", "precipitation_flux", "kg m-2 s-1")}


def open_grib_dataset(paths: str | os.PathLike | Sequence) -> xr.Dataset:
    """GRIB2 files -> one CF dataset (numpy-backed) of the fields listed in the module notes.

    Raises :class:`~ptype.errors.ReaderError` naming the file and message for anything that
    cannot be decoded, a grid that changes between messages, or no temperature on pressure
    levels.
    """
    if isinstance(paths, (str, os.PathLike)):
        paths = [paths]
    messages: list[_Message] = []
    geometry = None
    for path in paths:
        if not os.path.exists(path):
            raise FileNotFoundError(2, "No such file or directory", os.fspath(path))
        got, geo = read_messages(path)
        if geometry is not None and geo["shape"] != geometry["shape"]:
            raise ReaderError(f"{os.fspath(path)}: grid {geo['shape']} differs from "
                              f"{geometry['shape']} of {os.fspath(paths[0])}", field="input")
        geometry = geometry or geo
        messages.extend(got)
    return assemble(messages, geometry, [os.fspath(p) for p in paths])


def assemble(messages: list[_Message], geometry: dict[str, Any], names: list[str]):
    """Stack the messages into dimensioned arrays with CF attributes."""
    import xarray as xr
    by_role: dict[str, list[_Message]] = {}
    for m in messages:
        role = _role(m)
        if role is not None:
            by_role.setdefault(role, []).append(m)
    if "t" not in by_role:
        raise ReaderError(f"{', '.join(names)}: no temperature on pressure levels (GRIB2 "
                          "0/0/0 on surface type 100)", field="air_temperature")
    times = sorted({m.valid for m in by_role["t"]})
    levels = sorted({m.level for m in by_role["t"]}, reverse=True)
    members = sorted({m.member for m in messages if m.member is not None})
    reference = {m.valid: m.reference for m in by_role["t"]}
    hdims = (("latitude", "longitude") if geometry["grid_type"] == "regular_ll" else ("y", "x"))
    ny, nx = geometry["shape"]
    lead = ("time",) + (("realization",) if members else ())
    data_vars = {}
    for role, msgs in by_role.items():
        name, std, units = _CF[role]
        on_levels = role in ("t", "td", "r", "q", "gh")
        static = role == "orog"
        dims = (() if static else lead) + (("plev",) if on_levels else ()) + hdims
        shape = tuple({"time": len(times), "realization": len(members), "plev": len(levels),
                       hdims[0]: ny, hdims[1]: nx}[d] for d in dims)
        arr = np.full(shape, np.nan, dtype=np.float32)
        for m in msgs:
            idx = _index(m, static, on_levels, times, members, levels)
            if idx is not None:
                arr[idx] = m.values.reshape(ny, nx)
        attrs = {"standard_name": std, "units": units}
        data_vars[name] = xr.Variable(dims, arr, attrs)
        if role in ("t2m", "td2m"):
            data_vars[name].attrs["coordinates"] = "height"
    coords = _coordinates(geometry, hdims, times, levels, members, reference)
    ds = xr.Dataset(data_vars, coords=coords)
    ds.attrs.update({"Conventions": "CF-1.13", "source": "GRIB2: " + " ".join(
        os.path.basename(n) for n in names), "_ptype_sources": " ".join(
        os.path.basename(n) for n in names)})
    return ds


def _index(m: _Message, static: bool, on_levels: bool, times, members, levels):
    """Where a message goes in its variable's array (None: not on the dataset's axes); a
    field without a member number in an ensemble fills every member."""
    idx: tuple = ()
    if not static:
        if m.valid not in times:
            return None
        idx += (times.index(m.valid),)
        if members:
            idx += (slice(None) if m.member is None else members.index(m.member),)
    if on_levels:
        if m.level not in levels:
            return None
        idx += (levels.index(m.level),)
    return idx


def _coordinates(geometry, hdims, times, levels, members, reference) -> dict:
    import xarray as xr
    naive = [np.datetime64(t.replace(tzinfo=None), "ns") for t in times]
    coords: dict[str, Any] = {
        "time": xr.Variable("time", np.array(naive), {"standard_name": "time", "axis": "T"}),
        "plev": xr.Variable("plev", np.array(levels, dtype=np.float64),
                            {"standard_name": "air_pressure", "units": "hPa", "axis": "Z",
                             "positive": "down"}),
        "forecast_reference_time": xr.Variable(
            "time", np.array([np.datetime64(reference[t].replace(tzinfo=None), "ns")
                              for t in times]), {"standard_name": "forecast_reference_time"}),
        "height": xr.Variable((), 2.0, {"standard_name": "height", "units": "m",
                                        "positive": "up"}),
    }
    if members:
        coords["realization"] = xr.Variable("realization", np.array(members, dtype=np.int32),
                                            {"standard_name": "realization",
                                             "long_name": "ensemble member (GRIB2 "
                                                          "perturbation number)"})
    lat, lon = geometry["latitude"], geometry["longitude"]
    if hdims == ("latitude", "longitude"):
        coords["latitude"] = xr.Variable("latitude", lat[:, 0], {
            "standard_name": "latitude", "units": "degrees_north"})
        coords["longitude"] = xr.Variable("longitude", lon[0, :], {
            "standard_name": "longitude", "units": "degrees_east"})
    else:
        coords["latitude"] = xr.Variable(hdims, lat, {"standard_name": "latitude",
                                                      "units": "degrees_north"})
        coords["longitude"] = xr.Variable(hdims, lon, {"standard_name": "longitude",
                                                       "units": "degrees_east"})
    return coords


# --------------------------------------------------------------------------------------------
# Writing
# --------------------------------------------------------------------------------------------

@dataclasses.dataclass(frozen=True)
class FieldMessage:
    """One field to encode: product, surface, times, member and values ``(ny, nx)``."""

    parameter: tuple[int, int, int]
    values: np.ndarray
    reference: datetime
    step_hours: int = 0
    surface: int = SURFACE_ISOBARIC
    level: float = 0.0            # hPa (isobaric) or m (above ground)
    member: int | None = None
    members_total: int = 0


@dataclasses.dataclass(frozen=True)
class RegularGrid:
    """A regular latitude/longitude grid: first point (north-west) and increments, degrees."""

    lat_first: float
    lon_first: float
    dlat: float
    dlon: float
    ny: int
    nx: int


def _set_grid(ec, h, grid: RegularGrid) -> None:
    ec.codes_set(h, "Ni", grid.nx)
    ec.codes_set(h, "Nj", grid.ny)
    ec.codes_set(h, "jScansPositively", 0)
    ec.codes_set(h, "latitudeOfFirstGridPointInDegrees", grid.lat_first)
    ec.codes_set(h, "longitudeOfFirstGridPointInDegrees", grid.lon_first % 360.0)
    ec.codes_set(h, "latitudeOfLastGridPointInDegrees", grid.lat_first - (grid.ny - 1) * grid.dlat)
    ec.codes_set(h, "longitudeOfLastGridPointInDegrees",
                 (grid.lon_first + (grid.nx - 1) * grid.dlon) % 360.0)
    ec.codes_set(h, "iDirectionIncrementInDegrees", grid.dlon)
    ec.codes_set(h, "jDirectionIncrementInDegrees", grid.dlat)


def _set_product(ec, h, msg: FieldMessage, packing: str, bits: int) -> None:
    if msg.member is not None:
        ec.codes_set(h, "productDefinitionTemplateNumber", 1)
        ec.codes_set(h, "typeOfEnsembleForecast", 3)
        ec.codes_set(h, "perturbationNumber", int(msg.member))
        ec.codes_set(h, "numberOfForecastsInEnsemble", int(msg.members_total or msg.member + 1))
    d, c, n = msg.parameter
    ec.codes_set(h, "discipline", d)
    ec.codes_set(h, "parameterCategory", c)
    ec.codes_set(h, "parameterNumber", n)
    ec.codes_set(h, "typeOfFirstFixedSurface", msg.surface)
    value = msg.level * 100.0 if msg.surface == SURFACE_ISOBARIC else msg.level
    ec.codes_set(h, "scaleFactorOfFirstFixedSurface", 0)
    ec.codes_set(h, "scaledValueOfFirstFixedSurface", round(value))
    ref = msg.reference.astimezone(UTC)
    ec.codes_set(h, "dataDate", int(ref.strftime("%Y%m%d")))
    ec.codes_set(h, "dataTime", int(ref.strftime("%H%M")))
    ec.codes_set(h, "indicatorOfUnitOfTimeRange", 1)  # hours (code table 4.4)
    ec.codes_set(h, "forecastTime", int(msg.step_hours))
    ec.codes_set(h, "packingType", packing)
    if packing == "grid_simple":
        ec.codes_set(h, "bitsPerValue", bits)


def encode_messages(messages: Iterable[FieldMessage], grid: RegularGrid | bytes, *,
                    packing: str = "grid_ieee", bits: int = 16) -> Iterator[bytes]:
    """GRIB2 messages of the fields, built by ecCodes from its shipped GRIB2 sample (a
    regular lat/lon grid) or from a template message (any grid); NaN values are missing
    (a bitmap)."""
    ec = _eccodes()
    for msg in messages:
        if isinstance(grid, bytes):
            h = ec.codes_new_from_message(grid)
        else:
            h = ec.codes_grib_new_from_samples("GRIB2")
            _set_grid(ec, h, grid)
        try:
            _set_product(ec, h, msg, packing, bits)
            values = np.asarray(msg.values, dtype=np.float64).ravel()
            if np.isnan(values).any():
                ec.codes_set(h, "bitmapPresent", 1)
                ec.codes_set(h, "missingValue", 9.999e20)
                values = np.where(np.isnan(values), 9.999e20, values)
            ec.codes_set_values(h, values)
            yield ec.codes_get_message(h)
        finally:
            ec.codes_release(h)


def write_messages(path: str | os.PathLike, messages: Iterable[FieldMessage],
                   grid: RegularGrid | bytes, **kwargs) -> int:
    """Write the encoded messages to ``path`` (through a temporary name); their count."""
    tmp = f"{os.fspath(path)}.part"
    n = 0
    with open(tmp, "wb") as f:
        for raw in encode_messages(messages, grid, **kwargs):
            f.write(raw)
            n += 1
    os.replace(tmp, path)
    return n


def first_message(path: str | os.PathLike) -> bytes:
    """The raw bytes of the first message of a GRIB file (a grid template)."""
    ec = _eccodes()
    with open(path, "rb") as f:
        h = ec.codes_grib_new_from_file(f)
        if h is None:
            raise ReaderError(f"{os.fspath(path)}: no GRIB message found", field="input")
        try:
            return ec.codes_get_message(h)
        finally:
            ec.codes_release(h)


def regular_grid_of(ds: xr.Dataset) -> RegularGrid:
    """The regular lat/lon grid of a dataset's 1-D ``latitude``/``longitude`` coordinates."""
    try:
        lat = np.asarray(ds["latitude"].values, dtype=np.float64)
        lon = np.asarray(ds["longitude"].values, dtype=np.float64)
    except KeyError:
        lat = lon = np.zeros((0, 0))
    if lat.ndim != 1 or lon.ndim != 1 or lat.size < 2 or lon.size < 2:
        raise ReaderError("GRIB2 output: the grid has no 1-D latitude and longitude "
                          "coordinates; give a GRIB2 input (its grid is reused) or write "
                          "NetCDF", field="output")
    dlat, dlon = np.diff(lat), np.diff(lon)
    if not (np.allclose(dlat, dlat[0], atol=1e-6) and np.allclose(dlon, dlon[0], atol=1e-6)):
        raise ReaderError("GRIB2 output: latitude/longitude are not evenly spaced",
                          field="output")
    if dlat[0] > 0:
        raise ReaderError("GRIB2 output: latitudes must run north to south", field="output")
    return RegularGrid(float(lat[0]), float(lon[0]), float(-dlat[0]), float(dlon[0]),
                       lat.size, lon.size)


def write_type_grib2(out: xr.Dataset, path: str | os.PathLike,
                     template: bytes | None = None) -> int:
    """Write ``precipitation_type`` (code table 4.201, 255 missing) as GRIB2 0/1/19 on the
    ground surface, one message per time (and member); returns the message count."""
    var = out["precipitation_type"]
    grid: RegularGrid | bytes = template if template is not None else regular_grid_of(out)
    times = out["time"].values if "time" in var.dims else [None]
    refs = (out["forecast_reference_time"].values if "forecast_reference_time" in out.coords
            else None)
    members = out["realization"].values if "realization" in var.dims else [None]

    def fields():
        for it, t in enumerate(times):
            valid = _as_datetime(t) if t is not None else datetime(1970, 1, 1, tzinfo=UTC)
            ref = _as_datetime(np.atleast_1d(refs)[it]) if refs is not None else valid
            step = round((valid - ref).total_seconds() / 3600.0)
            for im, m in enumerate(members):
                sel = {}
                if t is not None:
                    sel["time"] = it
                if m is not None:
                    sel["realization"] = im
                values = np.asarray(var.isel(sel).values, dtype=np.float64)
                values = np.where(values == 255, np.nan, values)
                yield FieldMessage(TYPE_PARAMETER, values, ref, step, SURFACE_GROUND, 0.0,
                                   None if m is None else int(m), len(members))
    return write_messages(path, fields(), grid, packing="grid_simple", bits=8)


def _as_datetime(value) -> datetime:
    seconds = np.datetime64(value, "s").astype(np.int64)
    return datetime.fromtimestamp(int(seconds), tz=UTC)


#: CF standard name (and whether on levels) -> GRIB2 parameter and surface, for
#: :func:`write_fields_grib2`.
_CF_TO_GRIB = {
    ("air_temperature", True): ((0, 0, 0), SURFACE_ISOBARIC),
    ("dew_point_temperature", True): ((0, 0, 6), SURFACE_ISOBARIC),
    ("relative_humidity", True): ((0, 1, 1), SURFACE_ISOBARIC),
    ("specific_humidity", True): ((0, 1, 0), SURFACE_ISOBARIC),
    ("geopotential_height", True): ((0, 3, 5), SURFACE_ISOBARIC),
    ("air_temperature", False): ((0, 0, 0), SURFACE_ABOVE_GROUND),
    ("dew_point_temperature", False): ((0, 0, 6), SURFACE_ABOVE_GROUND),
    ("surface_air_pressure", False): ((0, 3, 0), SURFACE_GROUND),
    ("surface_altitude", False): ((0, 3, 5), SURFACE_GROUND),
}


def _cf_fields(ds, fields) -> list[tuple[str, tuple[int, int, int], int]]:
    """The dataset's model fields with their GRIB2 parameter and surface."""
    chosen = [(fields.temperature, True), (fields.humidity, True), (fields.height, True),
              (fields.temperature_2m, False), (fields.dewpoint_2m, False),
              (fields.surface_pressure, False), (fields.surface_altitude, False)]
    out = []
    for name, on_levels in chosen:
        if name:
            std = ds[name].attrs["standard_name"]
            parameter, surface = _CF_TO_GRIB[(std, on_levels)]
            out.append((name, parameter, surface))
    return out


def write_fields_grib2(ds: xr.Dataset, path: str | os.PathLike, grid: RegularGrid | bytes,
                       reference: datetime, *, packing: str = "grid_ieee",
                       bits: int = 16) -> int:
    """Encode the model fields of a CF dataset (as :func:`ptype.grid.find_fields` finds them,
    in SI units: K, %, kg kg-1, m, Pa) as GRIB2 on a regular lat/lon ``grid``, or on the
    grid of a template message (bytes), whose rows are the dataset's first horizontal
    dimension; steps are hours after ``reference``; a ``realization`` dimension becomes
    perturbation numbers.  Returns the message count."""
    from ptype.grid.fields import find_fields
    fields = find_fields(ds)
    member_dim = "realization" if "realization" in ds.dims else None
    members = [int(m) for m in ds[member_dim].values] if member_dim else []
    times = ds[fields.time_dim].values if fields.time_dim else []
    levels = ds[fields.level_dim].values * fields.level_to_hpa

    def messages():
        for name, parameter, surface in _cf_fields(ds, fields):
            for it, member, sub in _slices(ds[name], fields.time_dim, member_dim, len(times),
                                           members):
                step = 0 if it is None else round(
                    (_as_datetime(times[it]) - reference).total_seconds() / 3600.0)
                if fields.level_dim in sub.dims:
                    for il, lev in enumerate(levels):
                        yield FieldMessage(parameter, sub.isel({fields.level_dim: il}).values,
                                           reference, step, surface, float(lev), member,
                                           len(members))
                else:
                    level = 2.0 if surface == SURFACE_ABOVE_GROUND else 0.0
                    yield FieldMessage(parameter, sub.values, reference, step, surface, level,
                                       member, len(members))
    return write_messages(path, messages(), grid, packing=packing, bits=bits)


def _slices(var, time_dim: str | None, member_dim: str | None, n_times: int,
            members: list[int]):
    """``(time index, member number, sub-array)`` of a variable, one per time and member it
    has (None for a dimension it lacks)."""
    t_index = range(n_times) if time_dim and time_dim in var.dims else [None]
    m_index = range(len(members)) if member_dim and member_dim in var.dims else [None]
    for it in t_index:
        for im in m_index:
            sel = {}
            if it is not None:
                sel[time_dim] = it
            if im is not None:
                sel[member_dim] = im
            yield it, (None if im is None else members[im]), var.isel(sel)
