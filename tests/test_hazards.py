"""Tests of ptype.roads.hazards: road hazards and the Jones ice-accretion model."""

import math

import numpy as np
import psychrolib
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from ptype.codes import Code
from ptype.roads import hazards


def _probs(code_probs: dict, n: int = 1) -> np.ndarray:
    out = np.zeros((n, len(Code)))
    for code, p in code_probs.items():
        out[:, int(code)] = p
    return out


# --- frost point -------------------------------------------------------------------------

@pytest.mark.parametrize("dewpoint_c", [-20.0, -8.0, -0.5])
def test_frost_point_c_matches_psychrolib(dewpoint_c):
    # Reference: psychrolib (Meyer & Thevenard 2019, ASHRAE Handbook-Fundamentals 2017 ch. 1):
    # its saturation pressure is taken over ice below the triple point (Hyland & Wexler 1983),
    # so inverting it at the air's vapour pressure gives the frost point.
    psychrolib.SetUnitSystem(psychrolib.SI)
    # Vapour pressure of the air: saturation over *water* at the dew point (WMO convention),
    # ASHRAE 2017 ch. 1 eq. 6 (Hyland-Wexler over liquid water) evaluated directly.
    t = dewpoint_c + 273.15
    ln_pws = (-5.8002206e3 / t + 1.3914993 - 4.8640239e-2 * t + 4.1764768e-5 * t ** 2
              - 1.4452093e-8 * t ** 3 + 6.5459673 * math.log(t))
    e_pa = math.exp(ln_pws)
    expected = psychrolib.GetTDewPointFromVapPres(0.0, e_pa)  # air at 0 degC bounds it
    got = float(hazards.frost_point_c(dewpoint_c))
    # Tolerance: the two saturation formulas differ by < 0.5 % in e, i.e. < 0.05 K here.
    assert got == pytest.approx(expected, abs=0.06)
    assert got > dewpoint_c  # frost point lies above the dew point below 0 degC


def test_frost_point_c_above_zero_returns_dewpoint():
    assert float(hazards.frost_point_c(3.0)) == 3.0


# --- freezing on the road ----------------------------------------------------------------

def test_freezing_on_road_freezing_types_and_cold_road():
    codes = np.array([Code.FZRA, Code.RA, Code.RA, Code.SN, Code.FZDZ, Code.RAPL, Code.RA])
    road = np.array([2.0, -0.5, 0.0, -5.0, np.nan, -1.0, np.nan])
    got = hazards.freezing_on_road(codes, road)
    # Freezing types always; liquid-bearing types only on a road at or below 0 degC (common
    # practice); snow is a different hazard; unknown road temperature is never a guess.
    assert got.tolist() == [True, True, True, False, True, True, False]


def test_freezing_on_road_probability_adds_liquid_on_cold_road():
    prob = _probs({Code.FZRA: 0.2, Code.RA: 0.5, Code.SN: 0.3}, n=2)
    got = hazards.freezing_on_road_probability(prob, np.array([1.0, -1.0]))
    assert got.tolist() == pytest.approx([0.2, 0.7])


# --- frost ---------------------------------------------------------------------------------

def test_frost_on_road_uses_frost_point_not_dewpoint():
    # Td = -10 degC: frost point about -8.9 degC.  A road at -9.5 degC is above the dew point
    # (no dew-point "frost") but below the frost point: deposition occurs.
    assert hazards.frost_on_road(-9.5, -10.0)
    assert not hazards.frost_on_road(-8.0, -10.0)
    assert not hazards.frost_on_road(1.0, 3.0)     # road above 0 degC: dew, not frost
    assert not hazards.frost_on_road(np.nan, -5.0)


# --- Jones simple flux model ---------------------------------------------------------------

def test_jones_radial_ice_mm_hand_computed():
    # Jones (1998, Atmos. Res. 46) simple flux model as recalled in the methods brief (from
    # memory, unverified): R = 1/(rho_i pi) * sqrt((P rho_o)^2 + (3.6 V W)^2), W = 0.067 P^0.846.
    # Hand computation for P = 2.54 mm/h (0.1 in/h), V = 10 m/s, one hour:
    #   W = 0.067 * 2.54**0.846 = 0.067 * 2.1999 = 0.14739 g m-3
    #   3.6 * 10 * 0.14739 = 5.3061 mm/h;  sqrt(2.54^2 + 5.3061^2) = 5.8828
    #   R = 5.8828 / (0.9 * pi) = 2.0806 mm
    assert float(hazards.jones_radial_ice_mm(2.54, 10.0, 1.0)) == pytest.approx(2.0806, rel=1e-3)
    # P = 1 mm/h, V = 5 m/s, 3 h: W = 0.067; 3.6*5*0.067 = 1.206; sqrt(1 + 1.4544) = 1.56665;
    # R = 3 * 1.56665 / (0.9 pi) = 1.6623 mm.
    assert float(hazards.jones_radial_ice_mm(1.0, 5.0, 3.0)) == pytest.approx(1.6623, rel=1e-3)


