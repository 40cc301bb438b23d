"""NetCDF single-profile reader (ptype/readers/netcdf_format.py).

Files are written here with xarray/netCDF4 from the invented test sounding in
tests/data/warm_nose_sounding.json.  Variables are found by CF standard names
(CF Conventions 1.13, standard-name table v94: air_pressure, air_temperature,
dew_point_temperature, relative_humidity, geopotential_height, altitude; canonical
units Pa, K, 1, m).  Kelvin = degC + 273.15 (SI Brochure, 9th edition, 2019, 2.3.1).
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
import xarray as xr

from ptype import read_profile
from ptype.errors import ReaderError
from ptype.readers.netcdf_format import read_netcdf_document

DATA = Path(__file__).parent / "data"
REF = json.loads((DATA / "warm_nose_sounding.json").read_text())
P_HPA = np.array([lvl["pressure_hpa"] for lvl in REF["levels"]], dtype=float)
T_C = np.array([lvl["temperature_c"] for lvl in REF["levels"]])
TD_C = np.array([lvl["dewpoint_c"] for lvl in REF["levels"]])


def _dataset(pressure_as_coordinate=True, humidity="dewpoint", pressure_units="Pa",
             temperature_units="K", extra_dim=None, heights=False) -> xr.Dataset:
    p = P_HPA * {"Pa": 100.0, "hPa": 1.0, "kPa": 0.1}[pressure_units]
    t = T_C + 273.15 if temperature_units == "K" else T_C
    data = {"ta": ("level", t, {"standard_name": "air_temperature", "units": temperature_units})}
    if humidity == "dewpoint":
        data["tdew"] = ("level", TD_C + 273.15,
                        {"standard_name": "dew_point_temperature", "units": "K"})
    elif humidity in ("1", "%"):
        from ptype import thermo
        rh = thermo.relative_humidity_pct(T_C, TD_C) / (100.0 if humidity == "1" else 1.0)
        data["hur"] = ("level", rh, {"standard_name": "relative_humidity", "units": humidity})
    if heights:
        data["zg"] = ("level", np.linspace(0.31, 9.0, P_HPA.size),
                      {"standard_name": "geopotential_height", "units": "km"})
    coords = {}
    pressure = ("level", p, {"standard_name": "air_pressure", "units": pressure_units})
    if pressure_as_coordinate:
        coords["level"] = pressure
    else:
        data["pres"] = pressure
    ds = xr.Dataset(data, coords=coords)
    ds.attrs["title"] = "invented test sounding"
    if extra_dim:
        ds = ds.expand_dims({extra_dim: 2})
    return ds


def _write(ds: xr.Dataset, tmp_path, name="profile.nc") -> Path:
    path = tmp_path / name
    ds.to_netcdf(path)
    return path


@pytest.mark.parametrize("as_coordinate", [True, False])
def test_read_netcdf_document_pressure_variable_or_coordinate(tmp_path, as_coordinate):
    path = _write(_dataset(pressure_as_coordinate=as_coordinate), tmp_path)
    doc = read_netcdf_document(path)
    np.testing.assert_allclose([lvl["pressure_hpa"] for lvl in doc["levels"]], P_HPA, rtol=1e-12)
    np.testing.assert_allclose([lvl["temperature_c"] for lvl in doc["levels"]], T_C, atol=1e-9)
    np.testing.assert_allclose([lvl["dewpoint_c"] for lvl in doc["levels"]], TD_C, atol=1e-9)
    assert doc["source"] == "NetCDF profile.nc: invented test sounding"


@pytest.mark.parametrize("units", ["Pa", "hPa", "kPa"])
def test_read_netcdf_document_pressure_units(tmp_path, units):
    doc = read_netcdf_document(_write(_dataset(pressure_units=units), tmp_path))
    np.testing.assert_allclose([lvl["pressure_hpa"] for lvl in doc["levels"]], P_HPA, rtol=1e-12)


def test_read_netcdf_document_celsius_accepted(tmp_path):
    doc = read_netcdf_document(_write(_dataset(temperature_units="degC"), tmp_path))
    np.testing.assert_allclose([lvl["temperature_c"] for lvl in doc["levels"]], T_C, atol=1e-12)


@pytest.mark.parametrize("units", ["1", "%"])
def test_read_netcdf_document_relative_humidity_fraction_or_percent(tmp_path, units):
    # CF canonical unit of relative_humidity is '1' (a fraction); '%' is also accepted.
    path = _write(_dataset(humidity=units), tmp_path)
    doc = read_netcdf_document(path)
    assert all("relative_humidity_pct" in lvl for lvl in doc["levels"])
    prof = read_profile(path)
    np.testing.assert_allclose(prof.dewpoint_c, TD_C, atol=1e-6)  # same formula both ways


def test_read_netcdf_document_heights_in_km(tmp_path):
    doc = read_netcdf_document(_write(_dataset(heights=True), tmp_path))
    assert doc["levels"][0]["height_m"] == pytest.approx(310.0)
    assert doc["levels"][-1]["height_m"] == pytest.approx(9000.0)


def test_read_netcdf_document_bytes_same_as_path(tmp_path):
    path = _write(_dataset(), tmp_path)
    by_bytes = read_netcdf_document(path.read_bytes())
    by_path = read_netcdf_document(path)
    assert by_bytes["levels"] == by_path["levels"]


def test_read_profile_netcdf_matches_json(tmp_path):
    path = _write(_dataset(), tmp_path)
    a = read_profile(path)
    b = read_profile(DATA / "warm_nose_sounding.json")
    np.testing.assert_allclose(a.temperature_c, b.temperature_c, atol=1e-9)
    np.testing.assert_allclose(a.dewpoint_c, b.dewpoint_c, atol=1e-9)


def test_read_netcdf_document_site_and_time(tmp_path):
    ds = _dataset()
    ds["lat"] = ((), 46.5, {"standard_name": "latitude", "units": "degrees_north"})
    ds["lon"] = ((), 7.25, {"standard_name": "longitude", "units": "degrees_east"})
    ds["alt"] = ((), 310.0, {"standard_name": "surface_altitude", "units": "m"})
    ds["station"] = ((), "KESTREL", {"cf_role": "profile_id"})
    ds["time"] = ((), np.datetime64("2026-01-15T12:00:00", "ns"), {"standard_name": "time"})
    doc = read_netcdf_document(_write(ds, tmp_path))
    assert doc["site"] == {"id": "KESTREL", "latitude": 46.5, "longitude": 7.25,
                           "elevation_m": 310.0}
    assert doc["valid_time"] == "2026-01-15T12:00:00Z"


def test_read_netcdf_document_fill_values_dropped(tmp_path):
    ds = _dataset()
    ds["tdew"].values[3] = np.nan
    ds["ta"].values[5] = np.nan
    doc = read_netcdf_document(_write(ds, tmp_path))
    assert len(doc["levels"]) == P_HPA.size - 1  # the level without temperature is dropped
    assert "dewpoint_c" not in doc["levels"][3]


# --- refusals -------------------------------------------------------------------------------

def test_read_netcdf_document_more_than_one_column_refused(tmp_path):
    path = _write(_dataset(extra_dim="member"), tmp_path)
    with pytest.raises(ReaderError) as info:
        read_netcdf_document(path)
    msg = str(info.value)
    assert str(path) in msg and "dimension 'member'" in msg and "single profile" in msg


@pytest.mark.parametrize("drop, standard_name", [
    ("ta", "air_temperature"), ("level", "air_pressure")])
def test_read_netcdf_document_missing_standard_name(tmp_path, drop, standard_name):
    ds = _dataset()
    if drop == "level":
        ds["level"].attrs.pop("standard_name")
    else:
        ds = ds.drop_vars(drop)
    path = _write(ds, tmp_path)
    with pytest.raises(ReaderError, match=rf"{path.name}: no variable or coordinate with "
                                          rf"standard_name '{standard_name}'"):
        read_netcdf_document(path)


def test_read_netcdf_document_missing_humidity(tmp_path):
    path = _write(_dataset(humidity=None), tmp_path)
    with pytest.raises(ReaderError, match="'dew_point_temperature' or 'relative_humidity'"):
        read_netcdf_document(path)


@pytest.mark.parametrize("var, units, expected", [
    ("ta", "degF", "has units 'degF'; expected K or degC"),
    ("level", "inHg", "has units 'inHg'; expected Pa, hPa, mbar or kPa"),
])
def test_read_netcdf_document_bad_units(tmp_path, var, units, expected):
    ds = _dataset()
    ds[var].attrs["units"] = units
    path = _write(ds, tmp_path)
    with pytest.raises(ReaderError, match=expected):
        read_netcdf_document(path)


def test_read_netcdf_document_relative_humidity_without_units(tmp_path):
    ds = _dataset(humidity="1")
    del ds["hur"].attrs["units"]
    with pytest.raises(ReaderError, match="'hur' \\(relative_humidity\\) has no units"):
        read_netcdf_document(_write(ds, tmp_path))


def test_read_netcdf_document_two_temperatures_refused(tmp_path):
    ds = _dataset()
    ds["ta2"] = ds["ta"]
    with pytest.raises(ReaderError, match="several variables have standard_name 'air_temperature'"):
        read_netcdf_document(_write(ds, tmp_path))


def test_read_netcdf_document_not_netcdf(tmp_path):
    path = tmp_path / "fake.nc"
    path.write_text("not a netcdf file")
    with pytest.raises(ReaderError, match="fake.nc: not a readable NetCDF file"):
        read_netcdf_document(path)
    with pytest.raises(ReaderError, match="not a readable NetCDF file"):
        read_netcdf_document(b"CDF\x01garbage")


def test_read_netcdf_document_altitude_when_no_geopotential_height(tmp_path):
    ds = _dataset()
    ds["alt"] = ("level", np.linspace(310.0, 9000.0, P_HPA.size),
                 {"standard_name": "altitude", "units": "m"})
    doc = read_netcdf_document(_write(ds, tmp_path))
    assert [lvl["height_m"] for lvl in doc["levels"]][::11] == [310.0, 9000.0]


@pytest.mark.parametrize("file_format", ["NETCDF4", "NETCDF3_CLASSIC"])
def test_read_profile_netcdf_bytes_detected(tmp_path, file_format):
    # HDF5-based NetCDF-4 starts with the HDF5 signature, classic NetCDF with 'CDF'.
    path = tmp_path / "profile.nc"
    _dataset().to_netcdf(path, format=file_format)
    prof = read_profile(path.read_bytes())
    assert prof.n_levels == P_HPA.size
