"""Profile validation and completion (ptype/profile/model.py), end to end.

Every bad input must give one ProfileError on one line that names the level,
the field, the value and what was expected.  Physical completions (humidity
forms, hypsometric heights) are checked against MetPy, psychrolib and the
US Standard Atmosphere 1976.
"""

from __future__ import annotations

import copy
import json
import math
from pathlib import Path

import metpy.calc as mpcalc
import numpy as np
import psychrolib
import pytest
from metpy.units import units

from ptype.errors import ProfileError
from ptype.profile import Profile

ROOT = Path(__file__).resolve().parents[1]

#: An invented sounding (demo-style data, not an observation): shallow cold air under a warm nose.
LEVELS = [
    {"pressure_hpa": 1000.0, "temperature_c": -1.5, "dewpoint_c": -2.3},
    {"pressure_hpa": 950.0, "temperature_c": -0.8, "dewpoint_c": -1.4},
    {"pressure_hpa": 900.0, "temperature_c": 1.6, "dewpoint_c": 0.9},
    {"pressure_hpa": 850.0, "temperature_c": 3.2, "dewpoint_c": 2.4},
    {"pressure_hpa": 800.0, "temperature_c": 0.4, "dewpoint_c": -0.6},
    {"pressure_hpa": 700.0, "temperature_c": -6.1, "dewpoint_c": -8.8},
    {"pressure_hpa": 500.0, "temperature_c": -21.7, "dewpoint_c": -30.2},
]


def _levels():
    return copy.deepcopy(LEVELS)


def _error(levels, **doc) -> ProfileError:
    """The ProfileError from validating a document; asserts it is one line."""
    with pytest.raises(ProfileError) as info:
        Profile.from_document({"levels": levels, **doc})
    message = str(info.value)
    assert "\n" not in message and "Traceback" not in message
    return info.value


# --- bad input: one line naming level, field, value and expectation ------------------------

def test_from_document_too_few_levels():
    err = _error(_levels()[:2])
    assert "levels" in str(err) and "2 distinct" in str(err) and "at least 3" in str(err)


def test_from_document_too_few_distinct_levels_counts_duplicates_as_errors():
    levels = _levels()[:3]
    levels[2]["pressure_hpa"] = 950.0
    err = _error(levels)
    assert "duplicate pressure_hpa = 950" in str(err)


@pytest.mark.parametrize("field", ["pressure_hpa", "temperature_c", "dewpoint_c", "height_m"])
@pytest.mark.parametrize("value", [math.nan, math.inf, -math.inf])
def test_from_document_non_finite(field, value):
    levels = _levels()
    levels[3][field] = value
    err = _error(levels)
    assert f"levels[3].{field}" in str(err) and "finite" in str(err)
    assert err.field == f"levels[3].{field}"


def test_read_profile_json_nan_literal():
    # JSON text with a NaN literal (Python's json accepts it) still gets the finite-number message.
    from ptype.readers import read_profile
    levels = _levels()
    text = json.dumps({"levels": levels}).replace("-21.7", "NaN")
    with pytest.raises(ProfileError, match=r"levels\[6\]\.temperature_c = nan: expected a finite"):
        read_profile(text)


@pytest.mark.parametrize("value", [0.0, -5.0, 1100.5, 2000.0])
def test_from_document_pressure_out_of_range(value):
    levels = _levels()
    levels[2]["pressure_hpa"] = value
    err = _error(levels)
    assert f"levels[2].pressure_hpa = {value:g}" in str(err)
    assert "0 < pressure <= 1100 hPa" in str(err)


def test_from_document_pressure_limits_accepted():
    # 1100 hPa is the inclusive upper bound (common practice: above any observed surface pressure).
    levels = _levels()
    levels[0]["pressure_hpa"] = 1100.0
    assert Profile.from_document({"levels": levels}).pressure_hpa[0] == 1100.0


@pytest.mark.parametrize("value", [-100.5, 60.1, 75.0])
def test_from_document_temperature_out_of_range(value):
    levels = _levels()
    levels[4]["temperature_c"] = value
    err = _error(levels)
    assert f"levels[4] (800 hPa).temperature_c = {value:g}" in str(err)
    assert "expected -100 to +60 degC" in str(err)


def test_from_document_dewpoint_above_temperature_refused():
    levels = _levels()
    levels[3]["dewpoint_c"] = levels[3]["temperature_c"] + 0.6
    err = _error(levels)
    assert "levels[3] (850 hPa).dewpoint_c = 3.8" in str(err)
    assert "above the temperature 3.2" in str(err) and "at most 0.5" in str(err)


