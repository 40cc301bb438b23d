"""Bourgouin (2000) energy method: each threshold approached from both sides.

Areas follow the paper's definition (area between the sounding and 0 degC on
an equal-area diagram, R_d * integral (T - T0) d ln p) and are computed here in
closed form for piecewise-linear-in-ln-p profiles, independently of ptype.engine.layers.
Thresholds 2, 5.6, 13.2 J/kg and lines 46 + 0.66 PA / 66 + 0.66 PA: Bourgouin
(2000), Wea. Forecasting 15, 583-592 (confirmed against the operational code).
"""

from __future__ import annotations

import numpy as np
import pytest

from ptype.codes import Code
from ptype.engine.columns import Columns
from ptype.engine.methods import bourgouin
from ptype.engine.methods.base import Context
from ptype.thermo.constants import Rd


def run_one(p, t, sfc_t=None):
    p = np.asarray(p, dtype=float)
    t = np.asarray(t, dtype=float)
    cols = Columns.from_arrays(p[None], t[None], (t - 0.5)[None],
                               surface_temperature_c=sfc_t)
    res = bourgouin.run(Context(cols))
    return Code(int(res.code[0])), res


def surface_layer_profile(area_j_kg, t_sfc=2.0):
    """Surface 1000 hPa at t_sfc, falling linearly in ln p to 0 degC at p1: a triangle of area
    R_d * t_sfc / 2 * ln(1000 / p1); then a cold column."""
    p1 = 1000.0 * np.exp(-2.0 * area_j_kg / (Rd * t_sfc))
    return [1000.0, p1, p1 - 30.0, 700.0, 500.0], [t_sfc, 0.0, -2.0, -8.0, -25.0]


@pytest.mark.parametrize("area,expected", [
    (5.3, Code.SN), (5.9, Code.RASN),      # around 5.6 J/kg
    (12.9, Code.RASN), (13.5, Code.RA),    # around 13.2 J/kg
])
def test_case_c_surface_layer_thresholds(area, expected):
    code, res = run_one(*surface_layer_profile(area))
    assert res.values["pa_surface_j_kg"][0] == pytest.approx(area, rel=1e-6)
    assert code is expected


def test_case_d_all_cold_is_snow():
    code, _ = run_one([1000.0, 850.0, 700.0, 500.0], [-1.0, -5.0, -12.0, -30.0])
    assert code is Code.SN


def elevated_profile(warm_c, cold_c):
    """Cold surface layer (isothermal -cold_c from 1000 to 950 hPa, back to 0 at 900), warm nose
    (0 at 900, +warm_c from 850 to 800, 0 at 750), cold above.  Closed-form areas."""
    p = [1000.0, 950.0, 900.0, 850.0, 800.0, 750.0, 700.0, 600.0, 500.0]
    t = [-cold_c, -cold_c, 0.0, warm_c, warm_c, 0.0, -5.0, -12.0, -25.0]
    pa = Rd * warm_c * (0.5 * np.log(900 / 850) + np.log(850 / 800) + 0.5 * np.log(800 / 750))
    na = Rd * cold_c * (np.log(1000 / 950) + 0.5 * np.log(950 / 900))
    return p, t, pa, na


def cold_for(na_target, warm_c=3.0):
    _, _, _, na1 = elevated_profile(warm_c, 1.0)
    return na_target / na1


@pytest.mark.parametrize("offset,expected", [(+1.0, Code.PL), (-1.0, Code.FZRAPL)])
def test_case_a_ice_line(offset, expected):
    _, _, pa, _ = elevated_profile(3.0, 1.0)
    line = 66.0 + 0.66 * pa
    p, t, pa, na = elevated_profile(3.0, cold_for(line + offset))
    code, res = run_one(p, t)
    assert res.values["pa_aloft_j_kg"][0] == pytest.approx(pa, rel=1e-6)
    assert res.values["na_j_kg"][0] == pytest.approx(na, rel=1e-6)
    assert code is expected


@pytest.mark.parametrize("offset,expected", [(+1.0, Code.FZRAPL), (-1.0, Code.FZRA)])
def test_case_a_liquid_line(offset, expected):
    _, _, pa, _ = elevated_profile(3.0, 1.0)
    p, t, _, _ = elevated_profile(3.0, cold_for(46.0 + 0.66 * pa + offset))
    code, _ = run_one(p, t)
    assert code is expected


def test_case_a_warm_screen_gives_rain():
    _, _, pa, _ = elevated_profile(3.0, 1.0)
    p, t, _, _ = elevated_profile(3.0, cold_for(46.0 + 0.66 * pa - 10.0))
    code, _ = run_one(p, t, sfc_t=0.5)
    assert code is Code.RA


@pytest.mark.parametrize("warm_c,expected", [(0.05, Code.SN), (0.2, Code.PL)])
def test_weak_warm_layer_aloft_2_j_kg(warm_c, expected):
    # PA just under 2 J/kg is ignored (all-cold -> SN); just over, the lines apply, and a
    # strong cold layer refreezes whatever melted -> PL.
    p, t, pa, _ = elevated_profile(warm_c, 4.0)
    assert (pa < 2.0) == (expected is Code.SN)
    code, _ = run_one(p, t)
    assert code is expected


def test_case_b_warm_surface_layer_decides():
    # A thin warm surface layer (about 6.5 J/kg) under a strongly refreezing cold layer and a
    # warm nose: the pellets partly melt near the ground.
    p = [1000.0, 985.0, 960.0, 940.0, 900.0, 850.0, 800.0, 750.0, 700.0, 500.0]
    t = [3.0, 0.0, -10.0, -10.0, 0.0, 3.0, 3.0, 0.0, -5.0, -25.0]
    code, res = run_one(p, t)
    assert int(res.values["case"][0]) == 3
    na, pa = res.values["na_j_kg"][0], res.values["pa_aloft_j_kg"][0]
    assert na > 66.0 + 0.66 * pa
    pas = res.values["pa_surface_j_kg"][0]
    assert pas == pytest.approx(Rd * 3.0 / 2.0 * np.log(1000.0 / 985.0), rel=1e-6)
    # 3/2 * Rd * ln(1000/985) = 6.5 J/kg: between 5.6 and 13.2 -> rain and ice pellets.
    assert code is Code.RAPL


def test_explain_mentions_numbers():
    p, t, pa, na = elevated_profile(3.0, 3.0)
    _, res = run_one(p, t)
    texts = " ".join(s.text for s in res.steps(0))
    assert f"{pa:.1f}" in texts and f"{na:.1f}" in texts
