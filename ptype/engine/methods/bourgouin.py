"""Bourgouin (2000) energy ("area") method.

Bourgouin, P., 2000: A method to determine precipitation types. *Weather and
Forecasting* 15, 583-592, doi:10.1175/1520-0434(2000)015<0583:AMTDPT>2.0.CO;2.

Areas are computed from the **air temperature** (not the wet-bulb) as
``R_d * integral (T - T0) d ln p`` (J/kg) by :mod:`ptype.engine.layers`.  Profiles fall
into four cases:

* D - the whole column below 0 degC: snow.
* C - only a surface-based warm layer (area PA_s): PA_s < 5.6 -> SN,
  PA_s > 13.2 -> RA, in between -> rain/snow mix (RASN).
* A - an elevated warm layer (area PA, summed over every elevated warm layer)
  above a surface cold layer (area NA, the cold area below the highest warm
  layer): NA > 66 + 0.66 PA -> PL; NA < 46 + 0.66 PA -> FZRA (RA when the
  surface air is at or above 0 degC); between the lines -> FZRA/PL mix (FZRAPL).
* B - a warm surface layer, a cold layer and a warm layer aloft: A's lines on
  PA and NA; when they say ice pellets, the surface layer decides
  (PA_s < 5.6 -> PL, > 13.2 -> RA, between -> RAPL); when they say liquid -> RA.
  Between the lines we report RAPL when the surface layer cannot melt ice
  completely (PA_s <= 13.2) and RA otherwise (our reading of a partly refrozen
  population reaching a warm surface layer).

An elevated warm layer (or the sum of them) under 2 J/kg is ignored.

The thresholds 2, 5.6, 13.2 J/kg and the lines 46 + 0.66 PA, 66 + 0.66 PA are those of
Bourgouin2000 as operational post-processing uses them (common practice); which case each
applies to follows the paper's figures (from memory).  Where operational practice draws a
type at random inside the mix zones, we report the mix.
"""

from __future__ import annotations

import numpy as np

from ptype.codes import Code
from ptype.engine import wording as w
from ptype.engine.layers import TOP_LIMIT_HPA
from ptype.engine.methods.base import Context, MethodResult, Step

NAME = "bourgouin"
TITLE = "Bourgouin (2000) energy method"
REFERENCE = "Bourgouin2000"
WETBULB = None

#: Elevated warm area below which the warm layer is ignored, J/kg.
MIN_ALOFT_J_KG = 2.0
#: Surface-layer melting thresholds, J/kg.
SURFACE_SNOW_J_KG = 5.6
SURFACE_RAIN_J_KG = 13.2
#: Refreezing lines NA = intercept + slope * PA, J/kg.
LINE_SLOPE = 0.66
LINE_LIQUID_INTERCEPT = 46.0   # below this line the drops stay liquid
LINE_ICE_INTERCEPT = 66.0      # above this line they refreeze to ice pellets

SOURCE = "Bourgouin (2000), Wea. Forecasting 15, 583-592"

RULES = (
    "all_cold",                # 0  D: SN
    "surface_layer_snow",      # 1  C: PA_s < 5.6
    "surface_layer_mix",       # 2  C: between
    "surface_layer_rain",      # 3  C: PA_s > 13.2
    "refreeze_pellets",        # 4  A: NA > 66 + .66 PA
    "refreeze_mix",            # 5  A: between
    "no_refreeze_freezing",    # 6  A: NA < 46 + .66 PA, surface < 0
    "no_refreeze_warm_surface",  # 7 A: surface >= 0
    "b_pellets_survive",       # 8  B: IP then PA_s < 5.6
    "b_pellets_partly_melt",   # 9  B: IP then between
    "b_pellets_melt",          # 10 B: IP then PA_s > 13.2
    "b_liquid",                # 11 B: liquid
    "b_between",               # 12 B: between lines
)


