"""Top-down (ice-nucleation) reasoning: does the cloud make ice, and what happens on the way down.

Following a hydrometeor from its source to the ground in four steps
(Baumgardt 2000, NWS La Crosse "Precipitation Type Forecasting" teletraining):

1. **Is there ice in the cloud?**  Cloud layers are found with the saturation
   criteria of :mod:`ptype.engine.layers` (RH over water >= 90 %, or over ice >= 95 %
   below 0 degC).  A cloud layer makes ice when its coldest temperature is at or
   below :data:`ICE_NUCLEATION_C` (-10 degC: heterogeneous freezing is likeliest
   below -10 degC and deposition nucleation is efficient from -10 to -20 degC,
   NWS ice-nucleation guidance, common practice; Baumgardt2000).  A higher ice cloud
   *seeds* a lower one unless the gap between them holds more than
   :data:`SEEDING_GAP_M` of dry air (RH over water below 80 %, :mod:`ptype.engine.layers`)
   in which the crystals sublimate (ours, from memory of seeder-feeder
   practice: crystals survive a fall of the order of a kilometre through
   moderately dry air; not a published constant).  Nearly saturated gaps do
   not block seeding, so one slightly drier level between two cloud decks
   does not switch the answer.
2. Without ice the cloud rains out by collision-coalescence as **drizzle**:
   freezing drizzle when the surface air is at or below 0 degC (Huffman &
   Norman 1988; Bocchieri 1980), whatever the melting-layer methods say -
   provided the cloud's liquid part is at least :data:`DRIZZLE_CLOUD_DEPTH_M` deep
   (ours); a shallower cloud gives no result.  Cloud layers thinner than
   :data:`ptype.engine.layers.MIN_CLOUD_DEPTH_M` are not clouds at all.
3. With ice, the **warm layers** decide melting by their maximum temperature
   (Stewart & King 1987): above 3 degC complete melting; 1-3 degC partial
   melting; below 1 degC little melting.  The maximum is the air temperature's,
   as they state it, taken over the levels whose wet-bulb is above 0 degC
   (:func:`warm_layer_peaks_c`, ours): a warm but dry layer cools falling snow
   by sublimation and does not melt it.
4. The **near-surface cold layer** refreezes drops that melted completely only
   if it is colder than -8 degC (WPC forecaster training guidance, common
   practice); partly melted particles keep an ice core and refreeze readily.
"""

from __future__ import annotations

import numpy as np

from ptype.codes import NO_RESULT, Code
from ptype.engine import wording as w
from ptype.engine.compiled import AVAILABLE as _COMPILED
from ptype.engine.compiled import compiled
from ptype.engine.layers import (
    cumulative_dry_depth_m,
    deepest_run_within_m,
    liquid_cloud_mask,
)
from ptype.engine.methods.base import Context, MethodResult, Step, select_first

NAME = "cloud_top"
TITLE = "Cloud-top ice nucleation (top-down) reasoning"
REFERENCE = "Baumgardt2000"
WETBULB = "isobaric"

#: A cloud whose coldest temperature is at or below this makes ice, degC.
ICE_NUCLEATION_C = -10.0
#: Deepest clear gap through which a higher ice cloud still seeds a lower one, m (ours).
SEEDING_GAP_M = 1000.0
#: Stewart & King (1987) warm-layer maximum temperature limits, degC, applied to the air
#: temperature where the wet-bulb is above 0 degC (:func:`warm_layer_peaks_c`).
COMPLETE_MELT_C = 3.0
PARTIAL_MELT_C = 1.0
#: Completely melted drops refreeze to ice pellets only in a cold layer colder than this, degC.
REFREEZE_COLD_LAYER_C = -8.0
#: Precipitation freezes on contact when the surface air is at or below this, degC.
FREEZING_SURFACE_C = 0.0
#: A cloud that makes no ice gives drizzle only when its liquid part is at least this deep, m
#: (ours: collision-coalescence needs a deep enough supercooled layer to grow drizzle drops;
#: the freezing-drizzle stratus of Huffman & Norman 1988 are several hundred metres deep).
#: A shallower cloud abstains instead of overriding the other methods.
DRIZZLE_CLOUD_DEPTH_M = 300.0

