"""Baldwin, Treadon & Contorno (1994) decision tree, and the shared code of its 2005 revision.

Baldwin, M., R. Treadon and S. Contorno, 1994: Precipitation type prediction using a
decision tree approach with a mesoscale model.  Preprints, 10th Conf. on Numerical Weather
Prediction, Portland OR, Amer. Meteor. Soc., 30-31 (citation key ``Baldwin1994``).  All
thresholds as used in operational model post-processing (see ``docs/methods.md``).  The
revision (:mod:`ptype.engine.methods.baldwin_revised`) only replaces the snow test (step 3).

Baldwin's tree reads the **pseudo-adiabatic wet-bulb** ``Tw`` (Normand's rule; Columns'
``wetbulb_adiabatic_c``), the air temperature ``T`` and the dew point ``Td``.  Areas are
integrals of a temperature excess over height, in **K m** (not J/kg):

1. Saturated levels: ``T - Td < 2 K`` at pressures between ``p_sfc - 70 hPa`` and 500 hPa;
   if there are none the limit is relaxed to 4 K, then to 6 K.  From them: the coldest
   ``T_cold``, the warmest ``T_warm`` (and its level) and the highest saturated level.
   No saturated level even at 6 K: ptype abstains (no cloud to make precipitation).
2. ``T_cold > -4 degC``: no ice in the cloud; surface ``T <= 0 degC`` -> FZRA, else RA.
   This branch is where freezing drizzle lives; telling drizzle from rain is the cloud-top
   method's business, Baldwin's tree answers FZRA/RA.
3. ``AREAP4 = integral of (Tw + 4 degC) dz`` over the parts with ``Tw >= -4 degC`` from the
   ground to the highest saturated level; ``AREAP4 < 3000 K m`` -> SN.
   (Revision: ``AREAP0 = integral of Tw dz`` over ``Tw >= 0`` below the highest saturated
   level; ``AREAP0 < 350 K m`` -> SN.)
4. ``AREAS8`` = net ``integral of Tw dz`` over the lowest 150 hPa (can be negative);
   ``SURFW`` = ``integral of Tw dz`` over ``Tw >= 0`` from the ground up to the first level
   with ``T < 0``; ``SURFC`` = ``integral of Tw dz`` over ``Tw <= 0`` from the ground up to
   the level of ``T_warm``.
5. ``SURFC < -3000 K m`` or (``AREAS8 < -3000 K m`` and ``SURFW < 50 K m``) -> PL.
6. Otherwise surface ``T < 0 degC`` -> FZRA, else RA.

Integration.  Baldwin summed model layers (``Tw`` of a layer times its thickness).  A
sounding has levels, not layers, so ptype takes ``Tw`` linear in height between levels and
integrates exactly, including the part of an interval on one side of a crossing; the top of
the lowest 150 hPa is placed by interpolating height linearly in ln p (the hypsometric
equation with the interval's mean virtual temperature).  "Surface T" is the screen
temperature when the profile has one, else the lowest level's.  Dew points come from the
profile; Baldwin derived them with Tetens' formula from model humidity.

Bias (Reeves 2016, as commonly quoted): the original leans toward PL; the revision was
written to reduce its FZRA/PL bias.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

from ptype.codes import NO_RESULT, Code
from ptype.engine import wording as w
from ptype.engine.columns import Columns, interpolate_at_pressure
from ptype.engine.compiled import AVAILABLE as _COMPILED
from ptype.engine.compiled import compiled
from ptype.engine.methods.base import Context, MethodResult, Step, select_first

NAME = "baldwin"
TITLE = "Baldwin et al. (1994) decision tree"
REFERENCE = "Baldwin1994"
WETBULB = "adiabatic"

#: Saturation search band: from this far above the surface pressure, hPa ...
SATURATION_SEARCH_ABOVE_SURFACE_HPA = 70.0
#: ... up to this pressure, hPa.
SATURATION_SEARCH_TOP_HPA = 500.0
#: Dew-point depressions tried in turn for "saturated", K.
SATURATION_DEPRESSIONS_K = (2.0, 4.0, 6.0)
#: Coldest saturated temperature above which the cloud holds no ice, degC (269.15 K).
NO_ICE_CLOUD_C = -4.0
#: Snow when AREAP4 is below this, K m.
AREAP4_SNOW_K_M = 3000.0
#: Snow when AREAP0 is below this (2005 revision), K m.
AREAP0_SNOW_K_M = 350.0
#: Depth of the near-surface layer of AREAS8, hPa.
AREAS8_DEPTH_HPA = 150.0
#: PL when SURFC is below this, K m (a cold area is negative).
SURFC_PELLETS_K_M = -3000.0
#: PL when AREAS8 is below this and SURFW below :data:`SURFW_PELLETS_K_M`, K m.
AREAS8_PELLETS_K_M = -3000.0
SURFW_PELLETS_K_M = 50.0

RULES = (
    "insufficient_levels",   # 0
    "no_saturated_layer",    # 1
    "no_ice_freezing",       # 2 -> FZRA
    "no_ice_rain",           # 3 -> RA
    "snow_area",             # 4 -> SN  (AREAP4 or, revised, AREAP0)
    "pellets_surface_cold",  # 5 -> PL  (SURFC)
    "pellets_low_cold",      # 6 -> PL  (AREAS8 and SURFW)
    "freezing_rain",         # 7 -> FZRA
    "rain",                  # 8 -> RA
)
_RULE = {name: k for k, name in enumerate(RULES)}
_CODE_OF_RULE = np.array([NO_RESULT, NO_RESULT, Code.FZRA, Code.RA, Code.SN, Code.PL, Code.PL,
                          Code.FZRA, Code.RA], dtype=np.int64)

SOURCE = "Baldwin et al. (1994); thresholds as used operationally"
SOURCE_REVISED = "Baldwin et al. (1994), 2005 revision; thresholds as used operationally"


def _integrand(height_m, value_c):
    """The per-interval pieces of :func:`area_k_m` that depend only on the profile (shared by
    the several areas integrated over one profile)."""
    z = np.asarray(height_m, dtype=np.float64)
    v = np.asarray(value_c, dtype=np.float64)
    # Contiguous once here rather than at every compiled call of area_k_m.
    za, zb = np.ascontiguousarray(z[:, :-1]), np.ascontiguousarray(z[:, 1:])
    va, vb = np.ascontiguousarray(v[:, :-1]), v[:, 1:]
    ok = np.isfinite(za) & np.isfinite(zb) & np.isfinite(va) & np.isfinite(vb) & (zb > za)
    with np.errstate(invalid="ignore", divide="ignore"):
        slope = np.where(ok, (vb - va) / (zb - za), 0.0)
    return za, zb, va, ok, slope


def area_k_m(height_m: ArrayLike, value_c: ArrayLike, bottom_m: ArrayLike, top_m: ArrayLike,
             part: str = "net", *, integrand: tuple | None = None) -> np.ndarray:
    """Integral of ``value_c`` over height between ``bottom_m`` and ``top_m``, K m.

    ``value_c`` (n, L) is taken linear in height between levels (NaN-padded trailing levels
    are skipped); ``bottom_m``/``top_m`` are (n,).  ``part`` selects the whole integral
    (``"net"``), only where the value is positive (``"positive"``) or only where it is
    negative (``"negative"``, a negative number).  Crossings inside an interval are exact
    for the linear profile.  ``integrand`` may pass ``_integrand(height_m, value_c)`` computed
    once for several areas of the same profile.
    """
    if part not in ("net", "positive", "negative"):
        raise ValueError(f"part must be 'net', 'positive' or 'negative', got {part!r}")
    za, zb, va, ok, slope = _integrand(height_m, value_c) if integrand is None else integrand
    lo = np.asarray(bottom_m, dtype=np.float64)[:, None]
    hi = np.asarray(top_m, dtype=np.float64)[:, None]
    if _COMPILED and za.ndim == 2 and za.shape[1] > 0:
        out = np.empty(za.shape)
        _parts_compiled(np.ascontiguousarray(za), np.ascontiguousarray(zb),
                        np.ascontiguousarray(va), np.ascontiguousarray(ok),
                        np.ascontiguousarray(slope), np.ascontiguousarray(lo[:, 0]),
                        np.ascontiguousarray(hi[:, 0]), _PARTS.index(part), out)
        total = out.sum(axis=1)  # numpy's own summation, as on the numpy path
        return np.where(np.isfinite(lo[:, 0]) & np.isfinite(hi[:, 0]), total, np.nan)
    # np.clip(x, lo, hi) is minimum(maximum(x, lo), hi); the ufuncs directly skip its overhead.
    z0 = np.minimum(np.maximum(za, lo), hi)
    z1 = np.minimum(np.maximum(zb, lo), hi)
    a = va + slope * (z0 - za)
    b = va + slope * (z1 - za)
    d = np.where(ok & (z1 > z0), z1 - z0, 0.0)
    inside = d > 0
    a = np.where(inside, a, 0.0)
    b = np.where(inside, b, 0.0)
    net = 0.5 * (a + b) * d
    if part == "net":
        out = net
    else:
        ap, bp = np.maximum(a, 0.0), np.maximum(b, 0.0)
        with np.errstate(invalid="ignore", divide="ignore"):
            pos = np.where(np.abs(a - b) > 1e-12, d * (ap * ap - bp * bp) / (2.0 * (a - b)),
                           d * ap)
        out = pos if part == "positive" else net - pos
    total = out.sum(axis=1)
    return np.where(np.isfinite(lo[:, 0]) & np.isfinite(hi[:, 0]), total, np.nan)


_PARTS = ("net", "positive", "negative")


def _clip(z, lo, hi):
    """``np.minimum(np.maximum(z, lo), hi)`` for one value: NaN in any of them gives NaN."""
    if np.isnan(z) or np.isnan(lo):
        z = np.nan
    elif z < lo:
        z = lo
    if np.isnan(z) or np.isnan(hi):
        z = np.nan
    elif z > hi:
        z = hi
    return z


def _parts_loop(za, zb, va, ok, slope, lo, hi, part, out):
    """The per-interval integrals of :func:`area_k_m` (compiled with numba): the numpy path's
    arithmetic, element by element, without its temporaries.  ``part`` indexes :data:`_PARTS`."""
    n, m = za.shape
    for i in range(n):
        bot, top = lo[i], hi[i]
        for j in range(m):
            z0 = _clip(za[i, j], bot, top)
            z1 = _clip(zb[i, j], bot, top)
            s = slope[i, j]
            a = va[i, j] + s * (z0 - za[i, j])
            b = va[i, j] + s * (z1 - za[i, j])
            d = z1 - z0 if (ok[i, j] and z1 > z0) else 0.0
            if not d > 0:
                a = 0.0
                b = 0.0
            net = 0.5 * (a + b) * d
            if part == 0:
                out[i, j] = net
                continue
            ap = a if a > 0.0 or np.isnan(a) else 0.0
            bp = b if b > 0.0 or np.isnan(b) else 0.0
            if abs(a - b) > 1e-12:
                pos = d * (ap * ap - bp * bp) / (2.0 * (a - b))
            else:
                pos = d * ap
            out[i, j] = pos if part == 1 else net - pos


if _COMPILED:  # the helper is inlined into the compiled parts loop
    _clip = compiled(_clip, inline=True)
_parts_compiled = compiled(_parts_loop, numpy_errors=True)


def saturated_levels(columns: Columns) -> tuple[np.ndarray, np.ndarray]:
    """Baldwin's saturated levels.

    Returns ``(mask (n, L), depression_k (n,))``: the levels found with the first dew-point
    depression of :data:`SATURATION_DEPRESSIONS_K` that yields any, and that depression
    (NaN where none does).
    """
    p = columns.pressure_hpa
    dd = columns.temperature_c - columns.dewpoint_c
    band = (columns.valid & (p <= columns.surface_pressure_hpa[:, None]
                             - SATURATION_SEARCH_ABOVE_SURFACE_HPA)
            & (p >= SATURATION_SEARCH_TOP_HPA))
    n = columns.n_columns
    mask = np.zeros(p.shape, dtype=bool)
    used = np.full(n, np.nan)
    for limit in SATURATION_DEPRESSIONS_K:
        candidate = band & (dd < limit)
        take = np.isnan(used) & candidate.any(axis=1)
        mask = np.where(take[:, None], candidate, mask)
        used = np.where(take, limit, used)
    return mask, used


def _shared(ctx: Context) -> dict:
    """Everything of the tree except the snow test, computed once per context (the original
    and the revised tree share it)."""
    cached = ctx.__dict__.get("_baldwin_shared")
    if cached is not None:
        return cached
    c = ctx.columns
    n, L = c.pressure_hpa.shape
    rows = np.arange(n)
    p, z, t = c.pressure_hpa, c.height_m, c.temperature_c
    tw = c.wetbulb_adiabatic_c
    sfc_t = c.surface_temperature_c
    sfc_z = c.surface_height_m
    enough = c.n_levels >= 2

    sat, depression = saturated_levels(c)
    found = sat.any(axis=1)
    t_sat_cold = np.where(sat, t, np.inf)
    t_sat_warm = np.where(sat, t, -np.inf)
    k_cold = np.argmin(t_sat_cold, axis=1)
    k_warm = np.argmax(t_sat_warm, axis=1)
    k_high = np.where(found, L - 1 - np.argmax(sat[:, ::-1], axis=1), 0)
    t_cold = np.where(found, t[rows, k_cold], np.nan)
    t_warm = np.where(found, t[rows, k_warm], np.nan)
    z_high = np.where(found, z[rows, k_high], np.nan)
    p_high = np.where(found, p[rows, k_high], np.nan)
    z_warm = np.where(found, z[rows, k_warm], np.nan)
    p_warm = np.where(found, p[rows, k_warm], np.nan)

    integrand = _integrand(z, tw)
    p8 = c.surface_pressure_hpa - AREAS8_DEPTH_HPA
    z8 = interpolate_at_pressure(p, z, p8)
    # A sounding shallower than 150 hPa: integrate over what there is.
    z_top_valid = z[rows, np.maximum(c.n_levels - 1, 0)]
    z8 = np.where(np.isfinite(z8), z8, z_top_valid)
    areas8 = area_k_m(z, tw, sfc_z, z8, "net", integrand=integrand)
    # Top of the surface warm layer of T: the first 0 degC crossing (or the surface itself).
    air = ctx.air_layers
    z_first_cold = np.where(air.kind[:, 0] > 0, air.top_m[:, 0], sfc_z)
    surfw = area_k_m(z, tw, sfc_z, z_first_cold, "positive", integrand=integrand)
    surfc = area_k_m(z, tw, sfc_z, z_warm, "negative", integrand=integrand)

    # The rule up to the snow test, and from the pellet tests on (first true wins).
    rule_before = select_first(
        [~enough, ~found, (t_cold > NO_ICE_CLOUD_C) & (sfc_t <= 0.0), t_cold > NO_ICE_CLOUD_C],
        [_RULE["insufficient_levels"], _RULE["no_saturated_layer"], _RULE["no_ice_freezing"],
         _RULE["no_ice_rain"]], default=-1)
    rule_after = select_first(
        [surfc < SURFC_PELLETS_K_M, (areas8 < AREAS8_PELLETS_K_M) & (surfw < SURFW_PELLETS_K_M),
         sfc_t < 0.0],
        [_RULE["pellets_surface_cold"], _RULE["pellets_low_cold"], _RULE["freezing_rain"]],
        default=_RULE["rain"])
    shared = {
        "tw": tw, "sfc_z": sfc_z, "z_high": z_high, "integrand": integrand,
        "rule_before": rule_before, "rule_after": rule_after,
        "values": {
            "saturation_depression_k": depression,
            "cloud_coldest_c": t_cold,
            "cloud_warmest_c": t_warm,
            "cloud_warmest_hpa": p_warm,
            "cloud_warmest_m": z_warm,
            "highest_saturated_hpa": p_high,
            "highest_saturated_m": z_high,
            "surface_temperature_c": sfc_t,
        },
        "values_after": {
            "areas8_k_m": areas8,
            "surfw_k_m": surfw,
            "surfc_k_m": surfc,
            "surface_warm_top_m": z_first_cold,
            "low_layer_top_m": z8,
        },
    }
    ctx.__dict__["_baldwin_shared"] = shared
    return shared


def run_tree(ctx: Context, *, revised: bool) -> MethodResult:
    """Both variants of the tree; ``revised`` selects the 2005 snow test (AREAP0)."""
    s = _shared(ctx)
    z, tw, sfc_z, z_high = ctx.columns.height_m, s["tw"], s["sfc_z"], s["z_high"]
    if revised:
        snow_area = area_k_m(z, tw, sfc_z, z_high, "positive", integrand=s["integrand"])
        snow_limit = AREAP0_SNOW_K_M
    else:
        snow_area = area_k_m(z, tw - NO_ICE_CLOUD_C, sfc_z, z_high, "positive")
        snow_limit = AREAP4_SNOW_K_M
    rule_before = s["rule_before"]
    rule = np.where(rule_before >= 0, rule_before,
                    np.where(snow_area < snow_limit, _RULE["snow_area"], s["rule_after"]))
    values = dict(s["values"])
    values["areap0_k_m" if revised else "areap4_k_m"] = snow_area
    values.update(s["values_after"])
    return MethodResult(name="baldwin_revised" if revised else NAME, code=_CODE_OF_RULE[rule],
                        rule=rule, values=values,
                        explainer=explain_revised if revised else explain)


def run(ctx: Context) -> MethodResult:
    """Baldwin et al. (1994) for every column of ``ctx``."""
    return run_tree(ctx, revised=False)


def explain_tree(result: MethodResult, i: int, *, revised: bool) -> list[Step]:
    """The trace of column ``i`` for either variant, from ``result.values`` only."""
    src = SOURCE_REVISED if revised else SOURCE
    v = {k: float(a[i]) for k, a in result.values.items()}
    rule = RULES[int(result.rule[i])]
    if rule == "insufficient_levels":
        return [Step(rule, "Fewer than two valid levels: Baldwin's tree needs a profile.",
                     source=src)]
    if rule == "no_saturated_layer":
        band = (f"{w.pressure(SATURATION_SEARCH_ABOVE_SURFACE_HPA)} above the surface and "
                f"{w.pressure(SATURATION_SEARCH_TOP_HPA)}")
        return [Step(rule, f"No level between {band} has a dew-point "
                     f"depression below {w.kelvin(SATURATION_DEPRESSIONS_K[-1])}: no saturated "
                     "layer to make precipitation, so Baldwin's tree gives no type.", {},
                     {"dewpoint_depression_k": SATURATION_DEPRESSIONS_K[-1]}, src)]
    steps = [_saturation_step(v, src)]
    tc, st = v["cloud_coldest_c"], v["surface_temperature_c"]
    no_ice = w.temperature(NO_ICE_CLOUD_C, trim=True)
    zero = w.temperature(0.0, trim=True)
    if rule in ("no_ice_freezing", "no_ice_rain"):
        kind = (f"at or below {zero}: freezing rain" if rule == "no_ice_freezing"
                else f"above {zero}: rain")
        steps.append(Step(rule, f"The coldest saturated level, {w.temperature(tc)}, is warmer "
                          f"than {no_ice}, so the cloud holds no ice; the surface temperature "
                          f"{w.temperature(st)} is {kind}. (Whether this is drizzle rather than "
                          "rain is for the cloud-top method to say; Baldwin's tree answers rain "
                          "or freezing rain.)",
                          {"cloud_coldest_c": tc, "surface_temperature_c": st},
                          {"cloud_coldest_c": NO_ICE_CLOUD_C, "surface_temperature_c": 0.0}, src))
        return steps
    steps.append(Step("ice_in_cloud", f"The coldest saturated level, {w.temperature(tc)}, is at "
                      f"or below {no_ice}: the cloud makes ice.",
                      {"cloud_coldest_c": tc}, {"cloud_coldest_c": NO_ICE_CLOUD_C}, src))
    steps.append(_snow_step(v, rule, revised, src))
    if rule == "snow_area":
        return steps
    steps.append(_pellets_step(v, rule, src))
    if rule in ("pellets_surface_cold", "pellets_low_cold"):
        return steps
    if rule == "freezing_rain":
        text = f"Surface temperature {w.temperature(st)} < {zero}: freezing rain."
    else:
        text = f"Surface temperature {w.temperature(st)} {w.GE} {zero}: rain."
    steps.append(Step(rule, text, {"surface_temperature_c": st}, {"surface_temperature_c": 0.0},
                      src))
    return steps


def _saturation_step(v: dict, src: str) -> Step:
    """Step 1 of the tree: the saturated levels and the criterion that found them."""
    dep = v["saturation_depression_k"]
    relaxed = ("" if dep == SATURATION_DEPRESSIONS_K[0]
               else f" (limit relaxed to {w.kelvin(dep)})")
    return Step("saturated_layer",
                f"Saturated levels (T {w.MINUS} Td < {w.kelvin(dep)}{relaxed}) reach up to "
                f"{w.pressure(v['highest_saturated_hpa'])}; the coldest is "
                f"{w.temperature(v['cloud_coldest_c'])} and the warmest "
                f"{w.temperature(v['cloud_warmest_c'])} at {w.pressure(v['cloud_warmest_hpa'])}.",
                {"saturation_depression_k": dep,
                 "highest_saturated_hpa": v["highest_saturated_hpa"],
                 "cloud_coldest_c": v["cloud_coldest_c"],
                 "cloud_warmest_c": v["cloud_warmest_c"]},
                {"dewpoint_depression_k": dep}, src)


def _snow_step(v: dict, rule: str, revised: bool, src: str) -> Step:
    """Step 3: AREAP4 (or the revision's AREAP0) against its snow limit."""
    if revised:
        area, limit, key, label = v["areap0_k_m"], AREAP0_SNOW_K_M, "areap0_k_m", "AREAP0"
        what = f"wet-bulb above {w.temperature(0.0, trim=True)}"
    else:
        area, limit, key, label = v["areap4_k_m"], AREAP4_SNOW_K_M, "areap4_k_m", "AREAP4"
        no_ice = w.temperature(NO_ICE_CLOUD_C, trim=True)
        what = f"wet-bulb above {no_ice} (measured from {no_ice})"
    head = f"{label}, the area of {what} below the highest saturated level, is {w.area(area)}"
    if rule == "snow_area":
        text = f"{head} < {w.area(limit)}: too little warmth to melt the ice, snow."
    else:
        text = f"{head} {w.GE} {w.area(limit)}: enough warmth to melt the ice."
    return Step("snow_area", text, {key: area}, {key: limit}, src)


def _pellets_step(v: dict, rule: str, src: str) -> Step:
    """Step 5: the two ice-pellet tests on SURFC, AREAS8 and SURFW."""
    surfc, areas8, surfw = v["surfc_k_m"], v["areas8_k_m"], v["surfw_k_m"]
    values = {"surfc_k_m": surfc, "areas8_k_m": areas8, "surfw_k_m": surfw}
    limits = {"surfc_k_m": SURFC_PELLETS_K_M, "areas8_k_m": AREAS8_PELLETS_K_M,
              "surfw_k_m": SURFW_PELLETS_K_M}
    if rule == "pellets_surface_cold":
        text = (f"SURFC, the cold wet-bulb area from the ground up to the warmest saturated "
                f"level, is {w.area(surfc)} < {w.area(SURFC_PELLETS_K_M)}: melted drops "
                "refreeze, ice pellets.")
    elif rule == "pellets_low_cold":
        text = (f"AREAS8, the net wet-bulb area of the lowest {w.pressure(AREAS8_DEPTH_HPA)}, "
                f"is {w.area(areas8)} < {w.area(AREAS8_PELLETS_K_M)} and SURFW, the warm area "
                f"next to the ground, is {w.area(surfw)} < {w.area(SURFW_PELLETS_K_M)}: ice "
                "pellets.")
    else:
        rule = "pellets_test"
        text = (f"No refreezing to ice pellets: SURFC {w.area(surfc)} is not below "
                f"{w.area(SURFC_PELLETS_K_M)}, and AREAS8 {w.area(areas8)} with SURFW "
                f"{w.area(surfw)} does not meet AREAS8 < {w.area(AREAS8_PELLETS_K_M)} together "
                f"with SURFW < {w.area(SURFW_PELLETS_K_M)}.")
    return Step(rule, text, values, limits, src)


def explain(result: MethodResult, i: int) -> list[Step]:
    """Baldwin et al. (1994) trace of column ``i``."""
    return explain_tree(result, i, revised=False)


def explain_revised(result: MethodResult, i: int) -> list[Step]:
    """Trace of column ``i`` for the 2005 revision."""
    return explain_tree(result, i, revised=True)