def run(ctx: Context) -> MethodResult:
    """Bourgouin (2000) for every column of ``ctx`` (the cases of the module docstring)."""
    lay = ctx.air_layers
    c = ctx.columns
    _, K = lay.kind.shape
    k_idx = np.arange(K)[None, :]
    present = lay.kind != 0
    area = np.where(present, lay.area_j_kg, 0.0)
    warm = lay.kind > 0
    cold = lay.kind < 0
    surface_warm = lay.kind[:, 0] > 0
    pa_surface = np.where(surface_warm, area[:, 0], 0.0)
    aloft_warm = warm & (k_idx > 0)
    pa_aloft = np.where(aloft_warm, area, 0.0).sum(axis=1)
    has_aloft = aloft_warm.any(axis=1)
    highest_warm = np.where(has_aloft, K - 1 - np.argmax(aloft_warm[:, ::-1], axis=1), -1)
    na = np.where(cold & (k_idx < highest_warm[:, None]), area, 0.0).sum(axis=1)
    aloft = has_aloft & (pa_aloft >= MIN_ALOFT_J_KG)
    line_liquid = LINE_LIQUID_INTERCEPT + LINE_SLOPE * pa_aloft
    line_ice = LINE_ICE_INTERCEPT + LINE_SLOPE * pa_aloft
    refreeze = na > line_ice
    liquid = na < line_liquid
    sfc_t = c.surface_temperature_c

    def surface_decides(snowlike, mixlike, rainlike):
        return np.where(pa_surface < SURFACE_SNOW_J_KG, snowlike,
                        np.where(pa_surface > SURFACE_RAIN_J_KG, rainlike, mixlike))

    case_c_rule = surface_decides(1, 2, 3)
    case_a_rule = np.where(refreeze, 4, np.where(liquid, np.where(sfc_t < 0.0, 6, 7), 5))
    case_b_rule = np.where(refreeze, surface_decides(8, 9, 10),
                           np.where(liquid, 11, np.where(pa_surface <= SURFACE_RAIN_J_KG, 12, 11)))
    rule = np.where(~aloft, np.where(surface_warm, case_c_rule, 0),
                    np.where(surface_warm, case_b_rule, case_a_rule))
    lut = np.array([Code.SN, Code.SN, Code.RASN, Code.RA, Code.PL, Code.FZRAPL, Code.FZRA, Code.RA,
                    Code.PL, Code.RAPL, Code.RA, Code.RA, Code.RAPL], dtype=np.int64)
    code = lut[rule]
    case = np.where(~aloft, np.where(surface_warm, 1, 0), np.where(surface_warm, 3, 2))
    values = {"case": case, "pa_aloft_j_kg": pa_aloft, "na_j_kg": na, "pa_surface_j_kg": pa_surface,
              "line_liquid_j_kg": line_liquid, "line_ice_j_kg": line_ice,
              "surface_temperature_c": sfc_t, "ignored_aloft": has_aloft & ~aloft}
    return MethodResult(NAME, code, rule, values, explain)


_CASES = (f"D (whole column below {w.temperature(0.0, trim=True)})",
          "C (warm layer at the surface only)",
          "A (warm layer aloft over a cold surface layer)",
          "B (warm surface layer, cold layer, warm layer aloft)")
_SURFACE_LAYER_OUTCOME = {"surface_layer_snow": "too little to melt snow, so snow",
                          "surface_layer_mix": "snow partly melts, so rain and snow",
                          "surface_layer_rain": "enough to melt snow, so rain"}
_SURFACE_THRESHOLDS = {"snow_below_j_kg": SURFACE_SNOW_J_KG, "rain_above_j_kg": SURFACE_RAIN_J_KG}


