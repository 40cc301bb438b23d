"""Tests of ptype.engine.methods.czys against Czys et al. (1996) (docs/methods.md).

The melting time is the textbook form t_m = rho_i L_f r0^2 / (2 f [K_a dT + L_v D_v d_rho_v])
(Mason 1971; Pruppacher & Klett 1997 -- from memory, unverified);
tau = (depth / fall speed) / t_m; tau >= 1 -> FZRA, tau < 1 -> PL, on three-layer profiles
only (Rauber et al. 2001).  Expected values are recomputed here from those formulas with
textbook constants (from memory), independently of the module's code.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from ptype.codes import NO_RESULT, Code
from ptype.engine.columns import Columns
from ptype.engine.methods import czys, get_method
from ptype.engine.methods.base import Context
from ptype.errors import OptionError

# Textbook constants near 0 degC (from memory, [M]): rho_i, L_f, L_v, K_a.
RHO_I, LF, LV, KA = 917.0, 3.34e5, 2.5e6, 0.024
RD, RV, T0 = 287.04, 461.5, 273.15


def independent_tau(depth_m, excess_c, pressure_hpa, radius_m, d_rho_v=0.0):
    """tau from the published forms, written out step by step (values from memory marked [M])."""
    t_k = T0 + excess_c
    rho = pressure_hpa * 100.0 / (RD * t_k)
    d_mm = 2e3 * radius_m
    v = (9.65 - 10.3 * math.exp(-0.6 * d_mm)) * (1.204 / rho) ** 0.4  # Atlas et al. 1973 [M]
    mu = 1.458e-6 * t_k ** 1.5 / (t_k + 110.4)                        # USSA 1976 Sutherland
    re = rho * v * 2 * radius_m / mu
    x = 0.6 ** (1 / 3) * math.sqrt(re)
    f = 1 + 0.108 * x * x if x < 1.4 else 0.78 + 0.308 * x             # P&K 1997 [M]
    dv = 2.11e-5 * (t_k / T0) ** 1.94 * 1013.25 / pressure_hpa          # P&K 1997 [M]
    t_m = RHO_I * LF * radius_m ** 2 / (2 * f * (KA * excess_c + LV * dv * d_rho_v))
    return (depth_m / v) / t_m


def run(p, t, td=None, z=None, **kw):
    t = np.atleast_2d(np.asarray(t, dtype=float))
    td = t if td is None else np.atleast_2d(np.asarray(td, dtype=float))
    p = np.broadcast_to(np.asarray(p, dtype=float), t.shape)
    zz = None if z is None else np.broadcast_to(np.asarray(z, dtype=float), t.shape)
    return czys.run(Context(Columns.from_arrays(p, t, td, zz)), **kw)


def rule(result, i=0):
    return czys.RULES[int(result.rule[i])]


def test_module_interface():
    assert get_method("czys") is czys
    assert czys.NAME == "czys" and czys.TITLE and czys.REFERENCE


# -- pure physics --------------------------------------------------------------------------------

def test_melting_time_s_closed_form():
    # Mason (1971) / Pruppacher & Klett (1997) form [M]: dry air, given ventilation f = 2.
    r, dt, f = 0.5e-3, 2.0, 2.0
    expected = RHO_I * LF * r * r / (2 * f * KA * dt)
    assert czys.melting_time_s(r, dt, ventilation=f) == pytest.approx(expected, rel=1e-12)


def test_melting_time_s_vapour_term_and_square_law():
    # Same form: a moist layer (positive vapour-density excess) melts faster; t_m ~ r0^2 at
    # fixed ventilation; no heat supply -> never melts.
    dry = czys.melting_time_s(0.5e-3, 1.0, ventilation=3.0)
    moist = czys.melting_time_s(0.5e-3, 1.0, ventilation=3.0, vapour_density_excess_kg_m3_=5e-4)
    assert moist < dry
    assert czys.melting_time_s(1.0e-3, 1.0, ventilation=3.0) == pytest.approx(4 * dry)
    assert np.isinf(czys.melting_time_s(0.5e-3, 1.0, ventilation=3.0,
                                        vapour_density_excess_kg_m3_=-1e-2))


@pytest.mark.parametrize("diameter_mm,speed", [(1.0, 4.03), (2.0, 6.49), (4.0, 8.83)])
def test_terminal_velocity_matches_gunn_kinzer(diameter_mm, speed):
    # Gunn & Kinzer (1949) table at 1013 hPa, 20 degC (values from memory, unverified); the
    # Atlas et al. (1973) fit is stated to reproduce it within a few per cent.
    assert czys.terminal_velocity_m_s(diameter_mm * 1e-3) == pytest.approx(speed, rel=0.03)


def test_ventilation_factor_is_continuous():
    # Pruppacher & Klett (1997) [M]: the two branches meet at X = 1.4 (to 1e-3), X = Sc^1/3 Re^1/2.
    re = (1.4 / 0.6 ** (1 / 3)) ** 2
    lo = float(czys.ventilation_factor(re * (1 - 1e-9)))
    hi = float(czys.ventilation_factor(re * (1 + 1e-9)))
    assert lo == pytest.approx(hi, abs=1e-3)
    assert float(czys.ventilation_factor(0.0)) == 1.0  # no motion, no ventilation


def test_air_viscosity_standard_atmosphere():
    # U.S. Standard Atmosphere 1976: mu = 1.7894e-5 Pa s at sea level, 288.15 K.
    assert float(czys.air_viscosity_pa_s(15.0)) == pytest.approx(1.7894e-5, rel=1e-4)


@pytest.mark.parametrize("depth,excess,pressure,radius,d_rho", [
    (1500.0, 2.0, 850.0, 0.75e-3, 0.0),
    (800.0, 1.2, 900.0, 0.2e-3, 3e-4),
    (2500.0, 0.6, 800.0, 1.5e-3, 1e-4),
])
def test_tau_matches_closed_form(depth, excess, pressure, radius, d_rho):
    # Czys et al. (1996) tau = t_r / t_m [M], recomputed independently above.
    got = czys.tau(depth, excess, radius_m=radius, pressure_hpa=pressure,
                   vapour_density_excess_kg_m3_=d_rho)
    assert got == pytest.approx(independent_tau(depth, excess, pressure, radius, d_rho), rel=1e-9)


def test_tau_rejects_radius_outside_fall_speed_fit():
    with pytest.raises(OptionError) as info:
        czys.tau(1000.0, 1.0, radius_m=50e-6)
    assert info.value.field == "radius_m" and "radius_m" in str(info.value)


@settings(max_examples=60, deadline=None)
@given(depth=st.floats(100, 3000), excess=st.floats(0.1, 6), more=st.floats(1.01, 3))
def test_tau_grows_with_depth_and_warmth(depth, excess, more):
    # Physical invariant of tau: a deeper or warmer layer melts more (dry-air form).
    base = czys.tau(depth, excess)
    assert czys.tau(depth * more, excess) > base
    assert czys.tau(depth, excess * more) > base


# -- profiles ------------------------------------------------------------------------------------

P = [1000.0, 950.0, 900.0, 850.0, 800.0, 750.0, 700.0, 600.0, 500.0]


def three_layer(peak, cloud_c=-26.0, surface_c=-3.0):
    """Saturated three-layer profile: cold surface, warm nose 900-850 hPa at +peak, cloud above."""
    t = np.array([surface_c, -2.0, peak, peak, -2.0, -8.0, -12.0, -18.0, cloud_c])
    return t


def tau_from_values(r, i=0):
    """Independent tau from the layer the module found (depth, mean excess, pressure)."""
    depth = r.value("warm_depth_m", i)
    excess = r.value("warm_mean_excess_c", i)
    pressure = math.sqrt(r.value("warm_bottom_hpa", i) * r.value("warm_top_hpa", i))
    return independent_tau(depth, excess, pressure, r.value("particle_radius_m", i),
                           r.value("vapour_density_excess_kg_m3", i))


def test_run_mean_excess_is_layer_area_over_rd_lnp():
    # Bourgouin-style area identity A = R_d * dT_mean * ln(p_b/p_t) (Bourgouin 2000).
    r = run(P, three_layer(3.0))
    expected = r.value("warm_area_j_kg", 0) / (RD * math.log(r.value("warm_bottom_hpa", 0)
                                                              / r.value("warm_top_hpa", 0)))
    assert r.value("warm_mean_excess_c", 0) == pytest.approx(expected, rel=1e-12)


@pytest.mark.parametrize("vapour", [False, True])
def test_run_tau_boundary(vapour):
    # Czys et al. (1996): tau >= 1 -> FZRA, tau < 1 -> PL.  Find the nose peak where the
    # independently computed tau crosses 1, then step to tau = 0.97 and 1.03.
    def tau_at(peak):
        return tau_from_values(run(P, three_layer(peak), vapour_term=vapour))

    def peak_for(target):
        lo, hi = 0.2, 15.0
        for _ in range(60):
            mid = 0.5 * (lo + hi)
            lo, hi = (mid, hi) if tau_at(mid) < target else (lo, mid)
        return 0.5 * (lo + hi)

    below, above = peak_for(0.97), peak_for(1.03)
    r = run(P, [three_layer(below), three_layer(above)], vapour_term=vapour)
    assert list(r.code) == [Code.PL, Code.FZRA]
    assert r.value("tau", 0) == pytest.approx(0.97, rel=1e-6)
    assert r.value("tau", 1) == pytest.approx(1.03, rel=1e-6)


def test_run_vapour_density_excess_closed_form():
    # Constant dew point through the warm layer and its neighbours: the mean ambient vapour
    # pressure is e_s(Td) exactly; d_rho_v = e/(R_v T) - e_s(0)/(R_v T0) with the ideal gas law.
    t = np.array([-3.0, -1.0, 4.0, 4.0, -1.0, -8.0, -12.0, -18.0, -26.0])
    td = np.array([-3.0, -1.5, -1.5, -1.5, -1.5, -8.0, -12.0, -18.0, -26.0])
    r = run(P, t, td)
    # Alduchov & Eskridge (1996) AERK, as ptype's saturation vapour pressure.
    es = lambda tc: 6.1094 * math.exp(17.625 * tc / (tc + 243.04))
    assert r.value("warm_vapour_pressure_hpa", 0) == pytest.approx(es(-1.5), rel=1e-9)
    excess = r.value("warm_mean_excess_c", 0)
    expected = es(-1.5) * 100 / (RV * (T0 + excess)) - es(0.0) * 100 / (RV * T0)
    assert r.value("vapour_density_excess_kg_m3", 0) == pytest.approx(expected, rel=1e-9)
    assert expected < 0  # drier than saturation at 0 degC: evaporation slows melting


def test_run_dry_warm_layer_cannot_melt():
    # Same form: with K_a dT + L_v D_v d_rho_v <= 0 no heat reaches the particle, tau = 0 -> PL.
    t = np.array([-3.0, -2.0, 1.0, 1.0, -2.0, -8.0, -12.0, -18.0, -26.0])
    td = np.array([-3.5, -8.0, -8.0, -8.0, -8.0, -8.5, -12.0, -18.0, -26.0])
    r = run(P, t, td)
    assert r.code[0] == Code.PL and r.value("tau", 0) == 0.0
    assert "cannot melt" in " ".join(s.text for s in r.steps(0))


@pytest.mark.parametrize("cloud_c,decides", [(-10.1, True), (-9.9, False)])
def test_run_ice_cloud_aloft_boundary(cloud_c, decides):
    # Ice-producing cloud aloft: colder than about -10 degC (from memory; common
    # ice-nucleation guide).
    t = np.array([-3.0, -2.0, 3.0, 3.0, -2.0, -5.0, -7.0, -9.0, cloud_c])
    r = run(P, t)
    assert (r.code[0] != NO_RESULT) == decides
    if not decides:
        assert rule(r) == "no_ice_cloud_aloft"
        text = r.steps(0)[-1].text
        assert "\u22129.9 \u00b0C" in text and "\u221210 \u00b0C" in text


def test_run_no_cloud_above_abstains():
    t = three_layer(3.0)
    td = t.copy()
    td[4:] -= 20.0
    r = run(P, t, td)
    assert rule(r) == "no_ice_cloud_aloft" and r.code[0] == NO_RESULT
    assert "no cloud above the warm layer" in r.steps(0)[-1].text


def test_run_outside_three_layer_domain_abstains():
    # Rauber et al. (2001): only three-layer profiles; ptype abstains elsewhere and says why.
    warm_surface = three_layer(3.0, surface_c=1.0)
    all_cold = np.array([-3.0, -4.0, -5.0, -6.0, -7.0, -8.0, -12.0, -18.0, -26.0])
    two_noses = np.array([-3.0, 1.0, -1.0, 2.0, -2.0, -8.0, -12.0, -18.0, -26.0])
    r = run(P, [warm_surface, all_cold, two_noses])
    assert list(r.code) == [NO_RESULT] * 3
    assert [rule(r, i) for i in range(3)] == ["surface_not_freezing", "no_elevated_warm_layer",
                                              "not_three_layers"]
    assert "5 layers" in r.steps(2)[0].text
    for i in range(3):
        assert "three-layer" in r.steps(i)[0].text


def test_run_screen_temperature_above_zero_abstains():
    t = three_layer(3.0)
    c = Columns.from_arrays([P], [t], [t], surface_temperature_c=0.5)
    r = czys.run(Context(c))
    assert rule(r) == "surface_not_freezing"


def test_run_radius_option():
    # t_m ~ r0^2 while v grows more slowly, so a smaller particle melts in a shallower layer.
    r_small = run(P, three_layer(1.5), radius_m=0.2e-3)
    r_large = run(P, three_layer(1.5), radius_m=1.5e-3)
    assert r_small.value("tau", 0) > r_large.value("tau", 0)
    with pytest.raises(OptionError):
        run(P, three_layer(1.5), radius_m=10e-3)


def test_explain_carries_the_numbers():
    r = run(P, three_layer(4.0))
    steps = r.steps(0)
    assert steps[-1].values["tau"] == r.value("tau", 0)
    assert f"{r.value('tau', 0):.2f}" in steps[-1].text
    assert "750 \u00b5m" in steps[-2].text


# -- structure -----------------------------------------------------------------------------------

def _zoo(seed=21, n=40):
    rng = np.random.default_rng(seed)
    t = np.array([three_layer(rng.uniform(-1, 6), cloud_c=rng.uniform(-30, -5),
                              surface_c=rng.uniform(-8, 2)) for _ in range(n)])
    t += rng.normal(0, 0.3, t.shape)
    td = t - np.where(rng.uniform(size=t.shape) < 0.7, 0.0, rng.uniform(2, 10, t.shape))
    return np.array(P), t, td


def test_run_vectorised_equals_column_by_column():
    p, t, td = _zoo()
    t[::5, -2:] = np.nan
    batch = czys.run(Context(Columns.from_arrays(np.broadcast_to(p, t.shape), t, td)))
    assert set(batch.code) >= {Code.PL, Code.FZRA, NO_RESULT}
    for i in range(t.shape[0]):
        keep = np.isfinite(t[i])
        one = czys.run(Context(Columns.from_arrays(p[keep], t[i][keep], td[i][keep])))
        assert one.code[0] == batch.code[i] and one.rule[0] == batch.rule[i]
        for key, arr in batch.values.items():
            np.testing.assert_allclose(one.values[key][0], arr[i], rtol=1e-6, equal_nan=True)


def test_run_level_order_invariant():
    p, t, td = _zoo(seed=22, n=20)
    pp = np.broadcast_to(p, t.shape)
    a = czys.run(Context(Columns.from_arrays(pp, t, td)))
    b = czys.run(Context(Columns.from_arrays(pp[:, ::-1], t[:, ::-1], td[:, ::-1])))
    assert np.array_equal(a.code, b.code)
    np.testing.assert_allclose(a.values["tau"], b.values["tau"], rtol=1e-9, equal_nan=True)
