"""Partial-thickness rules (1000-850 and 850-700 hPa).

The thickness algorithm of Cortinas et al. (Cortinas2002, a preprint; thresholds chosen
from Keeter1991, Younkin 1967 and Zerr 1997; the values as quoted in a secondary source,
details from memory):

1. 1000-850 hPa > 1310 m, or 850-700 hPa > 1560 m -> RA when the surface
   wet-bulb is above 0 degC, otherwise FZRA;
2. 850-700 hPa thickness <= 1540 m (and 1000-850 hPa <= 1310 m) -> SN;
3. 1540 m < 850-700 hPa <= 1560 m -> PL.

The two thicknesses are read jointly, as Keeter & Cline (1991) read them on
their nomogram: a warm lowest layer (1000-850 hPa above the rain limit) rules
snow out whatever the layer above says, so the liquid test comes first.  All of 1000, 850,
700 and 500 hPa must lie inside the profile (no extrapolation below ground or above the top);
otherwise the method gives no result.  Thicknesses come from the profile's
heights interpolated linearly in ln p.
"""

from __future__ import annotations

import numpy as np

from ptype.codes import NO_RESULT, Code
from ptype.engine import wording as w
from ptype.engine.columns import interpolate_at_pressures
from ptype.engine.methods.base import Context, MethodResult, Step, select_first

NAME = "thickness"
TITLE = "Partial-thickness rules (1000-850, 850-700 hPa)"
REFERENCE = "Cortinas2002"
WETBULB = "isobaric"

SNOW_850_700_MAX_M = 1540.0
PELLETS_850_700_MAX_M = 1560.0
RAIN_1000_850_MIN_M = 1310.0
SOURCE = "Cortinas et al. thickness algorithm (thresholds from Keeter & Cline 1991, Zerr 1997)"

RULES = ("missing_levels", "snow_850_700", "liquid_warm_surface", "liquid_freezing_surface",
         "pellets_850_700", "none_fired")
_LUT = np.array([NO_RESULT, Code.SN, Code.RA, Code.FZRA, Code.PL, NO_RESULT], dtype=np.int64)


def run(ctx: Context) -> MethodResult:
    """The thickness rules for every column of ``ctx`` (see the module docstring)."""
    c = ctx.columns
    levels = (1000.0, 850.0, 700.0, 500.0)
    at = interpolate_at_pressures(c.pressure_hpa, c.height_m, levels)
    z = {p: at[:, j] for j, p in enumerate(levels)}
    low = z[850.0] - z[1000.0]
    mid = z[700.0] - z[850.0]
    complete = (np.isfinite(z[1000.0]) & np.isfinite(z[850.0]) & np.isfinite(z[700.0])
                & np.isfinite(z[500.0]))
    warm_sfc = c.surface_wetbulb_c > 0.0
    liquid = (low > RAIN_1000_850_MIN_M) | (mid > PELLETS_850_700_MAX_M)
    # Jointly (Keeter & Cline 1991): the liquid test before the snow test, so a warm
    # 1000-850 hPa layer is never snow.
    rule = select_first([~complete, liquid & warm_sfc, liquid, mid <= SNOW_850_700_MAX_M,
                         (mid > SNOW_850_700_MAX_M) & (mid <= PELLETS_850_700_MAX_M)],
                        [0, 2, 3, 1, 4], default=5)
    values = {"thickness_1000_850_m": low, "thickness_850_700_m": mid,
              "surface_wetbulb_c": c.surface_wetbulb_c, "complete": complete}
    return MethodResult(NAME, _LUT[rule], rule, values, explain)


def explain(result: MethodResult, i: int) -> list[Step]:
    """The thickness rule that fired for column ``i``, with the two thicknesses."""
    rule = RULES[int(result.rule[i])]
    low = float(result.values["thickness_1000_850_m"][i])
    mid = float(result.values["thickness_850_700_m"][i])
    tw = float(result.values["surface_wetbulb_c"][i])
    th = {"snow_850_700_max_m": SNOW_850_700_MAX_M, "pellets_850_700_max_m": PELLETS_850_700_MAX_M,
          "rain_1000_850_min_m": RAIN_1000_850_MIN_M}
    vals = {"thickness_1000_850_m": low, "thickness_850_700_m": mid, "surface_wetbulb_c": tw}
    lower = f"1000{w.DASH}850 hPa"
    upper = f"850{w.DASH}700 hPa"
    text = {
        "missing_levels": "The profile does not span 1000 to 500 hPa (1000 hPa below ground or "
                          "the top too low): no thickness result, as the rules are not "
                          "extrapolated.",
        "snow_850_700": f"The {lower} thickness {w.height(low)} {w.LE} "
                        f"{w.height(RAIN_1000_850_MIN_M)} and {upper} {w.height(mid)} {w.LE} "
                        f"{w.height(SNOW_850_700_MAX_M)}: snow.",
        "liquid_warm_surface": f"The {lower} thickness {w.height(low)} (limit "
                               f"{w.height(RAIN_1000_850_MIN_M)}) or {upper} {w.height(mid)} "
                               f"(limit {w.height(PELLETS_850_700_MAX_M)}) says liquid; surface "
                               f"wet-bulb {w.temperature(tw)}: rain.",
        "liquid_freezing_surface": f"The {lower} thickness {w.height(low)} or {upper} "
                                   f"{w.height(mid)} says liquid; surface wet-bulb "
                                   f"{w.temperature(tw)} is not above "
                                   f"{w.temperature(0.0, trim=True)}: freezing rain.",
        "pellets_850_700": f"The {upper} thickness {w.height(mid)} between "
                           f"{w.height(SNOW_850_700_MAX_M)} and "
                           f"{w.height(PELLETS_850_700_MAX_M)}: ice pellets.",
        "none_fired": "No thickness rule fired.",
    }[rule]
    return [Step(rule, text, vals, th, SOURCE)]
