"""Gridded diagnosis (ptype.grid, ``ptype grid``): reading CF input, same answers as the
single-profile path, CF-1.13 output, dask laziness, a distributed run and the map."""

from __future__ import annotations

import importlib.util
import os

import numpy as np
import pytest

xr = pytest.importorskip("xarray")
netCDF4 = pytest.importorskip("netCDF4")

import ptype
from ptype import grid
from ptype.cli import main
from ptype.codes import GRIB2_4201, from_abbrev
from ptype.errors import OptionError, ReaderError

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
#: The invented demo grid (soundings_demo/grid/make_grid.py).
DEMO_GRID = os.path.join(ROOT, "soundings_demo", "grid", "demo_grid.nc")

# WMO GRIB2 code table 4.201 "Precipitation type" (wmo-im/GRIB2 v37, as summarised in
# shared/reference/standards.md sec. 2.1): the flag meanings must be these words.
WMO_4201 = {0: "No precipitation", 1: "Rain", 2: "Thunderstorm", 3: "Freezing rain",
            4: "Mixed/ice", 5: "Snow", 6: "Wet snow", 7: "Mixture of rain and snow",
            8: "Ice pellets", 9: "Graupel", 10: "Hail", 11: "Drizzle", 12: "Freezing drizzle"}


def _load_generator():
    path = os.path.join(ROOT, "soundings_demo", "grid", "make_grid.py")
    spec = importlib.util.spec_from_file_location("ptype_demo_make_grid", path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


@pytest.fixture(scope="module")
def small_grid():
    """The invented demo grid at 40 km spacing: 16 x 12 columns, 2 times, 20 levels."""
    return _load_generator().make_grid(nx=16, ny=12, times=2, spacing_km=40.0)


@pytest.fixture(scope="module")
def small_file(small_grid, tmp_path_factory):
    path = tmp_path_factory.mktemp("grid") / "small.nc"
    _load_generator().write_grid(small_grid, str(path), compress=False)
    return str(path)


@pytest.fixture(scope="module")
def small_result(small_file):
    ds = grid.open_grid(small_file)
    return grid.diagnose_dataset(ds, per_method=True).compute()


# --- reading ----------------------------------------------------------------------------------

def test_find_fields_recognises_cf_standard_names(small_grid):
    f = grid.find_fields(small_grid)
    assert (f.temperature, f.humidity, f.humidity_kind) == ("ta", "hur", "relative_humidity")
    assert (f.level_dim, f.time_dim, f.horizontal_dims) == ("plev", "time", ("y", "x"))
    assert (f.height, f.surface_pressure, f.surface_altitude) == ("zg", "ps", "orog")
    assert (f.temperature_2m, f.dewpoint_2m) == ("tas", "tds")


def test_find_fields_missing_temperature_names_what_was_found(small_grid):
    with pytest.raises(ReaderError, match="x.nc: air_temperature found \\(tas\\) but none has a "
                                          "vertical coordinate"):
        grid.find_fields(small_grid.drop_vars(["ta"]), "x.nc")
    with pytest.raises(ReaderError, match="no variable with standard_name air_temperature on "
                                          "pressure levels; variables present: hur"):
        grid.find_fields(small_grid.drop_vars(["ta", "tas"]), "x.nc")


def test_find_fields_missing_humidity_is_an_error(small_grid):
    with pytest.raises(ReaderError, match="no humidity on pressure levels"):
        grid.find_fields(small_grid.drop_vars(["hur"]))


def test_find_fields_rejects_unknown_units(small_grid):
    ds = small_grid.copy()
    ds["ta"] = ds["ta"].assign_attrs(units="degF")
    with pytest.raises(ReaderError, match="'ta'.*units 'degF'"):
        grid.find_fields(ds)


@pytest.mark.parametrize("var,units", [("ps", "psi"), ("zg", "ft"), ("tds", "degF"),
                                       ("hur", "ppm")])
def test_find_fields_rejects_unknown_units_of_every_chosen_field(small_grid, var, units):
    # UDUNITS spellings outside our tables: each chosen variable's units are checked up
    # front, and the error names that variable.
    ds = small_grid.copy()
    ds[var] = ds[var].assign_attrs(units=units)
    with pytest.raises(ReaderError, match=f"'{var}'.*units '{units}'") as e:
        grid.find_fields(ds)
    assert e.value.field == var


def test_find_fields_optional_fields_are_optional(small_grid):
    f = grid.find_fields(small_grid.drop_vars(["zg", "ps", "orog", "tas", "tds"]))
    assert (f.height, f.surface_pressure, f.surface_altitude) == (None, None, None)
    assert (f.temperature_2m, f.dewpoint_2m) == (None, None)


def test_open_grid_not_netcdf_is_a_reader_error(tmp_path):
    bad = tmp_path / "bad.nc"
    bad.write_text("this is not a NetCDF file\n")
    with pytest.raises(ReaderError, match="bad.nc: not a readable NetCDF file"):
        grid.open_grid(str(bad))


def test_parse_chunks_syntax():
    assert grid.parse_chunks("y=256, x=128") == {"y": 256, "x": 128}
    assert grid.parse_chunks(None) == {}
    for bad in ("y=0", "y", "y=abc", "=4"):
        with pytest.raises(OptionError, match="NAME=SIZE"):
            grid.parse_chunks(bad)


def test_open_grid_unknown_chunk_dimension(small_file):
    with pytest.raises(OptionError, match="unknown dimension.*lat"):
        grid.open_grid(small_file, {"lat": 4})


def test_dewpoint_from_specific_humidity_against_metpy():
    # MetPy's dewpoint_from_specific_humidity (Bolton 1980 saturation form) as the reference;
    # ours uses Alduchov & Eskridge (1996): the forms differ by < 0.1 K from -40 to +30 degC.
    mpcalc = pytest.importorskip("metpy.calc")
    from metpy.units import units
    p = np.array([1000.0, 850.0, 700.0, 500.0])
    t = np.array([10.0, 2.0, -6.0, -25.0])
    q = np.array([6e-3, 4e-3, 2e-3, 4e-4])
    ours = grid.dewpoint_from_humidity_c("specific_humidity", q, p, t)
    ref = mpcalc.dewpoint_from_specific_humidity(p * units.hPa, q * units("kg/kg")).m_as("degC")
    np.testing.assert_allclose(ours, ref, atol=0.1)


# --- same answers as the single-profile path ----------------------------------------------------

def _profile_of_column(ds, it, j, i):
    """Build the profile document of one grid column directly from the raw file values
    (independently of ptype.grid): levels above ground plus the screen-level air."""
    col = ds.isel(time=it, y=j, x=i)
    psfc_hpa = float(col.ps) / 100.0
    levels = [{"pressure_hpa": psfc_hpa, "height_m": float(col.orog),
               "temperature_c": float(col.tas) - 273.15,
               "dewpoint_c": min(float(col.tds), float(col.tas)) - 273.15}]
    for k in range(col.sizes["plev"]):
        p = float(col.plev[k])
        if p >= psfc_hpa:
            continue  # at or below the ground
        levels.append({"pressure_hpa": p, "height_m": float(col.zg[k]),
                       "temperature_c": float(col.ta[k]) - 273.15,
                       "relative_humidity_pct": float(col.hur[k])})
    return {"levels": levels, "surface": {"temperature_2m_c": levels[0]["temperature_c"],
                                          "dewpoint_2m_c": levels[0]["dewpoint_c"]}}


def test_diagnose_dataset_matches_single_profile_diagnose(small_grid, small_result):
    rng = np.random.default_rng(11)
    picks = [(it, int(j), int(i)) for it in range(2)
             for j, i in zip(rng.integers(0, 12, 9), rng.integers(0, 16, 9))]
    # Always include the highest hill column (levels below ground) and one column per type.
    hill = np.unravel_index(int(np.argmax(small_grid.orog.values)), small_grid.orog.shape)
    picks.append((0, int(hill[0]), int(hill[1])))
    codes = small_result.precipitation_type.values
    for value in np.unique(codes):
        it, j, i = np.argwhere(codes == value)[0]
        picks.append((int(it), int(j), int(i)))
    seen = set()
    for it, j, i in picks:
        doc = _profile_of_column(small_grid, it, j, i)
        d = ptype.diagnose(doc, members=0).to_dict()
        got = small_result.isel(time=it, y=j, x=i)
        assert int(got.precipitation_type) == d["grib2_code"], (it, j, i, d["ptype"])
        assert int(got.precipitation_type) == GRIB2_4201[from_abbrev(d["ptype"])]
        for name, method in d["methods"].items():
            expected = 255 if method["ptype"] is None else GRIB2_4201[from_abbrev(method["ptype"])]
            assert int(got[f"precipitation_type_{name}"]) == expected, (it, j, i, name)
        if d["wetbulb_zero_height_m"] is None:
            assert np.isnan(float(got.wet_bulb_zero_height))
        else:
            assert float(got.wet_bulb_zero_height) == pytest.approx(d["wetbulb_zero_height_m"],
                                                                    abs=1.0)
        seen.add(d["ptype"])
    assert len(seen) >= 4  # the sample covers several types


def test_diagnose_dataset_levels_below_ground_are_masked(small_grid, small_result):
    # The hill column: levels with p > surface pressure exist in the file but must not count.
    j, i = np.unravel_index(int(np.argmax(small_grid.orog.values)), small_grid.orog.shape)
    col = small_grid.isel(time=0, y=j, x=i)
    assert (col.plev.values * 100.0 > float(col.ps)).sum() >= 2
    changed = small_grid.copy(deep=True)
    below = (changed.plev * 100.0) > changed.ps
    changed["ta"] = changed.ta.where(~below, 330.0)   # absurd values below ground
    changed["hur"] = changed.hur.where(~below, 3.0)
    out = grid.diagnose_dataset(changed).compute()
    np.testing.assert_array_equal(out.precipitation_type.values,
                                  small_result.precipitation_type.values)


def test_diagnose_dataset_any_dimension_order_names_and_units(small_grid, small_result):
    # Same data with renamed, reordered dimensions, levels in Pa, specific humidity, degC.
    from ptype import thermo
    ds = small_grid.rename({"plev": "isobaric", "x": "west_east", "y": "south_north",
                            "time": "valid"})
    ds = ds.assign_coords(isobaric=("isobaric", ds.isobaric.values * 100.0,
                                    {"units": "Pa", "positive": "down"}))
    t_c = ds.ta - 273.15
    td = thermo.dewpoint_from_relative_humidity_c(t_c.values, ds.hur.values)
    w = thermo.mixing_ratio_g_kg(ds.isobaric.values[None, :, None, None] / 100.0, td) / 1000.0
    ds["q"] = (ds.ta.dims, w / (1.0 + w), {"standard_name": "specific_humidity",
                                           "units": "kg kg-1"})
    ds = ds.drop_vars("hur")
    ds["ta"] = t_c.assign_attrs(standard_name="air_temperature", units="degC")
    ds = ds.transpose("west_east", "isobaric", "valid", "south_north")
    ds = ds.isel(isobaric=slice(None, None, -1))  # levels top -> bottom
    out = grid.diagnose_dataset(ds.chunk({"west_east": 5, "south_north": 4})).compute()
    got = out.precipitation_type.transpose("valid", "south_north", "west_east").values
    agree = np.mean(got == small_result.precipitation_type.values)
    # q is stored as float64 from float32 inputs: the dew points differ by < 1e-4 K, so every
    # column agrees except (at most) one sitting exactly on a threshold.
    assert agree >= 0.995


def test_diagnose_dataset_dew_point_input_in_kelvin(small_grid, small_result):
    from ptype import thermo
    ds = small_grid.copy()
    td = thermo.dewpoint_from_relative_humidity_c(ds.ta.values - 273.15, ds.hur.values)
    ds["td"] = (ds.ta.dims, td + 273.15, {"standard_name": "dew_point_temperature",
                                          "units": "K"})
    out = grid.diagnose_dataset(ds.drop_vars("hur")).compute()
    assert grid.find_fields(ds.drop_vars("hur")).humidity_kind == "dew_point_temperature"
    assert np.mean(out.precipitation_type.values == small_result.precipitation_type.values) \
        >= 0.995


def test_diagnose_dataset_is_lazy_and_independent_of_chunking(small_file, small_result):
    ds = grid.open_grid(small_file, {"y": 5, "x": 7})
    out = grid.diagnose_dataset(ds, per_method=True)
    import dask.array as da
    assert isinstance(out.precipitation_type.data, da.Array)
    assert out.precipitation_type.data.chunks[1] == (5, 5, 2)
    computed = out.compute()
    for name in small_result.data_vars:
        np.testing.assert_array_equal(computed[name].values, small_result[name].values)


def test_column_kernel_batches_give_the_same_answers(small_file, small_result, monkeypatch):
    # A chunk larger than the engine's batch is diagnosed batch by batch: same values.
    monkeypatch.setattr(grid.kernel, "ENGINE_BATCH_COLUMNS", 7)
    out = grid.diagnose_dataset(grid.open_grid(small_file), per_method=True).compute()
    for name in small_result.data_vars:
        np.testing.assert_array_equal(out[name].values, small_result[name].values)


def test_retain_freed_memory_applies_on_glibc():
    import platform
    applied = grid.retain_freed_memory()
    if platform.libc_ver()[0] == "glibc":
        assert applied is True
    else:
        assert applied is False


def test_default_chunks_follow_storage_and_members(small_grid, tmp_path, monkeypatch):
    # Contiguous storage: whole rows of the innermost dimension, bands along the outer one.
    monkeypatch.setattr(grid.io, "DEFAULT_CHUNK_WORK", 64)
    fields = grid.find_fields(small_grid)
    chunks = grid.default_chunks(small_grid, fields)
    assert (chunks["x"], chunks["y"], chunks["time"], chunks[fields.level_dim]) == (16, 4, 1, -1)
    # Members multiply the work per column: 64 // (1 + 3) = 16 columns, one row.
    assert (grid.default_chunks(small_grid, fields, members=3)["y"]) == 1
    # Chunked storage (2 x 3 columns per file chunk): whole multiples of the file's chunks.
    monkeypatch.setattr(grid.io, "DEFAULT_CHUNK_WORK", 8)
    path = tmp_path / "chunked.nc"
    enc = {v: {"chunksizes": (1, 1, 2, 3)} for v in small_grid.data_vars
           if small_grid[v].ndim == 4}
    assert enc
    small_grid.to_netcdf(path, encoding=enc)
    with xr.open_dataset(path) as ds:
        chunks = grid.default_chunks(ds, grid.find_fields(ds))
    assert (chunks["x"], chunks["y"]) == (9, 2)
    # One file chunk for the whole variable: split like contiguous storage, not one task.
    monkeypatch.setattr(grid.io, "DEFAULT_CHUNK_WORK", 64)
    path = tmp_path / "one_chunk.nc"
    small_grid.to_netcdf(path, encoding={v: {"chunksizes": small_grid[v].shape}
                                         for v in small_grid.data_vars})
    with xr.open_dataset(path) as ds:
        chunks = grid.default_chunks(ds, grid.find_fields(ds))
    assert (chunks["x"], chunks["y"]) == (16, 4)


def test_diagnose_dataset_without_per_method_same_consensus(small_file, small_result):
    # Consistency: without per-method outputs only the voting methods run (ptype.engine.consensus
    # VOTERS); the consensus, energies and heights must equal those of the full run.
    out = grid.diagnose_dataset(grid.open_grid(small_file)).compute()
    assert not any(n.startswith("precipitation_type_") for n in out.data_vars)
    for name in out.data_vars:
        np.testing.assert_array_equal(out[name].values, small_result[name].values)
    assert out.attrs["ptype_methods"] == small_result.attrs["ptype_methods"]


def test_diagnose_dataset_members_probabilities(small_file):
    ds = grid.open_grid(small_file)
    a = grid.diagnose_dataset(ds, members=8, seed=3).compute()
    b = grid.diagnose_dataset(ds, members=8, seed=3).compute()
    names = [n for n in a.data_vars if n.startswith("probability_of_")]
    assert len(names) == 10 and "probability_of_freezing_rain" in names
    total = sum(a[n] for n in names)
    np.testing.assert_allclose(total.values, 1.0, atol=1e-6)
    for n in names:
        np.testing.assert_array_equal(a[n].values, b[n].values)
        assert a[n].attrs["long_name"].startswith("probability of ")
        # Each probability is a count of members out of 8.
        np.testing.assert_allclose(a[n].values * 8, np.round(a[n].values * 8), atol=1e-5)


def test_diagnose_dataset_rejects_bad_options(small_grid):
    with pytest.raises(OptionError, match="members"):
        grid.diagnose_dataset(small_grid, members=-1)
    with pytest.raises(OptionError, match="seed"):
        grid.diagnose_dataset(small_grid, members=2, seed="x")
    with pytest.raises(OptionError, match="unknown method"):
        grid.diagnose_dataset(small_grid, methods=["nonesuch"])


# --- the command: CF-1.13 output, several inputs, errors, map, distributed -----------------------

def _split_times(small_grid, tmp_path):
    gen = _load_generator()
    paths = []
    for it in (1, 0):  # given out of order: combined and sorted along time
        p = tmp_path / f"part{it}.nc"
        gen.write_grid(small_grid.isel(time=[it]), str(p), compress=False)
        paths.append(str(p))
    return paths


def test_grid_cli_writes_cf_output(small_grid, small_result, tmp_path, capsys):
    paths = _split_times(small_grid, tmp_path)
    out = tmp_path / "out.nc"
    png = tmp_path / "map.png"
    rc = main(["grid", *paths, "-o", str(out), "--members", "4", "--seed", "5",
               "--chunks", "y=6,x=8", "--plot", str(png), "--no-progress"])
    printed = capsys.readouterr().out
    assert rc == 0
    assert "wrote" in printed and ptype.CAUTION in printed and "map:" in printed
    with netCDF4.Dataset(out) as nc:
        assert nc.Conventions == "CF-1.13"
        assert nc.ptype_version == ptype.__version__
        assert nc.ptype_members == 4 and nc.ptype_seed == "5"
        assert "ptype grid" in nc.history and "--members 4" in nc.history
        assert "bourgouin" in nc.ptype_methods.split()
        v = nc.variables["precipitation_type"]
        assert v.standard_name == "predominant_precipitation_type_at_surface"
        assert not hasattr(v, "units")
        assert v.dtype == np.uint8 and v._FillValue == 255
        assert v.filters()["zlib"] and v.chunking() == [1, 6, 8]
        flags = dict(zip(np.atleast_1d(v.flag_values).tolist(), v.flag_meanings.split()))
        for value, word in flags.items():
            # CF sec. 3.5: one word per value; the words are the 4.201 meanings.
            assert word == WMO_4201[value].lower().replace("/", "_").replace(" ", "_")
        assert nc.variables["warm_layer_energy"].units == "J kg-1"
        assert nc.variables["cold_layer_energy"].units == "J kg-1"
        assert nc.variables["wet_bulb_zero_height"].units == "m"
        assert nc.variables["probability_of_freezing_rain"].long_name == \
            "probability of freezing rain"
        assert list(nc.variables["precipitation_type"].dimensions) == ["time", "y", "x"]
    with xr.open_dataset(out) as back:
        assert back.time.values[0] < back.time.values[1]
        # With members the reported type is the profile's own consensus unless fewer than a
        # quarter of its members give it (docs/consensus.md): the same file diagnosed in
        # one piece with the same members, seed and chunks gives the same answer.
        same = grid.diagnose_dataset(grid.open_grid(paths, chunks={"y": 6, "x": 8}),
                                     members=4, seed=5).compute()
        np.testing.assert_array_equal(back.precipitation_type.values,
                                      same.precipitation_type.values)
        agree = back.precipitation_type.values == small_result.precipitation_type.values
        assert agree.mean() > 0.95
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    # The progress bar goes to standard error when asked for.
    rc = main(["grid", paths[0], "-o", str(tmp_path / "p.nc"), "--progress"])
    assert rc == 0 and "100% Completed" in capsys.readouterr().err


def test_grid_cli_bad_input_is_one_line_error(tmp_path, capsys):
    bad = tmp_path / "bad.nc"
    bad.write_text("no\n")
    rc = main(["grid", str(bad), "-o", str(tmp_path / "o.nc")])
    err = capsys.readouterr().err
    assert rc == 2 and err.count("\n") == 1 and "bad.nc" in err and "Traceback" not in err
    rc = main(["grid", str(tmp_path / "missing.nc"), "-o", str(tmp_path / "o.nc")])
    assert rc == 2 and "missing.nc" in capsys.readouterr().err
    rc = main(["grid", str(bad), "-o", str(bad)])
    assert rc == 2 and "overwrite an input" in capsys.readouterr().err
    assert bad.read_text() == "no\n"  # nothing already stored is lost
    assert not (tmp_path / "o.nc").exists()


def test_grid_cli_on_a_distributed_cluster(small_file, small_result, tmp_path, capsys):
    distributed = pytest.importorskip("distributed")
    with distributed.LocalCluster(n_workers=1, threads_per_worker=2, processes=False,
                                  dashboard_address=None) as cluster:
        out = tmp_path / "dist.nc"
        rc = main(["grid", small_file, "-o", str(out), "--scheduler", cluster.scheduler_address,
                   "--chunks", "y=6", "--no-progress"])
    assert rc == 0, capsys.readouterr().err
    with xr.open_dataset(out) as back:
        np.testing.assert_array_equal(back.precipitation_type.values,
                                      small_result.precipitation_type.values)


def test_grid_cli_unreachable_scheduler_is_an_option_error(small_file, tmp_path, capsys,
                                                           monkeypatch):
    from ptype.cli import grid as grid_command
    monkeypatch.setattr(grid_command, "CONNECT_TIMEOUT_S", 1)
    rc = main(["grid", small_file, "-o", str(tmp_path / "o.nc"), "--scheduler",
               "tcp://127.0.0.1:9"])
    err = capsys.readouterr().err
    assert rc == 2 and "--scheduler" in err and "Traceback" not in err


def test_plot_types_uses_palette_and_legend(small_result, tmp_path):
    from matplotlib.colors import to_rgb
    from matplotlib.image import imread

    from ptype.plot.gridmap import PALETTE, plot_types
    path = plot_types(small_result, tmp_path / "m.png", time_index=1)
    img = np.round(imread(path)[..., :3] * 255.0).astype(int)
    colours = {tuple(c) for c in img.reshape(-1, 3)}
    present = {int(v) for v in np.unique(small_result.precipitation_type.values[1])}
    assert len(present) >= 3
    for value in present:
        assert tuple(round(c * 255.0) for c in to_rgb(PALETTE[value])) in colours
    with pytest.raises(OptionError, match="time index"):
        plot_types(small_result, tmp_path / "x.png", time_index=5)


def test_diagnose_dataset_without_time_on_cells_with_auxiliary_coordinates(small_grid,
                                                                           small_result):
    # One time step, horizontal dims stacked into one unstructured "cell" dimension, with
    # latitude/longitude and a grid mapping: same types; coordinates carried, the screen
    # level's 2 m height coordinate not.
    ds = small_grid.isel(time=0)
    ds = ds.assign_coords(lat=(("y", "x"), 50.0 + 0.01 * ds.y.values[:, None] + 0.0 * ds.x.values),
                          lon=(("y", "x"), 0.0 * ds.y.values[:, None] + 0.01 * ds.x.values))
    ds["crs"] = xr.DataArray(0, attrs={"grid_mapping_name": "latitude_longitude"})
    ds["ta"].attrs["grid_mapping"] = "crs"
    cells = ds.stack(cell=("y", "x")).reset_index("cell", drop=True)
    out = grid.diagnose_dataset(cells).compute()
    assert out.precipitation_type.dims == ("cell",)
    np.testing.assert_array_equal(out.precipitation_type.values,
                                  small_result.precipitation_type.values[0].ravel())
    assert {"lat", "lon"} <= set(out.coords) and "height" not in out.coords
    assert out.precipitation_type.attrs["grid_mapping"] == "crs" and "crs" in out


def test_grid_fractions_are_cf_variables_that_sum_to_one(small_file):
    # The particle model's four classes of mass at the ground (docs/particles.md): each in
    # [0, 1] with units "1" (CF: a dimensionless fraction), and their sum is 1 where it ran.
    ds = grid.open_grid(small_file)
    out = grid.diagnose_dataset(ds, fractions=True).compute()
    names = [f"mass_fraction_of_{k}_at_surface" for k in ("snow", "melting", "liquid",
                                                          "refrozen")]
    total = sum(out[n].values.astype(np.float64) for n in names)
    ran = np.isfinite(total)
    assert ran.mean() > 0.9
    np.testing.assert_allclose(total[ran], 1.0, atol=1e-5)
    for n in names:
        v = out[n]
        assert v.attrs["units"] == "1" and ptype.CAUTION in v.attrs["comment"]
        assert np.nanmin(v.values) >= 0.0 and np.nanmax(v.values) <= 1.0


def test_demo_grid_has_no_snow_between_rain_and_freezing_rain():
    # Melted drops never become snow again (docs/consensus.md, the phase path): where rain
    # meets freezing rain on the invented demo grid, no column between them may say snow
    # (before the phase path a one-pixel band of snow showed there: 233 columns).
    ds = grid.open_grid(str(DEMO_GRID))
    codes = grid.diagnose_dataset(ds).compute().precipitation_type.values
    rain, freezing, snow = 1, 3, 5  # WMO GRIB2 code table 4.201
    band = 0
    for axis in (-1, -2):
        before, after = np.roll(codes, 1, axis=axis), np.roll(codes, -1, axis=axis)
        band += int(((codes == snow) & (((before == rain) & (after == freezing))
                                        | ((before == freezing) & (after == rain)))).sum())
    assert band == 0
    assert (codes == rain).any() and (codes == freezing).any() and (codes == snow).any()


def test_map_hatches_patterned_types_as_a_second_cue(tmp_path):
    """Colour is not the only carrier of the type on the map: freezing rain (diagonal
    hatching in ptype/style/palette.py) shows two colours inside its area, rain (plain) one."""
    import xarray as xr
    from PIL import Image

    from ptype.plot.gridmap import plot_types
    from ptype.style import GRIB2_STYLE
    from ptype.style.colourvision import hex_to_rgb
    field = np.tile(np.repeat(np.array([1, 3], dtype="u1"), 20), (30, 1))
    ds = xr.Dataset({"precipitation_type": (("y", "x"), field)},
                    coords={"y": np.arange(30.0), "x": np.arange(40.0)})
    path = plot_types(ds, tmp_path / "map.png")
    pixels = np.asarray(Image.open(path).convert("RGB"), dtype=int)

    def count_near(colour):
        return int(np.sum(np.abs(pixels - hex_to_rgb(colour) * 255).max(axis=-1) < 12))
    rain, fzra = GRIB2_STYLE[1], GRIB2_STYLE[3]
    assert count_near(rain.colour) > 2000 and count_near(fzra.colour) > 1000
    # The freezing-rain area carries lines in its text colour; plain rain does not.
    assert fzra.hatch and not rain.hatch
    rows = pixels[pixels.shape[0] // 3]
    fz_cols = np.abs(rows - hex_to_rgb(fzra.colour) * 255).max(axis=-1) < 12
    ra_cols = np.abs(rows - hex_to_rgb(rain.colour) * 255).max(axis=-1) < 12
    left, right = np.flatnonzero(fz_cols)[[0, -1]]
    assert (~fz_cols[left:right]).sum() >= 5  # hatch lines cross the row inside the area
    lo, hi = np.flatnonzero(ra_cols)[[0, -1]]
    assert (~ra_cols[lo:hi]).sum() == 0