def test_from_document_dewpoint_slightly_above_temperature_clamped_with_warning():
    levels = _levels()
    levels[3]["dewpoint_c"] = levels[3]["temperature_c"] + 0.4
    prof = Profile.from_document({"levels": levels})
    k = int(np.nonzero(prof.pressure_hpa == 850.0)[0][0])
    assert prof.dewpoint_c[k] == pytest.approx(3.2)
    assert any("850 hPa" in w and "clamped" in w for w in prof.warnings)


def test_from_document_duplicate_pressures():
    levels = _levels()
    levels[5]["pressure_hpa"] = 850.0
    err = _error(levels)
    assert "levels[3] and levels[5]: duplicate pressure_hpa = 850" in str(err)


def test_from_document_heights_disagree_with_pressure_order():
    levels = _levels()
    levels[0]["height_m"] = 300.0
    levels[1]["height_m"] = 250.0  # lower pressure must be higher up
    err = _error(levels)
    assert "levels[1] (950 hPa).height_m = 250" in str(err)
    assert "expected above levels[0] (1000 hPa) at 300 m" in str(err)


def test_from_document_humidity_missing_everywhere():
    levels = [{k: v for k, v in lvl.items() if k != "dewpoint_c"} for lvl in _levels()]
    err = _error(levels)
    assert "humidity missing at every level" in str(err)
    assert "dewpoint_c, relative_humidity_pct, mixing_ratio_g_kg, wetbulb_c" in str(err)


def test_from_document_humidity_missing_on_some_levels_is_filled_with_warning():
    levels = _levels()
    del levels[2]["dewpoint_c"]
    prof = Profile.from_document({"levels": levels})
    assert np.all(np.isfinite(prof.dewpoint_c))
    assert any("humidity missing at 1 level" in w for w in prof.warnings)


def test_from_document_unknown_level_field_named():
    levels = _levels()
    levels[2]["temperatur_c"] = 1.0
    err = _error(levels)
    assert "levels[2].temperatur_c" in str(err) and "unknown field" in str(err)



def test_from_levels_unknown_field_lists_accepted():
    levels = _levels()
    levels[1]["rh"] = 80.0
    with pytest.raises(ProfileError,
                       match=r"levels\[1\]: unknown field\(s\) rh; accepted: pressure_hpa"):
        Profile.from_levels(levels)


@pytest.mark.parametrize("value", ["3.2", True, None])
def test_from_document_strings_and_booleans_for_numbers(value):
    levels = _levels()
    levels[3]["temperature_c"] = value
    err = _error(levels)
    assert "levels[3].temperature_c" in str(err)
    if value is not None:
        assert repr(value) in str(err) and "valid number" in str(err)


def test_from_levels_string_for_number():
    levels = _levels()
    levels[3]["pressure_hpa"] = "850"
    with pytest.raises(ProfileError, match=r"levels\[3\]\.pressure_hpa = '850': expected a number"):
        Profile.from_levels(levels)



def test_from_document_two_humidity_forms_on_one_level():
    levels = _levels()
    levels[2]["relative_humidity_pct"] = 90.0
    err = _error(levels)
    assert "levels[2] (900 hPa)" in str(err)
    assert "both dewpoint_c and relative_humidity_pct" in str(err)


def test_from_document_relative_humidity_out_of_range():
    levels = _levels()
    del levels[2]["dewpoint_c"]
    levels[2]["relative_humidity_pct"] = 120.0
    err = _error(levels)
    assert "levels[2] (900 hPa).relative_humidity_pct = 120" in str(err)
    assert "0 < RH <= 100" in str(err)


# --- invariances and equivalent humidity forms ----------------------------------------------

def test_from_document_level_order_invariant():
    ref = Profile.from_document({"levels": _levels()})
    rng = np.random.default_rng(7)
    for _ in range(5):
        shuffled = [LEVELS[i] for i in rng.permutation(len(LEVELS))]
        prof = Profile.from_document({"levels": copy.deepcopy(shuffled)})
        for name in ("pressure_hpa", "temperature_c", "dewpoint_c", "height_m"):
            np.testing.assert_allclose(getattr(prof, name), getattr(ref, name), rtol=0, atol=1e-9)
    assert np.all(np.diff(ref.pressure_hpa) < 0)  # surface -> top


