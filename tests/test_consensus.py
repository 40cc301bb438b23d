"""The consensus (ptype/engine/consensus.py): ice first, the phase path, the vote, humidity.

The method results are set by hand here (the methods themselves are tested in
tests/test_method_*.py), so each rule of the consensus is checked on its own, on invented
profiles whose phase-path state each test asserts first:

* no ice in a deep enough cloud -> drizzle, freezing at or below 0 degC (Huffman & Norman
  1988);
* the vote: the weighted median of the ice content, the two Baldwin variants sharing one
  vote, even splits to less ice, equal votes within a level to the more hazardous type
  (FZRA > SN > PL > RA in operational multi-algorithm practice, Reeves et al. 2014);
* the phase path removes impossible types (ptype/engine/phase.py);
* a rainy vote over a sub-freezing surface wet-bulb after surface-based melting -> Jennings
  et al. (2018) decides; no vote at all -> Jennings et al. (2018) alone.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

import ptype
from ptype.codes import HAZARD_ORDER, NO_RESULT, Code
from ptype.engine import phase
from ptype.engine.columns import Columns
from ptype.engine.consensus import RULES, VOTER_WEIGHTS, VOTERS, consensus
from ptype.engine.methods.base import Context, MethodResult

P = np.array([1000.0, 960.0, 920.0, 880.0, 840.0, 800.0, 700.0, 600.0, 500.0])


def _ctx(temperatures, depression_c=0.3, n=1) -> Context:
    """Saturated (unless ``depression_c``) columns with the given temperatures at :data:`P`."""
    t = np.asarray(temperatures, dtype=float)
    return Context(Columns.from_arrays(np.tile(P, (n, 1)), np.tile(t, (n, 1)),
                                       np.tile(t - depression_c, (n, 1))))


#: A weak warm layer aloft (partial melting: 2 to 13.2 J/kg on the wet-bulb) over a cold
#: surface, ice cloud to 500 hPa: every type is possible.
PARTIAL_ALOFT = [-2.0, -1.5, -0.4, 0.6, -0.4, -3.0, -9.0, -16.0, -24.0]
#: A strong warm nose (well over 13.2 J/kg): complete melting aloft.
MELTED_ALOFT = [-2.0, -3.0, -1.0, 3.0, 4.0, 1.0, -6.0, -14.0, -24.0]
#: A warm surface layer of about 40 J/kg under the same nose.
WARM_SURFACE = [5.0, 2.5, -0.5, 3.0, 4.0, 1.0, -6.0, -14.0, -24.0]
#: The whole column below 0 degC: nothing melts.
ALL_COLD = [-3.0, -4.0, -5.0, -6.0, -7.0, -8.0, -13.0, -19.0, -27.0]


def _votes(*codes_by_method):
    """Results of the voters in VOTERS order, one code per column each (NO_RESULT abstains)."""
    out = {}
    for name, codes in zip(VOTERS, codes_by_method):
        codes = np.asarray([int(c) for c in codes], dtype=np.int64)
        out[name] = MethodResult(name, codes, np.zeros(codes.size, dtype=np.int64), {})
    return out


def _cloud(ice, drizzle=False, n=1):
    """A cloud-top result: a cloud is present, with or without ice, deep enough to drizzle or
    not (the ice analysis itself is tested in tests/test_method_cloud_top.py)."""
    return MethodResult("cloud_top", np.full(n, NO_RESULT, dtype=np.int64),
                        np.zeros(n, dtype=np.int64),
                        {"has_cloud": np.ones(n, dtype=bool), "ice": np.full(n, ice),
                         "drizzle": np.full(n, drizzle)})


def _rule(res, i=0):
    return RULES[int(res.rule[i])]


def _code(res, i=0):
    return Code(int(res.code[i]))


def _path(ctx, ice=True):
    return phase.phase_path(ctx, np.full(ctx.columns.n_columns, ice))


def test_partial_aloft_profile_allows_every_type():
    path = _path(_ctx(PARTIAL_ALOFT))
    aloft = path["melt_aloft_j_kg"][0]
    assert phase.MIN_MELT_ALOFT_J_KG <= aloft < phase.COMPLETE_MELT_J_KG
    assert path["possible"][0].all()


# -- the vote ----------------------------------------------------------------------------

def test_majority_wins_within_the_median_level():
    res = consensus(_ctx(PARTIAL_ALOFT), _votes([Code.SN], [Code.SN], [Code.PL]))
    assert _code(res) is Code.SN and _rule(res) == "vote"
    assert res.values["counts"][0, Code.SN] == 2


def test_weighted_median_can_pick_the_mix_between_two_sides():
    # Liquid 1, mixed 1 (the Baldwin pair, 0.5 + 0.5), frozen 1: the middle of the three
    # votes ordered by ice is the mix, freezing on a surface at -2 degC.
    res = consensus(_ctx(PARTIAL_ALOFT),
                    _votes([Code.FZRA], [Code.PL], [Code.FZRAPL], [Code.FZRAPL]))
    assert _code(res) is Code.FZRAPL


def test_even_split_goes_to_less_ice_and_equal_votes_to_the_more_hazardous():
    ctx = _ctx(PARTIAL_ALOFT, n=2)
    res = consensus(ctx, _votes([Code.FZRA, Code.SN], [Code.PL, Code.PL]))
    # Column 0: liquid 1 against frozen 1 -> the side with less ice, freezing rain.
    # Column 1: SN and PL are both frozen -> the more hazardous, SN (operational practice).
    assert [_code(res, 0), _code(res, 1)] == [Code.FZRA, Code.SN]
    assert res.values["split"][0] and res.values["tie"][1]
    assert _rule(res, 0) == _rule(res, 1) == "vote_tie_hazard"


def test_hazard_order_keeps_the_operational_tie_break():
    # FZRA > SN > PL (IP) > RA (Reeves et al. 2014 describe the practice).
    rank = {c: HAZARD_ORDER.index(c) for c in (Code.FZRA, Code.SN, Code.PL, Code.RA)}
    assert rank[Code.FZRA] < rank[Code.SN] < rank[Code.PL] < rank[Code.RA]
    assert set(HAZARD_ORDER) == set(Code)


def test_the_two_baldwin_variants_share_one_vote():
    assert VOTER_WEIGHTS["baldwin"] + VOTER_WEIGHTS["baldwin_revised"] == 1.0
    # Liquid: Bourgouin, Ramer (2); frozen: the Baldwin pair and Czys (0.5 + 0.5 + 1 = 2): an
    # even split, so freezing rain.  Counted as two votes, the pair would have made it PL.
    res = consensus(_ctx(PARTIAL_ALOFT),
                    _votes([Code.FZRA], [Code.FZRA], [Code.PL], [Code.PL], [Code.PL]))
    assert _code(res) is Code.FZRA and res.values["split"][0]


def test_freezing_on_contact_follows_the_surface_air_not_the_votes():
    # RA and FZRA are one liquid vote; the surface air at -2 degC makes it freezing rain.
    res = consensus(_ctx(PARTIAL_ALOFT), _votes([Code.RA], [Code.RA], [Code.PL]))
    assert _code(res) is Code.FZRA


def test_abstentions_are_not_counted():
    res = consensus(_ctx(PARTIAL_ALOFT), _votes([NO_RESULT], [NO_RESULT], [Code.PL]))
    assert _code(res) is Code.PL and res.values["n_voters"][0] == 0.5


# -- ice first ---------------------------------------------------------------------------

@pytest.mark.parametrize("surface_c, expected", [(-0.5, Code.FZDZ), (0.0, Code.FZDZ),
                                                 (0.5, Code.DZ)])
def test_no_ice_in_a_deep_cloud_gives_drizzle_whatever_the_vote(surface_c, expected):
    # Freezing on contact at or below 0 degC (Huffman & Norman 1988).
    results = _votes([Code.SN], [Code.SN], [Code.SN])
    results["cloud_top"] = _cloud(ice=False, drizzle=True)
    res = consensus(_ctx([surface_c] + ALL_COLD[1:]), results)
    assert _code(res) is expected and _rule(res) == "no_ice_drizzle"


def test_no_ice_in_a_shallow_cloud_rules_out_snow_and_pellets():
    # A cloud too shallow to drizzle still makes no snow: the snow and pellet votes go; with
    # nothing left the answer is the drizzle such a cloud can only give.
    results = _votes([Code.SN], [Code.PL], [Code.SN])
    results["cloud_top"] = _cloud(ice=False, drizzle=False)
    res = consensus(_ctx(PARTIAL_ALOFT), results)
    assert _code(res) is Code.FZDZ and _rule(res) == "phase_no_ice"


# -- the phase path ----------------------------------------------------------------------

def test_melted_drops_never_become_snow_again():
    ctx = _ctx(MELTED_ALOFT)
    assert _path(ctx)["melted_aloft"][0]
    res = consensus(ctx, _votes([Code.SN], [Code.SN], [Code.SN], [Code.SN], [Code.FZRA]))
    assert _code(res) is Code.FZRA and _rule(res) == "phase_melted_aloft"
    assert "cannot become snow again" in res.steps(0)[-1].text


def test_a_melting_surface_layer_melts_ice_pellets():
    ctx = _ctx(WARM_SURFACE)
    path = _path(ctx)
    assert path["melted_at_surface"][0] and path["melt_surface_j_kg"][0] > 13.2
    res = consensus(ctx, _votes([Code.PL], [Code.PL], [Code.RAPL]))
    # No method voted a possible type: melted precipitation over a warm surface, rain.
    assert _code(res) is Code.RA and _rule(res) == "phase_melted_at_surface"


def test_ice_that_nothing_melts_stays_snow():
    ctx = _ctx(ALL_COLD)
    assert _path(ctx)["nothing_melts"][0]
    res = consensus(ctx, _votes([Code.FZRA], [Code.FZRA], [Code.SN]))
    assert _code(res) is Code.SN and _rule(res) == "phase_nothing_melts"


# -- the surface humidity check and the no-vote fallback ---------------------------------

def _p_snow(t_c, rh_pct):
    """Jennings et al. (2018) Suppl. Table 2 logistic model, written out here."""
    return 1.0 / (1.0 + math.exp(-10.04 + 1.41 * t_c + 0.09 * rh_pct))


def test_rainy_vote_over_dry_cold_air_becomes_snow_after_surface_based_melting():
    # Surface +1.5 degC with dry air (wet-bulb below 0), a shallow moist layer just above it
    # melting a little (2 to 5.6 J/kg on the wet-bulb): melting near the surface, incomplete,
    # so evaporation can keep the snow frozen and Jennings et al. (2018) decides.
    t = np.array([1.5, 0.8, -0.1, -0.8, -2.0, -4.0, -9.0, -16.0, -24.0])
    dep = np.array([8.0, 0.3, 0.3, 0.3, 0.3, 0.3, 0.3, 0.3, 0.3])
    ctx = Context(Columns.from_arrays(P[None, :], t[None, :], (t - dep)[None, :]))
    path = _path(ctx)
    c = ctx.columns
    assert c.surface_wetbulb_c[0] < 0.0 and path["humidity_check_allowed"][0]
    assert phase.MIN_MELT_ALOFT_J_KG <= path["melt_aloft_j_kg"][0] < phase.PARTIAL_MELT_J_KG
    p_snow = _p_snow(1.5, float(c.surface_relative_humidity_pct[0]))
    assert p_snow > 0.5
    res = consensus(ctx, _votes([Code.RA], [Code.RA], [Code.RASN]))
    assert _code(res) is Code.SN and _rule(res) == "surface_humidity_snow"
    assert res.values["snow_probability"][0] == pytest.approx(p_snow, rel=1e-12)


def test_no_humidity_check_after_complete_melting_aloft():
    # The same dry surface under a nose that melts everything: drops stay drops.
    t = np.array(MELTED_ALOFT)
    t[0] = 1.5
    dep = np.array([8.0] + [0.3] * 8)
    ctx = Context(Columns.from_arrays(P[None, :], t[None, :], (t - dep)[None, :]))
    assert ctx.columns.surface_wetbulb_c[0] < 0.0 and not _path(ctx)["humidity_check_allowed"][0]
    res = consensus(ctx, _votes([Code.RA], [Code.RA], [Code.RA]))
    assert _code(res) is Code.RA and _rule(res) == "vote"


@pytest.mark.parametrize("profile, expected", [(ALL_COLD, Code.SN), (WARM_SURFACE, Code.RA)])
def test_no_votes_fall_back_to_the_surface(profile, expected):
    res = consensus(_ctx(profile, depression_c=1.0), _votes([NO_RESULT], [NO_RESULT]))
    assert _code(res) is expected and _rule(res) == "no_votes_surface"


# -- explanation -------------------------------------------------------------------------

def test_steps_state_the_ballot_and_the_rule():
    res = consensus(_ctx(PARTIAL_ALOFT), _votes([Code.SN], [Code.SN], [Code.PL]))
    (vote,) = res.steps(0)
    assert vote.rule == "vote" and vote.values == {"votes": {"SN": 2, "PL": 0.5}}
    assert vote.text.startswith("Votes SN 2, PL 0.5") and vote.text.endswith("snow (SN).")
    assert vote.thresholds["voter_weights"] == VOTER_WEIGHTS


def test_diagnosis_reports_the_consensus_rule_and_steps():
    # End to end: a cold saturated column under an ice cloud, voted snow by every method.
    p = [1000, 900, 800, 700, 500]
    t = [-8.0, -10.0, -14.0, -18.0, -30.0]
    doc = {"levels": [{"pressure_hpa": a, "temperature_c": b, "dewpoint_c": b - 0.5}
                      for a, b in zip(p, t)]}
    out = ptype.diagnose(doc, members=0).to_dict()
    assert out["ptype"] == "SN" and out["consensus"]["rule"] == "vote"
    assert out["consensus"]["control_ptype"] == "SN" and out["consensus"]["reported"] == "control"
    assert out["consensus"]["steps"][0]["text"].endswith("snow (SN).")