RULES = ("no_cloud", "no_ice_freezing_drizzle", "no_ice_drizzle", "melted_freezing_rain",
         "melted_refrozen_pellets", "melted_rain", "partly_melted_pellets",
         "partly_melted_rain_pellets", "surface_melt_rain", "surface_melt_rain_snow", "snow",
         "cloud_too_shallow")
_LUT = np.array([NO_RESULT, Code.FZDZ, Code.DZ, Code.FZRA, Code.PL, Code.RA, Code.PL, Code.RAPL,
                 Code.RA, Code.RASN, Code.SN, NO_RESULT], dtype=np.int64)

SOURCE_ICE = "Baumgardt (2000); ice nucleation below -10 °C (NWS guidance)"
SOURCE_MELT = "Stewart & King (1987) warm-layer temperature limits"
SOURCE_REFREEZE = "Refreezing needs a cold layer below about -8 °C (WPC guidance)"


def ice_analysis(ctx: Context) -> dict[str, np.ndarray]:
    """Vectorised step 1: which columns bring ice into their lowest cloud layer.

    Returns per-column arrays: ``has_cloud``, ``ice`` (ice reaches the lowest cloud),
    ``seeded`` (the ice came from a higher cloud), ``top_cloud_top_hpa``,
    ``top_cloud_top_m``, ``top_cloud_min_c`` (coldest temperature of the highest cloud),
    ``lowest_cloud_top_hpa``, ``lowest_cloud_min_c``.
    """
    cl = ctx.cloud_layers
    n = cl.bottom_m.shape[0]
    count = cl.count
    rows = np.arange(n)
    cum_dry = cumulative_dry_depth_m(ctx.columns.height_m, ctx.dry_mask)
    if _COMPILED:
        ice = np.empty(n, dtype=np.bool_)
        seeded = np.empty(n, dtype=np.bool_)
        _seeding_compiled(np.ascontiguousarray(count), np.ascontiguousarray(cl.min_temperature_c),
                          np.ascontiguousarray(cl.top_index), np.ascontiguousarray(cl.bottom_index),
                          np.ascontiguousarray(cum_dry), ice, seeded)
    else:
        ice, seeded = _seeding_numpy(count, cl.min_temperature_c, cl.top_index,
                                     cl.bottom_index, cum_dry)
    top = np.maximum(count - 1, 0)
    has = count > 0
    # Drizzle grows in the liquid part of the cloud: the depth that counts is that of its
    # deepest run of levels saturated over water.
    c = ctx.columns
    liquid_depth = np.where(has, deepest_run_within_m(
        liquid_cloud_mask(c.relative_humidity_pct), c.height_m, cl.bottom_m[:, 0],
        cl.top_m[:, 0]), np.nan)
    return {
        "has_cloud": has,
        "ice": ice & has,
        "seeded": seeded & has,
        # No ice and deep enough to grow drizzle (:data:`DRIZZLE_CLOUD_DEPTH_M`).
        "drizzle": has & ~ice & (liquid_depth >= DRIZZLE_CLOUD_DEPTH_M),
        "lowest_cloud_depth_m": liquid_depth,
        "top_cloud_top_hpa": np.where(has, cl.top_hpa[rows, top], np.nan),
        "top_cloud_top_m": np.where(has, cl.top_m[rows, top], np.nan),
        "top_cloud_min_c": np.where(has, cl.min_temperature_c[rows, top], np.nan),
        "lowest_cloud_top_hpa": np.where(has, cl.top_hpa[:, 0], np.nan),
        "lowest_cloud_base_hpa": np.where(has, cl.bottom_hpa[:, 0], np.nan),
        "lowest_cloud_min_c": np.where(has, cl.min_temperature_c[:, 0], np.nan),
    }


