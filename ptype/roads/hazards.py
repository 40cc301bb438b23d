"""Road-surface hazards and ice accretion, per forecast step (pure, vectorised).

Every function takes ``(n,)`` arrays (one value per time step) and returns
``(n,)`` arrays; NaN inputs (unknown road temperature, unknown rate) give
``False`` flags and NaN amounts, never a guess.

Hazards
-------
* **Freezing precipitation on the road** — a freezing type (FZRA, FZDZ,
  FZRAPL) is diagnosed, or any type carrying liquid water (RA, DZ, RASN, RAPL)
  falls on a road surface at or below 0 degC, where it freezes on contact
  (common practice in road-weather forecasting).
* **Frost (hoar-frost deposition)** — road surface at or below 0 degC *and*
  colder than the frost point of the air.  Below 0 degC the road surface is
  ice-covered or ice-nucleating, so vapour deposits when its temperature is
  below the temperature at which the air is saturated **over ice**: the frost
  point, which is higher than the dew point (e.g. Td = -10 degC gives a frost
  point near -9 degC).  Comparing with the dew point would miss the cases
  with the road between the dew point and the frost point; we therefore use
  the frost point, from the Alduchov & Eskridge (1996) over-ice saturation
  vapour pressure.
* **Snow** — SN, or a mix containing snow (RASN); depth from the
  liquid-equivalent rate with a 10:1 snow-to-liquid ratio (common practice,
  from memory; real ratios range roughly 5:1 to 20:1).
* **Ice pellets** — PL, or a mix containing pellets (RAPL, FZRAPL): a layer of
  loose ice grains that makes untreated roads slippery and is ploughed like
  snow; depth from the liquid-equivalent rate with a 2.5:1 pellet-to-liquid
  ratio (pellets pack densely, roughly 2:1 to 3:1; from memory).

Ice accretion (Jones simple flux model)
----------------------------------------
Jones, K. F., 1996: *Ice accretion in freezing rain*, CRREL Report 96-2;
Jones, K. F., 1998: A simple model for freezing rain ice loads, *Atmospheric
Research* 46, 87-97.  The equivalent uniform radial ice thickness on a
horizontal cylinder, accumulated over hourly steps::

    R_eq = 1 / (rho_i pi) * sum_hours sqrt( (P rho_o)**2 + (3.6 V W)**2 )     [mm]
    W    = 0.067 P**0.846                                                       [g m-3]

with P the precipitation rate (mm/h), V the wind speed (m/s), rho_o = 1.0 g cm-3
(water), rho_i = 0.9 g cm-3 (glaze) and W the liquid water content (Best's
relation).  The formula is as recalled in our methods brief (from memory,
unverified against the report); its two limits are checked independently in the
tests: in calm air it reduces to the geometry of rain falling on a cylinder
(R = P t rho_o / (rho_i pi)), and 3.6 V W is the horizontal water flux in mm/h.
It assumes every drop freezes on contact (no run-off), so it is an upper bound.

Flat-surface glaze (a road, a deck): all the freezing water stays, thickness
``P dt rho_w / rho_i``.

The Freezing Rain Accumulation Model (Sanders & Barjenbruch 2016) is **not**
shipped: one of its temperature coefficients could not be verified (two
recalled values, 0.1039 and 0.039, give ice-to-liquid ratios of about 0.8 and
2.4 at Tw = -5 degC), see ``docs/nowcast.md``.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

from ptype.codes import Code
from ptype.thermo import saturation_vapor_pressure_hpa

#: Density of liquid water and of accreted glaze used by Jones (1998), g cm-3.
WATER_DENSITY_G_CM3 = 1.0
GLAZE_DENSITY_G_CM3 = 0.9
#: Best's liquid-water-content relation W = a P**b (g m-3, P in mm/h), as used by Jones (1998).
LWC_COEFFICIENT = 0.067
LWC_EXPONENT = 0.846
#: Snow-to-liquid ratio for snow depth (common practice, from memory).
SNOW_TO_LIQUID_RATIO = 10.0
#: Alduchov & Eskridge (1996) AERKi over-ice constants (hPa, degC).
_AE_ICE = (6.1121, 22.587, 273.86)

FREEZING_CODES = (Code.FZRA, Code.FZDZ, Code.FZRAPL)
#: Types that carry liquid water to the road and freeze there when it is at or below 0 degC.
LIQUID_BEARING_CODES = (Code.RA, Code.DZ, Code.RASN, Code.RAPL)
SNOW_CODES = (Code.SN, Code.RASN)
#: Share of a mixed type's precipitation that is snow (for snow depth); ours: half for RASN.
SNOW_SHARE = {Code.SN: 1.0, Code.RASN: 0.5}
#: Codes that carry ice pellets, and the share of their precipitation that is pellets (ours:
#: half for the mixes).
PELLET_SHARE = {Code.PL: 1.0, Code.RAPL: 0.5, Code.FZRAPL: 0.5}
#: Ice-pellet depth per depth of melted water (from memory: pellets pack densely, about 2:1
#: to 3:1, far denser than snow).
PELLETS_TO_LIQUID_RATIO = 2.5


def _isin(codes, members) -> np.ndarray:
    return np.isin(np.asarray(codes), [int(c) for c in members])


def frost_point_c(dewpoint_c: ArrayLike) -> np.ndarray:
    """Frost point, degC: the temperature at which the air's vapour pressure saturates over ice.

    e = e_w(Td) (Alduchov & Eskridge 1996 over water), then the AERKi over-ice form
    inverted exactly: ``Tf = c x / (b - x)``, ``x = ln(e / a)``.  Above 0 degC the frost
    point is not defined; the dew point is returned there.
    """
    td = np.asarray(dewpoint_c, dtype=np.float64)
    e = saturation_vapor_pressure_hpa(td, "water")
    a, b, c = _AE_ICE
    with np.errstate(divide="ignore", invalid="ignore"):
        x = np.log(e / a)
        tf = c * x / (b - x)
    return np.where(td < 0.0, tf, td)


def freezing_on_road(codes: ArrayLike, road_surface_temperature_c: ArrayLike) -> np.ndarray:
    """True where a freezing type falls, or a liquid-bearing type falls on a road at or below
    0 degC."""
    road = np.asarray(road_surface_temperature_c, dtype=np.float64)
    cold_road = np.where(np.isfinite(road), road <= 0.0, False)
    return _isin(codes, FREEZING_CODES) | (_isin(codes, LIQUID_BEARING_CODES) & cold_road)


def freezing_on_road_probability(probabilities: ArrayLike,
                                 road_surface_temperature_c: ArrayLike) -> np.ndarray:
    """Probability of freezing precipitation on the road from per-code probabilities
    ``(n, len(Code))``.

    Sum of the freezing codes' probabilities, plus the liquid-bearing codes' where the
    road surface is at or below 0 degC.
    """
    prob = np.asarray(probabilities, dtype=np.float64)
    road = np.asarray(road_surface_temperature_c, dtype=np.float64)
    cold_road = np.where(np.isfinite(road), road <= 0.0, False)
    freezing = prob[:, [int(c) for c in FREEZING_CODES]].sum(axis=1)
    liquid = prob[:, [int(c) for c in LIQUID_BEARING_CODES]].sum(axis=1)
    return np.clip(freezing + np.where(cold_road, liquid, 0.0), 0.0, 1.0)


def frost_on_road(road_surface_temperature_c: ArrayLike, dewpoint_c: ArrayLike) -> np.ndarray:
    """Hoar-frost deposition: road surface <= 0 degC and below the air's frost point."""
    road = np.asarray(road_surface_temperature_c, dtype=np.float64)
    tf = frost_point_c(dewpoint_c)
    with np.errstate(invalid="ignore"):
        out = (road <= 0.0) & (road < tf)
    return np.where(np.isfinite(road) & np.isfinite(tf), out, False)


