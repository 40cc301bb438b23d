"""Thermodynamics checked against outside references (each check names its source)."""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from ptype import thermo
from ptype.errors import OptionError
from ptype.thermo import wetbulb

# --- saturation vapour pressure -----------------------------------------------------------

def test_saturation_vapor_pressure_triple_point():
    # IAPWS (Wagner & Pruss 2002; Wagner et al. 2011): triple point of water 273.16 K,
    # 611.657 Pa, where the water and ice curves meet.
    mk = thermo.saturation_vapor_pressure_murphy_koop_hpa
    assert mk(0.01, "water") == pytest.approx(6.11657, rel=2e-4)
    assert mk(0.01, "ice") == pytest.approx(6.11657, rel=2e-4)
    # Alduchov & Eskridge (1996) forms: within their stated accuracy (well under 0.1 % here).
    assert thermo.saturation_vapor_pressure_hpa(0.01, "water") == pytest.approx(6.11657, rel=1e-3)
    assert thermo.saturation_vapor_pressure_hpa(0.01, "ice") == pytest.approx(6.11657, rel=1e-3)


def test_saturation_vapor_pressure_boiling_point():
    # Murphy & Koop (2005) eq. 10 is valid to 332 K; at the normal boiling point (100 degC)
    # water's vapour pressure is 1013.25 hPa by definition of the (ITS-90-near) boiling point;
    # eq. 10 is not fitted there, so we only check 60 degC against the ASHRAE Handbook—Fundamentals
    # (2017) ch. 1 Table 3 value 19.946 kPa (via psychrolib, which implements that chapter).
    import psychrolib
    psychrolib.SetUnitSystem(psychrolib.SI)
    ref_hpa = psychrolib.GetSatVapPres(60.0) / 100.0
    mk = thermo.saturation_vapor_pressure_murphy_koop_hpa
    assert mk(60.0) == pytest.approx(ref_hpa, rel=1e-3)


@pytest.mark.parametrize("phase,lo,hi", [("water", -40.0, 50.0), ("ice", -80.0, 0.0)])
def test_saturation_vapor_pressure_alduchov_eskridge_vs_murphy_koop(phase, lo, hi):
    # Alduchov & Eskridge (1996), Table 3: relative error of AERK/AERKi under about 0.4 %
    # in these ranges (the 0.4 % figure is from memory); Murphy & Koop (2005) is the reference.
    t = np.linspace(lo, hi, 200)
    ae = thermo.saturation_vapor_pressure_hpa(t, phase)
    mk = thermo.saturation_vapor_pressure_murphy_koop_hpa(t, phase)
    assert np.max(np.abs(ae / mk - 1.0)) < 0.004


def test_saturation_vapor_pressure_against_psychrolib_over_water():
    # ASHRAE Handbook—Fundamentals (2017) ch. 1 eq. 6 (Hyland & Wexler 1983), as implemented by
    # psychrolib, for T >= 0.01 degC where ASHRAE uses liquid water.
    import psychrolib
    psychrolib.SetUnitSystem(psychrolib.SI)
    for t in np.linspace(1.0, 45.0, 12):
        ref = psychrolib.GetSatVapPres(float(t)) / 100.0
        # Within the Alduchov & Eskridge (1996) stated accuracy (0.4 %, from memory).
        assert thermo.saturation_vapor_pressure_hpa(t) == pytest.approx(ref, rel=4e-3)


# --- humidity conversions -----------------------------------------------------------------

def test_relative_humidity_roundtrip():
    t = np.array([-30.0, -5.0, 0.0, 12.0, 30.0])
    rh = np.array([20.0, 55.0, 80.0, 99.0, 100.0])
    td = thermo.dewpoint_from_relative_humidity_c(t, rh)
    assert np.allclose(thermo.relative_humidity_pct(t, td), rh, atol=1e-9)


def test_mixing_ratio_against_metpy():
    # MetPy mixing_ratio_from_relative_humidity / saturation_mixing_ratio (reference library).
    import metpy.calc as mpcalc
    from metpy.units import units
    p = np.array([1000.0, 850.0, 500.0])
    td = np.array([10.0, 0.0, -30.0])
    ref = mpcalc.saturation_mixing_ratio(p * units.hPa, td * units.degC).to("g/kg").m
    # MetPy uses Bolton (1980) for e_s; the Magnus forms differ by < 0.3 % here.
    assert np.allclose(thermo.mixing_ratio_g_kg(p, td), ref, rtol=3e-3)


