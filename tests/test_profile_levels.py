"""The stages from level mappings to profile arrays (ptype/profile/levels.py), one at a time.

Each stage is called on its own: columns, checks, dew points, order, heights.  Conversions
are checked against MetPy and psychrolib, heights against the hypsometric equation worked
by hand (Wallace & Hobbs 2006, eq. 3.29), and messages for the level, field, value and
expectation they name.
"""

from __future__ import annotations

import math

import metpy.calc as mpcalc
import numpy as np
import psychrolib
import pytest
from metpy.units import units

from ptype.errors import ProfileError
from ptype.profile import levels as L

#: Invented levels (not an observation), given top first to exercise the ordering.
LEVELS = [
    {"pressure_hpa": 700.0, "temperature_c": -6.0, "dewpoint_c": -9.0},
    {"pressure_hpa": 850.0, "temperature_c": 3.0, "dewpoint_c": 2.0},
    {"pressure_hpa": 1000.0, "temperature_c": -1.0, "dewpoint_c": -2.0},
]


def _cols(levels=None):
    return L.level_columns(LEVELS if levels is None else levels)


# -- 1. columns ----------------------------------------------------------------------------------

def test_level_columns_gives_one_array_per_field_nan_where_absent():
    cols = _cols()
    assert set(cols) == set(L.LEVEL_FIELDS)
    np.testing.assert_array_equal(cols["pressure_hpa"], [700.0, 850.0, 1000.0])
    assert np.isnan(cols["relative_humidity_pct"]).all() and np.isnan(cols["height_m"]).all()


def test_level_columns_fast_and_checked_paths_agree():
    # numpy integers take the level-by-level path; the values must not depend on the path.
    mixed = [dict(lvl, pressure_hpa=np.int64(lvl["pressure_hpa"])) for lvl in LEVELS]
    fast, checked = _cols(), _cols(mixed)
    for name in L.LEVEL_FIELDS:
        np.testing.assert_array_equal(fast[name], checked[name])


@pytest.mark.parametrize("value, expected", [("850", "= '850': expected a number"),
                                             (True, "= True: expected a number"),
                                             (math.inf, "= inf: expected a finite number")])
def test_level_columns_names_the_bad_value(value, expected):
    levels = [dict(lvl) for lvl in LEVELS]
    levels[1]["pressure_hpa"] = value
    with pytest.raises(ProfileError) as info:
        L.level_columns(levels, "case: ")
    assert str(info.value) == f"case: levels[1].pressure_hpa {expected}"
    assert info.value.field == "levels[1].pressure_hpa"


def test_level_columns_refuses_no_levels_and_unknown_fields():
    with pytest.raises(ProfileError, match="no levels given; expected at least 3"):
        L.level_columns([])
    with pytest.raises(ProfileError, match=r"levels\[0\]: unknown field\(s\) rh; accepted: "):
        L.level_columns([{"pressure_hpa": 900.0, "temperature_c": 1.0, "rh": 50.0}])


# -- 2-4. checks ---------------------------------------------------------------------------------

def test_check_levels_accepts_plausible_levels():
    L.check_levels(_cols())  # no exception


@pytest.mark.parametrize("change, message", [
    ({"pressure_hpa": None}, "levels[1].pressure_hpa: required field is missing"),
    ({"pressure_hpa": 1100.5},
     "levels[1].pressure_hpa = 1100.5: expected 0 < pressure <= 1100 hPa"),
    ({"temperature_c": 60.5},
     "levels[1] (850 hPa).temperature_c = 60.5: expected -100 to +60 degC"),
    ({"relative_humidity_pct": 90.0},
     ("levels[1] (850 hPa): humidity given as both dewpoint_c and relative_humidity_pct; "
      "expected exactly one form")),
])
def test_check_levels_names_the_first_bad_level(change, message):
    levels = [dict(lvl) for lvl in LEVELS]
    levels[1].update(change)
    with pytest.raises(ProfileError) as info:
        L.check_levels(L.level_columns(levels))
    assert str(info.value) == message