def test_jones_radial_ice_mm_calm_limit_is_cylinder_geometry():
    # Independent of the recalled formula: rain falling vertically on a horizontal cylinder of
    # diameter D intercepts P t D of water per unit length; spread as a thin uniform ice shell
    # of thickness R it occupies pi D R, so R = P t rho_w / (pi rho_i).
    p, t = 3.0, 2.0
    assert float(hazards.jones_radial_ice_mm(p, 0.0, t)) == pytest.approx(p * t / (math.pi * 0.9))


def test_liquid_water_content_g_m3_dimensional_flux():
    # 3.6 V W: V [m/s] * W [g/m3] = g m-2 s-1 of water = 1e-3 mm/s = 3.6 mm/h per unit V W.
    v, w = 1.0, 1.0
    mm_per_h = v * w * 3600 / 1000  # g m-2 s-1 -> kg m-2 h-1 -> mm/h (1 kg m-2 = 1 mm)
    assert mm_per_h == pytest.approx(3.6)
    assert float(hazards.liquid_water_content_g_m3(1.0)) == pytest.approx(0.067)


def test_flat_glaze_mm_mass_balance():
    # All the water stays: 2 mm/h for 1.5 h is 3 mm of water, 3 / 0.9 mm of glaze.
    assert float(hazards.flat_glaze_mm(2.0, 1.5)) == pytest.approx(3.0 / 0.9)


@settings(max_examples=60, deadline=None)
@given(p=st.floats(0.0, 20.0), dp=st.floats(0.0, 5.0), v=st.floats(0.0, 30.0),
       dv=st.floats(0.0, 10.0), h=st.floats(0.1, 6.0))
def test_jones_radial_ice_mm_monotonic(p, dp, v, dv, h):
    base = float(hazards.jones_radial_ice_mm(p, v, h))
    assert float(hazards.jones_radial_ice_mm(p + dp, v, h)) >= base - 1e-12
    assert float(hazards.jones_radial_ice_mm(p, v + dv, h)) >= base - 1e-12
    # Never less than the calm-air (geometric) value, and linear in duration.
    assert base >= float(hazards.jones_radial_ice_mm(p, 0.0, h)) - 1e-12
    assert float(hazards.jones_radial_ice_mm(p, v, 2 * h)) == pytest.approx(2 * base, abs=1e-12)


# --- step hazards --------------------------------------------------------------------------

def test_step_hazards_amounts_only_for_their_types():
    codes = np.array([Code.FZRA, Code.SN, Code.RA, Code.FZRA])
    prob = np.zeros((4, len(Code)))
    prob[np.arange(4), codes] = 1.0
    out = hazards.step_hazards(codes, prob, road_surface_temperature_c=[-1.0, -3.0, 2.0, -1.0],
                               dewpoint_c=[-2.0, -6.0, 1.0, -2.0],
                               precipitation_rate_mm_h=[1.0, 2.0, 1.0, np.nan],
                               wind_speed_m_s=[5.0, 5.0, 5.0, 5.0], hours=0.25)
    assert out["ice_accretion_mm"][0] == pytest.approx(0.25 * math.hypot(1.0, 3.6 * 5 * 0.067)
                                                       / (0.9 * math.pi))
    assert out["ice_accretion_mm"][1] == 0.0 and out["ice_accretion_mm"][2] == 0.0
    assert math.isnan(out["ice_accretion_mm"][3])  # freezing rain of unknown rate: unknown amount
    # 2 mm/h of snow for 15 min at 10:1 = 5 mm of snow = 0.5 cm.
    assert out["snow_cm"].tolist()[:3] == pytest.approx([0.0, 0.5, 0.0])
    assert out["freezing_on_road"].tolist() == [True, False, False, True]
    assert out["snow"].tolist() == [False, True, False, False]


def test_step_hazards_ice_pellets_depth_and_probability():
    # 1 mm/h of melted water for one hour: 2.5 mm of pellets at the 2.5:1 pellet-to-liquid
    # ratio (from memory: pellets pack at about 2:1 to 3:1), half of it for the mixes (ours).
    codes = np.array([Code.PL, Code.RAPL, Code.FZRAPL, Code.SN, Code.RA])
    probs = np.zeros((5, len(Code)))
    probs[:, Code.PL] = 0.4
    probs[:, Code.RAPL] = 0.2
    probs[:, Code.FZRAPL] = 0.2
    probs[:, Code.RA] = 0.2
    hz = hazards.step_hazards(codes, probs, np.full(5, -1.0), np.full(5, -3.0),
                              np.full(5, 1.0), np.full(5, 2.0), 1.0)
    assert hz["ice_pellets"].tolist() == [True, True, True, False, False]
    np.testing.assert_allclose(hz["ice_pellets_cm"], [0.25, 0.125, 0.125, 0.0, 0.0])
    np.testing.assert_allclose(hz["ice_pellets_probability"], 0.4 + 0.5 * 0.2 + 0.5 * 0.2)
    unknown = hazards.step_hazards(codes[:1], probs[:1], [-1.0], [-3.0], [np.nan], [2.0], 1.0)
    assert np.isnan(unknown["ice_pellets_cm"][0])