def test_dewpoint_from_mixing_ratio_inverse():
    p = np.array([1000.0, 700.0, 400.0])
    td = np.array([15.0, -5.0, -35.0])
    w = thermo.mixing_ratio_g_kg(p, td)
    assert np.allclose(thermo.dewpoint_from_mixing_ratio_c(p, w), td, atol=1e-9)


def test_virtual_temperature_against_metpy():
    import metpy.calc as mpcalc
    from metpy.units import units
    p = np.array([1000.0, 850.0])
    t = np.array([25.0, 5.0])
    td = np.array([20.0, 0.0])
    rh = mpcalc.relative_humidity_from_dewpoint(t * units.degC, td * units.degC)
    w = mpcalc.mixing_ratio_from_relative_humidity(p * units.hPa, t * units.degC, rh)
    ref = mpcalc.virtual_temperature(t * units.degC, w).to("degC").m
    assert np.allclose(thermo.virtual_temperature_c(p, t, td), ref, atol=0.03)


def test_hypsometric_thickness_against_metpy():
    # MetPy thickness_hydrostatic (reference library): 1000-500 hPa of a sample column.
    import metpy.calc as mpcalc
    from metpy.units import units
    p = np.array([1000.0, 925.0, 850.0, 700.0, 500.0])
    t = np.array([10.0, 6.0, 2.0, -8.0, -25.0])
    td = t - 3.0
    z = thermo.hypsometric_heights_m(p, t, td, 0.0)
    rh = mpcalc.relative_humidity_from_dewpoint(t * units.degC, td * units.degC)
    w = mpcalc.mixing_ratio_from_relative_humidity(p * units.hPa, t * units.degC, rh)
    ref = mpcalc.thickness_hydrostatic(p * units.hPa, t * units.degC, mixing_ratio=w).to("m").m
    # MetPy integrates the log-pressure-weighted mean Tv; we use the layer trapezoid: < 3 m in
    # 5.5 km.
    assert z[-1] == pytest.approx(ref, abs=3.0)


# --- wet-bulb --------------------------------------------------------------------------------

def test_wet_bulb_psychrometric_table_fact():
    # Common practice psychrometric tables: dry bulb 19 degC, wet bulb 13 degC at sea-level
    # pressure is about 51 % relative humidity.
    rh = thermo.psychrometer_relative_humidity_pct(19.0, 13.0, 1013.25)
    assert rh == pytest.approx(51.0, abs=1.5)
    td = thermo.psychrometer_dewpoint_c(19.0, 13.0, 1013.25)
    assert thermo.wet_bulb_temperature(1013.25, 19.0, td) == pytest.approx(13.0, abs=1e-3)


def test_wet_bulb_against_psychrolib_above_freezing():
    # ASHRAE Handbook—Fundamentals (2017) ch. 1 thermodynamic wet-bulb via psychrolib, Tw >= 0:
    # agreement within 0.05 degC.  psychrolib reads dew points below 0 degC as frost points, so we
    # hand it the humidity ratio instead of the dew point.
    import psychrolib
    psychrolib.SetUnitSystem(psychrolib.SI)
    rng = np.random.default_rng(7)
    t = rng.uniform(2.0, 40.0, 200)
    td = t - rng.uniform(0.0, 25.0, 200)
    p = rng.uniform(700.0, 1030.0, 200)
    w = thermo.mixing_ratio_g_kg(p, td) / 1000.0
    ref = np.array([psychrolib.GetTWetBulbFromHumRatio(float(a), float(b), float(c) * 100.0)
                    for a, b, c in zip(t, w, p)])
    ours = thermo.wet_bulb_temperature(p, t, td)
    mask = ref >= 0.0
    assert mask.sum() > 100
    assert np.max(np.abs(ours[mask] - ref[mask])) < 0.05


