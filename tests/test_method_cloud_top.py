"""Cloud-top (top-down) reasoning: ice or no ice, seeding, melting and refreezing limits.

Sources: ice nucleation likely at or below about -10 degC (NWS ice-nucleation guidance,
common practice: heterogeneous freezing likeliest below -10 degC); Stewart & King (1987)
wet-bulb limits 1 and 3 degC for partial/complete melting; refreezing of fully melted
drops needs a cold layer below about -8 degC (WPC training guidance); freezing drizzle
from clouds too warm for ice over a sub-freezing surface (Huffman & Norman 1988).
"""

from __future__ import annotations

import numpy as np
import pytest

from ptype.codes import NO_RESULT, Code
from ptype.engine.columns import Columns
from ptype.engine.methods import cloud_top
from ptype.engine.methods.base import Context


def run_one(p, t, td, sfc_t=None):
    cols = Columns.from_arrays(np.array([p], float), np.array([t], float), np.array([td], float),
                               surface_temperature_c=sfc_t)
    res = cloud_top.run(Context(cols))
    code = int(res.code[0])
    return (None if code == NO_RESULT else Code(code)), res


def stratus(top_c, sfc_c=-2.0):
    """Saturated low cloud from the surface to 850 hPa whose top is at top_c, very dry above."""
    p = [1000.0, 950.0, 900.0, 850.0, 800.0, 700.0, 500.0]
    t = [sfc_c, sfc_c - 1.0, (sfc_c + top_c) / 2.0, top_c, top_c + 3.0, top_c - 2.0, top_c - 18.0]
    td = [t[0] - 0.2, t[1] - 0.2, t[2] - 0.2, t[3] - 0.2, t[4] - 25.0, t[5] - 25.0, t[6] - 20.0]
    return p, t, td


@pytest.mark.parametrize("top_c,expected", [(-9.0, Code.FZDZ), (-11.0, Code.SN)])
def test_ice_nucleation_threshold(top_c, expected):
    code, res = run_one(*stratus(top_c))
    assert bool(res.values["ice"][0]) == (expected is Code.SN)
    assert code is expected


def test_warm_surface_gives_drizzle():
    code, _ = run_one(*stratus(-6.0, sfc_c=2.0))
    assert code is Code.DZ


def test_no_cloud_no_result():
    p = [1000.0, 850.0, 700.0, 500.0]
    t = [-2.0, -6.0, -12.0, -30.0]
    td = [x - 15.0 for x in t]
    code, res = run_one(p, t, td)
    assert code is None
    assert "No saturated layer" in res.steps(0)[0].text


def test_seeding_from_higher_ice_cloud():
    # Low stratus topping at -6 degC (no ice of its own) under a -20 degC ice cloud; the gap is
    # moist but not cloudy (RH ~85 %), so crystals survive the fall: seeded -> not drizzle.
    p = [1000.0, 950.0, 900.0, 850.0, 800.0, 750.0, 700.0, 600.0, 500.0]
    t = [-2.0, -3.0, -5.0, -6.0, -7.0, -9.0, -12.0, -17.0, -24.0]
    rh_gap = -1.6  # dew-point depression giving RH ~ 85-88 % over water
    td = [-2.2, -3.2, -5.2, -6.2, -7.0 + rh_gap, -9.0 + rh_gap, -12.2, -17.2, -24.2]
    code, res = run_one(p, t, td)
    assert bool(res.values["ice"][0])
    assert bool(res.values["seeded"][0]) or res.values["lowest_cloud_min_c"][0] <= -10.0
    assert code is Code.SN


def test_deep_dry_gap_blocks_seeding():
    # Same decks, but a 2-3 km very dry gap (RH < 50 %): the crystals sublimate -> drizzle.
    p = [1000.0, 950.0, 900.0, 850.0, 800.0, 700.0, 600.0, 500.0, 400.0]
    t = [-2.0, -3.0, -5.0, -6.0, -5.0, -9.0, -17.0, -24.0, -33.0]
    td = [-2.2, -3.2, -5.2, -6.2, -20.0, -25.0, -17.2, -24.2, -33.2]
    code, res = run_one(p, t, td)
    assert not bool(res.values["ice"][0])
    assert code is Code.FZDZ


def nose_profile(nose_c, cold_c):
    """Deep saturated column with an ice-producing top, a warm nose of nose_c at 850-800 hPa and a
    surface cold layer reaching cold_c."""
    p = [1000.0, 950.0, 900.0, 850.0, 800.0, 750.0, 700.0, 600.0, 500.0]
    t = [cold_c / 2.0, cold_c, -0.5, nose_c, nose_c, -0.5, -5.0, -12.0, -22.0]
    td = [x - 0.1 for x in t]
    return p, t, td


@pytest.mark.parametrize("nose_c,cold_c,expected", [
    (3.5, -5.0, Code.FZRA),     # complete melt (> 3 degC), cold layer warmer than -8: FZRA
    (3.5, -10.0, Code.PL),      # complete melt, cold layer colder than -8: refreezes
    (2.5, -5.0, Code.PL),       # partial melt (1-3 degC): ice cores refreeze
    (0.8, -5.0, Code.SN),       # under 1 degC: little melting
])
def test_stewart_king_and_refreezing_limits(nose_c, cold_c, expected):
    code, res = run_one(*nose_profile(nose_c, cold_c))
    assert code is expected, [s.text for s in res.steps(0)]


def test_vectorised_equals_single():
    cases = [stratus(-9.0), stratus(-11.0), nose_profile(3.5, -5.0), nose_profile(2.5, -5.0)]
    width = max(len(c[0]) for c in cases)

    def pad(a):
        return a + [np.nan] * (width - len(a))

    cols = Columns.from_arrays(np.array([pad(c[0]) for c in cases]),
                               np.array([pad(c[1]) for c in cases]),
                               np.array([pad(c[2]) for c in cases]))
    res = cloud_top.run(Context(cols))
    for i, c in enumerate(cases):
        single, _ = run_one(*c)
        assert int(res.code[i]) == int(single)
