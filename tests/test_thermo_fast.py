"""Compiled wet-bulb kernels (ptype.thermo.fast) against the numpy path and reference libraries."""

from __future__ import annotations

import threading

import numpy as np
import pytest

from ptype import thermo
from ptype.errors import OptionError
from ptype.thermo import fast as fastthermo
from ptype.thermo import wetbulb

pytestmark = pytest.mark.skipif(not fastthermo.AVAILABLE, reason="numba not installed")


def _sample(n, seed=0, t_range=(-60.0, 40.0), p_range=(100.0, 1080.0)):
    rng = np.random.default_rng(seed)
    p = rng.uniform(*p_range, n)
    t = rng.uniform(*t_range, n)
    rh = rng.uniform(1.0, 100.0, n)
    td = thermo.dewpoint_from_relative_humidity_c(t, rh)
    return p, t, td


def test_wet_bulb_c_isobaric_matches_numpy_path():
    # Same equation (ASHRAE 2017 ch. 1 eq. 35) solved two ways: the compiled path must agree
    # with the numpy solver to 1e-6 K everywhere, including very dry, very cold and 100 hPa air.
    p, t, td = _sample(50_000)
    fast = fastthermo.wet_bulb_c(p, t, td, kind="isobaric")
    ref = wetbulb._isobaric_wet_bulb_c(p, t, td)
    assert np.max(np.abs(fast - ref)) < 1e-6


def test_wet_bulb_c_adiabatic_matches_numpy_path():
    # Bolton (1980) eq. 39 inverted two ways (closed-form slope here, finite difference in numpy);
    # both stop on a 1e-3 K step, so they agree to well under 1e-5 K.
    p, t, td = _sample(20_000, seed=1, t_range=(-50.0, 40.0), p_range=(300.0, 1080.0))
    fast = fastthermo.wet_bulb_c(p, t, td, kind="adiabatic")
    ref = wetbulb._adiabatic_wet_bulb_c(p, t, td)
    assert np.max(np.abs(fast - ref)) < 1e-5


def test_wet_bulb_c_isobaric_against_psychrolib():
    # psychrolib (Meyer & Thevenard 2019) implements ASHRAE 2017 ch. 1 with the Hyland-Wexler
    # saturation pressure; above 0 degC dew point (where both use liquid water) the only
    # difference is the saturation formula (Alduchov & Eskridge 1996 here), worth ~0.02 K.
    psychrolib = pytest.importorskip("psychrolib")
    psychrolib.SetUnitSystem(psychrolib.SI)
    rng = np.random.default_rng(2)
    t = rng.uniform(5.0, 40.0, 200)
    td = t - rng.uniform(0.0, t - 1.0)
    p = rng.uniform(500.0, 1050.0, 200)
    fast = fastthermo.wet_bulb_c(p, t, td)
    ref = np.array([psychrolib.GetTWetBulbFromTDewPoint(a, b, c * 100.0)
                    for a, b, c in zip(t, td, p)])
    assert np.max(np.abs(fast - ref)) < 0.03


def test_wet_bulb_c_adiabatic_against_metpy():
    # MetPy's wet_bulb_temperature is the Normand (pseudo-adiabatic) wet-bulb, integrated
    # numerically along the moist adiabat; Bolton (1980) states ~0.3 K for his eq. 39.
    mpcalc = pytest.importorskip("metpy.calc")
    from metpy.units import units
    p, t, td = _sample(200, seed=3, t_range=(-30.0, 35.0), p_range=(500.0, 1050.0))
    fast = fastthermo.wet_bulb_c(p, t, td, kind="adiabatic")
    ref = mpcalc.wet_bulb_temperature(p * units.hPa, t * units.degC, td * units.degC).m_as("degC")
    assert np.max(np.abs(fast - ref)) < 0.3


def test_wet_bulb_c_bounds_and_missing_values():
    # Physical invariant: Td <= Tw <= T (e.g. AMS Glossary, "wet-bulb temperature").
    p, t, td = _sample(10_000, seed=4)
    for kind in thermo.WET_BULB_KINDS:
        tw = fastthermo.wet_bulb_c(p, t, td, kind=kind)
        assert np.all(tw <= t) and np.all(tw >= td)
    tw = fastthermo.wet_bulb_c([np.nan, 850.0, 850.0, -5.0], [1.0, np.nan, 1.0, 1.0],
                               [0.0, 0.0, np.nan, 0.0])
    assert np.isnan(tw).all()