def test_wet_bulb_against_metpy_pseudo_adiabatic():
    # MetPy wet_bulb_temperature follows Normand's rule (lift to the LCL, descend the moist
    # adiabat).  Our adiabatic kind inverts Bolton's (1980) theta_e, accurate to ~0.3 K, so we
    # allow 0.3 K.  The isobaric wet-bulb is a different quantity: it stays within 0.5 K of the
    # pseudo-adiabatic one over this range (the difference grows with dryness and warmth).
    import metpy.calc as mpcalc
    from metpy.units import units
    rng = np.random.default_rng(3)
    n = 60
    p = rng.uniform(500.0, 1030.0, n)
    t = rng.uniform(-30.0, 30.0, n)
    td = t - rng.uniform(0.0, 20.0, n)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        ref = mpcalc.wet_bulb_temperature(p * units.hPa, t * units.degC,
                                          td * units.degC).to("degC").m
    adi = thermo.wet_bulb_temperature(p, t, td, kind="adiabatic")
    iso = thermo.wet_bulb_temperature(p, t, td, kind="isobaric")
    assert np.max(np.abs(adi - ref)) < 0.3
    assert np.max(np.abs(iso - ref)) < 0.5


def test_wet_bulb_stull_2011_error_band():
    # Stull (2011), J. Appl. Meteor. Climatol. 50, 2267: at 101.325 kPa his empirical fit errs
    # within about 1 degC (band -1 to +0.65 degC; which side is which is from memory, so we test
    # the magnitude), mean absolute error under 0.3 degC, for RH 5-99 % and T -20..50 degC except
    # when both cold and dry.  Worked value: T = 20 degC, RH = 50 % -> 13.7 degC.
    def stull(t, rh):
        return (t * np.arctan(0.151977 * np.sqrt(rh + 8.313659)) + np.arctan(t + rh)
                - np.arctan(rh - 1.676331) + 0.00391838 * rh ** 1.5 * np.arctan(0.023101 * rh)
                - 4.686035)

    assert stull(20.0, 50.0) == pytest.approx(13.7, abs=0.01)
    t, rh = np.meshgrid(np.linspace(-20.0, 50.0, 71), np.linspace(10.0, 99.0, 90))
    keep = (t >= 0.0) | (rh >= 50.0)
    ours = thermo.wet_bulb_temperature(1013.25, t, thermo.dewpoint_from_relative_humidity_c(t, rh))
    err = (stull(t, rh) - ours)[keep]
    assert np.max(np.abs(err)) < 1.0 + 0.15  # 0.15 degC allowance for our own e_s formula
    # His MAE (0.28 degC) is over his own table's points; a uniform grid weights the hot/dry and
    # cold corners more, so we allow 0.4 degC.
    assert np.mean(np.abs(err)) < 0.4
    td_20_50 = thermo.dewpoint_from_relative_humidity_c(20.0, 50.0)
    assert thermo.wet_bulb_temperature(1013.25, 20.0, td_20_50) == pytest.approx(13.7, abs=0.3)


def test_wet_bulb_saturated_equals_temperature():
    t = np.array([-20.0, 0.0, 15.0])
    assert np.allclose(thermo.wet_bulb_temperature(900.0, t, t), t, atol=1e-6)
    assert np.allclose(thermo.wet_bulb_temperature(900.0, t, t, kind="adiabatic"), t, atol=1e-3)


def test_wet_bulb_nan_propagates_and_shape_kept():
    out = thermo.wet_bulb_temperature(np.full((2, 3), 850.0),
                                      [[1.0, np.nan, 3.0], [0.0, 1.0, 2.0]], -5.0)
    assert out.shape == (2, 3)
    assert np.isnan(out[0, 1]) and np.isfinite(out[1]).all()


@pytest.mark.parametrize("values", [(1000.0, 10.0, 5.0), (np.nan, np.nan, np.nan),
                                    (np.zeros(0), np.zeros(0), np.zeros(0))])
def test_wet_bulb_unknown_kind_raises_option_error(values):
    # Refused whatever the data, even when no point would be solved.
    with pytest.raises(OptionError) as info:
        thermo.wet_bulb_temperature(*values, kind="frosty")
    assert str(info.value) == "kind = 'frosty': expected one of isobaric, adiabatic"
    assert info.value.field == "kind" and isinstance(info.value, ValueError)


