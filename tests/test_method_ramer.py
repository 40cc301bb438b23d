"""Tests of ptype.engine.methods.ramer against Ramer (1993) (docs/methods.md).

Expected values are computed here, independently of the module, from the published
formula ``dI = ln(p_b/p_t) * (T0 - Tw) / (E * RH)`` with E = 0.045 and the thresholds
(2 degC, -6.6 degC, 80 %, 1.02, 0.04, 0.85) of Ramer (1993) as used operationally
(operational model post-processing).  Saturated levels (Td = T) make the isobaric
wet-bulb equal to T exactly and RH exactly 100 %, so the expected numbers are closed forms.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from ptype.codes import NO_RESULT, Code
from ptype.engine.columns import Columns
from ptype.engine.methods import get_method, ramer
from ptype.engine.methods.base import Context

E = 0.045  # Ramer (1993) melting coefficient (operational constant)


def run_columns(p, t, td=None, **kw):
    p = np.atleast_2d(np.asarray(p, dtype=float))
    t = np.atleast_2d(np.asarray(t, dtype=float))
    td = t if td is None else np.atleast_2d(np.asarray(td, dtype=float))
    return ramer.run(Context(Columns.from_arrays(p, t, td)), **kw)


# A saturated column: cold cloud above, a warm layer 900-800 hPa shaped as a trapezoid
# (0 at 900, +d at 875 and 825, 0 at 800) and a 0 degC surface layer.
TRAPEZOID_P = [1000.0, 900.0, 875.0, 825.0, 800.0, 700.0, 500.0]


def trapezoid_t(d, surface_c=0.0):
    return [surface_c, 0.0, d, d, 0.0, -10.0, -25.0]


def trapezoid_melt(d):
    """Independent closed form of Ramer's dI across the trapezoid (Tw linear in ln p, RH = 1):
    the ramps contribute a mean excess d/2, the plateau d."""
    return -(0.5 * d * math.log(900 / 875) + d * math.log(875 / 825)
             + 0.5 * d * math.log(825 / 800)) / E


def test_module_interface():
    m = get_method("ramer")
    assert m is ramer
    assert m.NAME == "ramer" and m.WETBULB == "isobaric"
    assert m.TITLE and m.REFERENCE


def test_ice_fraction_change_worked_magnitude():
    # Ramer (1993) worked magnitude: 50 hPa near 850 hPa, 2 K warm, RH = 1
    # gives dI ~ -2.6 (the particle melts fully).
    d_ice = ramer.ice_fraction_change(875.0, 825.0, 2.0, 1.0)
    assert d_ice == pytest.approx(-2.6, abs=0.05)
    assert d_ice == pytest.approx(math.log(875 / 825) * -2.0 / E, rel=1e-12)


def test_ice_fraction_change_drier_layer_changes_faster():
    # Ramer (1993): dI is inversely proportional to RH^efac with efac = 1.
    assert ramer.ice_fraction_change(875.0, 825.0, 2.0, 0.5) == pytest.approx(
        2.0 * ramer.ice_fraction_change(875.0, 825.0, 2.0, 1.0), rel=1e-12)


def test_run_worked_magnitude_melts_completely():
    # Ramer (1993) worked magnitude: a 2 K plateau 875-825 hPa melts the particle fully.
    r = run_columns(TRAPEZOID_P, trapezoid_t(2.0))
    assert r.value("ice_fraction", 0) == 0.0
    assert r.value("was_liquid", 0) == 1.0
    assert r.code[0] == Code.RA  # surface Tw = 0 is not < 0 degC


def test_run_partial_melting_matches_closed_form():
    # Ramer (1993) dI summed over the trapezoid, computed independently above.
    d = 0.3
    r = run_columns(TRAPEZOID_P, trapezoid_t(d))
    assert r.value("ice_fraction", 0) == pytest.approx(1.0 + trapezoid_melt(d), abs=1e-9)
    assert r.value("initial_ice_fraction", 0) == 1.0
    assert r.value("generation_top_hpa", 0) == pytest.approx(500.0)


@pytest.mark.parametrize("target,inside,outside", [
    # Ramer (1993) solid limit 0.85: at 0.86 snow, at 0.84 partly melted snow (ptype's mix).
    (0.85, Code.SN, Code.RASN),
    # Ramer (1993) liquid limit 0.04: at 0.03 rain, at 0.05 the mix band.
    (0.04, Code.RA, Code.RASN),
])
def test_run_final_ice_fraction_limits(target, inside, outside):
    per_kelvin = -trapezoid_melt(1.0)
    if target == 0.85:
        d_in, d_out = (1 - 0.86) / per_kelvin, (1 - 0.84) / per_kelvin
    else:
        d_in, d_out = (1 - 0.03) / per_kelvin, (1 - 0.05) / per_kelvin
    r = run_columns(TRAPEZOID_P, [trapezoid_t(d_in), trapezoid_t(d_out)])
    assert list(r.code) == [inside, outside]


def test_run_mix_over_freezing_surface_is_fzrapl():
    # Ramer (1993) march: the trapezoid leaves I = 1 + trapezoid_melt(0.3); a 5 hPa surface
    # layer from 0 to -0.5 degC then refreezes the partly melted particle by
    # ln(1000/995) * 0.25 / E.  In the undecided band over Tw < 0: ptype's FZRAPL.
    p = [1000.0, 995.0, 900.0, 875.0, 825.0, 800.0, 700.0, 500.0]
    t = [-0.5, 0.0, 0.0, 0.3, 0.3, 0.0, -10.0, -25.0]
    r = run_columns(p, t)
    expected = 1.0 + trapezoid_melt(0.3) + math.log(1000 / 995) * 0.25 / E
    assert r.value("ice_fraction", 0) == pytest.approx(expected, abs=1e-9)
    assert r.code[0] == Code.FZRAPL and ramer.RULES[r.rule[0]] == "mix_freezing"


def test_run_mix_after_refreezing_is_rapl():
    # Ramer (1993) march: a 2 K plateau melts the particle (was liquid), the layer colder than
    # -6.6 degC near 925 hPa starts refreezing, which then continues at any Tw < 0 up to I = 1;
    # a surface warm layer 960-1000 hPa (0 -> +0.5 degC) melts back ln(1000/960) * 0.25 / E.
    p = [1000.0, 960.0, 925.0, 900.0, 875.0, 825.0, 800.0, 700.0, 500.0]
    t = [0.5, 0.0, -8.0, 0.0, 2.0, 2.0, 0.0, -10.0, -25.0]
    r = run_columns(p, t)
    expected = 1.0 - math.log(1000 / 960) * 0.25 / E
    assert r.value("ice_fraction", 0) == pytest.approx(expected, abs=1e-9)
    assert r.value("was_liquid", 0) == 1.0
    assert r.code[0] == Code.RAPL and ramer.RULES[r.rule[0]] == "mix_refrozen_rain"
    texts = [s.text for s in r.steps(0)]
    assert any("is 1.00: the particle refroze completely" in t for t in texts)


def test_run_abstains_in_mix_band_when_asked():
    # Operational multi-algorithm practice abstains between the limits (common practice).
    t = trapezoid_t(0.3)
    assert run_columns(TRAPEZOID_P, t).code[0] == Code.RASN
    r = run_columns(TRAPEZOID_P, t, abstain_on_mix=True)
    assert r.code[0] == NO_RESULT
    assert ramer.RULES[r.rule[0]] == "mix_abstain"


def test_run_gross_warm_surface_boundary():
    # Ramer (1993) gross check: surface Tw >= +2 degC -> RA.  Saturated, 6.5 K/km-like lapse.
    p = [1000.0, 900.0, 800.0, 700.0, 600.0, 500.0]
    base = np.array([0.0, -5.0, -10.0, -15.0, -20.0, -26.0])
    r = run_columns(p, [base + 2.05, base + 1.95])
    assert ramer.RULES[r.rule[0]] == "gross_warm_surface" and r.code[0] == Code.RA
    assert ramer.RULES[r.rule[1]] != "gross_warm_surface"


def test_run_gross_cold_column_boundary():
    # Ramer (1993) gross check: column maximum Tw <= -6.6 degC -> SN.
    p = [1000.0, 900.0, 800.0, 700.0, 600.0, 500.0]
    base = np.array([0.0, -3.0, -6.0, -12.0, -18.0, -25.0])
    r = run_columns(p, [base - 6.65, base - 6.55])
    assert ramer.RULES[r.rule[0]] == "gross_cold_column" and r.code[0] == Code.SN
    assert ramer.RULES[r.rule[1]] != "gross_cold_column"


def test_run_initial_ice_fraction_boundary():
    # Ramer (1993): the particle starts as ice when Tw at the generation top <= -6.6 degC,
    # otherwise as supercooled liquid, which cannot freeze until Tw < -6.6 degC; so a
    # warm-topped, all-sub-zero saturated column gives freezing precipitation.
    p = [1000.0, 950.0, 900.0, 850.0, 800.0]   # the sounding ends at the cloud top
    cold = [-2.0, -3.0, -4.0, -5.0, -6.7]
    warm = [-2.0, -3.0, -4.0, -5.0, -6.5]
    r = run_columns(p, [cold, warm])
    assert r.value("initial_ice_fraction", 0) == 1.0 and r.code[0] == Code.SN
    assert r.value("initial_ice_fraction", 1) == 0.0 and r.code[1] == Code.FZRA
    assert r.value("generation_top_wetbulb_c", 1) == pytest.approx(-6.5)


def test_run_refreezing_needs_wetbulb_below_onset():
    # Ramer (1993): melted drops refreeze only where Tw < -6.6 degC; a 2 K plateau melts them
    # (worked magnitude), a deep -10 degC surface layer refreezes them to PL, a -5 degC one
    # leaves them supercooled (FZRA).
    p = [1000.0, 950.0, 920.0, 900.0, 875.0, 825.0, 800.0, 700.0, 500.0]
    refreeze = [-10.0, -10.0, -10.0, 0.0, 2.0, 2.0, 0.0, -10.0, -25.0]
    supercooled = [-5.0, -5.0, -5.0, 0.0, 2.0, 2.0, 0.0, -10.0, -25.0]
    r = run_columns(p, [refreeze, supercooled])
    assert list(r.code) == [Code.PL, Code.FZRA]
    assert r.value("was_liquid", 0) == 1.0
    # Refreezing of the deep cold layer, computed independently: it starts where Tw passes
    # -6.6 between 900 and 920 hPa (Tw linear in ln p) and far exceeds 1.
    assert r.value("ice_fraction", 0) == 1.0


def test_generation_layer_edges_interpolated_in_ln_p():
    # Ramer (1993): edges where RH crosses 80 %, interpolated in ln p.
    p = np.array([[1000.0, 800.0, 700.0, 600.0, 500.0]])
    rh = np.array([[50.0, 50.0, 100.0, 60.0, 50.0]])
    top, bottom = ramer.generation_layer(p, rh)
    assert top[0] == pytest.approx(math.sqrt(700.0 * 600.0), rel=1e-12)  # half-way in ln p
    assert bottom[0] == pytest.approx(math.exp(math.log(800) + 0.6 * math.log(700 / 800)))


@pytest.mark.parametrize("p_bottom,found", [(714.1, True), (713.9, False)])
def test_generation_layer_depth_ratio(p_bottom, found):
    # Ramer (1993): minimum depth p_bottom / p_top >= 1.02; 714 / 700 = 1.02.
    p = np.array([[1000.0, 900.0, p_bottom, 700.0, 600.0, 500.0]])
    rh = np.array([[50.0, 50.0, 80.0, 80.0, 50.0, 50.0]])
    top, bottom = ramer.generation_layer(p, rh)
    assert np.isfinite(top[0]) == found
    if found:
        assert (top[0], bottom[0]) == pytest.approx((700.0, p_bottom))


def test_generation_layer_highest_and_capped_at_400():
    # Ramer (1993): the highest qualifying layer, searched at p >= 400 hPa.
    p = np.array([[1000.0, 900.0, 800.0, 700.0, 500.0, 400.0, 300.0]])
    rh = np.array([[90.0, 90.0, 50.0, 50.0, 90.0, 90.0, 90.0]])
    top, bottom = ramer.generation_layer(p, rh)
    assert top[0] == pytest.approx(400.0)
    assert bottom[0] == pytest.approx(math.exp(math.log(700) + 0.75 * math.log(500 / 700)))


def test_run_no_generation_layer_abstains():
    # Ramer (1993): no generating layer -> no result.
    p = [1000.0, 900.0, 800.0, 700.0, 600.0, 500.0]
    t = np.array([-1.0, -2.0, -4.0, -9.0, -15.0, -22.0])
    r = run_columns(p, t, t - 15.0)
    assert r.code[0] == NO_RESULT
    assert ramer.RULES[r.rule[0]] == "no_generation_layer"
    assert any("no generating layer" in s.text for s in r.steps(0))


def test_explain_carries_the_numbers():
    r = run_columns(TRAPEZOID_P, trapezoid_t(2.0, surface_c=-1.0))
    steps = r.steps(0)
    texts = " ".join(s.text for s in steps)
    assert "Ice fraction after the warm layer 900\u2013800 hPa" in texts
    assert "is 0.00: the particle melted completely" in texts
    final = steps[-1]
    assert final.rule == "liquid_freezing"
    assert final.values["ice_fraction"] == r.value("ice_fraction", 0)
    assert final.thresholds["liquid_limit"] == 0.04
    assert all(s.to_dict()["text"] for s in steps)


# -- structure: vectorisation, padding, level order -------------------------------------------

def _profile_zoo(seed=3, n=40):
    """Varied saturated and unsaturated columns around the rules' boundaries (test inputs)."""
    rng = np.random.default_rng(seed)
    p = np.array([1000.0, 975, 950, 925, 900, 875, 850, 800, 750, 700, 650, 600, 500, 400, 300])
    rows_t, rows_td = [], []
    for _ in range(n):
        sfc = rng.uniform(-8, 4)
        nose = rng.uniform(-3, 5)
        t = np.interp(-p, -np.array([1000, 850, 700, 500, 300.0]),
                      np.array([sfc, nose, -8, -25, -45.0]))
        t = t + rng.normal(0, 0.5, p.size)
        dd = np.where(rng.uniform(size=p.size) < 0.7, rng.uniform(0, 1, p.size),
                      rng.uniform(3, 20, p.size))
        rows_t.append(t)
        rows_td.append(t - dd)
    return p, np.array(rows_t), np.array(rows_td)