def test_wet_bulb_c_saturated_equals_temperature():
    # At saturation the wet-bulb is the air temperature (definition).
    t = np.linspace(-40.0, 35.0, 76)
    tw = fastthermo.wet_bulb_c(np.full(t.shape, 900.0), t, t)
    np.testing.assert_allclose(tw, t, atol=1e-9)


def test_wet_bulb_c_serial_parallel_and_threads_agree():
    p, t, td = _sample(100_000, seed=5)
    serial = fastthermo.wet_bulb_c(p, t, td, parallel=False)
    parallel = fastthermo.wet_bulb_c(p, t, td, parallel=True)
    np.testing.assert_array_equal(serial, parallel)
    # From worker threads the serial loop is chosen; results are identical.
    results = {}

    def work(i):
        results[i] = fastthermo.wet_bulb_c(p, t, td)

    threads = [threading.Thread(target=work, args=(i,)) for i in range(2)]
    for th in threads:
        th.start()
    for th in threads:
        th.join()
    for i in range(2):
        np.testing.assert_array_equal(results[i], serial)


def test_wet_bulb_c_broadcasts_and_keeps_shape():
    tw = fastthermo.wet_bulb_c(np.array([[1000.0], [850.0]]), np.array([5.0, 0.0, -5.0]), -10.0)
    assert tw.shape == (2, 3)
    assert np.isscalar(fastthermo.wet_bulb_c(1000.0, 10.0, 5.0)) or \
        np.ndim(fastthermo.wet_bulb_c(1000.0, 10.0, 5.0)) == 0


def test_wet_bulb_c_rejects_unknown_kind():
    # The same check and message as the numpy path (ptype.thermo.kinds).
    with pytest.raises(OptionError) as info:
        fastthermo.wet_bulb_c(1000.0, 10.0, 5.0, kind="iced")
    assert str(info.value) == "kind = 'iced': expected one of isobaric, adiabatic"
    assert info.value.field == "kind"


def test_wet_bulb_temperature_dispatches_large_arrays_to_compiled_path():
    p, t, td = _sample(wetbulb._FAST_MIN_SIZE * 2, seed=6)
    td[::7] = np.nan
    out = thermo.wet_bulb_temperature(p, t, td)
    ok = np.isfinite(td)
    np.testing.assert_array_equal(out[ok], fastthermo.wet_bulb_c(p[ok], t[ok], td[ok]))
    assert np.isnan(out[~ok]).all()
    assert np.max(np.abs(out[ok] - wetbulb._isobaric_wet_bulb_c(p[ok], t[ok], td[ok]))) < 1e-6


def test_wet_bulbs_c_equals_each_kind_and_both_paths():
    # Consistency: the fused pass (shared es(Td), isobaric value as the adiabatic start) gives
    # bit for bit what the one-kind kernels give, through thermo.wet_bulb_temperatures too, and
    # NaN where an input is missing or p <= 0; the numpy solvers agree as in the tests above.
    p, t, td = _sample(30_000, seed=8, t_range=(-50.0, 40.0), p_range=(300.0, 1080.0))
    td[::11] = np.nan
    p[::13] = -1.0
    iso, adi = fastthermo.wet_bulbs_c(p, t, td, parallel=False)
    np.testing.assert_array_equal(iso, fastthermo.wet_bulb_c(p, t, td, "isobaric", parallel=True))
    np.testing.assert_array_equal(adi, fastthermo.wet_bulb_c(p, t, td, "adiabatic", parallel=True))
    for a, b in zip(thermo.wet_bulb_temperatures(p, t, td), (iso, adi)):
        np.testing.assert_array_equal(a, b)
    ok = np.isfinite(td) & (p > 0)
    assert np.isnan(iso[~ok]).all() and np.isnan(adi[~ok]).all()
    assert np.max(np.abs(adi[ok] - wetbulb._adiabatic_wet_bulb_c(p[ok], t[ok], td[ok]))) < 1e-5
    small = thermo.wet_bulb_temperatures(p[:20], t[:20], td[:20])  # numpy path below the threshold
    np.testing.assert_array_equal(small[1], thermo.wet_bulb_temperature(p[:20], t[:20], td[:20],
                                                                         kind="adiabatic"))