def test_wet_bulb_kinds_named_once():
    assert thermo.WET_BULB_KINDS == ("isobaric", "adiabatic")
    for kind in thermo.WET_BULB_KINDS:
        assert np.isfinite(thermo.wet_bulb_temperature(900.0, 2.0, -1.0, kind=kind))
        assert thermo.check_wet_bulb_kind(kind) == kind
    with pytest.raises(OptionError, match="^wetbulb = 'wet'"):
        thermo.check_wet_bulb_kind("wet", field="wetbulb")


def test_saturation_vapor_pressure_unknown_phase_raises_option_error():
    with pytest.raises(OptionError, match="^phase = 'slush': expected 'water' or 'ice'"):
        thermo.saturation_vapor_pressure_hpa(0.0, phase="slush")
    with pytest.raises(OptionError, match="^phase = 'slush'"):
        thermo.saturation_vapor_pressure_murphy_koop_hpa(0.0, phase="slush")


@settings(max_examples=300, deadline=None)
@given(p=st.floats(200.0, 1100.0), t=st.floats(-90.0, 55.0), dep=st.floats(0.0, 60.0),
       kind=st.sampled_from(thermo.WET_BULB_KINDS))
def test_wet_bulb_between_dewpoint_and_temperature(p, t, dep, kind):
    # Physical bound (AMS Glossary, "wet-bulb temperature"): Td <= Tw <= T, always finite.
    td = t - dep
    tw = float(thermo.wet_bulb_temperature(p, t, td, kind=kind))
    assert np.isfinite(tw)
    assert td - 1e-6 <= tw <= t + 1e-6


@settings(max_examples=200, deadline=None)
@given(p=st.floats(300.0, 1050.0), t=st.floats(-40.0, 40.0), dep=st.floats(0.5, 30.0),
       bump=st.floats(0.01, 5.0))
def test_wet_bulb_monotonic_in_temperature_and_humidity(p, t, dep, bump):
    # Common practice: at fixed dew point, warmer air has a higher wet-bulb; at fixed
    # temperature, moister air (higher dew point) has a higher wet-bulb.
    td = t - dep
    base = thermo.wet_bulb_temperature(p, t, td)
    assert thermo.wet_bulb_temperature(p, t + bump, td) >= base - 1e-6
    assert thermo.wet_bulb_temperature(p, t, min(td + bump, t)) >= base - 1e-6


def test_wet_bulb_newton_converged():
    # The stopping rule (largest step < 1e-3 K) leaves errors far below 1e-4 K.
    rng = np.random.default_rng(11)
    p = rng.uniform(300.0, 1050.0, 20000)
    t = rng.uniform(-40.0, 30.0, 20000)
    td = t - rng.uniform(0.0, 30.0, 20000)
    fast = wetbulb._isobaric_wet_bulb_c(p, t, td)
    tight = wetbulb._isobaric_wet_bulb_c(p, t, td, step_tolerance_k=0.0, max_iter=60)
    assert np.max(np.abs(fast - tight)) < 1e-4


def test_psychrometer_iced_bulb_drier_than_liquid_bulb():
    # ASHRAE (2017) ch. 1 eq. 37 vs eq. 35: ice has the lower saturation vapour pressure, so the
    # same wet-bulb depression read on an iced bulb means less vapour, a lower dew point.
    td_ice = thermo.psychrometer_dewpoint_c(-2.0, -4.0, 1000.0, iced_bulb=True)
    td_liq = thermo.psychrometer_dewpoint_c(-2.0, -4.0, 1000.0, iced_bulb=False)
    assert td_ice < td_liq


def test_lcl_temperature_against_metpy():
    # MetPy lcl (iterative) vs Bolton (1980) eq. 15: within 0.1 K.
    import metpy.calc as mpcalc
    from metpy.units import units
    _, t_lcl = mpcalc.lcl(1000.0 * units.hPa, 20.0 * units.degC, 10.0 * units.degC)
    assert thermo.lcl_temperature_c(20.0, 10.0) == pytest.approx(t_lcl.to("degC").m, abs=0.1)
