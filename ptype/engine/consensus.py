"""The consensus: one type per column from the methods, physically possible, with its reasons.

The flow (documented with its reasons in ``docs/consensus.md``):

1. **Does the cloud make ice?**  :func:`ptype.engine.methods.cloud_top.ice_analysis`.  When
   the precipitating cloud is too warm to make ice, no higher ice cloud seeds it, and it is
   deep enough to grow drizzle, the precipitation is drizzle (freezing drizzle when the
   surface air is at or below 0 degC) whatever the melting-layer methods say: they all assume
   snow falls from above.
2. **The melting/refreezing methods vote** (:data:`VOTER_WEIGHTS`), abstentions not counted.
   Methods that share one decision tree share one vote: the two Baldwin variants weigh one
   half each.  Among the **possible** codes of the phase path
   (:func:`ptype.engine.phase.phase_path`: melted drops never become snow again; a warm
   surface layer melts ice pellets) the most-voted wins; a tie goes to the more hazardous
   code in :data:`ptype.codes.HAZARD_ORDER` (FZRA first), the operational multi-algorithm
   practice (Reeves et al. 2014 describe the majority vote; the hazard order is ours).  When
   no possible code got a vote, completely melted precipitation is freezing rain on a
   freezing surface and rain otherwise.  The surface-only methods (Jennings) and the
   thickness rules of thumb do not vote: they cannot see the layers the others measure.
3. **Surface humidity check.**  When the vote says rain (or rain and snow), the surface
   wet-bulb is below 0 degC and the melting was surface-based and incomplete, evaporation
   into the dry surface air can keep snow frozen: Jennings et al. (2018) then decides between
   snow (p_snow >= 0.5) and a rain-snow mix.
4. No vote at all (no method applicable): the surface-only answer, within the phase path.

Everything is vectorised over columns; ``explain`` builds the steps of one column.  The
Monte-Carlo members pass random voter weights (``voter_weights``) so that the spread between
methods reaches the probabilities.
"""

from __future__ import annotations

import numpy as np

from ptype.codes import HAZARD_RANK, Code
from ptype.engine import phase
from ptype.engine import wording as w
from ptype.engine.methods import cloud_top, czys, jennings
from ptype.engine.methods.base import Context, MethodResult, Step, select_first

#: Methods that vote, with their weight: one vote per independent decision procedure.  The
#: original Baldwin et al. (1994) tree and its 2005 revision share everything but the snow
#: test, so together they cast one vote (ours).
VOTER_WEIGHTS = {"bourgouin": 1.0, "ramer": 1.0, "baldwin": 0.5, "baldwin_revised": 0.5,
                 "czys": 1.0, "cloud_top": 1.0, "particles": 1.0}
VOTERS = tuple(VOTER_WEIGHTS)
NAME = "consensus"

RULES = ("no_ice_drizzle", "vote", "vote_tie_hazard", "surface_humidity_snow",
         "surface_humidity_mix", "no_votes_surface", "phase_melted_aloft",
         "phase_melted_at_surface", "phase_no_ice", "phase_nothing_melts")
_RULE = {name: k for k, name in enumerate(RULES)}

N_CODES = len(Code)

#: What the methods vote on: the phase of the precipitation at the ground.  Whether liquid
#: freezes on contact is not voted: it is the surface air temperature's (at or below 0 degC:
#: freezing), one rule for every method, so that methods that judge it on the wet-bulb and
#: methods that judge it on the air temperature do not split the liquid vote.
PHASE_OF_CODE = {Code.RA: "liquid", Code.FZRA: "liquid", Code.DZ: "drizzle",
                 Code.FZDZ: "drizzle", Code.RAPL: "liquid_pellets",
                 Code.FZRAPL: "liquid_pellets", Code.RASN: "rain_snow", Code.PL: "pellets",
                 Code.SN: "snow", Code.NONE: "none"}
PHASES = ("liquid", "drizzle", "liquid_pellets", "rain_snow", "pellets", "snow", "none")
#: Ice in each phase, for the tie-break (0 liquid, 1 all ice).
PHASE_ICE = {"liquid": 0.0, "drizzle": 0.0, "liquid_pellets": 0.5, "rain_snow": 0.5,
             "pellets": 1.0, "snow": 1.0, "none": 2.0}