def explain(result: MethodResult, i: int) -> list[Step]:
    """Bourgouin's reasoning for column ``i``: the profile case, then the areas compared."""
    v = {k: (float(a[i]) if np.ndim(a) == 1 else a[i]) for k, a in result.values.items()}
    rule = RULES[int(result.rule[i])]
    case = int(v["case"])
    steps = [Step("profile_case", f"Profile case {_CASES[case]}.", {"case": "DCAB"[case]}, {},
                  SOURCE)]
    pa, pas = v["pa_aloft_j_kg"], v["pa_surface_j_kg"]
    if v["ignored_aloft"]:
        steps.append(Step("weak_aloft_ignored", f"The warm area aloft, {w.energy(pa)}, is under "
                          f"{w.energy(MIN_ALOFT_J_KG)} and is ignored.",
                          {"pa_aloft_j_kg": pa}, {"min_aloft_j_kg": MIN_ALOFT_J_KG}, SOURCE))
    if rule == "all_cold":
        steps.append(Step(rule, f"No layer above {w.temperature(0.0, trim=True)} below "
                          f"{w.pressure(TOP_LIMIT_HPA)}: snow.", {}, {}, SOURCE))
    elif rule.startswith("surface_layer"):
        steps.append(Step(rule, f"Surface warm area {w.energy(pas)} (snow under "
                          f"{w.energy(SURFACE_SNOW_J_KG)}, rain over "
                          f"{w.energy(SURFACE_RAIN_J_KG)}): {_SURFACE_LAYER_OUTCOME[rule]}.",
                          {"pa_surface_j_kg": pas},
                          _SURFACE_THRESHOLDS, SOURCE))
    else:
        steps.append(_lines_step(v, case))
        steps.append(_refreezing_outcome_step(v, rule))
    return steps


def _lines_step(v: dict, case: int) -> Step:
    """Cases A and B: the refreezing area against the two lines of the warm area aloft."""
    pa, na = v["pa_aloft_j_kg"], v["na_j_kg"]
    lo, hi = v["line_liquid_j_kg"], v["line_ice_j_kg"]
    where = "refreezing area NA" if case == 2 else "middle cold-layer area NA"
    if na > hi:
        verdict = f"above the ice line {w.energy(hi)}: drops refreeze to ice pellets"
    elif na < lo:
        verdict = f"below the liquid line {w.energy(lo)}: drops stay liquid"
    else:
        verdict = f"between the lines {w.energy(lo)} and {w.energy(hi)}: partial refreezing"
    return Step("refreezing_lines",
                f"Warm area aloft PA = {w.energy(pa)}; {where} = {w.energy(na)}, {verdict}.",
                {"pa_aloft_j_kg": pa, "na_j_kg": na},
                {"liquid_line_j_kg": lo, "ice_line_j_kg": hi,
                 "line": "46 + 0.66 PA / 66 + 0.66 PA"}, SOURCE)


def _refreezing_outcome_step(v: dict, rule: str) -> Step:
    """Cases A and B: the type the lines (and, in case B, the surface layer) give."""
    pas, sfc = v["pa_surface_j_kg"], v["surface_temperature_c"]
    zero = w.temperature(0.0, trim=True)
    surface_area = f"surface warm area {w.energy(pas)}"
    snow, rain = w.energy(SURFACE_SNOW_J_KG), w.energy(SURFACE_RAIN_J_KG)
    final = {
        "refreeze_pellets": "ice pellets",
        "refreeze_mix": "freezing rain and ice pellets (mix zone)",
        "no_refreeze_freezing": f"surface air {w.temperature(sfc)} is below {zero}: "
                                "freezing rain",
        "no_refreeze_warm_surface": f"surface air {w.temperature(sfc)} is not below {zero}: rain",
        "b_pellets_survive": f"{surface_area} < {snow}: pellets survive",
        "b_pellets_partly_melt": f"{surface_area} between {snow} and {rain}: rain and ice "
                                 "pellets",
        "b_pellets_melt": f"{surface_area} > {rain}: pellets melt, rain",
        "b_liquid": "liquid drops fall through a warm surface layer: rain",
        "b_between": f"partly refrozen drops meet a surface warm area of {w.energy(pas)}: "
                     "rain and ice pellets",
    }[rule]
    return Step(rule, final[0].upper() + final[1:] + ".",
                {"pa_surface_j_kg": pas, "surface_temperature_c": sfc},
                _SURFACE_THRESHOLDS if rule.startswith("b_") else {"surface_freezing_c": 0.0},
                SOURCE)