def test_from_document_relative_humidity_matches_dewpoint():
    # RH computed by MetPy (relative_humidity_from_dewpoint, Bolton 1980 saturation pressure),
    # converted back by ptype (Alduchov & Eskridge 1996): the two saturation formulas differ by
    # < 0.3 % here, i.e. < 0.05 degC in dew point; tolerance 0.1 degC.
    t = np.array([lvl["temperature_c"] for lvl in LEVELS])
    td = np.array([lvl["dewpoint_c"] for lvl in LEVELS])
    rh = mpcalc.relative_humidity_from_dewpoint(t * units.degC, td * units.degC).m_as("percent")
    levels = _levels()
    for lvl, r in zip(levels, rh):
        del lvl["dewpoint_c"]
        lvl["relative_humidity_pct"] = float(r)
    prof = Profile.from_document({"levels": levels})
    np.testing.assert_allclose(prof.dewpoint_c, td, atol=0.1)


def test_from_document_mixing_ratio_matches_dewpoint():
    # Mixing ratio from MetPy (mixing_ratio of saturation_vapor_pressure(Td), Bolton 1980);
    # tolerance 0.1 degC as above.
    p = np.array([lvl["pressure_hpa"] for lvl in LEVELS])
    td = np.array([lvl["dewpoint_c"] for lvl in LEVELS])
    w = mpcalc.mixing_ratio(mpcalc.saturation_vapor_pressure(td * units.degC),
                            p * units.hPa).m_as("g/kg")
    levels = _levels()
    for lvl, value in zip(levels, w):
        del lvl["dewpoint_c"]
        lvl["mixing_ratio_g_kg"] = float(value)
    prof = Profile.from_document({"levels": levels})
    np.testing.assert_allclose(prof.dewpoint_c, td, atol=0.1)


def test_from_document_psychrometer_wetbulb_matches_dewpoint():
    # Wet-bulb readings from psychrolib (GetTWetBulbFromTDewPoint: ASHRAE 2017 ch. 1 with
    # Hyland-Wexler saturation).  Above-freezing bulbs only, where psychrolib and ptype both
    # use liquid water; tolerance 0.1 degC (measured difference < 0.02 degC).
    psychrolib.SetUnitSystem(psychrolib.SI)
    warm = [(1000.0, 12.0, 8.0), (950.0, 9.5, 7.1), (900.0, 6.0, 2.5), (850.0, 4.2, 3.9)]
    levels = []
    for p, t, td in warm:
        tw = psychrolib.GetTWetBulbFromTDewPoint(t, td, p * 100.0)
        levels.append({"pressure_hpa": p, "temperature_c": t, "wetbulb_c": tw})
    prof = Profile.from_document({"levels": levels})
    np.testing.assert_allclose(prof.dewpoint_c, [td for _, _, td in warm], atol=0.1)


def test_from_document_wetbulb_above_temperature_refused():
    levels = _levels()
    del levels[3]["dewpoint_c"]
    levels[3]["wetbulb_c"] = 5.0
    err = _error(levels)
    assert "levels[3] (850 hPa).wetbulb_c = 5" in str(err)
    assert "at most the temperature 3.2" in str(err)


# --- heights ------------------------------------------------------------------------------

def _ussa76_pressure_hpa(h_m):
    """US Standard Atmosphere 1976 troposphere, pressure at geopotential height H
    (NOAA/NASA/USAF 1976, eq. 33a): p = p0 (1 - L H / T0) ** (g0 M0 / (R* L)), exponent 5.255877."""
    return 1013.25 * (1.0 - 0.0065 * h_m / 288.15) ** 5.255877


def test_from_levels_hypsometric_heights_match_us_standard_atmosphere():
    h = np.arange(0.0, 11001.0, 250.0)
    # Dry (dew point -95 degC): virtual temperature = temperature.
    levels = [{"pressure_hpa": float(_ussa76_pressure_hpa(z)),
               "temperature_c": float(15.0 - 0.0065 * z), "dewpoint_c": -95.0} for z in h]
    prof = Profile.from_levels(levels, site={"elevation_m": 0.0})
    # Rd = 287.04 vs R*/M0 = 287.053 J/kg/K (0.005 %) plus trapezoid error: < 1 m at 11 km.
    np.testing.assert_allclose(prof.height_m, h, atol=1.0)


@pytest.mark.parametrize("z_geometric_m, p_hpa", [
    (1000.0, 898.76), (2000.0, 795.01), (3000.0, 701.21), (5000.0, 540.48), (10000.0, 264.99)])