def _seeding_numpy(count, min_temperature_c, top_index, bottom_index, cum_dry):
    """From the highest cloud layer down: does each layer hold ice, its own (coldest
    temperature at or below :data:`ICE_NUCLEATION_C`) or seeded from the layer above across
    at most :data:`SEEDING_GAP_M` of dry air?  Returns ``(ice, seeded)`` of the lowest layer."""
    n, R = min_temperature_c.shape
    rows = np.arange(n)
    ice = np.zeros(n, dtype=bool)
    seeded = np.zeros(n, dtype=bool)
    upper_base_dry = np.full(n, np.nan)
    for r in range(R - 1, -1, -1):
        present = r < count
        own = min_temperature_c[:, r] <= ICE_NUCLEATION_C
        top_dry = cum_dry[rows, np.maximum(top_index[:, r], 0)]
        gap_dry = upper_base_dry - top_dry
        from_above = ice & np.isfinite(gap_dry) & (gap_dry <= SEEDING_GAP_M)
        seeded = np.where(present, from_above & ~own, seeded)
        ice = np.where(present, own | from_above, ice)
        upper_base_dry = np.where(present, cum_dry[rows, np.maximum(bottom_index[:, r], 0)],
                                  upper_base_dry)
    return ice, seeded


def _seeding_loop(count, min_temperature_c, top_index, bottom_index, cum_dry, ice, seeded):
    """:func:`_seeding_numpy` one column at a time (compiled with numba); fills ``ice`` and
    ``seeded``."""
    n, R = min_temperature_c.shape
    for i in range(n):
        has_ice = False
        was_seeded = False
        upper_base_dry = np.nan
        for r in range(min(count[i], R) - 1, -1, -1):
            own = min_temperature_c[i, r] <= ICE_NUCLEATION_C
            gap_dry = upper_base_dry - cum_dry[i, max(top_index[i, r], 0)]
            from_above = has_ice and np.isfinite(gap_dry) and gap_dry <= SEEDING_GAP_M
            was_seeded = from_above and not own
            has_ice = own or from_above
            upper_base_dry = cum_dry[i, max(bottom_index[i, r], 0)]
        ice[i] = has_ice
        seeded[i] = was_seeded


_seeding_compiled = compiled(_seeding_loop)


def warm_layer_peaks_c(columns) -> tuple[np.ndarray, np.ndarray]:
    """Peak air temperature of the melting layers aloft and of the surface-based one, degC (0
    where there is none).

    Stewart & King (1987) state their melting limits on the warm layer's maximum (air)
    temperature.  Melting happens only where the wet-bulb is above 0 degC (in drier air the
    falling snow cools by sublimation and stays frozen), so the peak is taken over the levels
    whose isobaric wet-bulb is above 0 degC (ours): in saturated layers the two agree, and a
    warm but dry layer does not count as melting.
    """
    c = columns
    valid = c.valid & (c.pressure_hpa >= 250.0)
    melting = valid & (c.wetbulb_c > 0.0)
    surface_run = np.cumprod(melting, axis=1).astype(bool)
    aloft = melting & ~surface_run
    t = c.temperature_c
    aloft_max = np.where(aloft, t, 0.0).max(axis=1)
    surface_max = np.where(surface_run, t, 0.0).max(axis=1)
    return np.maximum(aloft_max, 0.0), np.maximum(surface_max, 0.0)