def liquid_water_content_g_m3(precipitation_rate_mm_h: ArrayLike) -> np.ndarray:
    """Liquid water content of rain, g m-3: W = 0.067 P**0.846 (Best; as used by Jones 1998)."""
    p = np.asarray(precipitation_rate_mm_h, dtype=np.float64)
    return LWC_COEFFICIENT * np.power(np.maximum(p, 0.0), LWC_EXPONENT)


def jones_radial_ice_mm(precipitation_rate_mm_h: ArrayLike, wind_speed_m_s: ArrayLike,
                        hours: ArrayLike = 1.0) -> np.ndarray:
    """Equivalent uniform radial ice on a horizontal cylinder over ``hours`` (Jones 1996/1998), mm.

    ``hours / (rho_i pi) * sqrt((P rho_o)**2 + (3.6 V W)**2)``; an unknown wind is
    taken as calm (the vertical-flux part alone, a lower value).
    """
    p = np.maximum(np.asarray(precipitation_rate_mm_h, dtype=np.float64), 0.0)
    v = np.asarray(wind_speed_m_s, dtype=np.float64)
    v = np.where(np.isfinite(v), np.maximum(v, 0.0), 0.0)
    w = liquid_water_content_g_m3(p)
    flux_mm_h = np.hypot(p * WATER_DENSITY_G_CM3, 3.6 * v * w)
    return np.asarray(hours, dtype=np.float64) * flux_mm_h / (GLAZE_DENSITY_G_CM3 * np.pi)


