"""The invented demo data in ``soundings_demo/`` and its generator ``soundings_demo/make_demo.py``.

Everything checked here is invented (region, sites, storm).  The checks hold it to the
physics and the published thresholds the demo is meant to illustrate, to the open formats it
is written in, and to what the diagnosis engine makes of it.
"""

from __future__ import annotations

import importlib.util
import itertools
import json
from datetime import datetime, timedelta
from pathlib import Path

import numpy as np
import pytest

import ptype
from ptype.codes import Code
from ptype.engine.columns import Columns
from ptype.engine.layers import analyse_layers, cloud_mask, dry_mask, level_runs
from ptype.thermo.constants import Rd

DEMO = Path(__file__).resolve().parents[1] / "soundings_demo"
#: Sub-directories written by make_demo.py (soundings_demo/verification has its own generator).
GENERATED = ("json", "csv", "temp", "series")


def _load_generator():
    spec = importlib.util.spec_from_file_location("ptype_make_demo", DEMO / "make_demo.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


make_demo = _load_generator()


def _files(kind: str) -> list[Path]:
    if kind == "series":
        return sorted((DEMO / "series").glob("*/*.json"))
    suffix = {"json": ".json", "csv": ".csv", "temp": ".txt"}[kind]
    return sorted((DEMO / kind).glob(f"*{suffix}"))


ALL_FILES = [p for kind in GENERATED for p in _files(kind)]
CASE_STEMS = sorted(p.stem for p in _files("json"))


def _rel(path: Path) -> str:
    return str(path.relative_to(DEMO))


def _manifest() -> dict:
    return json.loads((DEMO / "series" / "manifest.json").read_text(encoding="utf-8"))


def _methods() -> tuple[str, ...]:
    """Every diagnosis method installed; the melting-layer and cloud-top voters must be."""
    names = make_demo.available_methods()
    assert names is not None, "ptype.engine.diagnosis is not importable"
    assert {"bourgouin", "ramer", "baldwin", "cloud_top"} <= set(names)
    return names


# --- reading ---------------------------------------------------------------------------------

@pytest.mark.parametrize("path", ALL_FILES, ids=_rel)
def test_read_profile_every_demo_file(path):
    profile = ptype.read_profile(path)
    # 25-60 levels from the ground to 250 hPa or higher (the demo's own design rule).
    assert 25 <= profile.n_levels <= 60
    assert profile.pressure_hpa[-1] <= 250.0
    assert np.all(profile.dewpoint_c <= profile.temperature_c)
    if path.suffix != ".txt":
        expected = "demo model run" if "series" in path.parts else "invented demo profile"
        assert profile.source == expected
        assert profile.valid_time is not None and profile.site is not None
        assert not profile.warnings  # heights and dew points are complete in our own formats


def test_read_profile_demo_counts():
    assert len(_files("json")) >= 12
    assert len(_files("csv")) == 3 and len(_files("temp")) == 3


def test_read_profile_demo_file_names_give_site_and_time():
    # Case library: <site-id>_<YYYYMMDDTHHMM>.json; series: <site-id>/<YYYYMMDDTHHMM>Z.json.
    for path in _files("json") + _files("series"):
        doc = json.loads(path.read_text(encoding="utf-8"))
        assert doc["valid_time"].endswith("Z")
        stamp = f"{datetime.fromisoformat(doc['valid_time']):%Y%m%dT%H%M}"
        if path.parent.name == "json":
            assert path.stem == f"{doc['site']['id']}_{stamp}"
        else:
            assert (path.parent.name, path.stem) == (doc["site"]["id"], f"{stamp}Z")


@pytest.mark.parametrize("stem", [p.stem for p in _files("temp")])
def test_read_profile_formats_agree_level_by_level(stem):
    js = ptype.read_profile(DEMO / "json" / f"{stem}.json")
    cs = ptype.read_profile(DEMO / "csv" / f"{stem}.csv")
    tp = ptype.read_profile(DEMO / "temp" / f"{stem}.txt")
    # CSV carries the same numbers as JSON.
    for attr in ("pressure_hpa", "height_m", "temperature_c", "dewpoint_c"):
        np.testing.assert_array_equal(getattr(cs, attr), getattr(js, attr))
    # TEMP carries every level (whole hPa) ...
    np.testing.assert_array_equal(tp.pressure_hpa, js.pressure_hpa)
    # ... temperature in tenths with the sign on the parity of the tenths digit, so 0.1 degC
    # at worst (WMO-No. 306 FM 35, Code table 3931; from memory, see docs/standards),
    assert np.max(np.abs(tp.temperature_c - js.temperature_c)) <= 0.1 + 1e-9
    # ... dew-point depression in tenths up to 5 degC, whole degrees from 6 (Code table 0777;
    # from memory): 0.05 or 0.5 degC of rounding, plus the temperature's 0.1.
    depression = js.temperature_c - js.dewpoint_c
    tolerance = np.where(depression <= 5.0, 0.05, 0.5) + 0.1 + 1e-9
    assert np.all(np.abs(tp.dewpoint_c - js.dewpoint_c) <= tolerance)
    # Heights: standard surfaces are coded in metres up to 700 hPa and decametres above
    # (FM 35 Part A; NAVEDTRA 14270 ch. 1); the decoder fills the other levels
    # hypsometrically from them, which stays within a decametre.
    standard = np.isin(tp.pressure_hpa, [1000, 925, 850, 700, 500, 400, 300, 250, 200])
    coded = np.where(tp.pressure_hpa >= 700, 0.5, 5.0) + 0.05
    dz = np.abs(tp.height_m - js.height_m)
    assert np.all(dz[standard] <= coded[standard])
    assert dz.max() <= 10.0


# --- physics ---------------------------------------------------------------------------------

def _arrays(path: Path):
    doc = json.loads(path.read_text(encoding="utf-8"))
    lv = doc["levels"]
    return (doc, *(np.array([x[k] for x in lv]) for k in
                   ("pressure_hpa", "height_m", "temperature_c", "dewpoint_c")))


def test_hypsometric_heights_match_metpy_thickness():
    # Reference: MetPy thickness_hydrostatic (hypsometric equation with virtual temperature),
    # an independent implementation of the same law.  Agreement within 0.05 % of the depth.
    import metpy.calc as mpcalc
    from metpy.units import units
    for path in _files("json") + _files("series")[::25]:
        _, p, z, t, td = _arrays(path)
        w = mpcalc.mixing_ratio_from_relative_humidity(
            p * units.hPa, t * units.degC,
            mpcalc.relative_humidity_from_dewpoint(t * units.degC, td * units.degC))
        depth = mpcalc.thickness_hydrostatic(p * units.hPa, t * units.degC, mixing_ratio=w)
        depth_m = depth.m_as("m")
        assert abs((z[-1] - z[0]) - depth_m) <= 5e-4 * depth_m, path.name


def test_lapse_rates_no_steeper_than_dry_adiabat():
    # Dry-adiabatic lapse g/c_p = 9.8 K/km (Wallace & Hobbs 2006, section 3.5): a demo
    # profile must not be absolutely unstable anywhere.
    for path in _files("json") + _files("series"):
        _, _p, z, t, _td = _arrays(path)
        lapse = -np.diff(t) / (np.diff(z) / 1000.0)
        assert lapse.max() <= 9.8, path.name


def _layers(stem: str):
    doc, p, z, t, td = _arrays(DEMO / "json" / f"{stem}.json")
    lay = analyse_layers(p[None], z[None], t[None])
    layers = lay.column(0)
    return doc, p, z, t, td, layers


def _bourgouin_area_j_kg(p, t, lo_hpa, hi_hpa, sign):
    """R_d * integral of max(sign*(T - T0), 0) d ln p between two pressures, on a dense
    ln p grid (Bourgouin 2000 area; 52.2 J/kg for +3 degC from 850 to 800 hPa by hand)."""
    grid = np.linspace(np.log(hi_hpa), np.log(lo_hpa), 4001)
    tt = np.interp(grid, np.log(p[::-1]), t[::-1])
    return Rd * np.trapezoid(np.maximum(sign * tt, 0.0), grid)


def test_design_ice_pellets_case():
    _, p, _z, t, _td, layers = _layers("drovan-junction_20260127T1300")
    warm = [x for x in layers if x["kind"] == "warm"]
    assert len(warm) == 1 and layers[0]["kind"] == "cold"
    nose = warm[0]
    # Warm nose +1 to +3 degC with 50-150 J/kg over a deep cold layer colder than -8 degC.
    assert 1.0 <= nose["extreme_c"] <= 3.0
    pa = _bourgouin_area_j_kg(p, t, nose["bottom_hpa"] + 0.5, nose["top_hpa"] - 0.5, +1)
    assert 50.0 <= pa <= 150.0
    na = _bourgouin_area_j_kg(p, t, p[0], nose["bottom_hpa"], -1)
    assert layers[0]["extreme_c"] < -8.0
    # Bourgouin (2000): NA > 66 + 0.66 PA -> ice pellets.
    assert na > 66.0 + 0.66 * pa


def test_design_freezing_rain_case():
    *_, layers = _layers("mistleby-bridge_20260127T1600")
    kinds = [x["kind"] for x in layers]
    assert kinds[:2] == ["cold", "warm"]
    cold, nose = layers[0], layers[1]
    # Strong warm nose (>= +5 degC, > 150 J/kg) over a shallow -1 to -4 degC surface layer.
    assert nose["extreme_c"] >= 5.0 and nose["area_j_kg"] > 150.0
    assert -4.0 <= cold["extreme_c"] <= -1.0 and cold["depth_m"] < 600.0
    # Bourgouin (2000): NA < 46 + 0.66 PA -> freezing rain under a sub-zero surface.
    assert cold["area_j_kg"] < 46.0 + 0.66 * nose["area_j_kg"]


def test_design_rain_snow_case():
    _, p, z, t, _td, layers = _layers("sennet-causeway_20260127T0700")
    surface = layers[0]
    assert surface["kind"] == "warm" and all(x["kind"] == "cold" for x in layers[1:])
    # Bourgouin (2000) surface warm layer between 5.6 and 13.2 J/kg -> rain/snow mix;
    # surface +1 to +2 degC with the 0 degC level a few hundred metres up.
    area = _bourgouin_area_j_kg(p, t, p[0], surface["top_hpa"], +1)
    assert 5.6 < area < 13.2
    assert 1.0 <= t[0] <= 2.0 and 100.0 <= surface["top_m"] - z[0] <= 500.0


def test_design_rain_and_snow_cases():
    *_, layers = _layers("sennet-causeway_20260127T1200")
    assert layers[0]["kind"] == "warm" and layers[0]["area_j_kg"] > 13.2  # Bourgouin: rain
    for stem in ("korrim-pass_20260127T1000", "mistleby-bridge_20260127T0900"):
        _, p, z, t, td, layers = _layers(stem)
        assert len(layers) == 1 and layers[0]["kind"] == "cold"  # whole column below 0 degC
        clouds = level_runs(cloud_mask(t[None], td[None]), p[None], z[None], t[None])
        # Deep cloud with a cold top: ice nucleation certain below about -15 degC
        # (NWS ice-nucleation guidance, common practice).
        assert clouds.min_temperature_c[0, int(clouds.count[0]) - 1] <= -25.0
        assert clouds.top_m[0, int(clouds.count[0]) - 1] - z[0] > 3000.0


def test_design_freezing_drizzle_case():
    _, p, z, t, td, layers = _layers("ulmbrook-cutting_20260126T1800")
    assert len(layers) == 1 and layers[0]["kind"] == "cold" and t[0] < 0.0
    clouds = level_runs(cloud_mask(t[None], td[None]), p[None], z[None], t[None])
    assert int(clouds.count[0]) == 1
    # Shallow saturated layer from the ground, top warmer than -8 degC (no ice: Huffman &
    # Norman 1988: tops 0 to -10 degC) ...
    assert clouds.bottom_hpa[0, 0] == p[0] and clouds.min_temperature_c[0, 0] > -8.0
    assert clouds.top_m[0, 0] - z[0] < 1000.0
    # ... with dry air right above it.
    above = p < clouds.top_hpa[0, 0] - 30.0
    assert np.all(dry_mask(t[None], td[None])[0, above])


# --- the storm series ------------------------------------------------------------------------

def test_series_manifest_lists_existing_files():
    manifest = _manifest()
    assert manifest["issued_time"] == "2026-01-27T00:00:00Z"
    assert manifest["source"] == "demo model run"
    sites = json.loads((DEMO / "sites.json").read_text(encoding="utf-8"))["sites"]
    assert set(manifest["sites"]) == {s["id"] for s in sites}
    listed = set()
    for site_id, entry in manifest["sites"].items():
        assert len(entry["files"]) == 25  # hourly, +0 h to +24 h
        assert [t["file"] for t in entry["timeline"]] == entry["files"]
        times = []
        for item in entry["timeline"]:
            path = DEMO / "series" / item["file"]
            assert path.is_file(), item["file"]
            doc = json.loads(path.read_text(encoding="utf-8"))
            assert doc["valid_time"] == item["valid_time"] and doc["site"]["id"] == site_id
            times.append(datetime.fromisoformat(item["valid_time"]))
            listed.add(path)
        steps = {(b - a).total_seconds() for a, b in itertools.pairwise(times)}
        assert steps == {3600.0}
    assert listed == set(_files("series"))


def test_sites_are_complete():
    sites = json.loads((DEMO / "sites.json").read_text(encoding="utf-8"))["sites"]
    assert len(sites) >= 6 and len({s["id"] for s in sites}) == len(sites)
    for s in sites:
        assert set(s) >= {"id", "name", "latitude", "longitude", "elevation_m", "description"}
        assert -90 <= s["latitude"] <= 90 and -180 <= s["longitude"] <= 180
        # Optional alert thresholds use the alert rules' own keys and types.
        from ptype.roads.alerts.rules import DEFAULT_THRESHOLDS
        for key, value in s.get("thresholds", {}).items():
            assert type(value) is type(DEFAULT_THRESHOLDS[key]), key
    by_id = {s["id"]: s for s in sites}
    for path in _files("json") + _files("series"):
        site = json.loads(path.read_text(encoding="utf-8"))["site"]
        ref = by_id[site["id"]]
        assert {k: ref[k] for k in site} == site


def _series_codes(site_id: str) -> tuple[list[str], list]:
    files = _manifest()["sites"][site_id]["files"]
    profiles = [ptype.read_profile(DEMO / "series" / f) for f in files]
    from ptype.engine.run import diagnose_columns
    out = diagnose_columns(Columns.from_profiles(profiles), methods=_methods())
    return [Code(int(c)).name for c in out["ptype"]], profiles


def _first(codes, code, start=0):
    return next(i for i, c in enumerate(codes) if i >= start and c == code)


def test_series_storm_sequence_at_lower_sites():
    # Warm front: snow, then ice pellets as the nose grows, freezing rain as it strengthens,
    # rain once the surface layer warms (by physical design; consensus of the installed methods).
    for site_id in ("ulmbrook-cutting", "tessary-viaduct", "drovan-junction"):
        codes, profiles = _series_codes(site_id)
        rate = [p.surface.precipitation_rate_mm_h for p in profiles]
        onset = next(i for i, r in enumerate(rate) if r > 0)
        sn = _first(codes, "SN", onset)
        pl = _first(codes, "PL", sn)
        fzra = _first(codes, "FZRA", pl)
        ra = _first(codes, "RA", fzra)
        assert sn < pl < fzra < ra, (site_id, codes)


def test_series_site_variations():
    codes = {s: _series_codes(s)[0] for s in make_demo.SITE_BY_ID}
    # The valley keeps its cold pool: at least 4 consecutive hours of freezing rain.
    valley = "".join("F" if c == "FZRA" else "." for c in codes["mistleby-bridge"])
    assert "FFFF" in valley
    # The coast turns to rain first; the pass keeps snow longest.
    first_rain = {s: next((i for i, c in enumerate(cs) if c == "RA"), 99)
                  for s, cs in codes.items()}
    assert first_rain["sennet-causeway"] < min(v for s, v in first_rain.items()
                                               if s != "sennet-causeway")
    last_snow = {s: max(i for i, c in enumerate(cs) if c == "SN") for s, cs in codes.items()}
    assert last_snow["korrim-pass"] >= max(v for s, v in last_snow.items()
                                           if s != "korrim-pass") + 4


def test_series_frost_before_the_storm():
    # Clear, calm night: road surface at or below 0 degC and below the air dew point (hoar
    # frost deposits; common practice of road-weather forecasting) at every inland site.
    for site_id in make_demo.SITE_BY_ID:
        if site_id == "sennet-causeway":
            continue
        files = _manifest()["sites"][site_id]["files"]
        frost = 0
        for f in files[:6]:
            s = ptype.read_profile(DEMO / "series" / f).surface
            assert s.precipitation_rate_mm_h == 0.0 and s.wind_speed_m_s <= 7.0
            road = s.road_surface_temperature_c
            if road <= 0.0 and road < s.dewpoint_2m_c:
                frost += 1
        assert frost >= 2, site_id


# --- diagnosis of the case library ----------------------------------------------------------

def test_diagnose_case_library_covers_every_type():
    from ptype.engine.diagnosis import diagnose
    methods = _methods()
    found = {}
    for case in make_demo.CASES:
        valid = make_demo.STORM_DAY + timedelta(hours=case["hour"])
        stem = f"{case['site']}_{valid:%Y%m%dT%H%M}"
        result = diagnose(DEMO / "json" / f"{stem}.json", members=0, methods=methods)
        # Every case diagnoses as drawn (marginal cases name both defensible types).
        assert result.ptype in case["design"].split(), (stem, result.ptype, case["design"])
        found[stem] = result.ptype
    assert {"SN", "RA", "PL", "FZRA", "FZDZ", "RASN"} <= set(found.values())
    assert set(found) == set(CASE_STEMS)


# --- regeneration ----------------------------------------------------------------------------

def test_generate_reproduces_committed_files(tmp_path):
    make_demo.generate(tmp_path, quiet=True)
    produced = {str(p.relative_to(tmp_path)) for p in tmp_path.rglob("*") if p.is_file()}
    committed = {"sites.json"} | {str(p.relative_to(DEMO)) for kind in GENERATED
                                  for p in (DEMO / kind).rglob("*") if p.is_file()}
    assert produced == committed
    for rel in sorted(produced):
        assert (tmp_path / rel).read_bytes() == (DEMO / rel).read_bytes(), rel


def test_demo_tree_is_small():
    total = sum(p.stat().st_size for kind in GENERATED for p in (DEMO / kind).rglob("*")
                if p.is_file())
    assert total < 3_000_000
