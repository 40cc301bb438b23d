"""The consensus: one type per column from the methods, with its own reasons.

The flow (documented with its reasons in ``docs/consensus.md``):

1. **Does the cloud make ice?**  :func:`ptype.engine.methods.cloud_top.ice_analysis`.
   When the precipitating cloud is too warm to make ice and no higher ice cloud
   seeds it, the precipitation is drizzle (freezing drizzle when the surface
   air is at or below 0 degC) whatever the melting-layer methods say: they all
   assume snow falls from above.
2. **The melting/refreezing methods vote** (:data:`VOTERS`), one vote each,
   abstentions not counted.  The most frequent code wins; a tie goes to the
   more hazardous code in :data:`ptype.codes.HAZARD_ORDER` (FZRA first), as
   operational multi-algorithm post-processing does (common practice).  The
   surface-only methods (Jennings) and the thickness rules of thumb do not vote:
   they cannot see the layers the others measure directly.
3. **Surface humidity check.**  When the vote says rain (or rain and snow) but
   the surface wet-bulb is below 0 degC, evaporation into the dry surface air
   can keep snow frozen: Jennings et al. (2018) then decides between snow
   (p_snow >= 0.5) and a rain-snow mix.
4. No vote at all (no method applicable): fall back to the surface-only answer.

Everything is vectorised over columns; ``explain`` builds the steps of one column.
"""

from __future__ import annotations

import numpy as np

from ptype.codes import HAZARD_ORDER, HAZARD_RANK, Code
from ptype.engine import wording as w
from ptype.engine.methods import cloud_top, jennings
from ptype.engine.methods.base import Context, MethodResult, Step, select_first

#: Methods that vote.
VOTERS = ("bourgouin", "ramer", "baldwin", "baldwin_revised", "czys", "cloud_top")
NAME = "consensus"

RULES = ("no_ice_drizzle", "vote", "vote_tie_hazard", "surface_humidity_snow",
         "surface_humidity_mix", "no_votes_surface")

N_CODES = len(Code)
_RANK = np.array([HAZARD_RANK[Code(k)] for k in range(N_CODES)], dtype=np.float64)


def consensus(ctx: Context, results: dict[str, MethodResult]) -> MethodResult:
    """Combine method results (all over the same columns) into the consensus."""
    c = ctx.columns
    n = c.n_columns
    rows = np.arange(n)
    counts = np.zeros((n, N_CODES), dtype=np.int64)
    voters = [name for name in VOTERS if name in results]
    for name in voters:
        code = results[name].code
        ok = code >= 0
        # One vote per row from each voter: the index pairs are distinct, so a plain
        # fancy-index increment counts them (np.add.at is only needed for repeats).
        counts[rows[ok], code[ok]] += 1
    total = counts.sum(axis=1)
    # Most votes first, then most hazardous (lowest rank).
    score = np.where(counts > 0, counts * 100.0 - _RANK[None, :], -np.inf)
    winner = np.argmax(score, axis=1)
    top = counts[rows, winner]
    tie = (counts == top[:, None]).sum(axis=1) > 1

    sfc_t = c.surface_temperature_c
    if "cloud_top" in results:
        ice = results["cloud_top"].values
        no_ice = ice["has_cloud"] & ~ice["ice"]
    else:
        no_ice = np.zeros(n, dtype=bool)
    drizzle = np.where(sfc_t <= cloud_top.FREEZING_SURFACE_C, int(Code.FZDZ), int(Code.DZ))

    p_snow = jennings.snow_probability(c.surface_temperature_c, c.surface_relative_humidity_pct)
    surface_code = np.where(p_snow >= jennings.SNOW_PROBABILITY_THRESHOLD, int(Code.SN),
                            int(Code.RA))
    rainy = (winner == Code.RA) | (winner == Code.RASN)
    humidity_check = rainy & (c.surface_wetbulb_c < 0.0) & (total > 0)
    snow_by_humidity = humidity_check & (p_snow >= jennings.SNOW_PROBABILITY_THRESHOLD)

    rule = select_first(
        [no_ice, total == 0, snow_by_humidity, humidity_check, tie],
        [0, 5, 3, 4, 2], default=1)
    code = select_first(
        [rule == 0, rule == 5, rule == 3, rule == 4],
        [drizzle, surface_code, int(Code.SN), int(Code.RASN)],
        default=winner).astype(np.int64)
    values = {"counts": counts, "n_voters": total, "winner": winner, "tie": tie,
              "surface_temperature_c": sfc_t, "surface_wetbulb_c": c.surface_wetbulb_c,
              "snow_probability": p_snow, "no_ice": no_ice,
              "voters": np.array(voters, dtype=object)}
    return MethodResult(NAME, code, rule, values, explain)


