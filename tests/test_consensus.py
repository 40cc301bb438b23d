"""The consensus (ptype/engine/consensus.py): ice first, the vote, the surface humidity check.

The method results are set by hand here (the methods themselves are tested in
tests/test_method_*.py), so each rule of the consensus is checked on its own:

* no ice in the cloud -> drizzle, freezing at or below 0 degC (Huffman & Norman 1988);
* majority vote, ties to the more hazardous type: FZRA > SN > PL > RA in operational
  multi-algorithm practice (common practice);
* a rainy vote over a sub-freezing surface wet-bulb -> Jennings et al. (2018) decides;
* no vote at all -> Jennings et al. (2018) alone.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

import ptype
from ptype.codes import HAZARD_ORDER, NO_RESULT, Code
from ptype.engine.columns import Columns
from ptype.engine.consensus import RULES, VOTERS, consensus
from ptype.engine.methods.base import Context, MethodResult

P = np.array([1000.0, 850.0, 700.0, 500.0])


def _ctx(surface_c, depression_c=20.0, n=1):
    """Columns whose surface air is ``surface_c`` with the given dew-point depression."""
    t = np.array([surface_c, surface_c + 2.0, -5.0, -20.0])
    cols = Columns.from_arrays(np.tile(P, (n, 1)), np.tile(t, (n, 1)),
                               np.tile(t - depression_c, (n, 1)))
    return Context(cols)


def _votes(*codes_by_method):
    """Results of the first voters, one code per column each (NO_RESULT abstains)."""
    out = {}
    for name, codes in zip(VOTERS, codes_by_method):
        codes = np.asarray([int(c) for c in codes], dtype=np.int64)
        out[name] = MethodResult(name, codes, np.zeros(codes.size, dtype=np.int64), {})
    return out


def _cloud(has_cloud, ice):
    has = np.asarray(has_cloud, dtype=bool)
    return MethodResult("cloud_top", np.full(has.size, NO_RESULT, dtype=np.int64),
                        np.zeros(has.size, dtype=np.int64),
                        {"has_cloud": has, "ice": np.asarray(ice, dtype=bool)})


def _rule(res, i=0):
    return RULES[int(res.rule[i])]


# -- the vote ----------------------------------------------------------------------------------

def test_majority_wins():
    res = consensus(_ctx(3.0), _votes([Code.SN], [Code.SN], [Code.PL]))
    assert Code(int(res.code[0])) is Code.SN and _rule(res) == "vote"
    assert res.values["counts"][0, Code.SN] == 2 and res.values["n_voters"][0] == 2 + 1


def test_abstentions_are_not_counted():
    res = consensus(_ctx(3.0, depression_c=1.0), _votes([NO_RESULT], [NO_RESULT], [Code.RA]))
    assert Code(int(res.code[0])) is Code.RA and int(res.values["n_voters"][0]) == 1
    assert not res.values["tie"][0]


def test_vote_ties_go_to_the_more_hazardous_type():
    # Operational multi-algorithm practice (common practice): ties to FZRA > SN > IP > RA.
    ctx = _ctx(3.0, n=3)
    res = consensus(ctx, _votes([Code.RA, Code.PL, Code.SN], [Code.FZRA, Code.SN, Code.PL]))
    assert [Code(int(c)) for c in res.code] == [Code.FZRA, Code.SN, Code.SN]
    assert res.values["tie"].all() and _rule(res) == "vote_tie_hazard"


def test_hazard_order_keeps_the_operational_tie_break():
    # FZRA > SN > PL (IP) > RA (common practice); the mixes and drizzles slot in between.
    rank = {c: HAZARD_ORDER.index(c) for c in (Code.FZRA, Code.SN, Code.PL, Code.RA)}
    assert rank[Code.FZRA] < rank[Code.SN] < rank[Code.PL] < rank[Code.RA]
    assert set(HAZARD_ORDER) == set(Code)


# -- ice first -------------------------------------------------------------------------------------

@pytest.mark.parametrize("surface_c, expected", [(-0.5, Code.FZDZ), (0.0, Code.FZDZ),
                                                 (0.5, Code.DZ)])
def test_no_ice_gives_drizzle_whatever_the_vote(surface_c, expected):
    # Freezing on contact at or below 0 degC (Huffman & Norman 1988).
    results = _votes([Code.SN], [Code.SN], [Code.SN])
    results["cloud_top"] = _cloud([True], [False])
    res = consensus(_ctx(surface_c, depression_c=0.5), results)
    assert Code(int(res.code[0])) is expected and _rule(res) == "no_ice_drizzle"


def test_no_cloud_at_all_leaves_the_vote():
    results = _votes([Code.SN], [Code.SN])
    results["cloud_top"] = _cloud([False], [False])
    res = consensus(_ctx(-2.0), results)
    assert Code(int(res.code[0])) is Code.SN


# -- the surface humidity check and the no-vote fallback -------------------------------------------

def _p_snow(t_c, rh_pct):
    """Jennings et al. (2018) Suppl. Table 2 logistic model, written out here."""
    return 1.0 / (1.0 + math.exp(-10.04 + 1.41 * t_c + 0.09 * rh_pct))


def test_rainy_vote_over_dry_cold_air_becomes_snow():
    # Surface +1.5 degC, dew point -10.5 degC: wet-bulb below 0 and p_snow above 0.5.
    ctx = _ctx(1.5, depression_c=12.0)
    c = ctx.columns
    assert c.surface_wetbulb_c[0] < 0.0
    assert _p_snow(1.5, float(c.surface_relative_humidity_pct[0])) > 0.5
    res = consensus(ctx, _votes([Code.RA], [Code.RA], [Code.RASN]))
    assert Code(int(res.code[0])) is Code.SN and _rule(res) == "surface_humidity_snow"
    assert res.values["snow_probability"][0] == pytest.approx(
        _p_snow(1.5, float(c.surface_relative_humidity_pct[0])), rel=1e-12)


def test_rainy_vote_over_moist_mild_air_stays_rain():
    ctx = _ctx(4.0, depression_c=1.0)
    assert ctx.columns.surface_wetbulb_c[0] > 0.0
    res = consensus(ctx, _votes([Code.RA], [Code.RA]))
    assert Code(int(res.code[0])) is Code.RA and _rule(res) == "vote"


@pytest.mark.parametrize("surface_c, expected", [(-2.0, Code.SN), (5.0, Code.RA)])
def test_no_votes_fall_back_to_the_surface(surface_c, expected):
    # p_snow at RH ~ 90 %: -2 degC gives 0.99 (snow), +5 degC 0.006 (rain), by the formula.
    res = consensus(_ctx(surface_c, depression_c=1.5), _votes([NO_RESULT], [NO_RESULT]))
    assert Code(int(res.code[0])) is expected and _rule(res) == "no_votes_surface"


# -- explanation -----------------------------------------------------------------------------------

def test_steps_state_the_tally_and_the_rule():
    ctx = _ctx(3.0, n=2)
    res = consensus(ctx, _votes([Code.SN, Code.RA], [Code.SN, Code.FZRA], [Code.PL, Code.RA]))
    vote = res.steps(0)
    assert [s.rule for s in vote] == ["vote"]
    assert vote[0].text == "2 of 3 methods vote SN (snow)."
    assert vote[0].values == {"votes": {"SN": 2, "PL": 1}}
    tie = res.steps(1)[0]
    assert tie.rule == "vote" and tie.values == {"votes": {"RA": 2, "FZRA": 1}}
    assert tie.thresholds["tie_break_order"].startswith("FZRA > FZRAPL > FZDZ > SN > PL")


def test_diagnosis_reports_the_consensus_rule_and_steps():
    # End to end: a dry column voted snow by every method.
    p = [1000, 900, 800, 700, 500]
    t = [-8.0, -10.0, -14.0, -18.0, -30.0]
    doc = {"levels": [{"pressure_hpa": a, "temperature_c": b, "dewpoint_c": b - 1.0}
                      for a, b in zip(p, t)]}
    out = ptype.diagnose(doc, members=0).to_dict()
    assert out["ptype"] == "SN" and out["consensus"]["rule"] == "vote"
    assert out["consensus"]["steps"][0]["text"].endswith("methods vote SN (snow).")