_PHASE_INDEX = np.array([PHASES.index(PHASE_OF_CODE[Code(k)]) for k in range(N_CODES)])
#: The code of each phase on a freezing and on a non-freezing surface.
_FREEZING_CODE = np.array([Code.FZRA, Code.FZDZ, Code.FZRAPL, Code.RASN, Code.PL, Code.SN,
                           Code.NONE], dtype=np.int64)
_WARM_CODE = np.array([Code.RA, Code.DZ, Code.RAPL, Code.RASN, Code.PL, Code.SN, Code.NONE],
                      dtype=np.int64)
#: The ice levels the median is taken over, and the level of each phase.
ICE_LEVELS = (0.0, 0.5, 1.0)
_LEVEL_OF_PHASE = np.array([ICE_LEVELS.index(min(PHASE_ICE[ph], 1.0)) for ph in PHASES])
_TIE_BREAK = 1e-6
TIE_TEXT = ("weighted median of the ice content (liquid < mixed < frozen), an even split to "
            "the side with less ice; then most votes, ties to FZRA > FZRAPL > FZDZ > SN > PL "
            "> RAPL > RASN > RA > DZ")


def vote_counts(results: dict[str, MethodResult], n: int,
                voter_weights: np.ndarray | None = None,
                melted_aloft: np.ndarray | None = None) -> tuple[np.ndarray, list[str]]:
    """Weighted votes per code, ``(n, len(Code))``, and the voters present.

    ``voter_weights``, ``(n, len(VOTERS))``, multiplies each voter's weight per column (the
    members' structural perturbation); None keeps :data:`VOTER_WEIGHTS`.  ``melted_aloft``
    (``(n,)``, :func:`ptype.engine.phase.phase_path`) turns Czys's silence over a surface
    that is not freezing into a vote for rain there (:func:`_czys_votes`)."""
    counts = np.zeros((n, N_CODES))
    rows = np.arange(n)
    voters = [name for name in VOTERS if name in results]
    for name in voters:
        code = results[name].code
        if name == czys.NAME and melted_aloft is not None:
            code = _czys_votes(results[name], melted_aloft)
        ok = code >= 0
        w = VOTER_WEIGHTS[name]
        if voter_weights is not None:
            w = w * voter_weights[:, VOTERS.index(name)]
            w = w[ok]
        # One vote per row from each voter: the index pairs are distinct, so a plain
        # fancy-index increment counts them (np.add.at is only needed for repeats).
        counts[rows[ok], code[ok]] += w
    return counts, voters