def run(ctx: Context) -> MethodResult:
    """The top-down reasoning for every column of ``ctx`` (see the module docstring)."""
    c = ctx.columns
    ia = ice_analysis(ctx)
    aloft_max, surface_max = warm_layer_peaks_c(c)
    air = ctx.air_layers
    Ka = air.kind.shape[1]
    ka = np.arange(Ka)[None, :]
    aloft_warm_air = (air.kind > 0) & (ka > 0)
    highest = np.where(aloft_warm_air.any(axis=1),
                       Ka - 1 - np.argmax(aloft_warm_air[:, ::-1], axis=1), 0)
    cold_below = (air.kind < 0) & (ka < highest[:, None])
    cold_min = np.where(cold_below, air.extreme_c, 0.0).min(axis=1)
    sfc_t = c.surface_temperature_c
    freezing_sfc = sfc_t <= FREEZING_SURFACE_C

    melted = aloft_max > COMPLETE_MELT_C
    partly = (aloft_max >= PARTIAL_MELT_C) & ~melted
    rule_ice = select_first(
        [melted & ~freezing_sfc, melted & (cold_min <= REFREEZE_COLD_LAYER_C), melted,
         partly & freezing_sfc, partly,
         surface_max > COMPLETE_MELT_C, surface_max >= PARTIAL_MELT_C],
        [5, 4, 3, 6, 7, 8, 9], default=10)
    no_ice = np.where(ia["drizzle"], np.where(freezing_sfc, 1, 2), 11)
    rule = np.where(~ia["has_cloud"], 0, np.where(~ia["ice"], no_ice, rule_ice))
    values = dict(ia)
    values.update({"max_temperature_aloft_c": aloft_max,
                   "max_temperature_surface_layer_c": surface_max,
                   "cold_layer_min_c": cold_min, "surface_temperature_c": sfc_t})
    return MethodResult(NAME, _LUT[rule], rule, values, explain)


_ICE_THRESHOLDS = {"ice_nucleation_c": ICE_NUCLEATION_C, "seeding_gap_m": SEEDING_GAP_M}


def explain(result: MethodResult, i: int) -> list[Step]:
    """The top-down reasoning for column ``i``: ice in the cloud, then melting and refreezing
    on the way down, from ``result.values`` only."""
    v = {k: a[i] for k, a in result.values.items()}
    rule = RULES[int(result.rule[i])]
    if rule == "no_cloud":
        return [Step(rule, "No saturated layer in the profile: the cloud-top reasoning cannot say "
                           "where precipitation forms.", {}, {}, SOURCE_ICE)]
    if not v["ice"]:
        return _no_ice_steps(v, rule)
    return [_ice_step(v), _melting_step(v, rule)]


def _ice_step(v: dict) -> Step:
    """Step 1 with ice: the cloud's own, or seeded from a higher cloud."""
    top_c = float(v["top_cloud_min_c"])
    low_c = float(v["lowest_cloud_min_c"])
    nucleation = w.temperature(ICE_NUCLEATION_C, trim=True)
    if v["seeded"]:
        text = (f"The lowest cloud (coldest {w.temperature(low_c)}) is too warm to make ice "
                f"itself but is seeded by ice from a higher cloud (top "
                f"{w.pressure(float(v['top_cloud_top_hpa']))}, {w.temperature(top_c)}) through "
                f"a gap with at most {w.height(SEEDING_GAP_M)} of dry air.")
    else:
        coldest = low_c if low_c <= ICE_NUCLEATION_C else top_c
        text = (f"The cloud reaches {w.temperature(coldest)}, at or below {nucleation}: it "
                "makes ice.")
    return Step("ice_present", text, {"cloud_min_c": min(low_c, top_c)}, _ICE_THRESHOLDS,
                SOURCE_ICE)


