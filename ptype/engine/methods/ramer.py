"""Ramer (1993) ice-fraction method.

Ramer, J., 1993: An empirical technique for diagnosing precipitation type from model
output.  Preprints, 5th Conf. on Aviation Weather Systems, Vienna VA, Amer. Meteor. Soc.,
227-230 (citation key ``Ramer1993``).  Constants as used in operational model
post-processing (see ``docs/methods.md``).

The method follows a particle from its generation level to the ground on the **isobaric
wet-bulb** profile ``Tw`` and tracks its ice fraction ``I`` (1 = all ice, 0 = all liquid):

1. Gross checks: surface ``Tw >= +2 degC`` -> RA; column maximum ``Tw <= -6.6 degC`` -> SN.
2. Generation level: the highest layer (``p >= 400 hPa``) whose RH is at least 80 % and whose
   depth satisfies ``p_bottom / p_top >= 1.02``; RH is interpolated linearly in ln p to find
   its edges.  No such layer -> no decision.
3. Initial ice fraction: 1 if ``Tw`` at the generation top is at or below -6.6 degC, else 0
   (supercooled liquid; the particle "was liquid").
4. Downward march, layer by layer (top ``p_t``, bottom ``p_b``)::

       dI = ln(p_b / p_t) * <T0 - Tw> / (E * RH^efac),  E = 0.045, efac = 1

   ``<T0 - Tw>`` is the layer mean (negative in warm layers: melting), RH the layer-mean
   fraction.  Ice cannot begin to melt until ``Tw > 0``; an all-liquid drop cannot begin to
   freeze until ``Tw < -6.6 degC`` and only the depth colder than -6.6 counts (the
   difference is still measured from 0 degC); a partly frozen particle keeps freezing at
   any ``Tw < 0``.  Each layer is split where ``Tw`` crosses 0 and -6.6 degC (``Tw`` linear
   in ln p) so every piece lies on one side of each limit.  ``I`` is clipped to [0, 1];
   reaching 0 sets the "was liquid" flag.
5. Final type: ``I >= 0.85`` -> PL if the particle was ever all liquid, else SN;
   ``I <= 0.04`` -> FZRA if surface ``Tw < 0``, else RA.

Between 0.04 and 0.85 the particle lands partly melted.  Operational multi-algorithm
practice lets Ramer abstain there and leaves the call to the other methods.  ptype reports a
mix instead by default, chosen from what the particle went through:

* surface ``Tw < 0 degC``: FZRAPL (liquid that freezes on contact with partly frozen
  pellets; a partly melted flake that refreezes partly is a pellet in the making);
* surface ``Tw >= 0``, particle was all liquid at some point: RAPL (drops partly refrozen
  aloft, now melting again);
* surface ``Tw >= 0``, never all liquid: RASN (partly melted snow).

Set :data:`ABSTAIN_ON_MIX` to True (or pass ``abstain_on_mix=True`` to :func:`run`) to
abstain in that band as operational practice does.

Worked magnitude: a 50 hPa layer centred near 850 hPa, ``Tw = +2 degC``,
RH = 1 gives ``dI = ln(875/825) * (-2) / 0.045 = -2.6``: it melts completely.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

from ptype.codes import NO_RESULT, Code
from ptype.engine import wording as w
from ptype.engine.compiled import AVAILABLE as _COMPILED
from ptype.engine.compiled import compiled
from ptype.engine.layers import level_index_runs
from ptype.engine.methods.base import Context, MethodResult, Step, select_first

NAME = "ramer"
TITLE = "Ramer (1993) ice fraction"
REFERENCE = "Ramer1993"
WETBULB = "isobaric"

#: Surface wet-bulb at or above which the gross check gives rain, degC (Ramer 1993).
GROSS_RAIN_SURFACE_TW_C = 2.0
#: Wet-bulb below which liquid can begin to freeze, and at or below which the generation top
#: produces ice, degC: 266.55 K (Ramer 1993).
FREEZING_ONSET_TW_C = -6.6
#: Minimum RH of the generating layer, % (Ramer 1993 as implemented operationally; some
#: secondary descriptions give 90 %, from memory, unverified).
GENERATION_RH_PCT = 80.0
#: Minimum depth of the generating layer as a pressure ratio p_bottom / p_top.
GENERATION_DEPTH_RATIO = 1.02
#: The generating layer is sought at pressures at or above this, hPa.
GENERATION_TOP_LIMIT_HPA = 400.0
#: Melting/freezing coefficient E ("emelt") and exponent on RH ("efac").
MELT_COEFFICIENT = 0.045
RH_EXPONENT = 1.0
#: Ice fraction at or below which the particle is liquid, at or above which it is solid.
LIQUID_LIMIT = 0.04
SOLID_LIMIT = 0.85
#: Layer-mean RH is floored here (fraction) so that a desert-dry layer cannot divide by ~0.
#: Ours: RH computed from a finite dew point is always positive, this only guards round-off.
MIN_RH_FRACTION = 1e-3
#: Abstain (NO_RESULT) when the final ice fraction lies between the two limits, as
#: operational multi-algorithm practice does.  Default False: ptype reports a mix.
ABSTAIN_ON_MIX = False

RULES = (
    "insufficient_levels",      # 0
    "gross_warm_surface",       # 1
    "gross_cold_column",        # 2
    "no_generation_layer",      # 3
    "solid_never_liquid",       # 4  -> SN
    "solid_refrozen",           # 5  -> PL
    "liquid_freezing",          # 6  -> FZRA
    "liquid_rain",              # 7  -> RA
    "mix_freezing",             # 8  -> FZRAPL
    "mix_refrozen_rain",        # 9  -> RAPL
    "mix_partly_melted_snow",   # 10 -> RASN
    "mix_abstain",              # 11 -> NO_RESULT
)
_RULE = {name: k for k, name in enumerate(RULES)}

SOURCE = "Ramer (1993); constants as used operationally"


def ice_fraction_change(pressure_bottom_hpa: ArrayLike, pressure_top_hpa: ArrayLike,
                        mean_wetbulb_c: ArrayLike,
                        mean_relative_humidity_fraction: ArrayLike) -> np.ndarray:
    """Ramer's (1993) change of ice fraction across a layer.

    ``dI = ln(p_b / p_t) * (T0 - Tw) / (E * RH^efac)`` with the layer-mean wet-bulb and RH;
    ``T0 - Tw`` in kelvin equals ``-Tw`` in degC.  Negative (melting) in a warm layer.
    """
    return ice_fraction_change_ln(
        np.log(np.asarray(pressure_bottom_hpa) / np.asarray(pressure_top_hpa)),
        mean_wetbulb_c, mean_relative_humidity_fraction)


def ice_fraction_change_ln(log_pressure_ratio: ArrayLike, mean_wetbulb_c: ArrayLike,
                           mean_relative_humidity_fraction: ArrayLike) -> np.ndarray:
    """:func:`ice_fraction_change` from ``ln(p_b / p_t)`` directly (the march works in ln p, so
    its pieces give the difference of their ln p bounds without an ``exp`` and a ``log``)."""
    rh = np.maximum(np.asarray(mean_relative_humidity_fraction, dtype=np.float64),
                    MIN_RH_FRACTION)
    return (np.asarray(log_pressure_ratio, dtype=np.float64)
            * (-np.asarray(mean_wetbulb_c, dtype=np.float64))
            / (MELT_COEFFICIENT * rh ** RH_EXPONENT))


def generation_layer(pressure_hpa: ArrayLike, relative_humidity_pct: ArrayLike,
                     wetbulb_c: ArrayLike | None = None) -> tuple[np.ndarray, ...]:
    """The highest generating layer of each column.

    Returns ``(top_hpa, bottom_hpa)``, each ``(n,)``, NaN where a column has none, and, when
    ``wetbulb_c`` is given, a third array: the wet-bulb at the top (linear in ln p).  Moist
    levels are those with ``RH >= 80 %`` at ``p >= 400 hPa``; the edges of a run of moist
    levels are where RH crosses 80 %, interpolated linearly in ln p, and the top is capped at
    400 hPa.  A run qualifies when ``p_bottom / p_top >= 1.02``.
    """
    p = np.asarray(pressure_hpa, dtype=np.float64)
    rh = np.asarray(relative_humidity_pct, dtype=np.float64)
    if _COMPILED and p.ndim == 2 and p.shape[1] > 0:
        return _generation_layer_fast(p, rh, wetbulb_c)
    return _generation_layer_numpy(p, rh, wetbulb_c)


def _generation_layer_numpy(p, rh, wetbulb_c=None):
    """numpy path of :func:`generation_layer`."""
    n, L = p.shape
    valid = np.isfinite(p) & np.isfinite(rh)
    x = np.log(np.where(valid, p, 1.0))
    moist = valid & (p >= GENERATION_TOP_LIMIT_HPA) & (rh >= GENERATION_RH_PCT)
    start, end, _ = level_index_runs(moist)
    R = start.shape[1]
    rows = np.arange(n)[:, None]
    present = start >= 0
    s = np.maximum(start, 0)
    e = np.maximum(end, 0)
    # Top edge: the 80 % crossing between level e and e+1 (or level e at the column top).
    e1 = np.minimum(e + 1, L - 1)
    has_above = present & (e + 1 < L) & valid[rows, e1]
    with np.errstate(invalid="ignore", divide="ignore"):
        f_top = (rh[rows, e] - GENERATION_RH_PCT) / (rh[rows, e] - rh[rows, e1])
    f_top = np.where(has_above & np.isfinite(f_top), np.clip(f_top, 0.0, 1.0), 0.0)
    x_top = x[rows, e] + f_top * (x[rows, e1] - x[rows, e])
    x_top = np.maximum(x_top, np.log(GENERATION_TOP_LIMIT_HPA))
    # Bottom edge: the crossing between level s-1 and s (or level s at the bottom).
    s0 = np.maximum(s - 1, 0)
    has_below = present & (s >= 1)
    with np.errstate(invalid="ignore", divide="ignore"):
        f_bot = (GENERATION_RH_PCT - rh[rows, s0]) / (rh[rows, s] - rh[rows, s0])
    f_bot = np.where(has_below & np.isfinite(f_bot), np.clip(f_bot, 0.0, 1.0), 1.0)
    x_bot = x[rows, s0] + f_bot * (x[rows, s] - x[rows, s0])
    ok = present & (x_bot - x_top >= np.log(GENERATION_DEPTH_RATIO) - 1e-12)
    # Highest qualifying run: runs are listed bottom -> top.
    last = np.where(ok, np.arange(R)[None, :], -1).max(axis=1)
    found = last >= 0
    k = np.maximum(last, 0)
    r = np.arange(n)
    top = np.where(found, np.exp(x_top[r, k]), np.nan)
    bottom = np.where(found, np.exp(x_bot[r, k]), np.nan)
    if wetbulb_c is None:
        return top, bottom
    tw = np.asarray(wetbulb_c, dtype=np.float64)
    ke, ke1 = e[r, k], e1[r, k]
    dx = x[r, ke1] - x[r, ke]
    with np.errstate(invalid="ignore", divide="ignore"):
        w = np.where(has_above[r, k] & (dx != 0.0), (x_top[r, k] - x[r, ke]) / dx, 0.0)
    step = np.where(w != 0.0, w * (tw[r, ke1] - tw[r, ke]), 0.0)
    top_tw = np.where(found, tw[r, ke] + step, np.nan)
    return top, bottom, top_tw


def _generation_layer_fast(p, rh, wetbulb_c=None):
    """:func:`generation_layer` through the compiled :func:`_generation_loop`; ``ln`` and
    ``exp`` stay in numpy, as on the numpy path."""
    n, L = p.shape
    valid = np.isfinite(p) & np.isfinite(rh)
    x = np.ascontiguousarray(np.log(np.where(valid, p, 1.0)))
    tw = (np.zeros((n, L)) if wetbulb_c is None
          else np.ascontiguousarray(wetbulb_c, dtype=np.float64))
    x_top, x_bot, top_tw = np.empty(n), np.empty(n), np.empty(n)
    _generation_compiled(np.ascontiguousarray(p), np.ascontiguousarray(rh), x, tw,
                         float(np.log(GENERATION_TOP_LIMIT_HPA)),
                         float(np.log(GENERATION_DEPTH_RATIO)), x_top, x_bot, top_tw)
    found = ~np.isnan(x_top)
    top = np.where(found, np.exp(x_top), np.nan)
    bottom = np.where(found, np.exp(x_bot), np.nan)
    if wetbulb_c is None:
        return top, bottom
    return top, bottom, top_tw


def _generation_loop(p, rh, x, tw, ln_top_limit, ln_depth_ratio, x_top_out, x_bot_out, tw_out):
    """Per column, the runs of moist levels from the top down; the first (highest) qualifying
    run gives ln p of its top and bottom edges and the wet-bulb at its top (NaN where none).
    The same arithmetic as :func:`_generation_layer_numpy` (compiled with numba)."""
    n, L = p.shape
    for i in range(n):
        x_top_out[i] = np.nan
        x_bot_out[i] = np.nan
        tw_out[i] = np.nan
        j = L - 1
        while j >= 0:
            if not _moist(p[i, j], rh[i, j]):
                j -= 1
                continue
            e = j
            while j >= 0 and _moist(p[i, j], rh[i, j]):
                j -= 1
            s = j + 1
            # Top edge: the 80 % crossing between level e and e + 1.
            e1 = min(e + 1, L - 1)
            has_above = e + 1 < L and np.isfinite(p[i, e1]) and np.isfinite(rh[i, e1])
            f_top = (rh[i, e] - GENERATION_RH_PCT) / (rh[i, e] - rh[i, e1])
            if has_above and np.isfinite(f_top):
                f_top = min(max(f_top, 0.0), 1.0)
            else:
                f_top = 0.0
            x_top = x[i, e] + f_top * (x[i, e1] - x[i, e])
            x_top = max(x_top, ln_top_limit)  # finite here: no NaN to carry
            # Bottom edge: the crossing between level s - 1 and s.
            s0 = max(s - 1, 0)
            f_bot = (GENERATION_RH_PCT - rh[i, s0]) / (rh[i, s] - rh[i, s0])
            if s >= 1 and np.isfinite(f_bot):
                f_bot = min(max(f_bot, 0.0), 1.0)
            else:
                f_bot = 1.0
            x_bot = x[i, s0] + f_bot * (x[i, s] - x[i, s0])
            if x_bot - x_top >= ln_depth_ratio - 1e-12:
                x_top_out[i] = x_top
                x_bot_out[i] = x_bot
                dx = x[i, e1] - x[i, e]
                w = (x_top - x[i, e]) / dx if (has_above and dx != 0.0) else 0.0
                step = w * (tw[i, e1] - tw[i, e]) if w != 0.0 else 0.0
                tw_out[i] = tw[i, e] + step
                break


def _moist(p, rh):
    return (np.isfinite(p) and np.isfinite(rh) and p >= GENERATION_TOP_LIMIT_HPA
            and rh >= GENERATION_RH_PCT)


def _pieces(p, tw, rh_frac, top_hpa):
    """Split every interval below the generation top where Tw crosses 0 and -6.6 degC.

    Returns a dict of ``(n, L-1, 3)`` arrays: ln p (hPa) of the top and bottom, Tw at both
    ends, mean Tw, mean RH and a validity mask; pieces run top -> bottom inside each interval
    (Tw and RH linear in ln p).
    """
    x = np.log(p)
    xg = np.log(top_hpa)[:, None]
    x_b, x_t = x[:, :-1], x[:, 1:]
    tw_b, tw_t = tw[:, :-1], tw[:, 1:]
    rh_b, rh_t = rh_frac[:, :-1], rh_frac[:, 1:]
    ok = np.isfinite(x_b) & np.isfinite(x_t) & np.isfinite(tw_b) & np.isfinite(tw_t) \
        & np.isfinite(xg)
    # Clip the interval's top to the generation top.
    x_top = np.maximum(x_t, xg)
    with np.errstate(invalid="ignore", divide="ignore"):
        w = np.where(x_t != x_b, (x_top - x_b) / (x_t - x_b), 0.0)
    tw_top = tw_b + w * (tw_t - tw_b)
    rh_top = rh_b + w * (rh_t - rh_b)
    ok &= x_b > x_top
    # Fractions (0 at the clipped top, 1 at the bottom) where Tw crosses each limit.
    cuts = []
    for limit in (0.0, FREEZING_ONSET_TW_C):
        with np.errstate(invalid="ignore", divide="ignore"):
            f = (tw_top - limit) / (tw_top - tw_b)
        cuts.append(np.where((f > 0.0) & (f < 1.0), f, 1.0))
    lo, hi = np.minimum(cuts[0], cuts[1]), np.maximum(cuts[0], cuts[1])
    bounds = np.stack([np.zeros_like(lo), lo, hi, np.ones_like(lo)], axis=-1)
    f0, f1 = bounds[..., :-1], bounds[..., 1:]
    dx = (x_b - x_top)[..., None]
    xa = x_top[..., None] + f0 * dx
    xb = x_top[..., None] + f1 * dx
    tw_a = tw_top[..., None] + f0 * (tw_b - tw_top)[..., None]
    tw_z = tw_top[..., None] + f1 * (tw_b - tw_top)[..., None]
    rh_a = rh_top[..., None] + f0 * (rh_b - rh_top)[..., None]
    rh_z = rh_top[..., None] + f1 * (rh_b - rh_top)[..., None]
    valid = ok[..., None] & (f1 - f0 > 1e-12)
    return {
        "ln_top_hpa": xa, "ln_bottom_hpa": xb,
        "tw_top": tw_a, "tw_bottom": tw_z,
        "tw_mean": 0.5 * (tw_a + tw_z), "rh_mean": 0.5 * (rh_a + rh_z),
        "valid": valid,
    }


def _sequence(p, tw, rh_frac, top_hpa):
    """:func:`_pieces` flattened to one sequence per column, top -> bottom (intervals reversed,
    pieces in order), ``(n, 3 (L-1))`` arrays."""
    n = p.shape[0]
    return {k: v[:, ::-1, :].reshape(n, -1) for k, v in _pieces(p, tw, rh_frac, top_hpa).items()}


#: Rows of the stage table: ln p of the top and bottom (pressure once read out), kind (+1
#: warm, -1 not warm), extreme wet-bulb, ice fraction at the start and at the end.
_STAGE_KEYS = ("top_hpa", "bottom_hpa", "kind", "extreme_c", "ice_start", "ice_end")
#: Stages per column the compiled march makes room for at first; a chunk with more is
#: marched again with the room it needs (the count is exact either way).
_STAGE_ROOM = 6


def _march(p, tw, rh_frac, top_hpa, initial_ice):
    """Follow the ice fraction down from the generation top, vectorised over columns.

    Returns the final ice fraction, the "was liquid" flag and the stages (maximal runs of
    warm, Tw > 0, or not-warm pieces) with the ice fraction at their ends, as a dict of
    ``(n, S)`` arrays keyed by :data:`_STAGE_KEYS`, and the number of stages per column.
    """
    ice0 = np.where(np.isfinite(initial_ice), initial_ice, 0.0).astype(np.float64)
    if _COMPILED:
        return _march_fast(p, tw, rh_frac, top_hpa, ice0)
    return _march_numpy(p, tw, rh_frac, top_hpa, ice0)


def _march_numpy(p, tw, rh_frac, top_hpa, ice0):
    """:func:`_march` with numpy: everything that does not depend on the running ice fraction
    (the change across each piece, its kind, its validity) for all pieces at once, then a
    loop over pieces carries the clipped ice fraction down, then the stages are read off the
    recorded history."""
    seq = _sequence(p, tw, rh_frac, top_hpa)
    valid = seq["valid"]
    # ln(p_b / p_t) is the difference of the pieces' ln p bounds.
    d_ice = np.where(valid, ice_fraction_change_ln(seq["ln_bottom_hpa"] - seq["ln_top_hpa"],
                                                   seq["tw_mean"], seq["rh_mean"]), 0.0)
    warm = seq["tw_mean"] > 0.0
    # An all-liquid drop needs Tw < -6.6 degC to begin freezing; ice needs Tw > 0 to begin
    # melting (automatic: dI >= 0 there and I is capped at 1).
    always = valid & (warm | (seq["tw_mean"] < FREEZING_ONSET_TW_C))
    ice, hist = _carry_numpy(d_ice, always, valid, ice0)
    was_liquid = (ice0 <= 0.0) | np.any(valid & (hist <= 0.0), axis=1)
    stages, count = _stages_numpy(seq, valid, warm, hist, ice0)
    return ice, was_liquid, stages, count


def _carry_numpy(d_ice, always, valid, ice0):
    """The sequential part of the march: the clipped ice fraction after every piece.

    A piece changes ``I`` when it always acts (warm, or colder than -6.6 degC) or when the
    particle already holds ice; ``I`` is then clipped to [0, 1].  Returns the final ``I``
    ``(n,)`` and its history ``(n, P)``; pieces no column uses are skipped.
    """
    n, P = valid.shape
    ice = ice0.copy()
    hist = np.empty((n, P))
    used = np.nonzero(valid.any(axis=0))[0]
    last = 0
    for q in used:
        hist[:, last:q] = ice[:, None]
        change = always[:, q] | (valid[:, q] & (ice > 0.0))
        ice = np.where(change, np.minimum(np.maximum(ice + d_ice[:, q], 0.0), 1.0), ice)
        hist[:, q] = ice
        last = q + 1
    hist[:, last:] = ice[:, None]
    return ice, hist


def _stages_numpy(seq, valid, warm, hist, ice0):
    """Maximal runs of warm / not-warm valid pieces, with bounds, extremes and ice fractions."""
    n, P = valid.shape
    rows = np.arange(n)[:, None]
    pos = np.broadcast_to(np.arange(P), (n, P))
    kind = np.where(warm, 1, -1).astype(np.int8)
    last_valid = np.maximum.accumulate(np.where(valid, pos, -1), axis=1)
    prev = np.concatenate([np.full((n, 1), -1), last_valid[:, :-1]], axis=1)
    prev_kind = np.where(prev >= 0, kind[rows, np.maximum(prev, 0)], 0)
    starts = valid & (kind != prev_kind)
    next_valid = np.minimum.accumulate(np.where(valid, pos, P)[:, ::-1], axis=1)[:, ::-1]
    nxt = np.concatenate([next_valid[:, 1:], np.full((n, 1), P)], axis=1)
    next_kind = np.where(nxt < P, kind[rows, np.minimum(nxt, P - 1)], 0)
    ends = valid & (kind != next_kind)
    stage_id = np.cumsum(starts, axis=1) - 1
    count = starts.sum(axis=1)
    S = int(max(count.max(initial=0), 1))
    st = {k: np.full((n, S), np.nan) for k in _STAGE_KEYS}
    si, sq = np.nonzero(starts)
    st["top_hpa"][si, stage_id[si, sq]] = seq["ln_top_hpa"][si, sq]
    st["kind"][si, stage_id[si, sq]] = kind[si, sq]
    before = prev[si, sq]
    st["ice_start"][si, stage_id[si, sq]] = np.where(before >= 0, hist[si, np.maximum(before, 0)],
                                                     ice0[si])
    ei, eq = np.nonzero(ends)
    st["bottom_hpa"][ei, stage_id[ei, eq]] = seq["ln_bottom_hpa"][ei, eq]
    st["ice_end"][ei, stage_id[ei, eq]] = hist[ei, eq]
    # Extremes: warmest wet-bulb of a warm stage, coldest of a cold one.
    vi, vq = np.nonzero(valid)
    flat = vi * S + stage_id[vi, vq]
    hi = np.maximum(seq["tw_top"][vi, vq], seq["tw_bottom"][vi, vq])
    lo = np.minimum(seq["tw_top"][vi, vq], seq["tw_bottom"][vi, vq])
    mx = np.full(n * S, -np.inf)
    mn = np.full(n * S, np.inf)
    np.maximum.at(mx, flat, hi)
    np.minimum.at(mn, flat, lo)
    present = np.arange(S)[None, :] < count[:, None]
    extreme = np.where(st["kind"] > 0, mx.reshape(n, S), mn.reshape(n, S))
    st["extreme_c"] = np.where(present, extreme, np.nan)
    for key in ("top_hpa", "bottom_hpa"):  # ln p -> hPa, only for the stage bounds
        st[key] = np.exp(st[key])
    return st, count


def _march_fast(p, tw, rh_frac, top_hpa, ice0):
    """:func:`_march_numpy` through the compiled :func:`_march_loop`: one pass per column, no
    per-piece arrays; the same arithmetic in the same order, so the same numbers."""
    n = p.shape[0]
    x = np.ascontiguousarray(np.log(p))
    xg = np.ascontiguousarray(np.log(top_hpa), dtype=np.float64)
    tw = np.ascontiguousarray(tw, dtype=np.float64)
    rh_frac = np.ascontiguousarray(rh_frac, dtype=np.float64)
    ice = np.empty(n)
    was_liquid = np.empty(n, dtype=np.bool_)
    count = np.empty(n, dtype=np.int64)
    room = _STAGE_ROOM
    while True:
        table = np.full((len(_STAGE_KEYS), n, room), np.nan)
        _march_compiled(x, tw, rh_frac, xg, ice0, ice, was_liquid, table, count)
        S = int(max(count.max(initial=0), 1))
        if S <= room:
            break
        room = S  # rare: a column with more stages than room; march again with enough
    stages = {k: np.ascontiguousarray(table[j, :, :S]) for j, k in enumerate(_STAGE_KEYS)}
    for key in ("top_hpa", "bottom_hpa"):  # ln p -> hPa, only for the stage bounds
        stages[key] = np.exp(stages[key])
    return ice, was_liquid, stages, count


def _march_loop(x, tw, rh_frac, xg, ice0, ice_out, was_liquid_out, table, count):
    """:func:`_march_numpy` for each column in one pass (compiled with numba): the pieces of
    :func:`_pieces` from the top down, the change of :func:`ice_fraction_change_ln` and the
    clipped carry of :func:`_carry_numpy` on every valid piece, and the stages of
    :func:`_stages_numpy` (ln p bounds) written into ``table`` while there is room for them.
    ``count`` receives every column's number of stages, room or not.  The helpers it calls
    are inlined into it, so it is one compiled loop."""
    n, L = x.shape
    for i in range(n):
        ice = ice0[i]
        liquid = ice <= 0.0
        s = -1
        kind = 0
        for j in range(L - 2, -1, -1):
            ok, x_top, tw_top, rh_top = _clipped_interval(
                x[i, j], x[i, j + 1], tw[i, j], tw[i, j + 1], rh_frac[i, j], rh_frac[i, j + 1],
                xg[i])
            if not ok:
                continue
            lo, hi = _cut_fractions(tw_top, tw[i, j])
            dx = x[i, j] - x_top
            dtw = tw[i, j] - tw_top
            drh = rh_frac[i, j] - rh_top
            for k in range(3):
                f0, f1 = _piece_fractions(k, lo, hi)
                if not f1 - f0 > 1e-12:
                    continue
                xa = x_top + f0 * dx
                xb = x_top + f1 * dx
                a = tw_top + f0 * dtw
                z = tw_top + f1 * dtw
                tw_mean = 0.5 * (a + z)
                rh_mean = 0.5 * ((rh_top + f0 * drh) + (rh_top + f1 * drh))
                before = ice
                ice = _ice_after_piece(ice, xb - xa, tw_mean, rh_mean)
                if ice <= 0.0:
                    liquid = True
                kk = 1 if tw_mean > 0.0 else -1
                if kk != kind:
                    s += 1
                    kind = kk
                    _open_stage(table, i, s, kk, xa, before)
                _extend_stage(table, i, s, kk, a, z, xb, ice)
        ice_out[i] = ice
        was_liquid_out[i] = liquid
        count[i] = s + 1


def _clipped_interval(x_b, x_t, tb, tt, rb, rt, g):
    """The interval between two levels clipped to the generation top ``g`` (ln p): whether
    it is usable, and ln p, Tw and RH at its clipped top (as :func:`_pieces`)."""
    if not (np.isfinite(x_b) and np.isfinite(x_t) and np.isfinite(tb)
            and np.isfinite(tt) and np.isfinite(g)):
        return False, 0.0, 0.0, 0.0
    x_top = x_t if x_t >= g else g  # noqa: FURB136 - np.maximum of finite values
    if not x_b > x_top:
        return False, 0.0, 0.0, 0.0
    f = (x_top - x_b) / (x_t - x_b) if x_t != x_b else 0.0
    return True, x_top, tb + f * (tt - tb), rb + f * (rt - rb)


def _cut_fractions(tw_top, tw_bottom):
    """Fractions of the interval (0 at its top, 1 at its bottom) where Tw crosses 0 and
    -6.6 degC, in increasing order; 1 where it does not cross (as :func:`_pieces`)."""
    f = (tw_top - 0.0) / (tw_top - tw_bottom)
    c0 = f if (f > 0.0 and f < 1.0) else 1.0
    f = (tw_top - FREEZING_ONSET_TW_C) / (tw_top - tw_bottom)
    c1 = f if (f > 0.0 and f < 1.0) else 1.0
    lo = c0 if c0 <= c1 else c1  # noqa: FURB136 - spelled out for numba
    hi = c0 if c0 >= c1 else c1  # noqa: FURB136
    return lo, hi


def _piece_fractions(k, lo, hi):
    """The bounds of piece ``k`` (0, 1, 2) of an interval cut at ``lo`` and ``hi``."""
    f0 = 0.0 if k == 0 else (lo if k == 1 else hi)
    f1 = lo if k == 0 else (hi if k == 1 else 1.0)
    return f0, f1


def _ice_after_piece(ice, log_pressure_ratio, tw_mean, rh_mean):
    """The ice fraction after one piece: :func:`ice_fraction_change_ln` added and clipped to
    [0, 1] where the piece acts (warm, colder than -6.6 degC, or ice already present)."""
    if tw_mean > 0.0 or tw_mean < FREEZING_ONSET_TW_C or ice > 0.0:
        # np.maximum / np.minimum semantics: NaN propagates.
        rh = MIN_RH_FRACTION if rh_mean < MIN_RH_FRACTION else rh_mean  # noqa: FURB136
        y = ice + log_pressure_ratio * (-tw_mean) / (MELT_COEFFICIENT * rh ** RH_EXPONENT)
        if y < 0.0:  # noqa: PLR1730 - NaN must pass through, as in numpy
            y = 0.0
        if y > 1.0:  # noqa: PLR1730
            y = 1.0
        return y
    return ice


def _open_stage(table, i, s, kind, x_top, ice_before):
    """Start stage ``s`` of column ``i`` in ``table`` (when there is room for it)."""
    if s < table.shape[2]:
        table[0, i, s] = x_top
        table[2, i, s] = kind
        table[3, i, s] = -np.inf if kind > 0 else np.inf
        table[4, i, s] = ice_before


def _extend_stage(table, i, s, kind, tw_a, tw_z, x_bottom, ice):
    """Add a piece to stage ``s``: its extreme wet-bulb, bottom and ice fraction (every piece
    may end its stage; the last one of the stage wins)."""
    if s < table.shape[2]:
        if kind > 0:
            top = tw_a if tw_a >= tw_z else tw_z  # noqa: FURB136 - spelled out for numba
            if top > table[3, i, s]:  # noqa: PLR1730
                table[3, i, s] = top
        else:
            bottom = tw_a if tw_a <= tw_z else tw_z  # noqa: FURB136
            if bottom < table[3, i, s]:  # noqa: PLR1730
                table[3, i, s] = bottom
        table[1, i, s] = x_bottom
        table[5, i, s] = ice


if _COMPILED:  # the helpers are inlined into the compiled march
    _clipped_interval = compiled(_clipped_interval, numpy_errors=True, inline=True)
    _cut_fractions = compiled(_cut_fractions, numpy_errors=True, inline=True)
    _piece_fractions = compiled(_piece_fractions, numpy_errors=True, inline=True)
    _ice_after_piece = compiled(_ice_after_piece, numpy_errors=True, inline=True)
    _open_stage = compiled(_open_stage, numpy_errors=True, inline=True)
    _extend_stage = compiled(_extend_stage, numpy_errors=True, inline=True)
_march_compiled = compiled(_march_loop, numpy_errors=True)
if _COMPILED:  # the helper is inlined into the compiled generation loop
    _moist = compiled(_moist, inline=True)
_generation_compiled = compiled(_generation_loop, numpy_errors=True)


def run(ctx: Context, *, abstain_on_mix: bool | None = None) -> MethodResult:
    """Ramer (1993) for every column of ``ctx`` (see the module docstring)."""
    abstain = ABSTAIN_ON_MIX if abstain_on_mix is None else bool(abstain_on_mix)
    c = ctx.columns
    n = c.n_columns
    p = c.pressure_hpa
    tw = c.wetbulb_c
    rh = c.relative_humidity_pct
    sfc_tw = c.surface_wetbulb_c
    with np.errstate(invalid="ignore"):
        max_tw = np.fmax(np.nanmax(np.where(c.valid, tw, -np.inf), axis=1), sfc_tw)
    enough = c.n_levels >= 2

    gen_top, gen_bottom, top_tw = generation_layer(p, rh, tw)
    initial = np.where(top_tw <= FREEZING_ONSET_TW_C, 1.0, 0.0)
    initial = np.where(np.isfinite(gen_top), initial, np.nan)
    ice, was_liquid, stages, count = _march(p, tw, rh / 100.0, gen_top, initial)
    ice = np.where(np.isfinite(gen_top), ice, np.nan)

    freezing_sfc = sfc_tw < 0.0
    solid = ice >= SOLID_LIMIT
    liquid = ice <= LIQUID_LIMIT
    conditions = [
        ~enough,
        sfc_tw >= GROSS_RAIN_SURFACE_TW_C,
        max_tw <= FREEZING_ONSET_TW_C,
        ~np.isfinite(gen_top),
        solid & ~was_liquid,
        solid & was_liquid,
        liquid & freezing_sfc,
        liquid,
        (abstain & np.ones(n, bool)),
        freezing_sfc,
        was_liquid,
    ]
    choices = [_RULE[r] for r in ("insufficient_levels", "gross_warm_surface", "gross_cold_column",
                                  "no_generation_layer", "solid_never_liquid", "solid_refrozen",
                                  "liquid_freezing", "liquid_rain", "mix_abstain", "mix_freezing",
                                  "mix_refrozen_rain")]
    rule = select_first(conditions, choices, default=_RULE["mix_partly_melted_snow"])
    code_of_rule = np.array([NO_RESULT, Code.RA, Code.SN, NO_RESULT, Code.SN, Code.PL, Code.FZRA,
                             Code.RA, Code.FZRAPL, Code.RAPL, Code.RASN, NO_RESULT], dtype=np.int64)
    code = code_of_rule[rule]

    values = {
        "surface_wetbulb_c": sfc_tw,
        "max_wetbulb_c": max_tw,
        "generation_top_hpa": gen_top,
        "generation_bottom_hpa": gen_bottom,
        "generation_top_wetbulb_c": top_tw,
        "initial_ice_fraction": initial,
        "ice_fraction": ice,
        "was_liquid": was_liquid.astype(np.float64),
        "stage_count": count.astype(np.float64),
    }
    values.update({f"stage_{k}": v for k, v in stages.items()})
    return MethodResult(name=NAME, code=code, rule=rule, values=values, explainer=explain)


def explain(result: MethodResult, i: int) -> list[Step]:
    """Ramer's reasoning for column ``i``, from the numbers in ``result.values`` only.

    The steps follow the method: the gross checks, the generating layer, one step per warm
    or cold stage of the march, then the rule on the final ice fraction.
    """
    v = {k: a[i] for k, a in result.values.items()}
    rule = RULES[int(result.rule[i])]
    if rule == "insufficient_levels":
        return [Step(rule, "Fewer than two valid levels: Ramer's method cannot follow a particle "
                     "down the column.", source=SOURCE)]
    steps = _gross_steps(v, rule)
    if rule in ("gross_warm_surface", "gross_cold_column"):
        return steps
    if rule == "no_generation_layer":
        steps.append(Step(rule, f"No layer at pressures of {w.pressure(GENERATION_TOP_LIMIT_HPA)} "
                          f"or more has RH {w.GE} {w.percent(GENERATION_RH_PCT)} over a depth "
                          f"p_bottom/p_top {w.GE} {GENERATION_DEPTH_RATIO}: no generating layer, "
                          "so Ramer's method gives no type.", {},
                          {"relative_humidity_pct": GENERATION_RH_PCT,
                           "depth_ratio": GENERATION_DEPTH_RATIO}, SOURCE))
        return steps
    steps.append(_generation_step(v))
    for s in range(int(v["stage_count"])):
        steps.append(_stage_step(v, s))
    steps.append(_final_step(v, rule))
    return steps


def _gross_steps(v: dict, rule: str) -> list[Step]:
    """The two gross checks (Ramer 1993): the one that fired, or both that passed."""
    sfc = float(v["surface_wetbulb_c"])
    gross = {"surface_wetbulb_c": sfc}
    limit = {"surface_wetbulb_c": GROSS_RAIN_SURFACE_TW_C}
    rain_limit = w.temperature(GROSS_RAIN_SURFACE_TW_C, trim=True)
    if rule == "gross_warm_surface":
        return [Step(rule, f"Surface wet-bulb {w.temperature(sfc)} {w.GE} {rain_limit}: rain, "
                     "whatever happens aloft.", gross, limit, SOURCE)]
    steps = [Step("gross_warm_surface", f"Surface wet-bulb {w.temperature(sfc)} is below "
                  f"{rain_limit}, so the gross rain check does not apply.", gross, limit, SOURCE)]
    mx = float(v["max_wetbulb_c"])
    onset = w.temperature(FREEZING_ONSET_TW_C)
    values, limits = {"max_wetbulb_c": mx}, {"max_wetbulb_c": FREEZING_ONSET_TW_C}
    if rule == "gross_cold_column":
        steps.append(Step(rule, f"The warmest wet-bulb in the column is {w.temperature(mx)} "
                          f"{w.LE} {onset}: nothing can melt, snow.", values, limits, SOURCE))
    else:
        steps.append(Step("gross_cold_column", f"The warmest wet-bulb in the column is "
                          f"{w.temperature(mx)}, above {onset}, so the particle must be "
                          "followed down.", values, limits, SOURCE))
    return steps


def _generation_step(v: dict) -> Step:
    """Where the particle is generated and whether it starts as ice (Ramer 1993)."""
    top, bot, ttw = (float(v["generation_top_hpa"]), float(v["generation_bottom_hpa"]),
                     float(v["generation_top_wetbulb_c"]))
    ice0 = float(v["initial_ice_fraction"])
    start = ("so the particle starts as ice (I = 1)." if ice0 >= 1.0 else
             "so the particle starts as supercooled liquid (I = 0).")
    relation = w.LE if ice0 >= 1.0 else ">"
    return Step("generation_layer",
                f"Precipitation is generated in the moist layer {w.pressure_range(bot, top)} "
                f"(RH {w.GE} {w.percent(GENERATION_RH_PCT)}, depth ratio "
                f"{w.number(bot / top, 3)}); the wet-bulb at its top is {w.temperature(ttw)} "
                f"{relation} {w.temperature(FREEZING_ONSET_TW_C)}, {start}",
                {"generation_top_hpa": top, "generation_bottom_hpa": bot,
                 "generation_top_wetbulb_c": ttw, "initial_ice_fraction": ice0},
                {"relative_humidity_pct": GENERATION_RH_PCT,
                 "depth_ratio": GENERATION_DEPTH_RATIO,
                 "generation_top_wetbulb_c": FREEZING_ONSET_TW_C}, SOURCE)


def _stage_step(v: dict, s: int) -> Step:
    """Stage ``s`` of the march: a warm (melting) or cold (freezing) run of pieces."""
    st_top, st_bot = float(v["stage_top_hpa"][s]), float(v["stage_bottom_hpa"][s])
    i0, i1 = float(v["stage_ice_start"][s]), float(v["stage_ice_end"][s])
    ext = float(v["stage_extreme_c"][s])
    vals = {"top_hpa": st_top, "bottom_hpa": st_bot, "ice_fraction_start": i0,
            "ice_fraction_end": i1}
    layer = w.pressure_range(st_bot, st_top)
    if v["stage_kind"][s] > 0:
        vals["max_wetbulb_c"] = ext
        text = (f"Ice fraction after the warm layer {layer} (wet-bulb up to "
                f"{w.temperature(ext)}) is {w.fraction(i1)}: {_melting_outcome(i0, i1)}.")
        return Step("warm_layer", text, vals, {"wetbulb_c": 0.0}, SOURCE)
    vals["min_wetbulb_c"] = ext
    text = (f"Ice fraction after the cold layer {layer} (wet-bulb down to "
            f"{w.temperature(ext)}) is {w.fraction(i1)}: {_freezing_outcome(i0, i1, ext)}.")
    return Step("cold_layer", text, vals,
                {"wetbulb_c": 0.0, "freezing_onset_wetbulb_c": FREEZING_ONSET_TW_C}, SOURCE)


def _melting_outcome(i0: float, i1: float) -> str:
    if i1 <= 0.0:
        return "the particle melted completely"
    if i1 < i0:
        return "the particle melted partly"
    return "nothing was left to melt"


def _freezing_outcome(i0: float, i1: float, coldest_c: float) -> str:
    onset = w.temperature(FREEZING_ONSET_TW_C)
    if i0 <= 0.0 and i1 <= 0.0:
        if coldest_c >= FREEZING_ONSET_TW_C:
            return f"the drop stays supercooled, as the wet-bulb never falls below {onset}"
        return f"the drop stays liquid: too little of the layer is colder than {onset}"
    if i1 >= 1.0 and i0 >= 1.0:
        return "the particle stays ice"
    if i1 >= 1.0:
        return "the particle refroze completely"
    if i1 > i0:
        return "the particle refroze partly"
    return "the ice fraction is unchanged"


#: The verdict of each final rule, after "Final ice fraction X ..." (Ramer 1993; the mixes
#: are ptype's reading of the undecided band).
_FINAL_TEXT = {
    "solid_never_liquid": "{ge_solid} and the particle was never all liquid: snow.",
    "solid_refrozen": "{ge_solid} and the particle was all liquid on the way down, so it "
                      "refroze: ice pellets.",
    "liquid_freezing": "{le_liquid} and surface wet-bulb {sfc} < {zero}: freezing rain.",
    "liquid_rain": "{le_liquid} and surface wet-bulb {sfc} {ge} {zero}: rain.",
    "mix_freezing": "{band} with surface wet-bulb {sfc} < {zero}: freezing rain mixed with ice "
                    "pellets (ptype's reading of Ramer's undecided band).",
    "mix_refrozen_rain": "{band}, surface wet-bulb {sfc} {ge} {zero} and the particle had been "
                         "all liquid: rain mixed with ice pellets (ptype's reading of Ramer's "
                         "undecided band).",
    "mix_partly_melted_snow": "{band}, surface wet-bulb {sfc} {ge} {zero} and the particle was "
                              "never all liquid: partly melted snow, rain and snow (ptype's "
                              "reading of Ramer's undecided band).",
    "mix_abstain": "{band}: Ramer's method leaves this undecided and abstains, as in "
                   "operational multi-algorithm practice.",
}


def _final_step(v: dict, rule: str) -> Step:
    """The rule on the ice fraction that reaches the ground."""
    ice = float(v["ice_fraction"])
    sfc = float(v["surface_wetbulb_c"])
    liquid = bool(v["was_liquid"])
    verdict = _FINAL_TEXT[rule].format(
        ge_solid=f"{w.GE} {SOLID_LIMIT}", le_liquid=f"{w.LE} {LIQUID_LIMIT}",
        band=f"lies between {LIQUID_LIMIT} and {SOLID_LIMIT}", sfc=w.temperature(sfc),
        zero=w.temperature(0.0, trim=True), ge=w.GE)
    return Step(rule, f"Final ice fraction {w.fraction(ice)} {verdict}",
                {"ice_fraction": ice, "was_liquid": liquid, "surface_wetbulb_c": sfc},
                {"liquid_limit": LIQUID_LIMIT, "solid_limit": SOLID_LIMIT,
                 "surface_wetbulb_c": 0.0}, SOURCE)