def flat_glaze_mm(precipitation_rate_mm_h: ArrayLike, hours: ArrayLike = 1.0) -> np.ndarray:
    """Glaze thickness on a flat horizontal surface, mm: ``P dt rho_w / rho_i`` (all water
    freezes)."""
    p = np.maximum(np.asarray(precipitation_rate_mm_h, dtype=np.float64), 0.0)
    return p * np.asarray(hours, dtype=np.float64) * WATER_DENSITY_G_CM3 / GLAZE_DENSITY_G_CM3


def step_hazards(codes: ArrayLike, probabilities: ArrayLike,
                 road_surface_temperature_c: ArrayLike, dewpoint_c: ArrayLike,
                 precipitation_rate_mm_h: ArrayLike, wind_speed_m_s: ArrayLike,
                 hours: ArrayLike) -> dict[str, np.ndarray]:
    """All hazards for ``n`` steps, each lasting ``hours`` (scalar or ``(n,)``).

    Returns ``(n,)`` arrays: ``freezing_on_road`` (bool), ``freezing_probability``,
    ``frost`` (bool), ``snow`` (bool), ``snow_probability``, ``snow_cm``, ``ice_pellets``
    (bool), ``ice_pellets_probability``, ``ice_pellets_cm``, ``ice_accretion_mm`` (Jones
    radial), ``flat_glaze_mm``; amounts are NaN where the precipitation rate is unknown and
    0 where the type does not produce them.
    """
    codes = np.asarray(codes)
    rate = np.asarray(precipitation_rate_mm_h, dtype=np.float64)
    freezing = _isin(codes, FREEZING_CODES)
    share = np.zeros(codes.shape)
    for code, s in SNOW_SHARE.items():
        share = np.where(codes == int(code), s, share)
    pellets = np.zeros(codes.shape)
    for code, s in PELLET_SHARE.items():
        pellets = np.where(codes == int(code), s, pellets)
    prob = np.asarray(probabilities, dtype=np.float64)
    snow_prob = (prob[:, int(Code.SN)] + SNOW_SHARE[Code.RASN] * prob[:, int(Code.RASN)])
    pellet_prob = sum(share_k * prob[:, int(code)] for code, share_k in PELLET_SHARE.items())
    return {
        "freezing_on_road": freezing_on_road(codes, road_surface_temperature_c),
        "freezing_probability": freezing_on_road_probability(prob, road_surface_temperature_c),
        "frost": frost_on_road(road_surface_temperature_c, dewpoint_c),
        "snow": _isin(codes, SNOW_CODES),
        "snow_probability": np.clip(snow_prob, 0.0, 1.0),
        # mm of water x ratio = mm of snow; / 10 for cm.
        "snow_cm": np.where(share > 0, rate * hours * share * SNOW_TO_LIQUID_RATIO / 10.0, 0.0),
        "ice_pellets": pellets > 0,
        "ice_pellets_probability": np.clip(pellet_prob, 0.0, 1.0),
        "ice_pellets_cm": np.where(pellets > 0,
                                   rate * hours * pellets * PELLETS_TO_LIQUID_RATIO / 10.0, 0.0),
        "ice_accretion_mm": np.where(freezing, jones_radial_ice_mm(rate, wind_speed_m_s, hours),
                                     0.0),
        "flat_glaze_mm": np.where(freezing_on_road(codes, road_surface_temperature_c),
                                  flat_glaze_mm(rate, hours), 0.0),
    }