def _no_ice_steps(v: dict, rule: str) -> list[Step]:
    """Steps 1-2 without ice: supercooled drops grow as drizzle, freezing on a cold surface
    (or, in too shallow a cloud, no decision)."""
    low_c = float(v["lowest_cloud_min_c"])
    if rule == "cloud_too_shallow":
        depth = float(v["lowest_cloud_depth_m"])
        return [Step(rule, f"The lowest cloud makes no ice and its liquid part is "
                           f"{w.height(depth)} deep: too shallow to grow drizzle (at least "
                           f"{w.height(DRIZZLE_CLOUD_DEPTH_M)}, ours), so this method does not "
                           "decide.", {"lowest_cloud_depth_m": depth},
                     {"drizzle_cloud_depth_m": DRIZZLE_CLOUD_DEPTH_M},
                     "ours (collision-coalescence needs a deep cloud)")]
    sfc = float(v["surface_temperature_c"])
    word = "freezing drizzle" if rule == "no_ice_freezing_drizzle" else "drizzle"
    return [
        Step("no_ice", f"The precipitating cloud is no colder than {w.temperature(low_c)} (ice "
             f"needs {w.temperature(ICE_NUCLEATION_C, trim=True)} or colder) and no higher ice "
             "cloud seeds it: supercooled liquid, growing as drizzle.",
             {"cloud_min_c": low_c}, _ICE_THRESHOLDS, SOURCE_ICE),
        Step(rule, f"Surface air {w.temperature(sfc)}: {word}.", {"surface_temperature_c": sfc},
             {"freezing_surface_c": FREEZING_SURFACE_C}, "Huffman & Norman (1988)"),
    ]


def _melting_step(v: dict, rule: str) -> Step:
    """Steps 3-4 with ice: the warm layers melt it (Stewart & King 1987), the cold layer
    below may refreeze it."""
    aloft = float(v["max_temperature_aloft_c"])
    sfc_l = float(v["max_temperature_surface_layer_c"])
    cold = float(v["cold_layer_min_c"])
    sfc = float(v["surface_temperature_c"])
    t_aloft, t_sfc, t_cold = w.temperature(aloft), w.temperature(sfc), w.temperature(cold)
    complete = w.temperature(COMPLETE_MELT_C, trim=True)
    partial = w.temperature(PARTIAL_MELT_C, trim=True)
    band = f"{partial} to {complete}"
    peak = f"A melting layer aloft peaks at {t_aloft}"
    texts = {
        "melted_freezing_rain": f"{peak} (> {complete}): snow melts completely; the cold layer "
                                f"below reaches only {t_cold} (refreezing needs "
                                f"{w.temperature(REFREEZE_COLD_LAYER_C, trim=True)}) and the "
                                f"surface is {t_sfc}: freezing rain.",
        "melted_refrozen_pellets": f"{peak}: snow melts completely, then the cold layer below "
                                   f"reaches {t_cold}: drops refreeze to ice pellets.",
        "melted_rain": f"{peak}: snow melts completely and the surface air is {t_sfc}: rain.",
        "partly_melted_pellets": f"{peak} ({band}): partial melting; the particles refreeze "
                                 f"below and the surface is {t_sfc}: ice pellets.",
        "partly_melted_rain_pellets": f"{peak} ({band}): partial melting; the surface air is "
                                      f"{t_sfc}: rain and ice pellets.",
        "surface_melt_rain": f"The surface-based melting layer peaks at "
                             f"{w.temperature(sfc_l)}: snow melts, so rain.",
        "surface_melt_rain_snow": f"The surface-based melting layer peaks at "
                                  f"{w.temperature(sfc_l)} ({band}): partial melting, so rain and "
                                  "snow.",
        "snow": f"No melting layer reaches {partial} (warmest "
                f"{w.temperature(max(aloft, sfc_l))}): snow.",
    }
    src = SOURCE_REFREEZE if rule.startswith("melted") else SOURCE_MELT
    return Step(rule, texts[rule],
                {"max_temperature_aloft_c": aloft, "max_temperature_surface_layer_c": sfc_l,
                 "cold_layer_min_c": cold, "surface_temperature_c": sfc},
                {"complete_melt_c": COMPLETE_MELT_C, "partial_melt_c": PARTIAL_MELT_C,
                 "refreeze_cold_layer_c": REFREEZE_COLD_LAYER_C}, src)