def test_check_distinct_duplicates_and_count():
    with pytest.raises(ProfileError, match=r"levels\[0\] and levels\[2\]: duplicate pressure_hpa = "
                                           "900; expected each pressure once"):
        L.check_distinct(np.array([900.0, 800.0, 900.0]))
    with pytest.raises(ProfileError, match="2 distinct level"):
        L.check_distinct(np.array([900.0, 800.0]))
    L.check_distinct(np.array([900.0, 800.0, 700.0]))


def test_check_not_boiling_at_half_the_pressure():
    # Saturation vapour pressure over water at 60 degC is about 199 hPa (19.9 kPa: Wagner &
    # Pruss / IAPWS tables, from memory), so 60 degC air is refused at 350 hPa (limit half the
    # pressure, ours) and accepted at 450 hPa.
    p = np.array([1000.0, 450.0, 350.0])
    t = np.array([20.0, 60.0, 60.0])
    with pytest.raises(ProfileError) as info:
        L.check_not_boiling(p, t)
    assert str(info.value).startswith("levels[2] (350 hPa).temperature_c = 60: too warm")
    assert info.value.field == "levels[2].temperature_c"
    L.check_not_boiling(p[:2], t[:2])


# -- 5. humidity ---------------------------------------------------------------------------------

def _one_level(**humidity):
    return L.level_columns([{"pressure_hpa": 850.0, "temperature_c": 4.0, **humidity}])


def test_dewpoints_plain_dewpoints_pass_through():
    warnings: list[str] = []
    td = L.dewpoints(_cols(), warnings)
    np.testing.assert_array_equal(td, [-9.0, 2.0, -2.0])
    assert warnings == []


def test_dewpoints_from_relative_humidity_match_metpy():
    # MetPy dewpoint_from_relative_humidity (Bolton 1980 inverted); ptype inverts Alduchov &
    # Eskridge (1996): the two differ by well under 0.1 degC at these temperatures.
    td = L.dewpoints(_one_level(relative_humidity_pct=72.0), [])
    ref = mpcalc.dewpoint_from_relative_humidity(4.0 * units.degC, 72.0 * units.percent)
    assert td[0] == pytest.approx(ref.m_as("degC"), abs=0.1)


def test_dewpoints_from_mixing_ratio_match_metpy():
    # MetPy: vapor_pressure(p, w) then dewpoint (Bolton 1980); tolerance 0.1 degC as above.
    td = L.dewpoints(_one_level(mixing_ratio_g_kg=4.5), [])
    e = mpcalc.vapor_pressure(850.0 * units.hPa, 4.5 * units("g/kg"))
    assert td[0] == pytest.approx(mpcalc.dewpoint(e).m_as("degC"), abs=0.1)


def test_dewpoints_from_wetbulb_match_psychrolib():
    # psychrolib GetTDewPointFromTWetBulb (ASHRAE 2017 ch. 1, Hyland-Wexler); above-freezing
    # bulb, so both use liquid water; tolerance 0.1 degC.
    psychrolib.SetUnitSystem(psychrolib.SI)
    td = L.dewpoints(_one_level(wetbulb_c=2.5), [])
    assert td[0] == pytest.approx(psychrolib.GetTDewPointFromTWetBulb(4.0, 2.5, 85000.0),
                                  abs=0.1)


def test_dewpoints_clamp_with_a_warning_and_refuse_beyond_tolerance():
    warnings: list[str] = []
    td = L.dewpoints(_one_level(relative_humidity_pct=103.0), warnings)
    assert td[0] == pytest.approx(4.0, abs=1e-9)  # RH 100 %: dew point = temperature
    assert warnings[0] == "levels[0] (850 hPa): relative humidity 103 % clamped to 100 %"
    warnings = []
    assert L.dewpoints(_one_level(dewpoint_c=4.3), warnings)[0] == 4.0
    assert "dew point 4.3 degC above temperature by 0.30 degC, clamped" in warnings[0]
    with pytest.raises(ProfileError, match=r"levels\[0\] \(850 hPa\)\.dewpoint_c = 4\.6: above "):
        L.dewpoints(_one_level(dewpoint_c=4.6), [])


def test_dewpoints_nan_where_no_humidity():
    td = L.dewpoints(_one_level(), [])
    assert np.isnan(td).all()


# -- 6. order ------------------------------------------------------------------------------------