#: The tie-break order as the steps state it, most hazardous first.
_TIE_BREAK_ORDER = " > ".join(c.name for c in HAZARD_ORDER if c is not Code.NONE)


def explain(result: MethodResult, i: int) -> list[Step]:
    """The consensus of column ``i``: the rule that fired, the vote tally and the numbers of
    the surface humidity check, from ``result.values`` only."""
    v = result.values
    rule = RULES[int(result.rule[i])]
    counts = v["counts"][i]
    tally = {Code(k).name: int(counts[k]) for k in np.argsort(-counts, kind="stable")
             if counts[k] > 0}
    code = Code(int(result.code[i]))
    if rule == "no_ice_drizzle":
        sfc = float(v["surface_temperature_c"][i])
        return [Step(rule, "The cloud makes no ice, so the melting-layer methods do not apply: "
                     f"{w.code(code)} at a surface temperature of {w.temperature(sfc)}.",
                     {"surface_temperature_c": sfc, "votes": tally},
                     {"freezing_surface_c": cloud_top.FREEZING_SURFACE_C},
                     "Top-down reasoning (Baumgardt 2000); see docs/consensus.md")]
    if rule == "no_votes_surface":
        return [Step(rule, "No melting/refreezing method reached a decision; the surface "
                     f"temperature and humidity alone give {w.code(code)}.",
                     {"snow_probability": float(v["snow_probability"][i])},
                     {"snow_probability_threshold": jennings.SNOW_PROBABILITY_THRESHOLD},
                     jennings.SOURCE)]
    winner = Code(int(v["winner"][i]))
    text = (f"{int(counts[winner])} of {int(v['n_voters'][i])} methods vote {winner.name} "
            f"({winner.label})")
    if v["tie"][i]:
        tied = [name for name, k in tally.items() if k == counts[winner] and name != winner.name]
        text += f"; tied with {', '.join(tied)}, the more hazardous type wins"
    steps = [Step("vote_tie_hazard" if v["tie"][i] else "vote", text + ".", {"votes": tally},
                  {"tie_break_order": _TIE_BREAK_ORDER},
                  "Majority vote, ties to the more hazardous type (operational practice)")]
    if rule in ("surface_humidity_snow", "surface_humidity_mix"):
        steps.append(_humidity_step(v, i, rule, winner, code))
    return steps


def _humidity_step(v: dict, i: int, rule: str, winner: Code, code: Code) -> Step:
    """Step 3: a dry, sub-freezing surface wet-bulb turns a rainy vote into snow or a mix."""
    tw = float(v["surface_wetbulb_c"][i])
    p_snow = float(v["snow_probability"][i])
    return Step(rule, f"The surface wet-bulb is {w.temperature(tw)}, below freezing: "
                "evaporation into the dry surface air can keep flakes frozen. The snow "
                f"probability {w.fraction(p_snow)} turns {winner.name} into {code.name} "
                f"({code.label}).",
                {"surface_wetbulb_c": tw, "snow_probability": p_snow},
                {"surface_wetbulb_c": 0.0,
                 "snow_probability_threshold": jennings.SNOW_PROBABILITY_THRESHOLD},
                jennings.SOURCE)