def _median_phase(phase_counts: np.ndarray, codes: np.ndarray
                  ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The phase the weighted vote gives each row: the weighted (lower) median of the votes'
    ice content picks the ice level, the most-voted phase of that level wins (ties to the
    more hazardous code).  Returns the phase index (-1 without votes), whether the median
    fell on an even split, and whether phases tied within the level.

    The median is monotone in every vote: when one method's answer holds less ice, the
    consensus cannot hold more; an even split resolves to the side with less ice for the same
    reason (freezing rain, the least icy and most hazardous type, wins such splits)."""
    n = phase_counts.shape[0]
    rows = np.arange(n)
    level_w = np.zeros((n, len(ICE_LEVELS)))
    for k, lv in enumerate(_LEVEL_OF_PHASE):
        level_w[:, lv] += phase_counts[:, k]
    total = level_w.sum(axis=1)
    cum = np.cumsum(level_w, axis=1)
    level = np.argmax(cum >= 0.5 * total[:, None] - 1e-9, axis=1)
    split = np.isclose(cum[rows, level], 0.5 * total, rtol=0.0, atol=1e-9) & (total > 0)
    hazard = np.array([HAZARD_RANK[Code(k)] for k in range(N_CODES)], dtype=np.float64)
    in_level = _LEVEL_OF_PHASE[None, :] == level[:, None]
    counts = np.where(in_level, phase_counts, 0.0)
    score = np.where(counts > 0, counts - _TIE_BREAK * hazard[codes], -np.inf)
    winner = np.argmax(score, axis=1)
    top = counts[rows, winner]
    tie = (np.isclose(counts, top[:, None], rtol=0.0, atol=1e-9) & (counts > 0)).sum(axis=1) > 1
    return np.where(total > 0, winner, -1), split, tie


def _czys_votes(result: MethodResult, melted_aloft: np.ndarray) -> np.ndarray:
    """Czys's codes, with RA where it is silent only because the surface is not freezing and
    the snow melted completely aloft.

    Czys et al. (1996) decide between freezing rain and ice pellets inside a sub-freezing
    surface layer; above 0 degC at the ground they say nothing.  A drop that melted completely
    aloft and lands on a surface above freezing is rain (common practice), so there their
    silence is a liquid vote.  Without it, warming the ground by a degree silenced a liquid
    voter and moved the median toward more ice (FZRAPL to PL), which no warming may do
    (docs/consensus.md, the warming invariant)."""
    silent_warm = (result.code < 0) & (result.rule == czys.RULES.index("surface_not_freezing"))
    return np.where(silent_warm & melted_aloft, int(Code.RA), result.code)


def consensus(ctx: Context, results: dict[str, MethodResult],
              voter_weights: np.ndarray | None = None) -> MethodResult:
    """Combine method results (all over the same columns) into the consensus."""
    c = ctx.columns
    n = c.n_columns
    rows = np.arange(n)
    if "cloud_top" in results:
        ice = results["cloud_top"].values
        ice_in_cloud = ~ice["has_cloud"] | ice["ice"]
        drizzle_cloud = ice["drizzle"]
    else:
        ice_in_cloud = np.ones(n, dtype=bool)
        drizzle_cloud = np.zeros(n, dtype=bool)
    path = phase.phase_path(ctx, ice_in_cloud)
    counts, voters = vote_counts(results, n, voter_weights, path["melted_aloft"])
    total = counts.sum(axis=1)
    phase_counts = np.zeros((n, len(PHASES)))
    for k in range(N_CODES):
        phase_counts[:, _PHASE_INDEX[k]] += counts[:, k]
    sfc_t = c.surface_temperature_c
    freezing = sfc_t <= cloud_top.FREEZING_SURFACE_C
    code_of_phase = np.where(freezing[:, None], _FREEZING_CODE[None, :], _WARM_CODE[None, :])
    possible = path["possible"][rows[:, None], code_of_phase]
    vote_phase, _, _ = _median_phase(phase_counts, code_of_phase)
    possible_phase, split, tie = _median_phase(np.where(possible, phase_counts, 0.0),
                                               code_of_phase)
    fallback = phase.fallback_code(path, sfc_t)
    phase_changed = (total > 0) & (possible_phase != vote_phase)
    vote_winner = np.where(vote_phase >= 0, code_of_phase[rows, np.maximum(vote_phase, 0)], -1)
    winner = np.where(possible_phase >= 0,
                      code_of_phase[rows, np.maximum(possible_phase, 0)], fallback)

    drizzle = np.where(freezing, int(Code.FZDZ), int(Code.DZ))

    p_snow = jennings.snow_probability(c.surface_temperature_c, c.surface_relative_humidity_pct)
    surface_code = np.where(p_snow >= jennings.SNOW_PROBABILITY_THRESHOLD, int(Code.SN),
                            int(Code.RA))
    surface_code = np.where(path["possible"][rows, surface_code], surface_code, fallback)
    rainy = (winner == Code.RA) | (winner == Code.RASN)
    humidity_check = (rainy & (c.surface_wetbulb_c < 0.0) & (total > 0)
                      & path["humidity_check_allowed"] & ~phase_changed)
    snow_by_humidity = humidity_check & (p_snow >= jennings.SNOW_PROBABILITY_THRESHOLD)
    phase_rule = select_first(
        [path["melted_at_surface"], path["melted_aloft"], path["nothing_melts"]],
        [_RULE["phase_melted_at_surface"], _RULE["phase_melted_aloft"],
         _RULE["phase_nothing_melts"]], default=_RULE["phase_no_ice"])

    rule = select_first(
        [drizzle_cloud, total == 0, phase_changed, snow_by_humidity, humidity_check,
         split | tie],
        [_RULE["no_ice_drizzle"], _RULE["no_votes_surface"], phase_rule,
         _RULE["surface_humidity_snow"], _RULE["surface_humidity_mix"],
         _RULE["vote_tie_hazard"]], default=_RULE["vote"])
    code = select_first(
        [rule == _RULE["no_ice_drizzle"], rule == _RULE["no_votes_surface"],
         rule == _RULE["surface_humidity_snow"], rule == _RULE["surface_humidity_mix"]],
        [drizzle, surface_code, int(Code.SN), int(Code.RASN)], default=winner).astype(np.int64)
    values = {"counts": counts, "phase_counts": phase_counts, "n_voters": total,
              "vote_winner": vote_winner, "winner": winner, "tie": tie, "split": split,
              "surface_temperature_c": sfc_t,
              "surface_wetbulb_c": c.surface_wetbulb_c, "snow_probability": p_snow,
              "drizzle_cloud": drizzle_cloud, "voters": np.array(voters, dtype=object),
              "melt_aloft_j_kg": path["melt_aloft_j_kg"],
              "melt_surface_j_kg": path["melt_surface_j_kg"],
              "melted_aloft": path["melted_aloft"],
              "melted_at_surface": path["melted_at_surface"], "possible": path["possible"]}
    return MethodResult(NAME, code, rule, values, explain)


def _tally(counts: np.ndarray) -> dict[str, float]:
    return {Code(k).name: _votes(counts[k]) for k in np.argsort(-counts, kind="stable")
            if counts[k] > 0}


def _votes(x: float) -> float | int:
    """Vote weights as people count them: 2, 1.5."""
    x = round(float(x), 2)
    return int(x) if x == int(x) else x


def explain(result: MethodResult, i: int) -> list[Step]:
    """The consensus steps of column ``i``: the vote, then whatever changed it."""
    v = result.values
    rule = RULES[int(result.rule[i])]
    code = Code(int(result.code[i]))
    counts = v["counts"][i]
    tally = _tally(counts)
    if rule == "no_ice_drizzle":
        return [Step(rule, f"The cloud makes no ice, so the melting-layer methods do not apply: "
                           f"{w.code(code)} at a surface temperature of "
                           f"{w.temperature(float(v['surface_temperature_c'][i]))}.",
                     {"surface_temperature_c": float(v["surface_temperature_c"][i]),
                      "votes": tally},
                     {"freezing_surface_c": cloud_top.FREEZING_SURFACE_C,
                      "drizzle_cloud_depth_m": cloud_top.DRIZZLE_CLOUD_DEPTH_M},
                     "Top-down reasoning (Baumgardt 2000); see docs/consensus.md")]
    if rule == "no_votes_surface":
        return [Step(rule, "No melting/refreezing method reached a decision; the surface "
                           f"temperature and humidity alone give {w.code(code)}.",
                     {"snow_probability": float(v["snow_probability"][i])},
                     {"snow_probability_threshold": jennings.SNOW_PROBABILITY_THRESHOLD},
                     jennings.SOURCE)]
    steps = [_vote_step(v, i, counts, tally)]
    if rule.startswith("phase_"):
        steps.append(_phase_step(v, i, rule, code, counts))
    if rule in ("surface_humidity_snow", "surface_humidity_mix"):
        winner = Code(int(v["winner"][i]))
        steps.append(Step(rule, f"The surface wet-bulb is "
                                f"{w.temperature(float(v['surface_wetbulb_c'][i]))}, below "
                                "freezing, and the snow reached the surface layer unmelted: "
                                "evaporation into the dry surface air can keep flakes frozen. "
                                "The snow probability "
                                f"{w.fraction(float(v['snow_probability'][i]))} turns "
                                f"{winner.name} into {w.code(code)}.",
                          {"surface_wetbulb_c": float(v["surface_wetbulb_c"][i]),
                           "snow_probability": float(v["snow_probability"][i])},
                          {"surface_wetbulb_c": 0.0,
                           "snow_probability_threshold": jennings.SNOW_PROBABILITY_THRESHOLD},
                          jennings.SOURCE))
    return steps


PHASE_WORDS = {"liquid": "liquid drops", "drizzle": "drizzle", "liquid_pellets":
               "drops and ice pellets", "rain_snow": "rain and snow", "pellets": "ice pellets",
               "snow": "snow", "none": "nothing"}


def _vote_step(v: dict, i: int, counts: np.ndarray, tally: dict) -> Step:
    vote = Code(int(v["vote_winner"][i]))
    ph = PHASE_OF_CODE[vote]
    total = _votes(v["n_voters"][i])
    weight = _votes(v["phase_counts"][i][PHASES.index(ph)])
    ballot = ", ".join(f"{name} {k}" for name, k in tally.items())
    text = (f"Votes {ballot} (the two Baldwin variants share one vote): the middle of the "
            f"{total} votes, ordered from liquid to frozen, says {PHASE_WORDS[ph]}")
    if v["split"][i]:
        text += " (an even split, which goes to the side with less ice)"
    if weight != total:
        text += f", {weight} of them for it"
    if ph in ("liquid", "drizzle", "liquid_pellets"):
        sfc = float(v["surface_temperature_c"][i])
        fate = ("freezes on contact" if sfc <= cloud_top.FREEZING_SURFACE_C
                else "stays liquid")
        text += f"; on a surface at {w.temperature(sfc)} the liquid {fate}"
    if v["tie"][i]:
        text += "; equal votes within that phase go to the more hazardous type"
    text += f": {w.code(vote)}"
    rule = "vote_tie_hazard" if (v["tie"][i] or v["split"][i]) else "vote"
    return Step(rule, text + ".", {"votes": tally},
                {"rule": TIE_TEXT, "voter_weights": dict(VOTER_WEIGHTS)},
                "Majority vote of the methods (Reeves et al. 2014), taken as the weighted "
                "median of the ice content (ours)")


def _phase_step(v: dict, i: int, rule: str, code: Code, counts: np.ndarray) -> Step:
    vote = Code(int(v["vote_winner"][i]))
    aloft = float(v["melt_aloft_j_kg"][i])
    surface = float(v["melt_surface_j_kg"][i])
    why = {
        "phase_melted_aloft": (
            f"the warm layer aloft holds {w.energy(aloft)} of melting energy on the wet-bulb "
            f"(complete melting from {w.energy(phase.COMPLETE_MELT_J_KG)}): melted drops "
            "cannot become snow again"),
        "phase_melted_at_surface": (
            f"the surface warm layer holds {w.energy(surface)} of melting energy on the "
            f"wet-bulb (more than {w.energy(phase.COMPLETE_MELT_J_KG)}): it melts any snow or "
            "ice pellets before they land"),
        "phase_no_ice": ("the cloud makes no ice, so there is no snow or ice to begin with, "
                         "only supercooled drops"),
        "phase_nothing_melts": (
            f"the cloud makes ice and nothing melts it (melting energy {w.energy(aloft)} aloft, "
            f"under {w.energy(phase.MIN_MELT_ALOFT_J_KG)}, and {w.energy(surface)} at the "
            f"surface, under {w.energy(phase.PARTIAL_MELT_J_KG)}): only snow can reach the "
            "ground"),
    }[rule]
    if counts[code] > 0:
        then = f"the vote among the possible types gives {w.code(code)}"
    else:
        then = (f"no method voted a possible type, so the answer is {w.code(code)} on a "
                f"surface at {w.temperature(float(v['surface_temperature_c'][i]))}")
    return Step(rule, f"{vote.name} is not possible: {why}; {then}.",
                {"melt_aloft_j_kg": aloft, "melt_surface_j_kg": surface},
                {"complete_melt_j_kg": phase.COMPLETE_MELT_J_KG,
                 "partial_melt_j_kg": phase.PARTIAL_MELT_J_KG,
                 "min_melt_aloft_j_kg": phase.MIN_MELT_ALOFT_J_KG},
                "Phase path (ours), limits from Bourgouin (2000); wet-bulb energy as Birk et al. "
                "(2021)")
