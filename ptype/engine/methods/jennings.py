"""Surface rain/snow partition from air temperature and humidity.

Jennings, K. S., T. S. Winchell, B. Livneh and N. P. Molotch, 2018: Spatial
variation of the rain-snow temperature threshold across the Northern
Hemisphere. *Nature Communications* 9, 1148, doi:10.1038/s41467-018-03629-7.
Bivariate logistic model (their Supplementary Table 2)::

    p_snow = 1 / (1 + exp(alpha + beta T + gamma RH)),  alpha = -10.04, beta = 1.41, gamma = 0.09

with T the 2 m air temperature in degC and RH in %; snow when p_snow >= 0.5.

Also :func:`ding_category` - Ding et al. (2014), *J. Hydrology* 513, 154-163,
doi:10.1016/j.jhydrol.2014.03.038: thresholds on the wet-bulb that depend on RH
and elevation, giving snow / sleet (a rain-snow mix) / rain (Ding2014).  The T0
equation is as published; the dT and dS expressions are from memory (unverified),
supported by their agreement (within 0.01 K for RH 0.8-1.0) with a polynomial form
of T_min in public use (common practice).  It is reported in the steps, not voted.

Neither looks aloft: they cannot see a warm nose, so they can only say rain or snow.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

from ptype.codes import Code
from ptype.engine import wording as w
from ptype.engine.methods.base import Context, MethodResult, Step

NAME = "jennings"
TITLE = "Jennings et al. (2018) surface rain/snow probability"
REFERENCE = "Jennings2018"
WETBULB = "isobaric"

ALPHA, BETA, GAMMA = -10.04, 1.41, 0.09
SNOW_PROBABILITY_THRESHOLD = 0.5
SOURCE = "Jennings et al. (2018), Nat. Commun. 9, 1148, Suppl. Table 2"
SOURCE_DING = "Ding et al. (2014), J. Hydrol. 513, 154-163 (dT, dS from memory)"


def snow_probability(temperature_c: ArrayLike, relative_humidity_pct: ArrayLike) -> np.ndarray:
    """Jennings et al. (2018) bivariate logistic probability of snow."""
    t = np.asarray(temperature_c, dtype=np.float64)
    rh = np.asarray(relative_humidity_pct, dtype=np.float64)
    return 1.0 / (1.0 + np.exp(ALPHA + BETA * t + GAMMA * rh))


def ding_thresholds_c(relative_humidity_pct: ArrayLike,
                      elevation_m: ArrayLike) -> tuple[np.ndarray, np.ndarray]:
    """Ding et al. (2014) wet-bulb thresholds ``(t_min, t_max)`` in degC.

    ``T0 = -5.87 - 0.1042 Z + 0.0885 Z**2 + 16.06 RH - 9.614 RH**2`` (Z in km, RH a
    fraction); ``dT = 0.215 - 0.099 RH + 1.018 RH**2``, ``dS = 2.374 - 1.634 RH``
    (from memory); when ``dT/dS > ln 2``:
    ``t_min = T0 - dS ln(exp(dT/dS) - 2 exp(-dT/dS))``, ``t_max = 2 T0 - t_min``;
    else ``t_min = t_max = T0``.
    """
    rh = np.asarray(relative_humidity_pct, dtype=np.float64) / 100.0
    zk = np.asarray(elevation_m, dtype=np.float64) / 1000.0
    t0 = -5.87 - 0.1042 * zk + 0.0885 * zk ** 2 + 16.06 * rh - 9.614 * rh ** 2
    dt = 0.215 - 0.099 * rh + 1.018 * rh ** 2
    ds = 2.374 - 1.634 * rh
    ratio = dt / ds
    spread = ratio > np.log(2.0)
    with np.errstate(invalid="ignore"):
        inner = np.exp(ratio) - 2.0 * np.exp(-ratio)
        t_min = np.where(spread, t0 - ds * np.log(np.where(spread, inner, 1.0)), t0)
    t_max = np.where(spread, 2.0 * t0 - t_min, t0)
    return t_min, t_max


def ding_category(wetbulb_c: ArrayLike, relative_humidity_pct: ArrayLike,
                  elevation_m: ArrayLike) -> np.ndarray:
    """Ding et al. (2014) class: Code.SN, Code.RASN (their 'sleet' = rain-snow mix) or Code.RA."""
    t_min, t_max = ding_thresholds_c(relative_humidity_pct, elevation_m)
    tw = np.asarray(wetbulb_c, dtype=np.float64)
    return np.where(tw <= t_min, int(Code.SN), np.where(tw >= t_max, int(Code.RA), int(Code.RASN)))


RULES = ("snow", "rain")


def run(ctx: Context) -> MethodResult:
    """Jennings et al. (2018) at the surface of every column of ``ctx``, with the Ding et al.
    (2014) class as a cross-check in the values."""
    c = ctx.columns
    p = snow_probability(c.surface_temperature_c, c.surface_relative_humidity_pct)
    snow = p >= SNOW_PROBABILITY_THRESHOLD
    rule = np.where(snow, 0, 1)
    code = np.where(snow, int(Code.SN), int(Code.RA)).astype(np.int64)
    elev = np.where(np.isfinite(c.surface_height_m), c.surface_height_m, 0.0)
    t_min, t_max = ding_thresholds_c(c.surface_relative_humidity_pct, elev)
    values = {"snow_probability": p, "surface_temperature_c": c.surface_temperature_c,
              "surface_relative_humidity_pct": c.surface_relative_humidity_pct,
              "surface_wetbulb_c": c.surface_wetbulb_c, "elevation_m": elev,
              "ding_t_min_c": t_min, "ding_t_max_c": t_max,
              "ding_code": ding_category(c.surface_wetbulb_c, c.surface_relative_humidity_pct,
                                         elev)}
    return MethodResult(NAME, code, rule, values, explain)


def explain(result: MethodResult, i: int) -> list[Step]:
    """The Ding et al. (2014) cross-check, then the Jennings et al. (2018) rule that decided."""
    v = {k: float(a[i]) for k, a in result.values.items()}
    rule = RULES[int(result.rule[i])]
    word = "snow" if rule == "snow" else "rain"
    ding = Code(int(v["ding_code"])).label
    t_sfc = v["surface_temperature_c"]
    rh_sfc = v["surface_relative_humidity_pct"]
    # The cross-check comes first so that the last step is always the rule that decided.
    return [
        Step("ding_check", f"Cross-check (Ding et al. 2014): surface wet-bulb "
             f"{w.temperature(v['surface_wetbulb_c'])} against "
             f"{w.temperature(v['ding_t_min_c'])} and {w.temperature(v['ding_t_max_c'])} at "
             f"{w.height(v['elevation_m'])} gives {ding}.",
             {"surface_wetbulb_c": v["surface_wetbulb_c"], "elevation_m": v["elevation_m"]},
             {"t_min_c": v["ding_t_min_c"], "t_max_c": v["ding_t_max_c"]}, SOURCE_DING),
        Step(rule, f"Surface air {w.temperature(t_sfc)} at {w.percent(rh_sfc)} relative "
             f"humidity gives a snow probability of {w.fraction(v['snow_probability'])} (snow at "
             f"{SNOW_PROBABILITY_THRESHOLD} or more): {word}. This looks at the surface only.",
             {"snow_probability": v["snow_probability"], "surface_temperature_c": t_sfc,
              "surface_relative_humidity_pct": rh_sfc},
             {"snow_probability_threshold": SNOW_PROBABILITY_THRESHOLD,
              "alpha": ALPHA, "beta": BETA, "gamma": GAMMA}, SOURCE),
    ]
