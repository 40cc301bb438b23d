"""Tests of ptype.engine.methods.baldwin and baldwin_revised against Baldwin et al. (1994) and its
2005 revision (thresholds as used in operational post-processing, docs/methods.md):
saturation 2/4/6 K between p_sfc - 70 hPa and 500 hPa, the -4 degC no-ice branch,
AREAP4 < 3000 K m and (revision) AREAP0 < 350 K m -> SN, SURFC < -3000 K m or
(AREAS8 < -3000 K m and SURFW < 50 K m) -> PL.

Profiles are given with explicit heights and saturated levels (Td = T), so the wet-bulb
equals T exactly and every area has a closed form, computed here independently of the
module for a profile linear in height between levels.
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from ptype.codes import NO_RESULT, Code
from ptype.engine.columns import Columns
from ptype.engine.methods import baldwin, baldwin_revised, get_method
from ptype.engine.methods.base import Context


def run(module, p, z, t, td=None):
    t = np.atleast_2d(np.asarray(t, dtype=float))
    td = t if td is None else np.atleast_2d(np.asarray(td, dtype=float))
    p = np.broadcast_to(np.asarray(p, dtype=float), t.shape)
    z = np.broadcast_to(np.asarray(z, dtype=float), t.shape)
    return module.run(Context(Columns.from_arrays(p, t, td, z)))


def rule(result, i=0):
    return baldwin.RULES[int(result.rule[i])]


def trapezoid_net(z, v):
    """Net integral of a profile linear between levels (the trapezoidal rule is exact)."""
    z, v = np.asarray(z, float), np.asarray(v, float)
    return float(np.sum(0.5 * (v[1:] + v[:-1]) * np.diff(z)))


def test_module_interface():
    assert get_method("baldwin") is baldwin
    assert get_method("baldwin_revised") is baldwin_revised
    assert baldwin.WETBULB == "adiabatic" and baldwin_revised.WETBULB == "adiabatic"
    assert baldwin_revised.NAME == "baldwin_revised"


# -- the area integral ----------------------------------------------------------------------

def test_area_k_m_triangle_parts():
    # Tw from -2 to +2 degC over 1000 m: 500 K m above zero, -500 below, net 0 (geometry).
    z = np.array([[0.0, 1000.0]])
    v = np.array([[-2.0, 2.0]])
    lo, hi = np.array([0.0]), np.array([1000.0])
    assert baldwin.area_k_m(z, v, lo, hi, "positive")[0] == pytest.approx(500.0)
    assert baldwin.area_k_m(z, v, lo, hi, "negative")[0] == pytest.approx(-500.0)
    assert baldwin.area_k_m(z, v, lo, hi, "net")[0] == pytest.approx(0.0, abs=1e-9)
    # Clipped to 750-1000 m: v runs 1 -> 2 K, 375 K m.
    assert baldwin.area_k_m(z, v, np.array([750.0]), hi, "positive")[0] == pytest.approx(375.0)


@settings(max_examples=50, deadline=None)
@given(st.lists(st.floats(-15, 15), min_size=3, max_size=8), st.floats(0, 1), st.floats(0, 1))
def test_area_k_m_parts_add_up(values, a, b):
    # Identity of the integral: positive part + negative part = net; positive >= 0 >= negative.
    z = np.arange(len(values), dtype=float)[None, :] * 300.0
    v = np.asarray(values)[None, :]
    lo = np.array([min(a, b) * z[0, -1]])
    hi = np.array([max(a, b) * z[0, -1]])
    pos = baldwin.area_k_m(z, v, lo, hi, "positive")[0]
    neg = baldwin.area_k_m(z, v, lo, hi, "negative")[0]
    net = baldwin.area_k_m(z, v, lo, hi, "net")[0]
    assert pos >= -1e-9 and neg <= 1e-9
    assert pos + neg == pytest.approx(net, abs=1e-6)


# -- step 1: saturated layers -----------------------------------------------------------------

BAND_P = [1000.0, 940.0, 930.0, 850.0, 700.0, 500.0, 400.0]
BAND_Z = [0.0, 520.0, 610.0, 1350.0, 2900.0, 5450.0, 6900.0]
BAND_T = [-1.0, -2.0, -3.0, -6.0, -12.0, -25.0, -35.0]


@pytest.mark.parametrize("depression,used", [(1.9, 2.0), (3.9, 4.0), (5.9, 6.0)])
def test_saturated_levels_relaxation(depression, used):
    # Baldwin et al. (1994): T - Td < 2 K, relaxed to 4 K, then 6 K when nothing is found.
    t = np.array(BAND_T)
    td = t - 20.0
    td[3] = t[3] - depression
    r = run(baldwin, BAND_P, BAND_Z, t, td)
    assert r.value("saturation_depression_k", 0) == used
    assert r.value("highest_saturated_hpa", 0) == 850.0


def test_saturated_levels_none_abstains():
    # Baldwin et al. (1994): no depression below 6 K -> no saturated layer; ptype abstains.
    t = np.array(BAND_T)
    td = t - 20.0
    td[3] = t[3] - 6.1
    r = run(baldwin, BAND_P, BAND_Z, t, td)
    assert r.code[0] == NO_RESULT and rule(r) == "no_saturated_layer"
    assert "no saturated layer" in r.steps(0)[0].text


@pytest.mark.parametrize("level,found", [(2, True), (1, False), (5, True), (6, False)])
def test_saturated_levels_search_band(level, found):
    # Baldwin et al. (1994): only p_sfc - 70 hPa (930 here) up to 500 hPa is searched.
    t = np.array(BAND_T)
    td = t - 20.0
    td[level] = t[level]
    r = run(baldwin, BAND_P, BAND_Z, t, td)
    assert (r.code[0] != NO_RESULT) == found


# -- step 2: the -4 degC no-ice branch ----------------------------------------------------------

CLOUD_P = [1000.0, 950.0, 900.0, 850.0, 800.0, 700.0, 500.0]
CLOUD_Z = [0.0, 420.0, 850.0, 1300.0, 1770.0, 2770.0, 5300.0]


def shallow_cloud(top_c, surface_c=-2.0):
    """Saturated 900-800 hPa whose coldest level is top_c, dry elsewhere (test input)."""
    t = np.array([surface_c, -2.5, -3.0, -3.5, top_c, -10.0, -25.0])
    td = t - 15.0
    td[2:5] = t[2:5]
    return t, td


@pytest.mark.parametrize("top_c,expected", [(-3.9, "no_ice_freezing"), (-4.1, "snow_area")])
def test_run_no_ice_boundary(top_c, expected):
    # Baldwin et al. (1994): coldest saturated T > -4 degC means no ice -> FZRA (surface
    # <= 0 degC); at -4.1 degC there is ice, and AREAP4 (about 1000 K m here) < 3000 -> SN.
    t, td = shallow_cloud(top_c)
    for module in (baldwin, baldwin_revised):
        r = run(module, CLOUD_P, CLOUD_Z, t, td)
        assert rule(r) == expected
        assert r.code[0] == (Code.FZRA if expected == "no_ice_freezing" else Code.SN)


@pytest.mark.parametrize("surface_c,code", [(0.0, Code.FZRA), (0.1, Code.RA)])
def test_run_no_ice_surface_at_or_below_zero(surface_c, code):
    # Baldwin et al. (1994) no-ice branch: lowest-layer T <= 0 degC -> FZRA, else RA.
    t, td = shallow_cloud(-3.0, surface_c)
    r = run(baldwin, CLOUD_P, CLOUD_Z, t, td)
    assert r.code[0] == code
    assert "cloud-top method" in r.steps(0)[-1].text


# -- step 3: AREAP4 (original) and AREAP0 (revision) ------------------------------------------

DEEP_P = [1000.0, 900.0, 800.0, 700.0, 600.0, 500.0]
DEEP_Z = [0.0, 900.0, 1900.0, 3000.0, 4200.0, 5600.0]


def areap4_profile(a):
    """T = -4 + a from the ground to 3000 m, then -10 and -20 degC (saturated)."""
    return [-4.0 + a, -4.0 + a, -4.0 + a, -4.0 + a, -10.0, -20.0]


def areap4_closed_form(a):
    # (Tw + 4) is a over 0-3000 m, then falls linearly from a to -6 over 3000-4200 m.
    return 3000.0 * a + 0.5 * a * 1200.0 * a / (a + 6.0)


def solve_increasing(f, target, lo, hi):
    for _ in range(80):
        mid = 0.5 * (lo + hi)
        lo, hi = (mid, hi) if f(mid) < target else (lo, mid)
    return 0.5 * (lo + hi)


@pytest.mark.parametrize("offset,expected", [(-30.0, "snow_area"), (30.0, "pellets_low_cold")])
def test_run_areap4_3000_boundary(offset, expected):
    # Baldwin et al. (1994): AREAP4 < 3000 K m -> SN.  Just above, the tree goes on to the
    # pellet test: the whole lowest 150 hPa is near -3 degC (AREAS8 about -4000 K m) with no
    # warm surface layer (SURFW = 0), so PL -- the original's known lean toward PL.
    a = solve_increasing(areap4_closed_form, 3000.0 + offset, 0.0, 3.0)
    r = run(baldwin, DEEP_P, DEEP_Z, areap4_profile(a))
    assert r.value("areap4_k_m", 0) == pytest.approx(3000.0 + offset, rel=1e-9)
    assert rule(r) == expected


NOSE_P = [1000.0, 900.0, 800.0, 700.0, 600.0, 500.0]
NOSE_Z = [0.0, 900.0, 1900.0, 3000.0, 4200.0, 5600.0]


def nose_profile(b):
    """Cold -5 degC surface layer, a warm nose peaking at +b at 1900 m (saturated)."""
    return [-5.0, -5.0, b, -5.0, -12.0, -20.0]


def areap0_closed_form(b):
    # Triangles above 0 degC on either side of the peak: bases 1000 b/(b+5) and 1100 b/(b+5).
    return 0.5 * b * b * 2100.0 / (b + 5.0)


@pytest.mark.parametrize("offset,snow", [(-20.0, True), (20.0, False)])
def test_run_areap0_350_boundary(offset, snow):
    # Baldwin 2005 revision: AREAP0 < 350 K m -> SN; above it the deep cold surface layer
    # (SURFC far below -3000 K m) gives PL.
    b = solve_increasing(areap0_closed_form, 350.0 + offset, 0.0, 10.0)
    r = run(baldwin_revised, NOSE_P, NOSE_Z, nose_profile(b))
    assert r.value("areap0_k_m", 0) == pytest.approx(350.0 + offset, rel=1e-9)
    assert (rule(r) == "snow_area") == snow
    assert r.code[0] == (Code.SN if snow else Code.PL)
    # The original tree does not use AREAP0: (Tw + 4) is positive far above 3000 K m here.
    assert rule(run(baldwin, NOSE_P, NOSE_Z, nose_profile(b))) != "snow_area"


# -- steps 4-6: the ice-pellet test ------------------------------------------------------------

SURFC_P = [1000.0, 950.0, 900.0, 850.0, 800.0, 700.0, 600.0, 500.0]
SURFC_Z = [0.0, 450.0, 900.0, 1400.0, 1900.0, 3000.0, 4200.0, 5600.0]


def surfc_profile(c):
    return [-c, -c, -c, 6.0, -2.0, -8.0, -14.0, -22.0]


def surfc_closed_form(c):
    # Cold area from the ground to the warmest saturated level (850 hPa, 1400 m):
    # -c over 900 m, then a triangle down to the crossing 500 c / (c + 6) m above 900 m.
    return -c * 900.0 - 0.5 * c * 500.0 * c / (c + 6.0)


@pytest.mark.parametrize("offset,code", [(-30.0, Code.PL), (30.0, Code.FZRA)])
def test_run_surfc_boundary(offset, code):
    # Baldwin et al. (1994): SURFC < -3000 K m -> PL; AREAS8 stays above -3000 K m here.
    c = solve_increasing(lambda x: -surfc_closed_form(x), 3000.0 - offset, 0.0, 10.0)
    r = run(baldwin, SURFC_P, SURFC_Z, surfc_profile(c))
    assert r.value("surfc_k_m", 0) == pytest.approx(-3000.0 + offset, rel=1e-9)
    assert r.value("areas8_k_m", 0) > -3000.0
    assert r.code[0] == code


LOW_P = [1000.0, 975.0, 950.0, 930.0, 900.0, 875.0, 850.0, 800.0, 750.0, 700.0, 600.0, 500.0]
LOW_Z = [0.0, 210.0, 420.0, 590.0, 850.0, 1070.0, 1300.0, 1780.0, 2280.0, 2800.0, 3950.0, 5350.0]


def low_cold_profile(surface_c, pocket_c):
    """A shallow warm surface layer, a saturated cold pocket 900-850 hPa, an unsaturated warm
    nose 800-700 hPa (so the warmest *saturated* level stays at 930 hPa) and cloud above."""
    t = np.array([surface_c, -1.0, -1.0, -0.5, pocket_c, pocket_c, pocket_c, 6.0, 6.0, 4.0,
                  -10.0, -20.0])
    td = t.copy()
    td[7:10] -= 10.0
    return t, td


@pytest.mark.parametrize("offset,code", [(-2.0, Code.PL), (2.0, Code.RA)])
def test_run_surfw_50_boundary(offset, code):
    # Baldwin et al. (1994): AREAS8 < -3000 K m and SURFW < 50 K m -> PL.  SURFW is the warm
    # triangle next to the ground: 0.5 s * 210 s / (s + 1) for a surface at +s degC.
    s = solve_increasing(lambda x: 0.5 * x * 210.0 * x / (x + 1.0), 50.0 + offset, 0.0, 5.0)
    r = run(baldwin, LOW_P, LOW_Z, *low_cold_profile(s, -9.0))
    assert r.value("surfw_k_m", 0) == pytest.approx(50.0 + offset, rel=1e-9)
    assert r.value("areas8_k_m", 0) < -3000.0 and r.value("surfc_k_m", 0) > -3000.0
    assert r.code[0] == code


@pytest.mark.parametrize("offset,code", [(-30.0, Code.PL), (30.0, Code.RA)])
def test_run_areas8_boundary(offset, code):
    # Baldwin et al. (1994): AREAS8, the net Tw area of the lowest 150 hPa (here exactly the
    # levels up to 850 hPa), < -3000 K m with SURFW < 50 K m -> PL.
    def areas8(q):
        t, _ = low_cold_profile(0.5, -q)
        return -trapezoid_net(LOW_Z[:7], t[:7])
    q = solve_increasing(areas8, 3000.0 - offset, 0.0, 20.0)
    r = run(baldwin, LOW_P, LOW_Z, *low_cold_profile(0.5, -q))
    assert r.value("areas8_k_m", 0) == pytest.approx(-3000.0 + offset, rel=1e-9)
    assert r.value("surfw_k_m", 0) < 50.0
    assert r.code[0] == code


def test_explain_names_the_numbers():
    r = run(baldwin, SURFC_P, SURFC_Z, surfc_profile(4.0))
    steps = r.steps(0)
    assert steps[-1].rule == "pellets_surface_cold"
    assert f"{r.value('surfc_k_m', 0):.0f}".replace("-", "\u2212") in steps[-1].text
    assert steps[-1].thresholds["surfc_k_m"] == -3000.0
    assert all(s.source for s in steps)


# -- structure ---------------------------------------------------------------------------------

def _zoo(seed=11, n=40):
    rng = np.random.default_rng(seed)
    p = np.array([1000.0, 975, 950, 925, 900, 850, 800, 750, 700, 600, 500, 400, 300])
    ts, tds = [], []
    for _ in range(n):
        t = np.interp(-p, -np.array([1000, 850, 700, 500, 300.0]),
                      [rng.uniform(-8, 5), rng.uniform(-4, 6), -7, -22, -45])
        t = t + rng.normal(0, 0.4, p.size)
        dd = np.where(rng.uniform(size=p.size) < 0.6, rng.uniform(0, 2.5, p.size),
                      rng.uniform(3, 15, p.size))
        ts.append(t)
        tds.append(t - dd)
    return p, np.array(ts), np.array(tds)


@pytest.mark.parametrize("module", [baldwin, baldwin_revised])
def test_run_vectorised_equals_column_by_column(module):
    p, t, td = _zoo()
    t[::4, -2:] = np.nan
    c = Columns.from_arrays(np.broadcast_to(p, t.shape), t, td)
    batch = module.run(Context(c))
    for i in range(t.shape[0]):
        keep = np.isfinite(t[i])
        one = module.run(Context(Columns.from_arrays(p[keep], t[i][keep], td[i][keep])))
        assert one.code[0] == batch.code[i] and one.rule[0] == batch.rule[i]
        for key, arr in batch.values.items():
            # Heights and wet-bulbs come from iterative solvers stopped on the batch's largest
            # step; agreement is to their tolerance.
            np.testing.assert_allclose(one.values[key][0], arr[i], rtol=1e-6, atol=1e-3,
                                       equal_nan=True)


@pytest.mark.parametrize("module", [baldwin, baldwin_revised])
def test_run_level_order_invariant(module):
    p, t, td = _zoo(seed=12, n=20)
    pp = np.broadcast_to(p, t.shape)
    a = module.run(Context(Columns.from_arrays(pp, t, td)))
    b = module.run(Context(Columns.from_arrays(pp[:, ::-1], t[:, ::-1], td[:, ::-1])))
    assert np.array_equal(a.code, b.code)


def test_revision_changes_only_the_snow_test():
    # Baldwin 2005 revision replaces step 3 only: where neither variant says snow, both give
    # the same type from the same SURFC/AREAS8/SURFW.
    p, t, td = _zoo(seed=13, n=60)
    ctx = Context(Columns.from_arrays(np.broadcast_to(p, t.shape), t, td))
    a, b = baldwin.run(ctx), baldwin_revised.run(ctx)
    snow = baldwin.RULES.index("snow_area")
    both = (a.rule != snow) & (b.rule != snow)
    assert both.any()
    assert np.array_equal(a.code[both], b.code[both])
    for key in ("areas8_k_m", "surfw_k_m", "surfc_k_m"):
        np.testing.assert_array_equal(a.values[key], b.values[key])
    # (Tw + 4)+ >= Tw+ pointwise, so AREAP4 >= AREAP0.
    assert np.all(a.values["areap4_k_m"][np.isfinite(a.values["areap4_k_m"])]
                  >= b.values["areap0_k_m"][np.isfinite(a.values["areap4_k_m"])] - 1e-9)