def test_surface_to_top_orders_and_fills_humidity_in_ln_p():
    levels = [{"pressure_hpa": 800.0, "temperature_c": 0.0, "dewpoint_c": -6.0},
              {"pressure_hpa": 900.0, "temperature_c": 5.0},
              {"pressure_hpa": 1000.0, "temperature_c": 10.0, "dewpoint_c": 8.0}]
    cols = L.level_columns(levels)
    warnings: list[str] = []
    order, p, t, td, z = L.surface_to_top(cols, L.dewpoints(cols, warnings), warnings)
    np.testing.assert_array_equal(order, [2, 1, 0])
    np.testing.assert_array_equal(p, [1000.0, 900.0, 800.0])
    # Depression 2 K at 1000 hPa and 6 K at 800 hPa, linear in ln p (ours):
    # 2 + 4 ln(1000/900) / ln(1000/800) = 3.8886 K, worked by hand.
    assert t[1] - td[1] == pytest.approx(3.8886, abs=1e-4)
    assert warnings == [("humidity missing at 1 level(s); filled by interpolating the "
                         "dew-point depression in ln p")]
    assert np.isnan(z).all()


def test_surface_to_top_refuses_a_profile_without_humidity():
    cols = L.level_columns([{"pressure_hpa": p, "temperature_c": 0.0} for p in (900.0, 800.0)])
    with pytest.raises(ProfileError, match="humidity missing at every level"):
        L.surface_to_top(cols, L.dewpoints(cols, []), [])


# -- 7. heights ----------------------------------------------------------------------------------

def _isothermal(n_given=0):
    p = np.array([1000.0, 900.0, 800.0])
    t = np.zeros(3)
    td = np.full(3, -95.0)  # dry: virtual temperature = temperature
    z = np.full(3, np.nan)
    z[:n_given] = [100.0, 950.0][:n_given]
    return p, t, td, z


#: Hypsometric thickness of an isothermal dry layer at 0 degC (Wallace & Hobbs 2006,
#: eq. 3.29): Rd T0 / g0 ln(p1 / p2) with Rd = 287.04, g0 = 9.80665, worked by hand.
DZ_1000_900 = 287.04 * 273.15 / 9.80665 * math.log(1000.0 / 900.0)   # 842.35 m
DZ_900_800 = 287.04 * 273.15 / 9.80665 * math.log(900.0 / 800.0)     # 941.68 m


def test_complete_heights_from_the_station_elevation():
    warnings: list[str] = []
    z, computed = L.complete_heights(*_isothermal(), 250.0, warnings)
    assert computed
    np.testing.assert_allclose(z, [250.0, 250.0 + DZ_1000_900,
                                   250.0 + DZ_1000_900 + DZ_900_800], atol=0.05)
    assert warnings == ["heights computed hypsometrically from the station elevation 250 m"]


def test_complete_heights_anchored_on_given_ones():
    warnings: list[str] = []
    z, computed = L.complete_heights(*_isothermal(n_given=2), None, warnings)
    # The offset of the highest given level carries up: 950 + the 900-800 hPa thickness.
    np.testing.assert_allclose(z, [100.0, 950.0, 950.0 + DZ_900_800], atol=0.05)
    assert computed and "at 1 level(s) from the given ones" in warnings[0]


def test_complete_heights_given_everywhere_untouched_and_must_rise():
    p, t, td, _ = _isothermal()
    z, computed = L.complete_heights(p, t, td, np.array([10.0, 900.0, 1800.0]), None, [])
    assert not computed and z.tolist() == [10.0, 900.0, 1800.0]
    with pytest.raises(ProfileError) as info:
        L.complete_heights(p, t, td, np.array([10.0, 900.0, 800.0]), None, [],
                           order=np.array([2, 1, 0]))
    assert str(info.value) == ("levels[0] (800 hPa).height_m = 800: expected above levels[1] "
                               "(900 hPa) at 900 m, since pressure decreases with height")


def test_complete_heights_without_elevation_starts_at_zero():
    warnings: list[str] = []
    z, _ = L.complete_heights(*_isothermal(), None, warnings)
    assert z[0] == 0.0 and "assuming the lowest level is at 0 m" in warnings[0]
