"""The phase path (ptype/engine/phase.py) and the physically possible consensus.

Soundings are invented for the tests; each states which physical fact decides it.  Energies
are checked against the closed form of an isothermal layer, R_d (T - T0) ln(p_b / p_t)
(Bourgouin 2000; the area on an equal-area diagram).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from winter_soundings import build_columns, draw_parameters

import ptype
from ptype import thermo
from ptype.codes import Code
from ptype.engine import phase
from ptype.engine.columns import Columns
from ptype.engine.methods.base import Context
from ptype.engine.run import diagnose_columns
from ptype.thermo.constants import Rd


def _levels(knots_p, knots_t, depression, n_levels=60, p_top=300.0):
    """Levels from knots_p[0] to p_top, temperature linear in ln p between the knots, dew point
    = temperature - depression(p)."""
    p = np.exp(np.linspace(math.log(knots_p[0]), math.log(p_top), n_levels))
    t = np.interp(-np.log(p), -np.log(np.asarray(knots_p, float)), np.asarray(knots_t, float))
    return [{"pressure_hpa": round(float(pi), 2), "temperature_c": round(float(ti), 2),
             "dewpoint_c": round(float(ti - depression(pi)), 2)} for pi, ti in zip(p, t)]


def _doc(levels, **extra):
    return {"site": {"id": "T-PH", "name": "Phase test (invented)", "elevation_m": 100.0},
            "levels": levels, **extra}


def _context(document) -> Context:
    return Context(Columns.from_profiles([ptype.Profile.from_document(document)]))


# -- energies ----------------------------------------------------------------------------

def test_melting_energy_of_an_isothermal_saturated_nose_matches_closed_form():
    # +3 degC from 850 to 800 hPa, saturated (wet-bulb = temperature): R_d * 3 * ln(850/800)
    # = 52.2 J/kg (Bourgouin 2000's area), plus the two ramps in and out of the nose.
    levels = [{"pressure_hpa": p, "temperature_c": t, "dewpoint_c": t}
              for p, t in [(1000, -5.0), (900, -2.0), (860, -0.5), (855, 3.0), (850, 3.0),
                           (800, 3.0), (795, -0.5), (700, -8.0), (500, -25.0), (400, -38.0)]]
    ctx = _context(_doc(levels))
    aloft, surface = phase.melting_energies_j_kg(ctx)
    closed = Rd * 3.0 * math.log(850.0 / 800.0)
    assert closed == pytest.approx(52.2, abs=0.05)
    assert surface[0] == 0.0
    # The ramps (trapezoids in ln p, crossings interpolated) add a little: between the
    # plateau alone and plateau plus the full ramps.
    ramps = Rd * 1.5 * (math.log(855 / 850) + math.log(800 / 795)) + Rd * 3.0 * math.log(
        860 / 855) * 0.5
    assert closed < aloft[0] < closed + 2 * ramps + 1.0


def test_melting_energy_counts_only_below_the_cloud_top():
    # The same nose, but the only cloud ends below it (dry above 900 hPa): nothing falls
    # through the nose, so it melts nothing.
    def depression(p):
        return 0.2 if p > 905 else 15.0
    levels = _levels([1000, 900, 850, 800, 700, 500], [-5, -2, 4, 4, -8, -25], depression)
    aloft, _ = phase.melting_energies_j_kg(_context(_doc(levels)))
    assert aloft[0] == pytest.approx(0.0, abs=1e-9)


def test_dry_warm_layer_melts_less_than_a_saturated_one():
    # Wet-bulb below the air temperature in dry air: less melting energy (sublimation cools
    # the falling snow; Mason 1971).
    knots_p, knots_t = [1000, 900, 850, 800, 700, 500], [-5, -2, 4, 4, -8, -25]
    wet = phase.melting_energies_j_kg(_context(_doc(_levels(knots_p, knots_t, lambda p: 0.2))))
    dry = phase.melting_energies_j_kg(_context(_doc(_levels(
        knots_p, knots_t, lambda p: 0.2 if p > 905 or p < 760 else 6.0))))
    assert dry[0][0] < wet[0][0]


# -- the cases the consensus must get right ----------------------------------------------

def test_melted_aloft_over_a_dry_surface_is_never_snow():
    # A warm nose of ~110 J/kg melts snow completely (Bourgouin 2000: far above 13.2 J/kg);
    # the surface air is +1 degC but dry (wet-bulb below 0 degC).  The drops cannot become
    # snow again: rain (or freezing rain), never SN.
    def depression(p):
        return 7.0 if p > 985 else 0.3
    levels = _levels([1000, 980, 930, 900, 800, 700, 500], [1.0, -1.5, -2.0, 3.5, 5.0, -6, -24],
                     depression)
    d = ptype.diagnose(_doc(levels), members=40, seed=2)
    assert d.to_dict()["surface"]["wetbulb_c"] < 0.0
    assert d.to_dict()["warm_area_j_kg"] > 100.0
    assert d.ptype in ("RA", "FZRA")


def test_warm_surface_layer_melts_ice_pellets():
    # +5 degC at the surface with ~50 J/kg in the surface warm layer under a refreezing layer
    # and a warm nose: whatever refroze aloft melts again near the ground (Bourgouin 2000,
    # case B: surface area above 13.2 J/kg gives rain).
    levels = _levels([1000, 945, 930, 880, 840, 780, 700, 500],
                     [5.0, 0.5, -1.0, -8.0, -4.0, 3.0, -5.0, -24.0], lambda p: 0.3)
    d = ptype.diagnose(_doc(levels), members=40, seed=3)
    assert d.ptype == "RA"


def test_one_humid_level_at_the_ground_is_not_a_drizzle_cloud():
    # A snow sounding (whole column below 0 degC, deep ice cloud above 750 hPa) whose lowest
    # level alone is humid (RH 91 %) under 1.5 km of dry air: a single humid level is no
    # cloud that can grow drizzle (ours: at least 300 m of liquid cloud), so the methods'
    # snow stands.
    def depression(p):
        if p > 995:
            return 1.2
        return 10.0 if p > 760 else 0.3
    levels = _levels([1000, 900, 700, 500], [-3.0, -6.0, -14.0, -30.0], depression)
    d = ptype.diagnose(_doc(levels), members=0)
    assert d.ptype == "SN"
    assert d.to_dict()["consensus"]["rule"] != "no_ice_drizzle"


def test_deep_warm_topped_cloud_still_gives_freezing_drizzle():
    # Stratus from the ground to 850 hPa topping at about -6 degC under dry air, surface
    # -3 degC: no ice, deep enough to grow drizzle (Huffman & Norman 1988): FZDZ.
    def depression(p):
        return 0.2 if p > 845 else 12.0
    levels = _levels([1000, 850, 700, 500], [-3.0, -6.0, -10.0, -28.0], depression)
    d = ptype.diagnose(_doc(levels), members=0)
    assert d.ptype == "FZDZ"


def test_thickness_rules_read_both_layers_jointly():
    # Saturated +8 degC at 1000 hPa: the 1000-850 hPa thickness is far above 1310 m, so the
    # thickness rules say liquid whatever the 850-700 hPa layer says (Keeter & Cline 1991).
    levels = _levels([1000, 850, 700, 500], [8.0, -4.0, -13.0, -30.0], lambda p: 0.3)
    d = ptype.diagnose(_doc(levels), members=0).to_dict()
    assert d["methods"]["thickness"]["ptype"] in ("RA", "FZRA")


# -- invariants over generated soundings -------------------------------------------------

ICE = {Code.SN: 2, Code.PL: 2, Code.RASN: 1, Code.RAPL: 1, Code.FZRAPL: 1}
ICE_OF_CODE = np.array([ICE.get(Code(k), 0) for k in range(len(Code))])


def _warmed(columns: Columns, kelvin: float) -> Columns:
    """Every level warmed by ``kelvin`` at the same relative humidity."""
    t = columns.temperature_c + kelvin
    td = thermo.dewpoint_from_relative_humidity_c(t, columns.relative_humidity_pct)
    return Columns.from_arrays(columns.pressure_hpa, t, td, columns.height_m,
                               surface_height_m=columns.height_m[:, 0])


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(seed=st.integers(0, 2**31 - 1), kelvin=st.floats(0.2, 3.0))
def test_warming_never_moves_the_consensus_toward_ice(seed, kelvin):
    prm = draw_parameters(np.random.default_rng(seed), 64)
    cols = build_columns(prm)
    before = diagnose_columns(cols, consensus_only=True)["ptype"]
    after = diagnose_columns(_warmed(cols, kelvin), consensus_only=True)["ptype"]
    worse = ICE_OF_CODE[after] > ICE_OF_CODE[before]
    assert not worse.any(), [(Code(b).name, Code(a).name) for b, a in
                             zip(before[worse], after[worse])]


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(seed=st.integers(0, 2**31 - 1))
def test_complete_melting_never_gives_snow(seed):
    cols = build_columns(draw_parameters(np.random.default_rng(seed), 64))
    out = diagnose_columns(cols, return_context=True)
    melted = out["_consensus"].values["melted_aloft"] | out["_consensus"].values[
        "melted_at_surface"]
    assert not np.isin(out["ptype"][melted], [Code.SN, Code.RASN]).any()


@settings(max_examples=10, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(seed=st.integers(0, 2**31 - 1))
def test_reported_type_is_supported_and_probabilities_sum_to_one(seed):
    # The reported type has at least a quarter of its members whenever a possible type has
    # (ptype.engine.probability.MIN_SUPPORT, docs/consensus.md) and stays within the
    # profile's phase path.
    from ptype.engine.probability import MIN_SUPPORT
    from ptype.engine.run import run_columns
    cols = build_columns(draw_parameters(np.random.default_rng(seed), 32))
    run = run_columns(cols, 20, seed)
    rows = np.arange(cols.n_columns)
    np.testing.assert_allclose(run.probabilities.sum(axis=1), 1.0)
    # Where the members split over five or more types none may reach a quarter: then the most
    # probable possible type is reported (docs/consensus.md).
    p_reported = run.probabilities[rows, run.codes]
    p_best = np.where(run.fields["possible"], run.probabilities, 0.0).max(axis=1)
    split = p_best < MIN_SUPPORT - 1e-12
    assert np.all(p_reported[~split] >= MIN_SUPPORT - 1e-12)
    assert np.all(p_reported[split] >= p_best[split] - 1e-12)
    assert np.all(run.fields["possible"][rows, run.codes])


def test_ground_warming_past_zero_keeps_czys_vote_liquid():
    # A generated sounding (seed 1138, column 27) whose ground warms from -0.8 to +0.2 degC:
    # Czys et al. (1996) fall silent above 0 degC; with the snow melted aloft that silence is
    # a rain vote, so the consensus may not move from FZRAPL toward PL (docs/consensus.md).
    cols = build_columns(draw_parameters(np.random.default_rng(1138), 64))
    before = diagnose_columns(cols, consensus_only=True)["ptype"]
    after = diagnose_columns(_warmed(cols, 1.0), consensus_only=True)["ptype"]
    assert Code(int(before[27])) is Code.FZRAPL
    assert ICE_OF_CODE[after[27]] <= ICE_OF_CODE[before[27]]