def test_from_levels_heights_match_us_standard_atmosphere_table(z_geometric_m, p_hpa):
    # US Standard Atmosphere 1976, Table I pressures at geometric altitude (from memory);
    # geopotential H = r0 Z / (r0 + Z), r0 = 6356766 m (1976 eq. 18).
    h = np.arange(0.0, 11001.0, 250.0)
    levels = [{"pressure_hpa": float(_ussa76_pressure_hpa(z)),
               "temperature_c": float(15.0 - 0.0065 * z), "dewpoint_c": -95.0} for z in h]
    prof = Profile.from_levels(levels, site={"elevation_m": 0.0})
    z_at_p = np.interp(-math.log(p_hpa), -np.log(prof.pressure_hpa), prof.height_m)
    h_expected = 6356766.0 * z_geometric_m / (6356766.0 + z_geometric_m)
    assert z_at_p == pytest.approx(h_expected, abs=3.0)  # 0.01 hPa table rounding ~ 1 m aloft


def test_from_levels_heights_match_metpy_thickness_hydrostatic():
    # MetPy thickness_hydrostatic (hypsometric equation with virtual temperature, Hobbs 2006)
    # for each layer of the moist sounding; tolerance 1 m per layer.
    prof = Profile.from_document({"levels": _levels(), "site": {"elevation_m": 120.0}})
    p = prof.pressure_hpa * units.hPa
    t = prof.temperature_c * units.degC
    w = mpcalc.mixing_ratio(mpcalc.saturation_vapor_pressure(prof.dewpoint_c * units.degC), p)
    for k in range(prof.n_levels - 1):
        layer = slice(k, k + 2)
        dz = mpcalc.thickness_hydrostatic(p[layer], t[layer], mixing_ratio=w[layer]).m_as("m")
        assert prof.height_m[k + 1] - prof.height_m[k] == pytest.approx(dz, abs=1.0)


def test_from_levels_metpy_add_pressure_to_height_style_reference():
    # Starting from the station elevation, MetPy's standard-atmosphere height conversion
    # (pressure_to_height_std, US Standard Atmosphere 1976) agrees on a standard sounding.
    h = np.arange(0.0, 9001.0, 500.0)
    p = _ussa76_pressure_hpa(h)
    levels = [{"pressure_hpa": float(pi), "temperature_c": float(15.0 - 0.0065 * z),
               "dewpoint_c": -95.0}
              for pi, z in zip(p, h)]
    prof = Profile.from_levels(levels, site={"elevation_m": 0.0})
    ref = mpcalc.pressure_to_height_std(p * units.hPa).m_as("m")
    # MetPy's formula uses geometric-height-free constants (T0 288 K, Rd 287 J/kg/K): within 0.5 %.
    np.testing.assert_allclose(prof.height_m[1:], ref[1:], rtol=5e-3)


def test_from_document_heights_from_station_elevation_with_warning():
    prof = Profile.from_document({"levels": _levels(), "site": {"elevation_m": 250.0}})
    assert prof.height_m[0] == 250.0
    assert prof.heights_computed
    assert any("station elevation 250 m" in w for w in prof.warnings)


def test_from_document_heights_from_surface_elevation_preferred():
    prof = Profile.from_document({"levels": _levels(), "site": {"elevation_m": 250.0},
                                  "surface": {"elevation_m": 240.0}})
    assert prof.height_m[0] == 240.0


def test_from_document_heights_from_zero_with_warning():
    prof = Profile.from_document({"levels": _levels()})
    assert prof.height_m[0] == 0.0
    assert any("assuming the lowest level is at 0 m" in w for w in prof.warnings)


def test_from_document_partial_heights_honoured():
    levels = _levels()
    levels[0]["height_m"] = 110.0
    levels[5]["height_m"] = 3010.0
    prof = Profile.from_document({"levels": levels})
    assert prof.height_m[0] == 110.0 and prof.height_m[5] == 3010.0
    assert np.all(np.diff(prof.height_m) > 0)
    assert any("computed hypsometrically at 5 level" in w for w in prof.warnings)


def test_to_document_round_trips():
    prof = Profile.from_document({"levels": _levels(),
                                  "site": {"id": "ALPHA", "elevation_m": 300.0},
                                  "valid_time": "2026-01-14T06:00:00Z"})
    again = Profile.from_document(prof.to_document())
    np.testing.assert_allclose(again.height_m, prof.height_m, atol=0.1)
    assert again.valid_time == prof.valid_time
