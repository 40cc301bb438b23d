"""GRIB2 model output (ptype.grid.grib): fields written by ecCodes from its shipped GRIB2
sample give the same diagnosis as the same fields in CF NetCDF; ensembles give member
fractions; the type is written back as GRIB2 product 0/1/19 (code table 4.201)."""

from __future__ import annotations

import importlib.util
import os
from datetime import UTC, datetime

import numpy as np
import pytest

xr = pytest.importorskip("xarray")
eccodes = pytest.importorskip("eccodes")

from ptype import grid
from ptype.cli import main
from ptype.errors import ReaderError
from ptype.grid import ensemble, grib

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
REFERENCE = datetime(2031, 1, 14, 6, tzinfo=UTC)  # the invented demo grid's first time
GRID = grib.RegularGrid(lat_first=48.0, lon_first=-34.0, dlat=0.25, dlon=0.25, ny=12, nx=16)


def _generator():
    path = os.path.join(ROOT, "soundings_demo", "grid", "make_grid.py")
    spec = importlib.util.spec_from_file_location("ptype_demo_make_grid_grib", path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


@pytest.fixture(scope="module")
def fields():
    """The invented demo grid, 16 x 12 columns, 2 times (3 h apart), 20 levels."""
    return _generator().make_grid(nx=16, ny=12, times=2, spacing_km=40.0)


@pytest.fixture(scope="module")
def files(fields, tmp_path_factory):
    """The same fields as CF NetCDF (netCDF4) and as GRIB2 (ecCodes, IEEE packing)."""
    d = tmp_path_factory.mktemp("grib")
    nc, g2 = d / "fields.nc", d / "fields.grib2"
    _generator().write_grid(fields, str(nc), compress=False)
    grib.write_fields_grib2(fields, g2, GRID, REFERENCE)
    return {"nc": str(nc), "grib": str(g2), "dir": d}


def _ensemble(fields, n=5):
    """An invented 5-member ensemble: the demo fields shifted by -1.6 ... +1.6 K."""
    members = []
    for k in range(n):
        m = fields.drop_vars("orog").copy(deep=True)
        for v in ("ta", "tas"):
            m[v] = m[v] + (k - n // 2) * 0.8
        members.append(m)
    e = xr.concat(members, dim="realization", data_vars="all", coords="minimal",
                  compat="override")
    e = e.assign_coords(realization=("realization", np.arange(n, dtype=np.int32),
                                     {"standard_name": "realization"}))
    e["orog"] = fields["orog"]
    return e


def test_grib_fields_read_back_with_cf_names_units_and_times(files, fields):
    ds = grib.open_grib_dataset(files["grib"])
    assert ds["ta"].attrs == {"standard_name": "air_temperature", "units": "K"}
    assert ds["ta"].dims == ("time", "plev", "latitude", "longitude")
    # IEEE packing is lossless for float32 (WMO-No. 306 data representation template 5.4).
    np.testing.assert_array_equal(ds["ta"].values, fields["ta"].values)
    np.testing.assert_array_equal(ds["ps"].values, fields["ps"].values)
    assert list(ds["plev"].values) == list(fields["plev"].values)
    assert list(ds["time"].values) == list(fields["time"].values)
    assert (ds["forecast_reference_time"].values == np.datetime64("2031-01-14T06:00")).all()
    assert float(ds["latitude"][0]) == 48.0 and float(ds["longitude"][-1]) == -30.25


def test_grib_diagnosis_equals_cf_netcdf(files):
    from_nc = grid.diagnose_dataset(grid.open_grid(files["nc"])).compute()
    from_grib = grid.diagnose_dataset(grid.open_grid(files["grib"])).compute()
    np.testing.assert_array_equal(from_grib["precipitation_type"].values,
                                  from_nc["precipitation_type"].values)
    for name in grid.FLOAT_OUTPUTS:
        np.testing.assert_array_equal(from_grib[name].values, from_nc[name].values)


def test_grib_simple_packing_changes_few_types(files, fields):
    """16-bit simple packing (the common operational choice) quantises T to about 1 mK
    over a 60 K range: the types stay the same almost everywhere."""
    path = files["dir"] / "packed.grib2"
    grib.write_fields_grib2(fields, path, GRID, REFERENCE, packing="grid_simple", bits=16)
    a = grid.diagnose_dataset(grid.open_grid(str(path))).compute()["precipitation_type"]
    b = grid.diagnose_dataset(grid.open_grid(files["nc"])).compute()["precipitation_type"]
    assert np.mean(a.values == b.values) > 0.97


def test_grib_type_output_is_product_0_1_19(files, tmp_path, capsys):
    out = tmp_path / "type.grib2"
    assert main(["grid", files["grib"], "-o", str(out)]) == 0
    assert "Guidance only" in capsys.readouterr().out
    expected = grid.diagnose_dataset(grid.open_grid(files["nc"])).compute()
    with open(out, "rb") as f:
        for it in range(2):
            h = eccodes.codes_grib_new_from_file(f)
            # WMO GRIB2 code table 4.2, discipline 0 category 1: parameter 19 is
            # "Precipitation type", values from code table 4.201.
            assert [eccodes.codes_get_long(h, k) for k in
                    ("discipline", "parameterCategory", "parameterNumber", "forecastTime")] \
                == [0, 1, 19, 3 * it]
            values = eccodes.codes_get_values(h).reshape(12, 16)
            eccodes.codes_release(h)
            np.testing.assert_array_equal(values,
                                          expected["precipitation_type"][it].values)
        assert eccodes.codes_grib_new_from_file(f) is None


def test_ensemble_probabilities_are_member_fractions(fields, tmp_path):
    e = _ensemble(fields)
    path = tmp_path / "ens.grib2"
    grib.write_fields_grib2(e, path, GRID, REFERENCE)
    ds = grid.open_grid(str(path))
    assert ensemble.member_dim(ds) == "realization"
    assert list(ds["realization"].values) == [0, 1, 2, 3, 4]
    out = grid.diagnose_dataset(ds).compute()
    types = out["precipitation_type"]          # (time, realization, lat, lon), 4.201 values
    # The relative frequency over members (Wilks 2011, sec. 8.1), counted here by hand.
    snow = (types == 5).sum("realization") / 5.0
    np.testing.assert_allclose(out["probability_of_snow"].values, snow.values, atol=1e-6)
    rain = (types == 1).sum("realization") / 5.0
    np.testing.assert_allclose(out["probability_of_rain"].values, rain.values, atol=1e-6)
    total = sum(out[v] for v in out.data_vars if v.startswith("probability_of_"))
    np.testing.assert_allclose(total.values, 1.0, atol=1e-6)
    spread = (types.max("realization") != types.min("realization")).values
    assert spread.any()  # the warm and cold members disagree somewhere: a real test
    ml = out["most_likely_precipitation_type"].values
    agree = ~spread
    np.testing.assert_array_equal(ml[agree], types.isel(realization=0).values[agree])


def test_ensemble_cf_realization_same_as_grib(fields, tmp_path):
    e = _ensemble(fields, n=3)
    nc = tmp_path / "ens.nc"
    e.to_netcdf(nc)
    g2 = tmp_path / "ens.grib2"
    grib.write_fields_grib2(e, g2, GRID, REFERENCE)
    a = grid.diagnose_dataset(grid.open_grid(str(nc))).compute()
    b = grid.diagnose_dataset(grid.open_grid(str(g2))).compute()
    np.testing.assert_array_equal(a["probability_of_snow"].transpose("time", "y", "x").values,
                                  b["probability_of_snow"].values)


def test_ensemble_widened_by_perturbations_sums_to_one(fields, tmp_path):
    g2 = tmp_path / "ens.grib2"
    grib.write_fields_grib2(_ensemble(fields, n=3).isel(time=[0]), g2, GRID, REFERENCE)
    out = grid.diagnose_dataset(grid.open_grid(str(g2)), members=4, seed=1).compute()
    assert out["probability_of_snow"].dims == ("time", "latitude", "longitude")
    total = sum(out[v] for v in out.data_vars if v.startswith("probability_of_"))
    np.testing.assert_allclose(total.values, 1.0, atol=1e-5)
    # 3 members x 4 perturbations: every probability is a multiple of 1/12.
    p = out["probability_of_snow"].values * 12
    np.testing.assert_allclose(p, np.round(p), atol=1e-4)


def test_grib_truncated_file_names_the_message(files, tmp_path, capsys):
    with open(files["grib"], "rb") as f:
        raw = f.read()
    bad = tmp_path / "cut.grib2"
    bad.write_bytes(raw[: len(raw) - 500])
    with pytest.raises(ReaderError, match="cut.grib2: message"):
        grib.open_grib_dataset(bad)
    assert main(["grid", str(bad), "-o", str(tmp_path / "o.nc")]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "message" in err


def test_grib_without_temperature_is_an_error(fields, tmp_path):
    path = tmp_path / "rh.grib2"
    msgs = [grib.FieldMessage((0, 1, 1), fields["hur"].values[0, 0], REFERENCE, 0,
                              grib.SURFACE_ISOBARIC, 850.0)]
    grib.write_messages(path, msgs, GRID)
    with pytest.raises(ReaderError, match="no temperature on pressure levels"):
        grib.open_grib_dataset(path)


def lambert_template(nx: int, ny: int) -> bytes:
    """A GRIB2 message on a Lambert conformal grid (grid definition template 3.30), built by
    ecCodes from its GRIB2 sample: the grid of the fields below (invented, 20 km)."""
    h = eccodes.codes_grib_new_from_samples("GRIB2")
    try:
        eccodes.codes_set(h, "gridDefinitionTemplateNumber", 30)
        for key, value in (("Nx", nx), ("Ny", ny), ("latitudeOfFirstGridPointInDegrees", 45.0),
                           ("longitudeOfFirstGridPointInDegrees", 326.0),
                           ("LaDInDegrees", 46.0), ("LoVInDegrees", 328.0),
                           ("Latin1InDegrees", 46.0), ("Latin2InDegrees", 46.0),
                           ("DxInMetres", 20000), ("DyInMetres", 20000),
                           ("iScansNegatively", 0), ("jScansPositively", 1),
                           ("latitudeOfSouthernPoleInDegrees", -90),
                           ("longitudeOfSouthernPoleInDegrees", 0)):
            eccodes.codes_set(h, key, value)
        eccodes.codes_set_values(h, np.zeros(nx * ny))
        return eccodes.codes_get_message(h)
    finally:
        eccodes.codes_release(h)


def test_grib_on_a_lambert_grid_equals_cf_netcdf(files, fields, tmp_path):
    path = tmp_path / "lambert.grib2"
    grib.write_fields_grib2(fields, path, lambert_template(16, 12), REFERENCE)
    ds = grib.open_grib_dataset(path)
    assert ds["ta"].dims == ("time", "plev", "y", "x")
    assert ds["latitude"].dims == ("y", "x")
    # The first grid point is where the template puts it; latitudes grow northward (rows
    # scan south to north, jScansPositively = 1).
    assert float(ds["latitude"][0, 0]) == pytest.approx(45.0, abs=1e-6)
    assert float(ds["latitude"][-1, 0]) > float(ds["latitude"][0, 0])
    a = grid.diagnose_dataset(grid.open_grid(str(path))).compute()["precipitation_type"]
    b = grid.diagnose_dataset(grid.open_grid(files["nc"])).compute()["precipitation_type"]
    np.testing.assert_array_equal(a.values, b.values)
