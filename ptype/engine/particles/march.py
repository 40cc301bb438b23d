"""The column march: every size bin followed from the generating level to the ground.

State of a bin (fractions of its mass, summing to 1, and one number fraction):

* ``s`` - snow: original ice that has not melted;
* ``w`` - liquid water (melt water, or the whole drop);
* ``r`` - refrozen ice: melt water that froze again;
* ``q`` - fraction of the bin's particles that hold ice.  It is 1 while any snow or refrozen ice
  is left; when the ice is gone the bin is all drops (``q = 0``) and drops regain ice only by
  immersion freezing (:func:`ptype.engine.particles.heat.bigg_rate_per_m3_s`).

The shape of a particle follows the mass that has ever melted, ``phi = 1 - s``: a melting flake
collapses towards the drop of the same mass, and refreezing does not rebuild the flake.  Its fall
speed, size and capacitance are interpolated linearly in ``phi`` between the flake (Locatelli &
Hobbs 1974, thin-disc capacitance ``D / pi``) and the drop (Atlas et al. 1973, sphere ``D / 2``).

Through a height step ``dz`` (the particle takes ``dz / v`` seconds):

1. particles holding ice (fraction ``q``) gain the heat ``H`` of
   :func:`ptype.engine.particles.heat.surface_heat_w`; where ``H > 0`` they lose refrozen ice first
   (it is the outer shell), then snow: ``q H dz / (v L_f m)`` of the bin's mass, with the shape at
   the middle of the step (a predictor half-step: second order), the step cut into parts of at
   most :data:`MAX_MELT_STEP` melt;
2. drops with no ice (fraction ``1 - q``) nucleate with probability ``1 - exp(-J V dz / v)``
   (Bigg 1953); the nucleated fraction ``dq`` freezes ``c_w (T0 - Tw) / L_f`` at once;
3. where ``H < 0`` the particles holding ice freeze their liquid, ``q' |H| dz / (v L_f m)`` with
   ``q' = q - dq / 2`` (drops nucleated during the step freeze, on average, for half of it).

The air between two levels varies linearly in height (temperature, vapour pressure, pressure,
wet-bulb); each interval is cut into equal sub-steps no deeper than :data:`STEP_M`, the air
taken at their middle.  The profile is never changed: the latent heat of melting does not cool
the air.  Particles neither grow nor sublimate: the mass of every particle is conserved.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np

from ptype.engine.compiled import AVAILABLE as _COMPILED
from ptype.engine.compiled import compiled
from ptype.engine.particles import fallspeed, heat
from ptype.thermo import saturation_vapor_pressure_hpa
from ptype.thermo.constants import T0, Lf, Lv, Rd, Rv, rho_w

#: Deepest sub-step, m (ours: against 6.25 m sub-steps the ground classes of the test columns move
#: by at most 0.011 and the melted fraction by 0.002; ``docs/particles.md``).
STEP_M = 50.0
#: Largest melted fraction a bin may gain in one integration step (ours): a sub-step that would
#: melt more is cut into equal parts for that bin (the air is the same in every part), so that
#: the change of shape and fall speed during melting is followed even in a warm layer that melts
#: a flake within a few tens of metres.
MAX_MELT_STEP = 0.1
#: At most this many parts per sub-step (ours; reached only above +30 degC).
MAX_PARTS = 256
#: Mean melted fraction at which the mass counts as half and completely melted (ours: the open
#: tail of the size distribution would otherwise put "complete" at the ground).
HALF_MELTED = 0.5
COMPLETE_MELTED = 0.99
#: Nucleation rate standing for "freezes at once" in the nucleation-temperature mode, m-3 s-1
#: (ours: any drop of 0.05 mm or more then nucleates within a millimetre of fall).
CERTAIN_RATE_PER_M3_S = 1e30
#: A fraction smaller than this is round-off: the component is gone (ours).
EMPTY = 1e-12

_PR13 = heat.PRANDTL ** (1.0 / 3.0)
_SC13 = heat.SCHMIDT ** (1.0 / 3.0)
_FOUR_PI = 4.0 * math.pi
_RHO_VS0 = heat.SATURATION_DENSITY_0C_KG_M3


@dataclasses.dataclass(frozen=True, eq=False)
class MarchResult:
    """What :func:`march` returns.

    Ground state per bin, ``(n, B)``: ``snow``, ``liquid``, ``refrozen`` (mass fractions) and
    ``ice_holding`` (number fraction of particles with ice).  Per level, ``(n, L)`` and NaN above
    the generating level: the mass-weighted mean ``melted`` (``1 - s``, mass that has melted),
    ``liquid`` and ``refrozen`` fractions.  Per column ``(n,)``: heights (m) where the mean melted
    fraction first exceeds 0 (``melting_start_m``, the top of the sub-step), reaches
    :data:`HALF_MELTED` and :data:`COMPLETE_MELTED` (interpolated in the sub-step), and where
    the refrozen fraction first rises (``refreezing_start_m``); NaN when not reached.
    """

    snow: np.ndarray
    liquid: np.ndarray
    refrozen: np.ndarray
    ice_holding: np.ndarray
    melted_levels: np.ndarray
    liquid_levels: np.ndarray
    refrozen_levels: np.ndarray
    melting_start_m: np.ndarray
    melting_half_m: np.ndarray
    melting_complete_m: np.ndarray
    refreezing_start_m: np.ndarray


# -- per-bin constants ---------------------------------------------------------------------------

def particle_bins(melted_diameter_mm) -> dict[str, np.ndarray]:
    """Constants of every bin, ``(n, B)`` arrays, from the melted diameters (mm).

    ``d_drop`` and ``d_snow`` (m): the drop and the flake's maximum dimension
    (:func:`~ptype.engine.particles.fallspeed.snow_dimension_mm`); ``v_drop`` and ``v_snow``: their
    fall speeds at the reference air density, m/s; ``c_drop`` and ``c_snow``: capacitances, m;
    ``mass`` (kg) and ``volume`` (m3) of the drop.
    """
    d_mm = np.asarray(melted_diameter_mm, dtype=np.float64)
    d_snow_mm = fallspeed.snow_dimension_mm(d_mm)
    d_drop = d_mm * 1e-3
    d_snow = d_snow_mm * 1e-3
    volume = math.pi / 6.0 * d_drop ** 3
    return {
        "d_drop": d_drop, "d_snow": d_snow,
        "v_drop": fallspeed.drop_fall_speed_m_s(d_mm),
        "v_snow": fallspeed.snow_fall_speed_m_s(d_snow_mm),
        "c_drop": heat.sphere_capacitance_m(d_drop), "c_snow": heat.disc_capacitance_m(d_snow),
        "mass": rho_w * volume, "volume": volume,
    }


# -- shared arithmetic (numpy arrays, or scalars inside the compiled loop) ----------------------

def _environment(t_c, e_pa, p_hpa, tw_c, threshold_c, by_threshold):
    """Air at one sub-step: ``rho / mu`` (s m-2), the conduction and vapour terms ``g_h``,
    ``g_v`` of the heat balance (W m-1 per unit ventilation), the fall-speed density factor,
    the nucleation rate J (m-3 s-1) of a drop at ``tw_c`` and the fraction frozen at nucleation.
    J is Bigg's rate, or (``by_threshold`` = 1.0) :data:`CERTAIN_RATE_PER_M3_S` at or below
    ``threshold_c`` and 0 above.  Arithmetic only, so numpy and the compiled loop share it."""
    tk = t_c + T0
    rho = p_hpa * 100.0 / (Rd * tk)
    mu = heat.SUTHERLAND_BETA * tk * np.sqrt(tk) / (tk + heat.SUTHERLAND_S_K)
    k_a = heat.CONDUCTIVITY_0C_W_M_K + heat.CONDUCTIVITY_SLOPE_W_M_K2 * t_c
    d_v = heat.DIFFUSIVITY_0C_M2_S * (tk / T0) ** heat.DIFFUSIVITY_EXPONENT * (1013.25 / p_hpa)
    g_h = k_a * t_c
    g_v = Lv * d_v * (e_pa / (Rv * tk) - _RHO_VS0)
    dens = (fallspeed.REFERENCE_AIR_DENSITY_KG_M3 / rho) ** fallspeed.DENSITY_EXPONENT
    cold = -tw_c
    cold = cold * (cold > 0.0)
    bigg = heat.BIGG_B_PER_M3_S * (np.exp(heat.BIGG_A_PER_K * cold) - 1.0)
    bigg = by_threshold * (CERTAIN_RATE_PER_M3_S * (tw_c <= threshold_c)) \
        + (1.0 - by_threshold) * bigg
    frozen = heat.WATER_HEAT_CAPACITY_J_KG_K * cold / Lf
    frozen = frozen - (frozen - 1.0) * (frozen > 1.0)
    return rho / mu, g_h, g_v, dens, bigg, frozen


def _heat_and_speed(s, v_snow, v_drop, d_snow, d_drop, c_snow, c_drop, dens, rho_mu, g_h, g_v):
    """Heat ``H`` (W) reaching a particle with snow fraction ``s`` and its fall speed (m/s): the
    shape interpolated in the melted fraction ``1 - s`` between flake and drop."""
    phi = 1.0 - s
    v = (s * v_snow + phi * v_drop) * dens
    d = s * d_snow + phi * d_drop
    c = s * c_snow + phi * c_drop
    root = np.sqrt(rho_mu * v * d)
    # Ventilation of heat and vapour (heat.ventilation_factor): both branches computed, one kept
    # (exact for finite values), so the arithmetic runs on arrays and in the compiled loop alike.
    x = _PR13 * root
    small = (x < heat.VENTILATION_SWITCH) * 1.0
    f_h = small * (1.0 + 0.108 * x * x) + (1.0 - small) * (0.78 + 0.308 * x)
    x = _SC13 * root
    small = (x < heat.VENTILATION_SWITCH) * 1.0
    f_v = small * (1.0 + 0.108 * x * x) + (1.0 - small) * (0.78 + 0.308 * x)
    return _FOUR_PI * c * (g_h * f_h + g_v * f_v), v


# -- entry point ----------------------------------------------------------------------------------

def march(height_m, temperature_c, dewpoint_c, pressure_hpa, wetbulb_c, start_height_m,
          start_liquid, melted_diameter_mm, mass_fraction=None, *, step_m: float = STEP_M,
          nucleation_temperature_c: float | None = None,
          use_compiled: bool | None = None) -> MarchResult:
    """Follow every size bin of every column from ``start_height_m`` to the lowest level.

    Parameters
    ----------
    height_m, temperature_c, dewpoint_c, pressure_hpa, wetbulb_c : (n, L) array_like
        Columns ordered surface -> top, NaN-padded.
    start_height_m : (n,) array_like
        Generating level; NaN: the column is not marched (NaN results).
    start_liquid : (n,) array_like of bool
        The particles start as supercooled drops (no ice) instead of snow.
    melted_diameter_mm : (n, B) array_like
        Melted diameter of each bin
        (:func:`ptype.engine.particles.distribution.melted_diameters_mm`).
    mass_fraction : (B,) or (n, B) array_like, optional
        Mass carried by each bin (default equal).
    step_m : float
        Deepest sub-step, m.
    nucleation_temperature_c : float, optional
        Drops with no ice freeze when their wet-bulb reaches this temperature (degC) instead of
        by Bigg's (1953) stochastic rate (the default, None).
    use_compiled : bool, optional
        Force the compiled loop (True) or the numpy path (False); default: compiled when numba
        is installed.  Both give the same numbers.

    Returns
    -------
    MarchResult
    """
    z = np.ascontiguousarray(height_m, dtype=np.float64)
    t = np.ascontiguousarray(temperature_c, dtype=np.float64)
    p = np.ascontiguousarray(pressure_hpa, dtype=np.float64)
    tw = np.ascontiguousarray(wetbulb_c, dtype=np.float64)
    e = np.ascontiguousarray(saturation_vapor_pressure_hpa(np.asarray(dewpoint_c, dtype=np.float64))
                             * 100.0)
    n, L = z.shape
    bins = particle_bins(np.atleast_2d(melted_diameter_mm))
    B = bins["mass"].shape[1]
    mf = np.full((n, B), 1.0 / B) if mass_fraction is None else np.ascontiguousarray(
        np.broadcast_to(np.asarray(mass_fraction, dtype=np.float64), (n, B)))
    zg = np.ascontiguousarray(np.broadcast_to(np.asarray(start_height_m, dtype=np.float64), (n,)))
    liquid0 = np.ascontiguousarray(np.broadcast_to(np.asarray(start_liquid, dtype=bool), (n,)))
    consts = tuple(np.ascontiguousarray(np.broadcast_to(bins[k], (n, B)))
                   for k in ("v_snow", "v_drop", "d_snow", "d_drop", "c_snow", "c_drop", "mass",
                             "volume"))
    state = np.empty((4, n, B))
    levels = np.full((3, n, L), np.nan)
    heights = np.full((4, n), np.nan)
    nucleation = (0.0, 0.0) if nucleation_temperature_c is None else (
        float(nucleation_temperature_c), 1.0)
    fast = _COMPILED if use_compiled is None else bool(use_compiled)
    run = _march_compiled if fast and _COMPILED else _march_numpy
    run(z, t, e, p, tw, zg, liquid0, *consts, mf, float(step_m), *nucleation, state, levels,
        heights)
    started = np.isfinite(zg)
    state[:, ~started] = np.nan
    return MarchResult(snow=state[0], liquid=state[1], refrozen=state[2], ice_holding=state[3],
                       melted_levels=levels[0], liquid_levels=levels[1], refrozen_levels=levels[2],
                       melting_start_m=heights[0], melting_half_m=heights[1],
                       melting_complete_m=heights[2], refreezing_start_m=heights[3])


# -- numpy path -----------------------------------------------------------------------------------

def _weighted_sum(mf, x):
    """``sum_b mf[:, b] x[:, b]`` added bin by bin (the compiled loop's order)."""
    acc = np.zeros(mf.shape[0])
    for b in range(mf.shape[1]):
        acc = acc + mf[:, b] * x[:, b]
    return acc


def _interval(z, zg, started, j, step):
    """Top (m), depth (m) and number of sub-steps of the interval between levels ``j`` and
    ``j + 1`` below the generating level (0 sub-steps where there is nothing to march)."""
    zb, zt = z[:, j], z[:, j + 1]
    top = np.minimum(zt, zg)
    ok = started & np.isfinite(zb) & np.isfinite(zt) & (zb < top)
    depth = np.where(ok, top - zb, 0.0)
    count = np.where(ok, np.ceil(depth / step), 0.0).astype(np.int64)
    return np.where(ok, top, 0.0), depth, count


def _melt_parts(a_full):
    """Parts a sub-step is cut into for a bin that would melt ``a_full`` of its mass in it."""
    return np.minimum(np.maximum(np.ceil(a_full / MAX_MELT_STEP), 1.0), MAX_PARTS)


def _update_numpy(state, env, consts, dz):
    """One sub-step of every bin (see the module docstring), numpy arrays ``(n, B)``."""
    s, w, r, q = state
    rho_mu, g_h, g_v, dens, bigg, frozen = env
    v_snow, v_drop, d_snow, d_drop, c_snow, c_drop, mass, volume = consts
    geometry = (v_snow, v_drop, d_snow, d_drop, c_snow, c_drop, dens, rho_mu, g_h, g_v)
    h_first, v_first = _heat_and_speed(s, *geometry)
    melt = (q > 0.0) & (h_first > 0.0) & (s + r > 0.0)
    parts = np.where(melt, _melt_parts(q * h_first * dz / (v_first * Lf * mass)), 1.0)
    part = dz / parts
    h0, v0 = h_first, v_first
    for k in range(int(parts.max(initial=1.0))):
        if k > 0:
            h0, v0 = _heat_and_speed(s, *geometry)
        ice = s + r
        go = melt & (k < parts) & (ice > 0.0)
        a0 = q * h0 * part / (v0 * Lf * mass)
        s_half = np.maximum(s - np.maximum(0.5 * a0 - r, 0.0), 0.0)
        h1, v1 = _heat_and_speed(s_half, *geometry)
        a = np.minimum(q * np.maximum(h1, 0.0) * part / (v1 * Lf * mass), ice)
        take_r = np.minimum(a, r)
        s_m = s - (a - take_r)
        r_m = r - take_r
        gone = s_m + r_m <= EMPTY
        s = np.where(go, np.where(gone, 0.0, s_m), s)
        w = np.where(go, np.where(gone, 1.0, w + a), w)
        r = np.where(go, np.where(gone, 0.0, r_m), r)
        q = np.where(go & gone, 0.0, q)
    nucleate = (q < 1.0) & (bigg > 0.0)
    chance = 1.0 - np.exp(-((bigg * dz / dens) * (volume / v_drop)))
    dq = np.where(nucleate, (1.0 - q) * chance, 0.0)
    fz = dq * frozen
    q = q + dq
    r = r + fz
    w = w - fz
    held = w - (1.0 - q)
    q_mid = q - 0.5 * dq
    freeze = ~melt & (q > 0.0) & (h_first < 0.0) & (held > 0.0)
    a_f = np.minimum(q_mid * (-h_first) * dz / (v_first * Lf * mass), held)
    r = np.where(freeze, r + a_f, r)
    w = np.where(freeze, w - a_f, w)
    return s, w, r, q


def _march_numpy(z, t, e, p, tw, zg, liquid0, v_snow, v_drop, d_snow, d_drop, c_snow, c_drop,
                 mass, volume, mf, step, threshold_c, by_threshold, state, levels, heights):
    """:func:`march` with numpy: a loop over levels and sub-steps, vectorised over columns and
    bins; fills ``state``, ``levels`` and ``heights``."""
    n, L = z.shape
    B = mass.shape[1]
    started = np.isfinite(zg)
    s = np.where(liquid0[:, None], 0.0, 1.0) * np.ones((1, B))
    w = 1.0 - s
    r = np.zeros((n, B))
    q = s.copy()
    consts = (v_snow, v_drop, d_snow, d_drop, c_snow, c_drop, mass, volume)
    melted = _weighted_sum(mf, 1.0 - s)
    refrozen = np.zeros(n)
    _record_numpy(levels, L - 1, z, zg, started, mf, s, w, r)
    for j in range(L - 2, -1, -1):
        top, depth, count = _interval(z, zg, started, j, step)
        zb, zt = z[:, j], z[:, j + 1]
        for k in range(int(count.max(initial=0))):
            act = k < count
            dz = np.where(act, depth / np.maximum(count, 1), 0.0)
            upper = top - k * dz
            mid = top - (k + 0.5) * dz
            with np.errstate(invalid="ignore", divide="ignore"):
                f = np.where(act, (mid - zb) / (zt - zb), 0.0)
            ib, it = np.where(act, j, 0), np.where(act, j + 1, 0)
            rows = np.arange(n)
            env = _environment(*(a[rows, ib] + f * (a[rows, it] - a[rows, ib])
                                 for a in (t, e, p, tw)), threshold_c, by_threshold)
            env = tuple(x[:, None] for x in env)
            new = _update_numpy((s, w, r, q), env, consts, dz[:, None])
            s, w, r, q = (np.where(act[:, None], a, b) for a, b in zip(new, (s, w, r, q)))
            melted, refrozen = _crossings_numpy(heights, act, upper, dz, mf, s, r, melted,
                                                refrozen)
        _record_numpy(levels, j, z, zg, started, mf, s, w, r)
    state[0], state[1], state[2], state[3] = s, w, r, q


def _crossings_numpy(heights, act, upper, dz, mf, s, r, melted_before, refrozen_before):
    """Record where the mean melted fraction first exceeds 0, :data:`HALF_MELTED` and
    :data:`COMPLETE_MELTED`, and where the refrozen fraction first rises, in this sub-step."""
    melted = _weighted_sum(mf, 1.0 - s)
    refrozen = _weighted_sum(mf, r)
    rise = melted - melted_before
    with np.errstate(invalid="ignore", divide="ignore"):
        for row, limit in ((1, HALF_MELTED), (2, COMPLETE_MELTED)):
            hit = act & np.isnan(heights[row]) & (melted_before < limit) & (melted >= limit)
            heights[row] = np.where(hit, upper - dz * (limit - melted_before) / rise, heights[row])
    hit = act & np.isnan(heights[0]) & (melted_before <= 0.0) & (melted > 0.0)
    heights[0] = np.where(hit, upper, heights[0])
    hit = act & np.isnan(heights[3]) & (refrozen_before <= 0.0) & (refrozen > 0.0)
    heights[3] = np.where(hit, upper, heights[3])
    return np.where(act, melted, melted_before), np.where(act, refrozen, refrozen_before)


def _record_numpy(levels, j, z, zg, started, mf, s, w, r):
    """Mean melted, liquid and refrozen fractions at level ``j`` (NaN above the start)."""
    here = started & (z[:, j] <= zg)
    levels[0, :, j] = np.where(here, _weighted_sum(mf, 1.0 - s), np.nan)
    levels[1, :, j] = np.where(here, _weighted_sum(mf, w), np.nan)
    levels[2, :, j] = np.where(here, _weighted_sum(mf, r), np.nan)


# -- compiled loop ---------------------------------------------------------------------------------

def _update_bin(i, b, s, w, r, q, env, v_snow, v_drop, d_snow, d_drop, c_snow, c_drop, mass,
                volume, dz, out):
    """:func:`_update_numpy` for one bin (compiled with numba); writes ``out[0..3]``.  The heat
    balance is evaluated only where it can change something (elsewhere the numpy path computes
    a zero change): no melting in air that cannot heat a 0 degC surface, no freezing in air that
    cannot cool it."""
    rho_mu, g_h, g_v, dens, bigg, frozen = env
    cold_dry = g_h <= 0.0 and g_v <= 0.0
    warm_wet = g_h >= 0.0 and g_v >= 0.0
    vs, vd, ds, dd, cs, cd = (v_snow[i, b], v_drop[i, b], d_snow[i, b], d_drop[i, b],
                              c_snow[i, b], c_drop[i, b])
    m = mass[i, b]
    h_first, v_first = 0.0, 1.0
    have_heat = False
    melted = False
    if q > 0.0 and s + r > 0.0 and not cold_dry:
        h_first, v_first = _heat_and_speed_jit(s, vs, vd, ds, dd, cs, cd, dens, rho_mu, g_h, g_v)
        have_heat = True
        if h_first > 0.0:
            melted = True
            s, w, r, q = _melt_jit(s, w, r, q, h_first, v_first, dz, m, vs, vd, ds, dd, cs, cd,
                                   dens, rho_mu, g_h, g_v)
    dq = 0.0
    if q < 1.0 and bigg > 0.0:
        chance = 1.0 - np.exp(-((bigg * dz / dens) * (volume[i, b] / v_drop[i, b])))
        dq = (1.0 - q) * chance
        fz = dq * frozen
        q = q + dq
        r = r + fz
        w = w - fz
    held = w - (1.0 - q)
    if not melted and q > 0.0 and held > 0.0 and not warm_wet:
        if not have_heat:
            h_first, v_first = _heat_and_speed_jit(s, vs, vd, ds, dd, cs, cd, dens, rho_mu, g_h,
                                                   g_v)
        if h_first < 0.0:
            a_f = (q - 0.5 * dq) * (-h_first) * dz / (v_first * Lf * m)
            if a_f > held:  # noqa: PLR1730 - plain branches compile simply in numba
                a_f = held
            r = r + a_f
            w = w - a_f
    out[0], out[1], out[2], out[3] = s, w, r, q


def _melt_scalar(s, w, r, q, h_first, v_first, dz, m, vs, vd, ds, dd, cs, cd, dens, rho_mu, g_h,
                 g_v):
    """The melting of :func:`_update_numpy` for one bin (compiled with numba): the sub-step cut
    into :func:`_melt_parts`, each part a predictor half-step; returns ``s, w, r, q``."""
    parts = _melt_parts_jit(q * h_first * dz / (v_first * Lf * m))
    part = dz / parts
    h0, v0 = h_first, v_first
    for k in range(int(parts)):
        if k > 0:
            h0, v0 = _heat_and_speed_jit(s, vs, vd, ds, dd, cs, cd, dens, rho_mu, g_h, g_v)
        ice = s + r
        if not ice > 0.0:
            break
        a0 = q * h0 * part / (v0 * Lf * m)
        x = 0.5 * a0 - r
        if x < 0.0:  # noqa: PLR1730 - plain branches compile simply in numba
            x = 0.0
        s_half = s - x
        if s_half < 0.0:  # noqa: PLR1730
            s_half = 0.0
        h1, v1 = _heat_and_speed_jit(s_half, vs, vd, ds, dd, cs, cd, dens, rho_mu, g_h, g_v)
        if h1 < 0.0:  # noqa: PLR1730
            h1 = 0.0
        a = q * h1 * part / (v1 * Lf * m)
        if a > ice:  # noqa: PLR1730
            a = ice
        take_r = a if a < r else r  # noqa: FURB136 - np.minimum order, for numba
        s_m = s - (a - take_r)
        r_m = r - take_r
        if s_m + r_m <= EMPTY:
            return 0.0, 1.0, 0.0, 0.0
        s, r, w = s_m, r_m, w + a
    return s, w, r, q


def _melt_parts_scalar(a_full):
    """:func:`_melt_parts` for a scalar (compiled with numba)."""
    parts = np.ceil(a_full / MAX_MELT_STEP)
    if parts < 1.0:  # noqa: PLR1730 - plain branches compile simply in numba
        parts = 1.0
    if parts > MAX_PARTS:
        parts = float(MAX_PARTS)
    return parts


def _march_loop(z, t, e, p, tw, zg, liquid0, v_snow, v_drop, d_snow, d_drop, c_snow, c_drop,
                mass, volume, mf, step, threshold_c, by_threshold, state, levels, heights):
    """:func:`_march_numpy` one column at a time (compiled with numba), same arithmetic."""
    n, L = z.shape
    B = mass.shape[1]
    out = np.empty(4)
    for i in range(n):
        g = zg[i]
        if not np.isfinite(g):
            continue
        s0 = 0.0 if liquid0[i] else 1.0
        for b in range(B):
            state[0, i, b] = s0
            state[1, i, b] = 1.0 - s0
            state[2, i, b] = 0.0
            state[3, i, b] = s0
        melted = 0.0
        for b in range(B):
            melted += mf[i, b] * (1.0 - state[0, i, b])
        refrozen = 0.0
        _record_jit(levels, i, L - 1, z, g, mf, state)
        for j in range(L - 2, -1, -1):
            zb, zt = z[i, j], z[i, j + 1]
            top = zt if zt <= g else g  # noqa: FURB136 - np.minimum of finite values
            if not (np.isfinite(zb) and np.isfinite(zt) and zb < top):
                _record_jit(levels, i, j, z, g, mf, state)
                continue
            depth = top - zb
            count = int(np.ceil(depth / step))
            dz = depth / count
            if _inert_interval(i, j, z, t, e, tw, state, B):
                _record_jit(levels, i, j, z, g, mf, state)
                continue
            for k in range(count):
                upper = top - k * dz
                mid = top - (k + 0.5) * dz
                f = (mid - zb) / (zt - zb)
                env = _environment_jit(t[i, j] + f * (t[i, j + 1] - t[i, j]),
                                       e[i, j] + f * (e[i, j + 1] - e[i, j]),
                                       p[i, j] + f * (p[i, j + 1] - p[i, j]),
                                       tw[i, j] + f * (tw[i, j + 1] - tw[i, j]),
                                       threshold_c, by_threshold)
                new_melted = 0.0
                new_refrozen = 0.0
                for b in range(B):
                    _update_bin_jit(i, b, state[0, i, b], state[1, i, b], state[2, i, b],
                                    state[3, i, b], env, v_snow, v_drop, d_snow, d_drop, c_snow,
                                    c_drop, mass, volume, dz, out)
                    state[0, i, b], state[1, i, b] = out[0], out[1]
                    state[2, i, b], state[3, i, b] = out[2], out[3]
                    new_melted += mf[i, b] * (1.0 - out[0])
                    new_refrozen += mf[i, b] * out[2]
                rise = new_melted - melted
                if np.isnan(heights[1, i]) and melted < HALF_MELTED <= new_melted:
                    heights[1, i] = upper - dz * (HALF_MELTED - melted) / rise
                if np.isnan(heights[2, i]) and melted < COMPLETE_MELTED <= new_melted:
                    heights[2, i] = upper - dz * (COMPLETE_MELTED - melted) / rise
                if np.isnan(heights[0, i]) and melted <= 0.0 < new_melted:
                    heights[0, i] = upper
                if np.isnan(heights[3, i]) and refrozen <= 0.0 < new_refrozen:
                    heights[3, i] = upper
                melted = new_melted
                refrozen = new_refrozen
            _record_jit(levels, i, j, z, g, mf, state)


def _inert_loop(i, j, z, t, e, tw, state, B):
    """True when no bin of column ``i`` can change between levels ``j`` and ``j + 1`` (the
    compiled loop then skips the interval; the numpy path computes zero changes there): all
    particles are dry ice in air with neither conduction nor condensation heating (T <= 0 and
    vapour density <= saturation at 0 degC at both ends, hence everywhere between, as T and e
    are linear), or all are drops with no ice in air whose wet-bulb is >= 0 degC."""
    dry_ice = True
    all_liquid = True
    for b in range(B):
        if state[1, i, b] != 0.0 or state[3, i, b] != 1.0:
            dry_ice = False
        if state[3, i, b] != 0.0:
            all_liquid = False
    if dry_ice:
        for k in (j, j + 1):
            if t[i, k] > 0.0 or e[i, k] / (Rv * (t[i, k] + T0)) > _RHO_VS0:
                return False
        return True
    if all_liquid:
        return tw[i, j] >= 0.0 and tw[i, j + 1] >= 0.0
    return False


def _record_loop(levels, i, j, z, g, mf, state):
    """:func:`_record_numpy` for column ``i`` (compiled with numba)."""
    if not z[i, j] <= g:
        return
    a0 = 0.0
    a1 = 0.0
    a2 = 0.0
    for b in range(mf.shape[1]):
        a0 += mf[i, b] * (1.0 - state[0, i, b])
        a1 += mf[i, b] * state[1, i, b]
        a2 += mf[i, b] * state[2, i, b]
    levels[0, i, j] = a0
    levels[1, i, j] = a1
    levels[2, i, j] = a2


_environment_jit = compiled(_environment, inline=True, numpy_errors=True)
_heat_and_speed_jit = compiled(_heat_and_speed, inline=True, numpy_errors=True)
_melt_parts_jit = compiled(_melt_parts_scalar, inline=True, numpy_errors=True)
_melt_jit = compiled(_melt_scalar, inline=True, numpy_errors=True)
_update_bin_jit = compiled(_update_bin, inline=True, numpy_errors=True)
_record_jit = compiled(_record_loop, inline=True)
_inert_interval = compiled(_inert_loop, inline=True)
_march_compiled = compiled(_march_loop, numpy_errors=True)