def test_block_exponential_matches_numpy_exp_over_its_range():
    # The vectorised solver's own exponential (Taylor series of exp(a/32), squared five times)
    # against numpy's exp over the whole argument range it is used on, B T / (T + C) for
    # T in [-100, 60] degC with the Alduchov & Eskridge (1996) constants.
    a = np.linspace(-12.4, 3.5, 200_001)
    approx = np.array([fastthermo._exp_block(v) for v in a[::97]])
    np.testing.assert_allclose(approx, np.exp(a[::97]), rtol=1e-14, atol=0.0)


def test_blocked_isobaric_solver_equals_scalar_solver_and_leaves_hard_points_to_it():
    # Two routes to the same root: the blocked two-step Halley solver and the per-point scalar
    # solver (same formulas, same bracket, same stopping rule) agree to 1e-11 K; points outside
    # the blocked solver's range (Td < -100 degC, T > 60 degC, p > 1100 hPa) or missing are
    # flagged and solved by the scalar solver, so they are equal bit for bit.
    p, t, td = _sample(40_000, seed=9, t_range=(-90.0, 45.0), p_range=(50.0, 1080.0))
    p[:50], t[50:100], td[100:150], td[150:160] = 1150.0, 70.0, -120.0, np.nan
    out = np.empty(p.size)
    pending = np.empty(p.size, dtype=np.uint8)
    fastthermo._isobaric_blocks_serial(p, t, td, out, pending)
    assert pending[:160].all()
    # Only very dry air (RH of a few per cent) needs a third step: a few per cent of this
    # population, whose RH goes down to 1 %; none of the benchmark's (RH >= 10 %).
    assert np.count_nonzero(pending[160:]) <= 0.05 * (p.size - 160)
    fastthermo._isobaric_pending(p, t, td, out, pending)
    scalar = np.array([fastthermo._isobaric_point(a, b, c) for a, b, c in zip(p, t, td)])
    np.testing.assert_array_equal(out[:150], scalar[:150])
    assert np.isnan(out[150:160]).all()
    assert np.max(np.abs(out[160:] - scalar[160:])) < 1e-11


def test_block_logarithm_matches_numpy_log_over_its_range():
    # The vectorised solver's own logarithm (power-of-two scaling, then 2 atanh((y-1)/(y+1)))
    # against numpy's log over its whole range [1/64, 64] and the kelvin variant over 64..16384 K.
    y = np.geomspace(1.0 / 64.0, 64.0, 4001)
    approx = np.array([fastthermo._log_block(v) for v in y])
    np.testing.assert_allclose(approx, np.log(y), rtol=2e-15, atol=2e-16)
    t_k = np.linspace(150.0, 350.0, 2001)
    approx = np.array([fastthermo._log_kelvin_block(v) for v in t_k])
    np.testing.assert_allclose(approx, np.log(t_k), rtol=2e-15)


def test_blocked_adiabatic_solver_equals_per_point_solver():
    # Bolton (1980) eq. 39 inverted two ways from the same isobaric start: the blocked two-step
    # Newton solver and the per-point solver agree to 1e-9 K where the blocked one finished;
    # the points it left (out of range, missing, or needing a third step) are the per-point
    # solver's own results, bit for bit.
    p, t, td = _sample(40_000, seed=10, t_range=(-90.0, 45.0), p_range=(10.0, 1080.0))
    td[:20] = np.nan
    iso = fastthermo.wet_bulb_c(p, t, td, parallel=False)
    out = np.empty(p.size)
    pending = np.empty(p.size, dtype=np.uint8)
    fastthermo._adiabatic_blocks_serial(p, t, td, iso, out, pending)
    # This population includes air no atmosphere holds (40 degC at 20 hPa), which is left to
    # the per-point solver; a fifth of it at most.
    assert pending[:20].all() and np.count_nonzero(pending) < 0.25 * p.size
    fastthermo._adiabatic_pending(p, t, td, iso, out, pending)
    ref = np.array([fastthermo._adiabatic_from_isobaric(*v) for v in zip(p, t, td, iso)])
    left = pending.astype(bool)
    np.testing.assert_array_equal(out[left], ref[left])
    assert np.max(np.abs(out[~left] - ref[~left])) < 1e-9
