"""Czys et al. (1996) nondimensional melting parameter tau: freezing rain or ice pellets.

Czys, R. R., R. W. Scott, K. C. Tang, R. W. Przybylinski and M. E. Sabones, 1996:
A physically based, nondimensional parameter for discriminating between locations of
freezing rain and ice pellets.  J. Appl. Meteor. 35, 1747-1758 (citation key ``Czys1996``;
volume and pages from memory, unverified).

``tau = t_r / t_m``: the time a falling ice particle spends in the elevated warm layer
(``t_r = depth / fall speed``) over the time it needs to melt completely (``t_m``).
``tau >= 1``: it melts completely and, the surface layer being sub-freezing, arrives as
**freezing rain**; ``tau < 1``: a frozen core survives and the drop refreezes to **ice
pellets**.  Czys et al. drew the ``tau = 1`` line on an isonomogram of warm-layer depth
against warm-layer mean temperature.

Domain.  The parameter assumes the three-layer profile: ice-producing cloud aloft, one
elevated warm layer, a sub-freezing surface layer.  Rauber et al. (2001, Wea. Forecasting 16)
found only 306 of 1051 freezing-precipitation soundings had that shape; elsewhere ptype's
Czys abstains and says why.  Here "three-layer" means the air-temperature profile has
exactly three layers about 0 degC (cold, warm, cold from the ground up), the surface is below
0 degC, and some cloud level (see :func:`ptype.engine.layers.cloud_mask`) above the warm layer is
at or below :data:`ICE_CLOUD_MAX_C` (about -10 degC, from memory: heterogeneous ice
nucleation becomes likely below -10 degC).

Melting time (Mason 1971; Pruppacher & Klett 1997; the form is from memory, unverified)::

    t_m = rho_i L_f r0^2 / (2 f [K_a dT + L_v D_v (rho_v,inf - rho_v,s(0 degC))])

with ``dT`` the warm layer's mean excess over 0 degC, ``f`` the ventilation factor and
``rho_v`` vapour densities (ambient, and saturated at the melting surface).  A dry warm layer
(``rho_v,inf < rho_v,s(0)``) slows melting through evaporative cooling; leaving the vapour
term out (:data:`VAPOUR_TERM` False) gives the dry-air upper bound on ``t_m``.

Choices (ours, documented in ``docs/methods.md``):

* Particle: an ice sphere of radius :data:`PARTICLE_RADIUS_M` = 750 um (1.5 mm diameter).
  The size Czys et al. used is not verified.  The value is chosen so that the ``tau = 1``
  line sits where Stewart & King's (1987) guide puts the partial/complete melting boundary
  for warm layers 1-2 km deep (maximum wet-bulb 1-3 degC: partial; above 3-4: complete;
  see ``docs/methods.md``).  With 200 um every warm layer deeper than about 100 m would melt
  the particle.  ``t_m`` grows as r0^2, so the choice matters: pass ``radius_m``.
* Fall speed: the drop the particle becomes, from the Atlas, Srivastava & Sekhon (1973) fit
  ``v = 9.65 - 10.3 exp(-0.6 D[mm])`` m/s to the Gunn & Kinzer (1949) measurements, scaled
  for air density by ``(rho_0 / rho)^0.4`` (Foote & du Toit 1969), rho_0 = 1.204 kg/m3
  (from memory, unverified).  The fit is used for 0.3-5.8 mm diameters.
* Ventilation: ``f = 0.78 + 0.308 X`` for ``X = Sc^(1/3) Re^(1/2) >= 1.4``, else
  ``1 + 0.108 X^2`` (Pruppacher & Klett 1997, from memory, unverified), Sc = 0.6.
* Air viscosity: Sutherland's law as in the U.S. Standard Atmosphere 1976
  (``mu = 1.458e-6 T^1.5 / (T + 110.4)`` Pa s).
* Vapour diffusivity ``D_v = 2.11e-5 (T/T0)^1.94 (1013.25 / p)`` m2/s and conductivity
  ``K_a = 0.024`` W/m/K (Pruppacher & Klett 1997, from memory, unverified).
* Warm-layer depth, mean excess (area / (R_d ln(p_b/p_t)), the ln-p mean of T - 0 degC) and
  ambient vapour pressure (ln-p mean of e(Td)) come from the air-temperature layers.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

from ptype.codes import NO_RESULT, Code
from ptype.engine import wording as w
from ptype.engine.compiled import AVAILABLE as _COMPILED
from ptype.engine.compiled import compiled
from ptype.engine.layers import TOP_LIMIT_HPA
from ptype.engine.methods.base import Context, MethodResult, Step, select_first
from ptype.errors import OptionError
from ptype.thermo import saturation_vapor_pressure_hpa
from ptype.thermo.constants import T0, Lf, Rd, Rv, rho_i

NAME = "czys"
TITLE = "Czys et al. (1996) melting parameter"
REFERENCE = "Czys1996"
WETBULB = None  # Czys et al. work on the air temperature

#: Radius of the representative ice sphere, m.  Ours (see the module docstring): the size
#: Czys et al. used is not verified.
PARTICLE_RADIUS_M = 750e-6
#: Cloud above the warm layer must reach this temperature for ice, degC (about -10 degC,
#: from memory; common ice-nucleation guide).
ICE_CLOUD_MAX_C = -10.0
#: Include the vapour (latent heat) term of the melting equation.
VAPOUR_TERM = True
#: Thermal conductivity of air, W m-1 K-1 (Pruppacher & Klett 1997, from memory, unverified).
AIR_CONDUCTIVITY_W_M_K = 0.024
#: Water-vapour diffusivity at 0 degC and 1013.25 hPa, m2 s-1 (P&K 1997, from memory).
VAPOUR_DIFFUSIVITY_M2_S = 2.11e-5
#: Latent heat of vaporisation near 0 degC, J kg-1 (textbook value near 0 degC).
LATENT_HEAT_VAPORIZATION = 2.5e6
#: Schmidt number of water vapour in air (from memory, unverified).
SCHMIDT_NUMBER = 0.6
#: Reference air density of the fall-speed fit, kg m-3 (1013.25 hPa, 20 degC).
FALL_SPEED_REFERENCE_DENSITY = 1.204
#: Diameters, m, over which the fall-speed fit is used.
FALL_SPEED_DIAMETER_RANGE_M = (0.3e-3, 5.8e-3)

RULES = (
    "insufficient_levels",      # 0
    "surface_not_freezing",     # 1
    "no_elevated_warm_layer",   # 2
    "not_three_layers",         # 3
    "no_ice_cloud_aloft",       # 4
    "complete_melting",         # 5 -> FZRA
    "partial_melting",          # 6 -> PL
)
_RULE = {name: k for k, name in enumerate(RULES)}
_CODE_OF_RULE = np.array([NO_RESULT, NO_RESULT, NO_RESULT, NO_RESULT, NO_RESULT, Code.FZRA,
                          Code.PL], dtype=np.int64)
SOURCE = "Czys et al. (1996); melting time after Mason (1971) and Pruppacher & Klett (1997)"


# -- pure physics --------------------------------------------------------------------------------

def _check_radius(radius_m):
    r = np.asarray(radius_m, dtype=np.float64)
    lo, hi = FALL_SPEED_DIAMETER_RANGE_M
    if np.any(~np.isfinite(r)) or np.any(2 * r < lo - 1e-12) or np.any(2 * r > hi + 1e-12):
        raise OptionError(f"radius_m must lie between {lo / 2:g} and {hi / 2:g} m (the range of "
                          f"the fall-speed fit), got {radius_m!r}", field="radius_m")
    return r


def air_density_kg_m3(pressure_hpa: ArrayLike, temperature_c: ArrayLike) -> np.ndarray:
    """Dry-air density, ``p / (R_d T)``, kg m-3."""
    return np.asarray(pressure_hpa) * 100.0 / (Rd * (np.asarray(temperature_c) + T0))


def air_viscosity_pa_s(temperature_c: ArrayLike) -> np.ndarray:
    """Dynamic viscosity of air, Pa s (Sutherland's law, U.S. Standard Atmosphere 1976)."""
    t = np.asarray(temperature_c, dtype=np.float64) + T0
    return 1.458e-6 * t ** 1.5 / (t + 110.4)


def terminal_velocity_m_s(diameter_m: ArrayLike,
                          air_density: ArrayLike = FALL_SPEED_REFERENCE_DENSITY) -> np.ndarray:
    """Fall speed of a raindrop, m/s: Atlas et al. (1973) fit to Gunn & Kinzer (1949),
    ``9.65 - 10.3 exp(-0.6 D[mm])``, times ``(1.204 / rho_air)^0.4`` (Foote & du Toit 1969).
    Constants from memory, unverified."""
    d_mm = np.asarray(diameter_m, dtype=np.float64) * 1e3
    return (9.65 - 10.3 * np.exp(-0.6 * d_mm)) * (FALL_SPEED_REFERENCE_DENSITY
                                                   / np.asarray(air_density)) ** 0.4


def ventilation_factor(reynolds_number: ArrayLike) -> np.ndarray:
    """Mean ventilation factor of a falling sphere (Pruppacher & Klett 1997, from memory,
    unverified): ``X = Sc^(1/3) Re^(1/2)``; ``1 + 0.108 X^2`` for X < 1.4, else
    ``0.78 + 0.308 X``."""
    x = SCHMIDT_NUMBER ** (1.0 / 3.0) * np.sqrt(np.asarray(reynolds_number, dtype=np.float64))
    return np.where(x < 1.4, 1.0 + 0.108 * x * x, 0.78 + 0.308 * x)


def vapour_diffusivity_m2_s(pressure_hpa: ArrayLike, temperature_c: ArrayLike) -> np.ndarray:
    """``D_v = 2.11e-5 (T/T0)^1.94 (1013.25/p)`` m2/s (Pruppacher & Klett 1997, from memory)."""
    t = np.asarray(temperature_c, dtype=np.float64) + T0
    return VAPOUR_DIFFUSIVITY_M2_S * (t / T0) ** 1.94 * (1013.25 / np.asarray(pressure_hpa))


def vapour_density_excess_kg_m3(vapour_pressure_hpa: ArrayLike,
                                temperature_c: ArrayLike) -> np.ndarray:
    """Ambient vapour density minus the saturation vapour density over water at 0 degC, kg m-3."""
    e = np.asarray(vapour_pressure_hpa, dtype=np.float64) * 100.0
    es0 = float(saturation_vapor_pressure_hpa(0.0)) * 100.0
    return e / (Rv * (np.asarray(temperature_c) + T0)) - es0 / (Rv * T0)


def fall_state(radius_m: ArrayLike, pressure_hpa: ArrayLike,
               mean_excess_c: ArrayLike) -> tuple[np.ndarray, np.ndarray]:
    """Fall speed (m/s) and ventilation factor of the particle in the warm layer."""
    r = _check_radius(radius_m)
    rho = air_density_kg_m3(pressure_hpa, mean_excess_c)
    v = terminal_velocity_m_s(2.0 * r, rho)
    reynolds = rho * v * 2.0 * r / air_viscosity_pa_s(mean_excess_c)
    return v, ventilation_factor(reynolds)


def melting_time_s(radius_m: ArrayLike, mean_excess_c: ArrayLike, *,
                   pressure_hpa: ArrayLike = 850.0, vapour_density_excess_kg_m3_: ArrayLike = 0.0,
                   ventilation: ArrayLike | None = None) -> np.ndarray:
    """Time to melt an ice sphere of radius ``radius_m`` completely, s.

    ``t_m = rho_i L_f r0^2 / (2 f [K_a dT + L_v D_v d_rho_v])`` (Mason 1971; Pruppacher &
    Klett 1997; form from memory, unverified).  ``ventilation`` (f) defaults to the value for
    the particle's fall speed at ``pressure_hpa``; ``vapour_density_excess_kg_m3_`` is the
    ambient minus the 0 degC saturation vapour density (0 gives the dry-air form).  Infinite
    where the heat supply is not positive (no melting).
    """
    r = _check_radius(radius_m)
    dt = np.asarray(mean_excess_c, dtype=np.float64)
    if ventilation is None:
        _, ventilation = fall_state(r, pressure_hpa, dt)
    heat = (AIR_CONDUCTIVITY_W_M_K * dt + LATENT_HEAT_VAPORIZATION
            * vapour_diffusivity_m2_s(pressure_hpa, dt) * np.asarray(vapour_density_excess_kg_m3_))
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(heat > 0.0, rho_i * Lf * r * r / (2.0 * ventilation * heat), np.inf)


def tau(depth_m: ArrayLike, mean_excess_c: ArrayLike, *, radius_m: ArrayLike = PARTICLE_RADIUS_M,
        pressure_hpa: ArrayLike = 850.0,
        vapour_density_excess_kg_m3_: ArrayLike = 0.0) -> np.ndarray:
    """Czys et al. (1996) ``tau = t_r / t_m`` for a warm layer ``depth_m`` deep whose mean
    excess over 0 degC is ``mean_excess_c`` (``t_r = depth / fall speed``)."""
    v, f = fall_state(radius_m, pressure_hpa, mean_excess_c)
    t_m = melting_time_s(radius_m, mean_excess_c, pressure_hpa=pressure_hpa,
                         vapour_density_excess_kg_m3_=vapour_density_excess_kg_m3_,
                         ventilation=f)
    return (np.asarray(depth_m, dtype=np.float64) / v) / t_m


# -- column analysis -----------------------------------------------------------------------------

def _lnp_integral_to(p, v, target_hpa, *more_targets_hpa):
    """``integral of v d(-ln p)`` from the lowest level up to ``target_hpa`` (n,), v linear in
    ln p; NaN where the target is outside the column.  With more targets, one array per target
    (the level integrals are shared)."""
    targets = (target_hpa, *more_targets_hpa)
    if _COMPILED and p.ndim == 2 and p.shape[1] > 0:
        out = _lnp_integral_fast(p, v, targets)
    else:
        out = _lnp_integral_numpy(p, v, targets)
    return out[0] if not more_targets_hpa else out


def _lnp_integral_numpy(p, v, targets):
    """:func:`_lnp_integral_to` with numpy: the integral to every level, then each target."""
    n, L = p.shape
    x = np.log(p)
    seg = np.where(np.isfinite(x[:, 1:]) & np.isfinite(x[:, :-1]),
                   0.5 * (v[:, 1:] + v[:, :-1]) * (x[:, :-1] - x[:, 1:]), 0.0)
    cum = np.concatenate([np.zeros((n, 1)), np.cumsum(seg, axis=1)], axis=1)
    rows = np.arange(n)
    finite_p = np.isfinite(p)
    out = []
    for target in targets:
        xt = np.log(np.asarray(target, dtype=np.float64))
        k = np.sum(finite_p & (p >= np.asarray(target)[:, None]), axis=1) - 1
        inside = k >= 0
        k = np.clip(k, 0, L - 1)
        k1 = np.minimum(k + 1, L - 1)
        dx = x[rows, k] - x[rows, k1]
        with np.errstate(invalid="ignore", divide="ignore"):
            w = np.where(np.isfinite(dx) & (dx > 0), (x[rows, k] - xt) / dx, 0.0)
        vt = v[rows, k] + np.where(w != 0.0, w * (v[rows, k1] - v[rows, k]), 0.0)
        part = np.where(w != 0.0, 0.5 * (v[rows, k] + vt) * (x[rows, k] - xt), 0.0)
        out.append(np.where(inside, cum[rows, k] + part, np.nan))
    return out


def _lnp_integral_fast(p, v, targets):
    """:func:`_lnp_integral_numpy` through the compiled :func:`_lnp_integral_loop`: per column
    only the levels up to each target are summed (same order, same numbers)."""
    p = np.ascontiguousarray(p, dtype=np.float64)
    target = np.ascontiguousarray(np.broadcast_to(np.asarray(targets, dtype=np.float64),
                                                  (len(targets), p.shape[0])))
    out = np.empty(target.shape)
    _lnp_integral_compiled(p, np.log(p), np.ascontiguousarray(v, dtype=np.float64), target,
                           np.log(target), out)
    return list(out)


def _lnp_integral_loop(p, x, v, target, x_target, out):
    """For each target and column: the sum of the level segments below the target's level in
    the order of ``np.cumsum``, plus the part segment up to the target, as
    :func:`_lnp_integral_numpy` (compiled with numba)."""
    n, L = p.shape
    for t in range(target.shape[0]):
        for i in range(n):
            pt = target[t, i]
            k = -1
            for j in range(L):
                if np.isfinite(p[i, j]) and p[i, j] >= pt:
                    k += 1
            if k < 0:
                out[t, i] = np.nan
                continue
            cum = 0.0
            for j in range(k):
                if np.isfinite(x[i, j + 1]) and np.isfinite(x[i, j]):
                    cum += 0.5 * (v[i, j + 1] + v[i, j]) * (x[i, j] - x[i, j + 1])
            k1 = min(k + 1, L - 1)
            dx = x[i, k] - x[i, k1]
            xt = x_target[t, i]
            w = (x[i, k] - xt) / dx if (np.isfinite(dx) and dx > 0) else 0.0
            part = 0.0
            if w != 0.0:
                vt = v[i, k] + w * (v[i, k1] - v[i, k])
                part = 0.5 * (v[i, k] + vt) * (x[i, k] - xt)
            out[t, i] = cum + part


_lnp_integral_compiled = compiled(_lnp_integral_loop, numpy_errors=True)


def run(ctx: Context, *, radius_m: float | None = None,
        vapour_term: bool | None = None) -> MethodResult:
    """Czys et al. (1996) for every column of ``ctx``.

    ``radius_m`` defaults to :data:`PARTICLE_RADIUS_M`, ``vapour_term`` to :data:`VAPOUR_TERM`.
    """
    radius = PARTICLE_RADIUS_M if radius_m is None else radius_m
    use_vapour = VAPOUR_TERM if vapour_term is None else bool(vapour_term)
    _check_radius(radius)
    c = ctx.columns
    n = c.n_columns
    air = ctx.air_layers
    count = air.count
    sfc_t = c.surface_temperature_c
    K = air.kind.shape[1]
    k1 = min(1, K - 1)
    has_warm = (count >= 2) & (air.kind[:, k1] > 0) & (air.kind[:, 0] < 0)
    nan = np.full(n, np.nan)
    bottom_hpa = np.where(has_warm, air.bottom_hpa[:, k1], nan)
    top_hpa = np.where(has_warm, air.top_hpa[:, k1], nan)
    bottom_m = np.where(has_warm, air.bottom_m[:, k1], nan)
    top_m = np.where(has_warm, air.top_m[:, k1], nan)
    area = np.where(has_warm, air.area_j_kg[:, k1], nan)
    ln_ratio = np.log(bottom_hpa / top_hpa)
    with np.errstate(invalid="ignore", divide="ignore"):
        excess = area / (Rd * ln_ratio)
    depth = top_m - bottom_m
    pressure = np.sqrt(bottom_hpa * top_hpa)      # the ln-p mean pressure of the layer

    # Ambient vapour pressure: ln-p mean of e(Td) over the warm layer.
    e = np.where(c.valid, saturation_vapor_pressure_hpa(c.dewpoint_c), np.nan)
    p = c.pressure_hpa
    safe_bottom = np.where(has_warm, bottom_hpa, p[:, 0])
    safe_top = np.where(has_warm, top_hpa, p[:, 0])
    with np.errstate(invalid="ignore", divide="ignore"):
        to_top, to_bottom = _lnp_integral_to(p, e, safe_top, safe_bottom)
        e_mean = (to_top - to_bottom) / ln_ratio
    d_rho_v = np.where(has_warm, vapour_density_excess_kg_m3(e_mean, excess), nan)
    if not use_vapour:
        d_rho_v = np.where(has_warm, 0.0, nan)

    # Coldest cloud level above the warm layer.
    above = (ctx.cloud_mask & c.valid & (p >= TOP_LIMIT_HPA)
             & (c.height_m > np.where(has_warm, top_m, np.inf)[:, None]))
    cloud_min = np.where(above.any(axis=1),
                         np.min(np.where(above, c.temperature_c, np.inf), axis=1), np.nan)

    ok = has_warm & np.isfinite(excess) & (excess > 0) & (depth > 0)
    safe_excess = np.where(ok, excess, 1.0)
    safe_p = np.where(ok, pressure, 850.0)
    v, f = fall_state(radius, safe_p, safe_excess)
    t_m = melting_time_s(radius, safe_excess, pressure_hpa=safe_p,
                         vapour_density_excess_kg_m3_=np.where(ok, d_rho_v, 0.0), ventilation=f)
    t_r = np.where(ok, depth, 0.0) / v
    with np.errstate(invalid="ignore", divide="ignore"):
        tau_value = np.where(ok, t_r / t_m, np.nan)

    conditions = [
        c.n_levels < 2,
        (sfc_t >= 0.0) | (air.kind[:, 0] > 0),
        ~has_warm,
        count != 3,
        ~(cloud_min <= ICE_CLOUD_MAX_C),
        tau_value >= 1.0,
    ]
    choices = [_RULE[r] for r in ("insufficient_levels", "surface_not_freezing",
                                  "no_elevated_warm_layer", "not_three_layers",
                                  "no_ice_cloud_aloft", "complete_melting")]
    rule = select_first(conditions, choices, default=_RULE["partial_melting"])
    values = {
        "layer_count": count.astype(np.float64),
        "surface_temperature_c": sfc_t,
        "warm_bottom_hpa": bottom_hpa, "warm_top_hpa": top_hpa,
        "warm_bottom_m": bottom_m, "warm_top_m": top_m,
        "warm_depth_m": depth, "warm_area_j_kg": area, "warm_mean_excess_c": excess,
        "warm_vapour_pressure_hpa": np.where(has_warm, e_mean, nan),
        "vapour_density_excess_kg_m3": d_rho_v,
        "cloud_coldest_above_c": cloud_min,
        "particle_radius_m": np.full(n, float(radius)),
        "fall_speed_m_s": np.where(ok, v, nan),
        "ventilation_factor": np.where(ok, f, nan),
        "melting_time_s": np.where(ok, t_m, nan),
        "residence_time_s": np.where(ok, t_r, nan),
        "tau": tau_value,
    }
    return MethodResult(name=NAME, code=_CODE_OF_RULE[rule], rule=rule, values=values,
                        explainer=explain)


#: Why Czys's tau gives no type outside its domain (Czys et al. 1996; Rauber et al. 2001).
_DOMAIN = ("Czys's \u03c4 applies only to the three-layer profile (ice cloud aloft, one "
           "elevated warm layer, a sub-freezing surface layer)")


def explain(result: MethodResult, i: int) -> list[Step]:
    """Czys's reasoning for column ``i``, from ``result.values`` only."""
    v = {k: float(a[i]) for k, a in result.values.items()}
    rule = RULES[int(result.rule[i])]
    outside = _outside_domain_step(v, rule)
    if outside is not None:
        return [outside]
    sfc = v["surface_temperature_c"]
    steps = [Step("three_layers", f"Three-layer profile: a sub-freezing surface "
                  f"({w.temperature(sfc)}) under a warm layer "
                  f"{w.pressure_range(v['warm_bottom_hpa'], v['warm_top_hpa'])}, "
                  f"{w.height(v['warm_depth_m'])} deep, mean "
                  f"{w.temperature(v['warm_mean_excess_c'], 2)} above freezing.",
                  {"surface_temperature_c": sfc, "warm_depth_m": v["warm_depth_m"],
                   "warm_mean_excess_c": v["warm_mean_excess_c"]},
                  {"surface_temperature_c": 0.0}, SOURCE)]
    steps.append(_ice_cloud_step(v, rule))
    if rule == "no_ice_cloud_aloft":
        return steps
    steps.append(_melting_time_step(v))
    t = v["tau"]
    if rule == "complete_melting":
        text = (f"\u03c4 = {w.number(t, 2)} {w.GE} 1: the particle melts completely and the "
                "drop supercools in the cold surface layer: freezing rain.")
    else:
        text = (f"\u03c4 = {w.number(t, 2)} < 1: an ice core survives the warm layer and the "
                "drop refreezes in the cold surface layer: ice pellets.")
    steps.append(Step(rule, text, {"tau": t}, {"tau": 1.0}, SOURCE))
    return steps


def _outside_domain_step(v: dict, rule: str) -> Step | None:
    """The one step of a column outside the three-layer domain, or None inside it."""
    zero = w.temperature(0.0, trim=True)
    if rule == "insufficient_levels":
        return Step(rule, "Fewer than two valid levels: no layers to examine.", source=SOURCE)
    if rule == "surface_not_freezing":
        sfc = v["surface_temperature_c"]
        return Step(rule, f"The surface is at {w.temperature(sfc)}, not below {zero}: "
                    f"{_DOMAIN}, so it gives no type here.", {"surface_temperature_c": sfc},
                    {"surface_temperature_c": 0.0}, SOURCE)
    if rule == "no_elevated_warm_layer":
        return Step(rule, f"No layer above {zero} aloft: {_DOMAIN}; with nothing to melt the "
                    "particle the question it answers does not arise.",
                    {"layer_count": v["layer_count"]}, {}, SOURCE)
    if rule == "not_three_layers":
        return Step(rule, f"The temperature profile has {int(v['layer_count'])} layers about "
                    f"{zero}, not three: {_DOMAIN}, so it gives no type here.",
                    {"layer_count": v["layer_count"]}, {"layer_count": 3}, SOURCE)
    return None


def _ice_cloud_step(v: dict, rule: str) -> Step:
    """Whether a cloud above the warm layer is cold enough to send ice into it."""
    cmin = v["cloud_coldest_above_c"]
    limit = w.temperature(ICE_CLOUD_MAX_C, trim=True)
    values, limits = {"cloud_coldest_above_c": cmin}, {"cloud_coldest_above_c": ICE_CLOUD_MAX_C}
    if rule != "no_ice_cloud_aloft":
        return Step("ice_cloud_aloft", f"Cloud above the warm layer reaches "
                    f"{w.temperature(cmin)} ({w.LE} {limit}): ice falls into the warm layer.",
                    values, limits, SOURCE)
    if np.isfinite(cmin):
        text = (f"The cloud above the warm layer is no colder than {w.temperature(cmin)}, "
                f"warmer than {limit}, so it is unlikely to make ice: {_DOMAIN}.")
    else:
        text = f"There is no cloud above the warm layer to make ice: {_DOMAIN}."
    return Step(rule, text, values, limits, SOURCE)


def _melting_time_step(v: dict) -> Step:
    """The particle's residence and melting times in the warm layer."""
    if np.isfinite(v["melting_time_s"]):
        needs = (f"needs {w.seconds(v['melting_time_s'])} to melt (ventilation factor "
                 f"{w.number(v['ventilation_factor'], 2)})")
    else:
        needs = ("cannot melt at all: the layer is so dry that evaporation cools the particle "
                 "more than the warm air heats it")
    return Step("melting_time", f"An ice sphere of radius {w.micrometres(v['particle_radius_m'])} "
                f"falling at {w.speed(v['fall_speed_m_s'])} spends "
                f"{w.seconds(v['residence_time_s'])} in the warm layer and {needs}.",
                {"particle_radius_m": v["particle_radius_m"],
                 "fall_speed_m_s": v["fall_speed_m_s"],
                 "residence_time_s": v["residence_time_s"],
                 "melting_time_s": v["melting_time_s"],
                 "vapour_density_excess_kg_m3": v["vapour_density_excess_kg_m3"]}, {}, SOURCE)