def test_run_vectorised_equals_column_by_column():
    p, t, td = _profile_zoo()
    # Ragged: drop the top levels of some columns so padding is exercised.
    t = t.copy()
    t[::3, -3:] = np.nan
    batch = run_columns(np.broadcast_to(p, t.shape), t, td)
    for i in range(t.shape[0]):
        keep = np.isfinite(t[i])
        one = run_columns(p[keep], t[i][keep], td[i][keep])
        assert one.code[0] == batch.code[i]
        assert one.rule[0] == batch.rule[i]
        for key in ("ice_fraction", "generation_top_hpa", "max_wetbulb_c"):
            # The wet-bulb solver stops on the batch's largest step, so values agree to its
            # tolerance (about 1e-7 K), not bit for bit.
            np.testing.assert_allclose(one.values[key][0], batch.values[key][i], rtol=1e-6,
                                       atol=1e-6, equal_nan=True)
        assert [s.text for s in one.steps(0)] == [s.text for s in batch.steps(i)]


def test_run_level_order_invariant():
    p, t, td = _profile_zoo(seed=5, n=20)
    pp = np.broadcast_to(p, t.shape)
    a = run_columns(pp, t, td)
    b = run_columns(pp[:, ::-1], t[:, ::-1], td[:, ::-1])
    assert np.array_equal(a.code, b.code)
    np.testing.assert_allclose(a.values["ice_fraction"], b.values["ice_fraction"], equal_nan=True)


