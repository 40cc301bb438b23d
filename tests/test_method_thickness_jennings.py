"""Partial-thickness rules and the Jennings / Ding surface partitions."""

from __future__ import annotations

import numpy as np
import pytest

from ptype.codes import NO_RESULT, Code
from ptype.engine.columns import Columns
from ptype.engine.methods import jennings, thickness
from ptype.engine.methods.base import Context


def column_with_thickness(low_m, mid_m, t_sfc=1.0, td_dep=0.5):
    """Heights given explicitly so the 1000-850 and 850-700 thicknesses are exact."""
    p = np.array([[1000.0, 850.0, 700.0, 500.0]])
    z = np.array([[100.0, 100.0 + low_m, 100.0 + low_m + mid_m, 100.0 + low_m + mid_m + 2600.0]])
    t = np.array([[t_sfc, -2.0, -8.0, -25.0]])
    return Columns.from_arrays(p, t, t - td_dep, z)


# Cortinas et al. thickness algorithm (Cortinas2002; thresholds from Keeter & Cline 1991 and
# Zerr 1997; details from memory): 850-700 <= 1540 -> SN; 1000-850 > 1310 or 850-700 > 1560
# -> RA/FZRA by surface wet-bulb; 1540 < 850-700 <= 1560 -> PL.
@pytest.mark.parametrize("low,mid,t_sfc,expected", [
    (1290.0, 1539.0, 1.0, Code.SN),
    (1290.0, 1541.0, 1.0, Code.PL),
    (1290.0, 1559.0, -2.0, Code.PL),
    (1290.0, 1561.0, 2.0, Code.RA),
    (1290.0, 1561.0, -2.0, Code.FZRA),
    (1311.0, 1545.0, 3.0, Code.RA),
    (1309.0, 1545.0, 3.0, Code.PL),
])
def test_thickness_thresholds(low, mid, t_sfc, expected):
    res = thickness.run(Context(column_with_thickness(low, mid, t_sfc)))
    assert res.values["thickness_1000_850_m"][0] == pytest.approx(low)
    assert Code(int(res.code[0])) is expected


def test_thickness_needs_1000_hpa():
    p = np.array([[900.0, 850.0, 700.0, 500.0]])
    t = np.array([[0.0, -2.0, -8.0, -25.0]])
    res = thickness.run(Context(Columns.from_arrays(p, t, t - 1.0)))
    assert int(res.code[0]) == NO_RESULT


def test_jennings_published_check_values():
    # Jennings et al. (2018) Suppl. Table 2 coefficients, evaluated by hand:
    # T = 1 degC, RH = 90 %: 1 / (1 + exp(-10.04 + 1.41 + 8.1)) = 0.629;
    # T = 2 degC, RH = 70 %: 1 / (1 + exp(-10.04 + 2.82 + 6.3)) = 0.715.
    assert jennings.snow_probability(1.0, 90.0) == pytest.approx(0.63, abs=0.005)
    assert jennings.snow_probability(2.0, 70.0) == pytest.approx(0.72, abs=0.01)
    # Drier air favours snow at the same temperature (their finding: RH the strongest control).
    assert jennings.snow_probability(1.5, 60.0) > jennings.snow_probability(1.5, 95.0)


def test_jennings_fifty_percent_near_one_degree_at_typical_humidity():
    # Jennings et al. (2018): the 50 % threshold averages ~1.0 degC over NH land (at the RH of
    # precipitating conditions; we check that it lies in their 95 % range -0.4..2.4 for RH 80-100).
    for rh in (80.0, 90.0, 100.0):
        t50 = -(jennings.ALPHA + jennings.GAMMA * rh) / jennings.BETA
        assert -0.4 <= t50 <= 2.4


def test_ding_sea_level_saturated_t0():
    # Ding et al. (2014) T0 at sea level with RH = 1: -5.87 + 16.06 - 9.614 = +0.576 degC
    # (their equation, evaluated by hand).
    t_min, t_max = jennings.ding_thresholds_c(100.0, 0.0)
    assert (t_min + t_max) / 2.0 == pytest.approx(0.576, abs=0.01)


def test_ding_polynomial_form_agrees():
    # A polynomial T_min = T0 + 11.756 - 23.1 RH + 10.289 RH^2 (RH > 0.78) in public use for
    # Ding et al. (2014) (common practice) agrees with the exponential form to 0.01 K for
    # RH 0.8-1.0: the check on the dT and dS recalled from memory.
    for rh in np.linspace(0.8, 1.0, 9):
        t_min, _ = jennings.ding_thresholds_c(rh * 100.0, 0.0)
        t0 = -5.87 + 16.06 * rh - 9.614 * rh ** 2
        assert t_min == pytest.approx(t0 + 11.756 - 23.1 * rh + 10.289 * rh ** 2, abs=0.015)


def test_jennings_method_uses_screen_values():
    p = np.array([[1000.0, 850.0, 700.0]])
    t = np.array([[5.0, 0.0, -8.0]])
    cols = Columns.from_arrays(p, t, t - 1.0, surface_temperature_c=0.5, surface_dewpoint_c=-4.0)
    res = jennings.run(Context(cols))
    assert Code(int(res.code[0])) is Code.SN
    assert res.values["surface_temperature_c"][0] == 0.5