def test_run_has_no_result_for_single_level():
    r = run_columns([[1000.0, np.nan]], [[-1.0, np.nan]])
    assert r.code[0] == NO_RESULT and ramer.RULES[r.rule[0]] == "insufficient_levels"


# -- physical monotonicity ---------------------------------------------------------------------

NOSE_P = np.array([1000.0, 975, 950, 925, 900, 875, 850, 825, 800, 750, 700, 600, 500])


@settings(max_examples=60, deadline=None)
@given(surface=st.floats(-12.0, -0.5), nose=st.floats(0.2, 4.0),
       warming=st.floats(0.0, 3.0), cold_top=st.floats(-30.0, -8.0))
def test_run_warmer_nose_never_more_ice(surface, nose, warming, cold_top):
    # Physical invariant of Ramer's scheme: melting grows with the warm-layer wet-bulb, and a
    # particle entering the cold layer with less ice never leaves it with more.  So warming the
    # warm nose (saturated, RH fixed at 100 %) never raises the final ice fraction and never
    # turns freezing rain into snow or ice pellets.
    t = np.interp(-NOSE_P, -np.array([1000.0, 925, 850, 775, 700, 500]),
                  [surface, surface / 2, nose, nose / 2 - 1, -6.0, cold_top])
    warmer = np.where(t > 0, t + warming, t)
    r = run_columns(np.broadcast_to(NOSE_P, (2, NOSE_P.size)), [t, warmer])
    assert r.value("ice_fraction", 1) <= r.value("ice_fraction", 0) + 1e-12
    if r.code[0] == Code.FZRA:
        assert r.code[1] == Code.FZRA
