"""Generate the invented demo data of ptype: sites, a case library and a 24-hour storm series.

Everything written here is invented for demonstration: the region (the island of
Aldevorn, placed in open ocean on purpose so that no coordinate can be mistaken
for a real station), its road-weather sites and the storm of 27 January 2026.
No observation or model output went into it.

Run from the repository root::

    .venv/bin/python soundings_demo/make_demo.py            # rewrite soundings_demo/
    .venv/bin/python soundings_demo/make_demo.py --out DIR  # write elsewhere (tests)

Output is deterministic (no clock, no unseeded randomness, fixed number formatting),
so a regenerated tree is byte-identical to the committed one.

How a profile is drawn
----------------------
Temperature is given by a few knots in pressure and interpolated linearly in
ln p, the way a forecaster sketches a sounding on a thermodynamic diagram:
the surface, the base of a low-level inversion (the top of the cold air), the
warm nose (the top of the frontal inversion), 700 hPa, the tropopause and the
top.  Above 700 hPa the lapse is 50 K per unit ln p (6.5-7.5 K/km), below it
whatever the knots give; every profile is checked to be no steeper than the dry
adiabat (9.8 K/km).  Humidity is a dew-point depression: cloud layers are
saturated over water above -4 degC and tend to saturation over ice below about
-14 degC (the usual look of a mixed-phase cloud on a sounding); dry layers carry
depressions of 10-25 degC.  Heights are hydrostatic, integrated upward from the
station elevation with :func:`ptype.thermo.hypsometric_heights_m`.

The storm is a warm front crossing the island from the south-west: warm air
overruns the cold air near the ground, building a warm nose near 820-850 hPa
that strengthens through the day, while the cold surface layer slowly warms
and thins (first at the coast, last in the sheltered valley).  A dry slot
aloft ends the deep cloud in the evening and leaves low stratus behind.

Layer areas are Bourgouin's (2000) ``R_d * integral (T - T0) d ln p`` in J/kg,
computed with :func:`ptype.engine.layers.analyse_layers`; the script prints them for
every case so the design can be checked against the intended type.
"""

from __future__ import annotations

import argparse
import json
import math
import sys
import zlib
from datetime import UTC, datetime, timedelta
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
if str(HERE.parent) not in sys.path:  # allow running from a source checkout
    sys.path.insert(0, str(HERE.parent))

from ptype import thermo
from ptype.engine.layers import analyse_layers, cloud_mask, level_runs
from ptype.readers.temp_format import write_temp

# --- the invented region -------------------------------------------------------------------

REGION = {
    "name": "Aldevorn",
    "description": ("An invented island of moors, one mountain range and a sheltered central "
                    "valley, placed in open ocean so that its coordinates cannot be mistaken "
                    "for any real station. Everything about it is made up for the ptype demo."),
}

#: The road-weather sites.  ``temp_station`` is the invented five-digit number used in the
#: WMO TEMP copies; ``road_surface`` describes the pavement; the optional ``thresholds``
#: override the alert defaults of :mod:`ptype.roads.alerts.rules` for that site (bridge decks ice
#: first, so their freezing-precipitation alerts start at a lower probability; the pass is
#: ploughed at a lower snowfall rate).
SITES = [
    {"id": "korrim-pass", "name": "Korrim Pass", "latitude": 47.412, "longitude": -33.187,
     "elevation_m": 1380.0, "temp_station": "99911",
     "description": "Mountain pass on the trunk road over the Korrim range; exposed, "
                    "snow-prone, often in cloud.",
     "road_surface": "asphalt, exposed", "thresholds": {"snow_rate_mm_h": 0.5}},
    {"id": "drovan-junction", "name": "Drovan Plateau Junction", "latitude": 47.296,
     "longitude": -33.402, "elevation_m": 720.0, "temp_station": "99912",
     "description": "Junction on the open moorland plateau; deep cold air pools here "
                    "under a warm nose.",
     "road_surface": "asphalt"},
    {"id": "tessary-viaduct", "name": "Tessary Gorge Viaduct", "latitude": 47.233,
     "longitude": -33.561, "elevation_m": 390.0, "temp_station": "99913",
     "description": "Concrete viaduct over the Tessary gorge; the deck cools faster "
                    "than the approach roads.",
     "road_surface": "concrete bridge deck", "thresholds": {"freezing_probability": 0.2}},
    {"id": "ulmbrook-cutting", "name": "Ulmbrook Cutting", "latitude": 47.158,
     "longitude": -33.702, "elevation_m": 260.0, "temp_station": "99914",
     "description": "Motorway cutting in the rolling lowland east of the coast; shaded, "
                    "holds frost in the morning.",
     "road_surface": "asphalt, shaded"},
    {"id": "mistleby-bridge", "name": "Mistleby Valley Bridge", "latitude": 47.341,
     "longitude": -33.655, "elevation_m": 140.0, "temp_station": "99915",
     "description": "Bridge over the river in the enclosed Mistleby valley; cold air "
                    "drains into the valley and lingers long after the hills have thawed.",
     "road_surface": "steel-concrete bridge deck",
     "thresholds": {"freezing_probability": 0.2, "freezing_window_hours": 9.0}},
    {"id": "sennet-causeway", "name": "Sennet Causeway", "latitude": 47.021,
     "longitude": -33.948, "elevation_m": 4.0, "temp_station": "99916",
     "description": "Low causeway across the tidal flats on the south-west coast; "
                    "the sea keeps the surface air mild.",
     "road_surface": "asphalt on embankment"},
]
SITE_BY_ID = {s["id"]: s for s in SITES}

STORM_DAY = datetime(2026, 1, 27, tzinfo=UTC)
ISSUED = STORM_DAY  # the demo model run starts at 00 UTC
SERIES_HOURS = range(25)
CASE_SOURCE = "invented demo profile"
SERIES_SOURCE = "demo model run"

# --- vertical structure --------------------------------------------------------------------

#: Tropopause temperature, degC, and the lapses in K per unit ln p above and below 700 hPa.
T_TROPOPAUSE_C = -56.0
UPPER_LAPSE_K_PER_LNP = 50.0
MID_LAPSE_K_PER_LNP = 43.0
TOP_HPA = 200.0
#: WMO TEMP standard isobaric surfaces (FM 35 Part A) within the profile, hPa.
STANDARD_HPA = (1000, 925, 850, 700, 500, 400, 300, 250, 200)
DRY_ADIABATIC_K_PER_KM = 9.8


def pressure_levels(surface_hpa: float, standard_near_ground: bool = False) -> np.ndarray:
    """Levels: the surface, every 10 hPa up to 700 hPa (925 instead of 930 and 920), then every
    25 hPa to 300 hPa, then 250 and 200 hPa.  All whole hPa, so the TEMP copy needs no rounding."""
    grid = sorted((set(range(1000, 699, -10)) - {930, 920}) | {925} | set(range(675, 299, -25))
                  | {250, 200}, reverse=True)
    # With ``standard_near_ground`` the standard surfaces are kept even close to the ground,
    # as a TEMP report has them (so the TEMP copy carries exactly the same levels).
    keep = [p for p in grid if p <= surface_hpa - 8
            or (standard_near_ground and p in STANDARD_HPA and p < surface_hpa)]
    return np.array([float(surface_hpa)] + keep)


def temperature_profile(p: np.ndarray, prm: dict) -> np.ndarray:
    """Piecewise-linear temperature in ln p through the knots of ``prm`` (see module docstring).

    Knots: surface ``t_sfc``; top of the cold air ``ib_agl`` hPa above the surface at ``t_ib``;
    the warm nose ``t_nose`` at ``p_nose`` and, ``nose_depth`` hPa higher, the top of the
    frontal zone, cooler by 0.012 K per hPa (0.8 K over 70 hPa); then a moist lapse of 43 K per
    unit ln p (about 5.5 K/km) to 700 hPa and 50 K per unit ln p (6.5-7.5 K/km) to the
    tropopause.
    """
    p_top_nose = prm["p_nose"] - prm.get("nose_depth", 0.0)
    t_top_nose = prm["t_nose"] - 0.012 * prm.get("nose_depth", 0.0)
    t700 = t_top_nose - MID_LAPSE_K_PER_LNP * math.log(p_top_nose / 700.0)
    p_trop = 700.0 * math.exp((T_TROPOPAUSE_C - t700) / UPPER_LAPSE_K_PER_LNP)
    knots = [(p[0], prm["t_sfc"])]
    p_ib = p[0] - prm["ib_agl"]
    for pk, tk in ((p_ib, prm["t_ib"]), (prm["p_nose"], prm["t_nose"]), (p_top_nose, t_top_nose),
                   (700.0, t700), (p_trop, T_TROPOPAUSE_C), (TOP_HPA, T_TROPOPAUSE_C - 1.0)):
        if pk < knots[-1][0] - 4.0:
            knots.append((pk, tk))
    kp = np.array([k[0] for k in knots])
    kt = np.array([k[1] for k in knots])
    return np.interp(-np.log(p), -np.log(kp), kt)


def _ice_saturated_depression(t: np.ndarray) -> np.ndarray:
    """Dew-point depression (over water) of air saturated over ice at ``t`` < 0 degC."""
    td = thermo.dewpoint_from_vapor_pressure_c(thermo.saturation_vapor_pressure_hpa(t, "ice"))
    return np.maximum(t - td, 0.0)


def depression_profile(p: np.ndarray, t: np.ndarray, prm: dict) -> np.ndarray:
    """Dew-point depression per level from the cloud layer [cloud_top, cloud_base] of ``prm``."""
    cb = min(prm["cloud_base"], p[0] + 50.0)
    ct = prm["cloud_top"]
    # Mixed-phase cloud: water-saturated above -4 degC, tending to ice saturation below -14.
    frac_ice = np.clip((-t - 4.0) / 10.0, 0.0, 1.0)
    ice_dep = _ice_saturated_depression(np.minimum(t, 0.0))
    in_cloud = np.where(t > 0.0, 0.2, 0.3 + frac_ice * (ice_dep - 0.3))
    dep = np.full(p.shape, prm["dep_dry"])
    # Below cloud: sub-cloud depression, blending to the surface value over the lowest 30 hPa.
    below = p > cb
    w_sfc = np.clip(1.0 - (p[0] - p) / 30.0, 0.0, 1.0)
    sub = prm["dep_sub"] * (1.0 - w_sfc) + prm["dep_sfc"] * w_sfc
    dep = np.where(below, sub, dep)
    inside = (p <= cb) & (p >= ct)
    dep = np.where(inside, in_cloud, dep)
    # Above the top the air dries out over 30 hPa.
    ramp = np.clip((ct - p) / 30.0, 0.0, 1.0)
    above = p < ct
    dep = np.where(above, in_cloud + ramp * (prm["dep_dry"] - in_cloud), dep)
    if cb >= p[0]:  # cloud down to the ground: the surface value still applies
        dep[0] = min(dep[0], prm["dep_sfc"]) if not above[0] else dep[0]
    return dep


def quantize_temp_code(t: np.ndarray, dep: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Round to what WMO TEMP can carry: tenths with the sign on the parity of the tenths digit
    (even = 0 or above, odd = below 0), depression in tenths to 5.0 then whole degrees."""
    tenths = np.rint(np.abs(t) * 10.0).astype(int)
    neg = t < 0
    bump = np.where(neg, tenths % 2 == 0, tenths % 2 == 1)
    tenths = np.where(bump, tenths + 1, tenths)
    neg &= tenths > 0
    tq = np.where(neg, -tenths, tenths) / 10.0
    dq = np.where(dep < 5.05, np.rint(dep * 10.0) / 10.0, np.maximum(6.0, np.rint(dep)))
    return tq, dq


def _noise(key: str, n: int, scale: float) -> np.ndarray:
    """Small deterministic wiggles so profiles do not look machine-smooth (seeded by name)."""
    rng = np.random.default_rng(zlib.crc32(key.encode()))
    return rng.normal(0.0, scale, n)


def build_profile(site: dict, prm: dict, key: str,
                  temp_code: bool) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Arrays (p, z, t, td) for one profile."""
    p = pressure_levels(prm["p_sfc"], standard_near_ground=temp_code)
    t = temperature_profile(p, prm)
    # Wiggles only away from 0 degC and above 700 hPa, so no layer is invented.
    wiggle = _noise(key, p.size, 0.15)
    t = t + np.where((np.abs(t) > 2.0) & (p <= 700.0), wiggle, 0.0)
    dep = depression_profile(p, t, prm)
    dep = dep * (1.0 + np.where(dep > 6.0, 0.15 * _noise(key + "/q", p.size, 1.0), 0.0))
    if temp_code:
        t, dep = quantize_temp_code(t, dep)
    else:
        t = np.round(t, 1)
        dep = np.round(dep, 1)
    td = np.round(t - dep, 1)
    z = thermo.hypsometric_heights_m(p, t, td, site["elevation_m"])
    return p, np.round(z, 1), t, td


def check_physics(name: str, p: np.ndarray, z: np.ndarray, t: np.ndarray,
                  td: np.ndarray) -> None:
    """Refuse a profile that breaks the physical rules of the demo set."""
    if not 25 <= p.size <= 60:
        raise SystemExit(f"{name}: {p.size} levels; the demo wants 25-60")
    if np.any(td > t):
        raise SystemExit(f"{name}: dew point above temperature")
    if np.any(np.diff(p) >= 0) or np.any(np.diff(z) <= 0):
        raise SystemExit(f"{name}: levels not ordered")
    lapse = -np.diff(t) / (np.diff(z) / 1000.0)
    if lapse.max() > DRY_ADIABATIC_K_PER_KM:
        k = int(np.argmax(lapse))
        raise SystemExit(f"{name}: lapse {lapse[k]:.1f} K/km between {p[k]:g} and "
                         f"{p[k + 1]:g} hPa exceeds the dry adiabat")


# --- the storm: parameters by site and hour ------------------------------------------------

#: Regional evolution aloft (hours after 00 UTC on the storm day, at the coast).
#: p_nose/t_nose: top of the frontal inversion (the warm nose); nose_depth: depth of the
#: near-isothermal frontal zone above it, hPa; cloud_base/cloud_top: pressure bounds of the
#: deep cloud; dep_dry: dew-point depression of the dry air.
ALOFT = {
    0: {"p_nose": 850.0, "t_nose": -8.0, "nose_depth": 0.0, "cloud_base": 420.0, "cloud_top": 150.0,
        "dep_dry": 16.0},
    4: {"t_nose": -7.5, "cloud_top": 300.0},
    6: {"t_nose": -5.5, "cloud_base": 640.0, "cloud_top": 330.0},
    8: {"p_nose": 845.0, "t_nose": -2.5, "nose_depth": 20.0, "cloud_base": 1050.0,
        "cloud_top": 380.0},
    10: {"p_nose": 840.0, "t_nose": 0.8, "nose_depth": 50.0},
    12: {"p_nose": 835.0, "t_nose": 2.4, "nose_depth": 70.0},
    14: {"p_nose": 830.0, "t_nose": 4.2},
    16: {"t_nose": 5.8},
    18: {"t_nose": 6.5, "cloud_top": 400.0},
    20: {"cloud_top": 620.0, "dep_dry": 14.0},
    21: {"cloud_top": 820.0},
    22: {"cloud_top": 885.0},
    24: {"p_nose": 845.0, "t_nose": 6.0, "nose_depth": 60.0, "cloud_top": 900.0},
}

#: Sea-level pressure as the low approaches, hPa.
MSLP = {0: 1026.0, 6: 1021.0, 12: 1012.0, 18: 1004.0, 24: 1001.0}

#: Near-surface evolution by site.  t_sfc: surface (2 m) temperature; ib_agl/t_ib: depth in
#: hPa and temperature of the top of the cold air (base of the frontal or radiation
#: inversion); dep_sfc/dep_sub: surface and sub-cloud depressions; rate: precipitation,
#: mm/h; wind: m/s; road: road-surface minus air temperature (clear nights strongly negative).
#: ``shift`` delays the regional evolution aloft (hours); ``aloft`` adds site corrections.
LOW = {
    # The sea keeps the causeway mild: a shallow warm surface layer melts the snow early.
    "sennet-causeway": {"shift": -1.5, "aloft": {}, "knots": {
        0: {"t_sfc": 2.6, "ib_agl": 20.0, "t_ib": 3.2, "dep_sfc": 2.0, "dep_sub": 6.0, "rate": 0.0,
            "wind": 2.0, "road": -1.8},
        5: {"t_sfc": 2.0, "ib_agl": 20.0, "t_ib": 2.6, "dep_sfc": 1.8, "rate": 0.0, "wind": 4.0,
            "road": -1.2},
        6: {"t_sfc": 0.6, "ib_agl": 40.0, "t_ib": -2.0, "dep_sfc": 1.0, "dep_sub": 3.0, "rate": 0.4,
            "wind": 7.0, "road": -0.2},
        7: {"t_sfc": 1.8, "ib_agl": 45.0, "t_ib": -0.8, "dep_sfc": 1.0, "dep_sub": 1.5, "rate": 1.2,
            "wind": 9.0, "road": 0.0},
        9: {"t_sfc": 3.8, "ib_agl": 35.0, "t_ib": 1.5, "dep_sfc": 0.6, "rate": 2.2, "wind": 12.0,
            "road": 0.3},
        12: {"t_sfc": 6.0, "ib_agl": 30.0, "t_ib": 4.5, "dep_sfc": 0.5, "rate": 3.0, "wind": 15.0},
        18: {"t_sfc": 7.5, "ib_agl": 30.0, "t_ib": 6.0, "rate": 2.5, "wind": 16.0},
        20: {"rate": 1.0, "dep_sub": 1.0},
        22: {"t_sfc": 7.2, "rate": 0.3, "wind": 13.0},
        24: {"t_sfc": 7.0, "ib_agl": 30.0, "t_ib": 5.5, "dep_sfc": 0.5, "dep_sub": 0.8, "rate": 0.2,
             "wind": 11.0, "road": 0.3},
    }},
    # Cold air drains into the enclosed valley and stays: hours of freezing rain, then
    # freezing drizzle from stratus trapped in the cold pool under the dry slot.
    "mistleby-bridge": {"shift": 0.0, "aloft": {}, "knots": {
        0: {"t_sfc": -4.5, "ib_agl": 30.0, "t_ib": -1.5, "dep_sfc": 2.0, "dep_sub": 8.0,
            "rate": 0.0, "wind": 0.5, "road": -3.4},
        5: {"t_sfc": -6.0, "ib_agl": 35.0, "t_ib": -2.5, "dep_sfc": 2.0, "rate": 0.0, "wind": 0.5,
            "road": -3.6},
        7: {"t_sfc": -5.5, "ib_agl": 80.0, "t_ib": -9.0, "dep_sfc": 1.5, "dep_sub": 3.0,
            "rate": 0.0, "wind": 1.5, "road": -1.5},
        8: {"t_sfc": -5.0, "ib_agl": 85.0, "t_ib": -9.5, "dep_sfc": 1.0, "dep_sub": 1.5,
            "rate": 0.8, "wind": 2.0, "road": -0.5},
        12: {"t_sfc": -4.5, "ib_agl": 80.0, "t_ib": -9.0, "rate": 1.5, "wind": 3.0, "road": -0.3},
        14: {"t_sfc": -3.2, "ib_agl": 60.0, "t_ib": -3.8, "rate": 2.0},
        16: {"t_sfc": -2.4, "ib_agl": 45.0, "t_ib": -2.8, "rate": 2.4, "wind": 3.5, "road": -0.2},
        19: {"t_sfc": -1.6, "ib_agl": 35.0, "t_ib": -1.8, "rate": 2.0},
        21: {"t_sfc": -1.2, "ib_agl": 30.0, "t_ib": -1.4, "rate": 0.6, "dep_sub": 0.8},
        22: {"rate": 0.3},
        24: {"t_sfc": -0.8, "ib_agl": 30.0, "t_ib": -1.0, "dep_sfc": 0.4, "dep_sub": 0.6,
             "rate": 0.2, "wind": 3.0, "road": -0.1},
    }},
    "ulmbrook-cutting": {"shift": 0.0, "aloft": {}, "knots": {
        0: {"t_sfc": -3.0, "ib_agl": 25.0, "t_ib": -0.8, "dep_sfc": 1.8, "dep_sub": 8.0,
            "rate": 0.0, "wind": 1.0, "road": -3.0},
        5: {"t_sfc": -4.0, "ib_agl": 30.0, "t_ib": -1.5, "dep_sfc": 1.8, "rate": 0.0, "wind": 1.0,
            "road": -3.0},
        7: {"t_sfc": -3.8, "ib_agl": 70.0, "t_ib": -8.5, "dep_sfc": 1.5, "dep_sub": 3.0,
            "rate": 0.0, "wind": 3.0, "road": -1.0},
        8: {"t_sfc": -3.6, "ib_agl": 75.0, "t_ib": -8.8, "dep_sfc": 1.0, "dep_sub": 1.5,
            "rate": 1.0, "wind": 4.0, "road": -0.3},
        12: {"t_sfc": -3.0, "ib_agl": 70.0, "t_ib": -8.2, "rate": 1.8, "wind": 6.0, "road": 0.0},
        14: {"t_sfc": -1.6, "ib_agl": 45.0, "t_ib": -2.2, "rate": 2.2, "wind": 7.0},
        15: {"t_sfc": -0.8, "ib_agl": 35.0, "t_ib": -1.2, "rate": 2.5, "wind": 8.0, "road": 0.2},
        16: {"t_sfc": 1.0, "ib_agl": 30.0, "t_ib": 0.6, "rate": 2.5},
        18: {"t_sfc": 3.5, "ib_agl": 30.0, "t_ib": 3.2, "rate": 2.0, "wind": 9.0},
        20: {"rate": 0.8, "dep_sub": 0.8},
        22: {"t_sfc": 4.0, "rate": 0.3},
        24: {"t_sfc": 4.2, "ib_agl": 30.0, "t_ib": 4.0, "dep_sfc": 0.5, "dep_sub": 0.6, "rate": 0.2,
             "wind": 7.0, "road": 0.4},
    }},
    "tessary-viaduct": {"shift": 0.5, "aloft": {}, "knots": {
        0: {"t_sfc": -3.5, "ib_agl": 25.0, "t_ib": -1.2, "dep_sfc": 2.0, "dep_sub": 9.0,
            "rate": 0.0, "wind": 1.5, "road": -3.4},
        5: {"t_sfc": -4.5, "ib_agl": 30.0, "t_ib": -2.0, "dep_sfc": 2.0, "rate": 0.0, "wind": 1.5,
            "road": -3.6},
        7: {"t_sfc": -4.2, "ib_agl": 65.0, "t_ib": -8.5, "dep_sfc": 1.5, "dep_sub": 3.0,
            "rate": 0.0, "wind": 3.0, "road": -1.5},
        8: {"t_sfc": -4.0, "ib_agl": 70.0, "t_ib": -8.8, "dep_sfc": 1.0, "dep_sub": 1.5,
            "rate": 0.9, "wind": 5.0, "road": -0.6},
        12.5: {"t_sfc": -3.4, "ib_agl": 65.0, "t_ib": -8.4, "dep_sfc": 0.8, "rate": 1.8,
               "wind": 7.0, "road": -0.3},
        14.5: {"t_sfc": -1.8, "ib_agl": 40.0, "t_ib": -2.2, "rate": 2.2, "wind": 8.0},
        16: {"t_sfc": -0.6, "ib_agl": 30.0, "t_ib": -1.0, "rate": 2.4, "wind": 9.0, "road": -0.1},
        17: {"t_sfc": 1.2, "ib_agl": 30.0, "t_ib": 0.8, "rate": 2.4},
        19: {"t_sfc": 3.0, "ib_agl": 30.0, "t_ib": 3.0, "rate": 1.8, "wind": 10.0, "road": 0.3},
        21: {"rate": 0.6, "dep_sub": 0.8},
        24: {"t_sfc": 3.5, "ib_agl": 30.0, "t_ib": 3.6, "dep_sfc": 0.5, "dep_sub": 0.6, "rate": 0.2,
             "wind": 8.0},
    }},
    # The open plateau holds a deep, very cold layer under the nose: the longest ice-pellet spell.
    "drovan-junction": {"shift": 1.0, "aloft": {}, "knots": {
        0: {"t_sfc": -6.0, "ib_agl": 20.0, "t_ib": -4.0, "dep_sfc": 2.0, "dep_sub": 10.0,
            "rate": 0.0, "wind": 2.0, "road": -3.0},
        5: {"t_sfc": -7.0, "ib_agl": 25.0, "t_ib": -5.0, "dep_sfc": 2.0, "rate": 0.0, "wind": 2.0,
            "road": -3.2},
        7: {"t_sfc": -7.0, "ib_agl": 40.0, "t_ib": -9.5, "dep_sfc": 1.5, "dep_sub": 3.0,
            "rate": 0.0, "wind": 5.0, "road": -1.2},
        8: {"t_sfc": -7.0, "ib_agl": 45.0, "t_ib": -10.0, "dep_sfc": 1.0, "dep_sub": 1.5,
            "rate": 1.0, "wind": 7.0, "road": -0.5},
        15: {"t_sfc": -6.0, "ib_agl": 45.0, "t_ib": -9.5, "dep_sfc": 0.8, "rate": 1.6, "wind": 10.0,
             "road": -0.3},
        17: {"t_sfc": -2.8, "ib_agl": 25.0, "t_ib": -3.2, "rate": 2.0, "wind": 11.0},
        19.5: {"t_sfc": -0.8, "ib_agl": 20.0, "t_ib": -1.0, "rate": 2.0, "wind": 12.0,
               "road": -0.1},
        20.5: {"t_sfc": 1.2, "ib_agl": 20.0, "t_ib": 1.4, "rate": 1.5, "dep_sub": 0.8},
        22: {"t_sfc": 2.5, "t_ib": 2.8, "rate": 0.4},
        24: {"t_sfc": 3.0, "ib_agl": 20.0, "t_ib": 3.2, "dep_sfc": 0.5, "dep_sub": 0.6, "rate": 0.1,
             "wind": 11.0, "road": 0.3},
    }},
    # The pass sits near 860 hPa.  Upslope flow keeps it cold: the nose arrives later, weaker
    # and higher there, so snow lasts longest and then turns to ice pellets; the deep cloud
    # over the range outlasts the dry slot.
    "korrim-pass": {"shift": 3.0, "aloft": {
        0: {"dt_nose": 0.0, "p_nose": 800.0, "nose_depth": 0.0, "cloud_top": 150.0},
        6: {"cloud_top": 330.0},
        9: {"cloud_top": 380.0},
        10: {"dt_nose": -2.5, "p_nose": 790.0},
        16: {"dt_nose": -4.0, "p_nose": 790.0, "nose_depth": 30.0},
        24: {"dt_nose": -4.0, "p_nose": 790.0, "nose_depth": 30.0, "cloud_top": 400.0},
    }, "knots": {
        0: {"t_sfc": -9.0, "ib_agl": 15.0, "t_ib": -8.0, "dep_sfc": 2.5, "dep_sub": 12.0,
            "rate": 0.0, "wind": 6.0, "road": -2.0},
        5: {"t_sfc": -9.5, "ib_agl": 15.0, "t_ib": -8.5, "dep_sfc": 2.0, "rate": 0.0, "wind": 7.0,
            "road": -2.2},
        6: {"t_sfc": -9.0, "ib_agl": 20.0, "t_ib": -9.5, "dep_sfc": 0.5, "dep_sub": 1.0,
            "rate": 0.6, "wind": 10.0, "road": -0.6},
        12: {"t_sfc": -7.5, "ib_agl": 20.0, "t_ib": -8.0, "rate": 2.0, "wind": 16.0, "road": -0.4},
        18: {"t_sfc": -6.5, "ib_agl": 30.0, "t_ib": -8.0, "rate": 2.2, "wind": 18.0},
        24: {"t_sfc": -5.5, "ib_agl": 30.0, "t_ib": -7.0, "dep_sfc": 0.5, "dep_sub": 1.0,
             "rate": 1.0, "wind": 15.0, "road": -0.2},
    }},
}


def _interp_knots(knots: dict, hour: float) -> dict:
    """Each field interpolated linearly in time over the knots that define it (held at the ends)."""
    fields = sorted({k for v in knots.values() for k in v})
    out = {}
    for name in fields:
        hs = [h for h in sorted(knots) if name in knots[h]]
        vs = [knots[h][name] for h in hs]
        out[name] = float(np.interp(hour, hs, vs))
    return out


def station_pressure_hpa(mslp_hpa: float, elevation_m: float, t_sfc_c: float) -> float:
    """Hypsometric reduction from sea level with a standard-atmosphere lapse in the column."""
    t_mean_k = t_sfc_c + 273.15 + 0.0065 * elevation_m / 2.0
    return mslp_hpa * math.exp(-9.80665 * elevation_m / (287.04 * t_mean_k))


def series_params(site_id: str, hour: float) -> dict:
    """All profile parameters for one site at one hour after 00 UTC."""
    spec = LOW[site_id]
    site = SITE_BY_ID[site_id]
    prm = _interp_knots(ALOFT, hour - spec["shift"])
    low = _interp_knots(spec["knots"], hour)
    prm.update({k: v for k, v in low.items()})
    if spec["aloft"]:
        corr = _interp_knots(spec["aloft"], hour)
        prm["t_nose"] += corr.pop("dt_nose", 0.0)
        prm.update(corr)
    mslp = float(np.interp(hour, sorted(MSLP), [MSLP[h] for h in sorted(MSLP)]))
    prm["p_sfc"] = float(round(station_pressure_hpa(mslp, site["elevation_m"], prm["t_sfc"])))
    if prm["rate"] <= 0.05:
        prm["rate"] = 0.0
    return prm


# --- the case library ----------------------------------------------------------------------

#: Single soundings sampled from the storm at the hours that show each type best, some with
#: small corrections (an observed sounding is never exactly the forecast).  ``design`` is the
#: type the case was drawn to show (two codes for a marginal case: either is defensible);
#: ``formats`` the copies written besides JSON.  Hour -6 is the evening before the storm.
CASES = [
    {"site": "korrim-pass", "hour": 10, "design": "SN", "formats": ("csv", "temp"),
     "note": "dry snow: whole column below 0 degC, deep cloud with its top near -40 degC",
     "set": {}},
    {"site": "mistleby-bridge", "hour": 9, "design": "SN",
     "note": "snow into the valley cold pool before the warm nose arrives", "set": {}},
    {"site": "sennet-causeway", "hour": 12, "design": "RA",
     "note": "rain: mild sea air, 0 degC level well above 1 km", "set": {}},
    {"site": "sennet-causeway", "hour": 7, "design": "RASN",
     "note": "rain and snow: surface +1.8 degC, 0 degC level about 250 m up "
             "(surface warm area between 5.6 and 13.2 J/kg)", "set": {}},
    {"site": "drovan-junction", "hour": 13, "design": "PL", "formats": ("csv", "temp"),
     "note": "ice pellets: frontal warm zone near +2 degC (50-150 J/kg) over a deep plateau "
             "cold layer below -9 degC", "set": {}},
    {"site": "mistleby-bridge", "hour": 16, "design": "FZRA", "formats": ("csv", "temp"),
     "note": "freezing rain: warm nose near +6 degC over a shallow valley cold pool of -2 degC",
     "set": {"p_nose": 880.0, "ib_agl": 25.0, "t_ib": -2.4}},
    {"site": "mistleby-bridge", "hour": 22, "design": "FZDZ",
     "note": "freezing drizzle: dry slot aloft, stratus left in the cold pool, no ice in the "
             "cloud", "set": {}},
    {"site": "ulmbrook-cutting", "hour": -6, "design": "FZDZ",
     "note": "freezing drizzle the evening before: stratus topped near -5 degC under a dry "
             "inversion, no warm layer, no ice",
     "set": {"t_sfc": -1.8, "ib_agl": 60.0, "t_ib": -5.0, "p_nose": 914.0, "t_nose": -2.0,
             "nose_depth": 0.0, "cloud_base": 1050.0, "cloud_top": 936.0, "dep_sfc": 0.3,
             "dep_sub": 0.3, "dep_dry": 18.0, "rate": 0.2, "wind": 2.0, "road": -0.6}},
    {"site": "ulmbrook-cutting", "hour": 23, "design": "DZ",
     "note": "drizzle: warm stratus under the dry slot, surface +4 degC", "set": {}},
    {"site": "drovan-junction", "hour": 18, "design": "FZRA",
     "note": "freezing rain on the plateau once the cold layer has thinned", "set": {}},
    {"site": "korrim-pass", "hour": 20, "design": "SN PL",
     "note": "marginal: weak warm nose (under +1 degC) above the pass; snow or ice pellets",
     "set": {"t_nose": 0.7, "nose_depth": 20.0}},
    {"site": "tessary-viaduct", "hour": 13, "design": "FZRAPL PL FZRA",
     "note": "marginal: +3 degC nose over a -6 degC cold layer, between the ice-pellet and "
             "freezing-rain lines (a cold layer warmer than about -8 degC may leave melted "
             "drops liquid)", "set": {"t_nose": 3.0, "t_ib": -5.8, "ib_agl": 55.0}},
    {"site": "ulmbrook-cutting", "hour": 16, "design": "RA FZRA",
     "note": "marginal: surface just above 0 degC under a strong warm nose; rain or freezing "
             "rain",
     "set": {"t_sfc": 0.6, "t_ib": 0.4}},
    {"site": "tessary-viaduct", "hour": 17, "design": "RAPL RA",
     "note": "marginal: warm surface layer under a cold layer and a warm nose; rain with ice "
             "pellets",
     "set": {"t_sfc": 2.0, "ib_agl": 110.0, "t_ib": -5.5, "t_nose": 2.5, "p_nose": 820.0,
             "nose_depth": 40.0}},
]


# --- documents and writers -----------------------------------------------------------------

def _iso(t: datetime) -> str:
    return t.strftime("%Y-%m-%dT%H:%M:%SZ")


def _stamp(t: datetime) -> str:
    return t.strftime("%Y%m%dT%H%M")


def make_document(site: dict, valid: datetime, prm: dict, source: str, key: str,
                  temp_code: bool) -> dict:
    """The JSON profile document of one designed profile (physics checked)."""
    p, z, t, td = build_profile(site, prm, key, temp_code)
    check_physics(key, p, z, t, td)
    road = round(float(t[0]) + prm["road"], 1)
    return {
        "site": {"id": site["id"], "name": site["name"], "latitude": site["latitude"],
                 "longitude": site["longitude"], "elevation_m": site["elevation_m"]},
        "valid_time": _iso(valid),
        "source": source,
        "levels": [{"pressure_hpa": float(p[k]), "height_m": float(z[k]),
                    "temperature_c": float(t[k]), "dewpoint_c": float(td[k])}
                   for k in range(p.size)],
        "surface": {"temperature_2m_c": float(t[0]), "dewpoint_2m_c": float(td[0]),
                    "road_surface_temperature_c": road,
                    "precipitation_rate_mm_h": round(prm["rate"], 1),
                    "wind_speed_m_s": round(prm["wind"], 1),
                    "elevation_m": site["elevation_m"]},
    }


def _num(x: float) -> str:
    return json.dumps(round(float(x), 3))


def dumps_document(doc: dict) -> str:
    """JSON with one level per line: readable and compact, identical on every run."""
    lines = ["{"]
    lines.append(f'  "site": {json.dumps(doc["site"])},')
    lines.append(f'  "valid_time": {json.dumps(doc["valid_time"])},')
    lines.append(f'  "source": {json.dumps(doc["source"])},')
    lines.append('  "levels": [')
    rows = [("    {" + ", ".join(f'"{k}": {_num(v)}' for k, v in lvl.items()) + "}")
            for lvl in doc["levels"]]
    lines.append(",\n".join(rows))
    lines.append("  ],")
    lines.append(f'  "surface": {json.dumps(doc["surface"])}')
    lines.append("}")
    return "\n".join(lines) + "\n"


def dumps_csv(doc: dict) -> str:
    """The CSV form of :mod:`ptype.readers.csv_format`: ``#`` metadata, then a header."""
    s = doc["site"]
    out = ["# ptype demo profile (invented data, see soundings_demo/README.md)",
           f"# site_id: {s['id']}", f"# site_name: {s['name']}",
           f"# latitude: {s['latitude']}", f"# longitude: {s['longitude']}",
           f"# elevation_m: {s['elevation_m']}", f"# valid_time: {doc['valid_time']}",
           f"# source: {doc['source']}"]
    for k, v in doc["surface"].items():
        out.append(f"# surface.{k}: {v}")
    out.append("pressure_hpa,height_m,temperature_c,dewpoint_c")
    for lvl in doc["levels"]:
        out.append(",".join(f"{lvl[k]:g}" for k in ("pressure_hpa", "height_m", "temperature_c",
                                                     "dewpoint_c")))
    return "\n".join(out) + "\n"


def design_summary(doc: dict) -> dict:
    """Layer areas (Bourgouin 2000, J/kg) and cloud facts of one document, for the table."""
    p = np.array([[lv["pressure_hpa"] for lv in doc["levels"]]])
    z = np.array([[lv["height_m"] for lv in doc["levels"]]])
    t = np.array([[lv["temperature_c"] for lv in doc["levels"]]])
    td = np.array([[lv["dewpoint_c"] for lv in doc["levels"]]])
    lay = analyse_layers(p, z, t)
    layers = [{"kind": int(lay.kind[0, k]), "area": float(lay.area_j_kg[0, k]),
                   "extreme": float(lay.extreme_c[0, k]), "bottom": float(lay.bottom_m[0, k]),
                   "top": float(lay.top_m[0, k])} for k in range(int(lay.count[0]))]
    surface_warm = layers[0]["area"] if layers and layers[0]["kind"] > 0 else 0.0
    aloft = [lv for lv in layers[1:] if lv["kind"] > 0]
    warm_aloft = sum(lv["area"] for lv in aloft)
    nose = max((lv["extreme"] for lv in aloft), default=float("nan"))
    # Cold area below the highest warm layer aloft (Bourgouin's NA).
    cold_below = 0.0
    if aloft:
        top_warm = max(i for i, lv in enumerate(layers) if lv["kind"] > 0)
        cold_below = sum(lv["area"] for lv in layers[:top_warm] if lv["kind"] < 0)
    clouds = level_runs(cloud_mask(t, td), p, z, t)
    n_cloud = int(clouds.count[0])
    top_c = float(clouds.min_temperature_c[0, n_cloud - 1]) if n_cloud else float("nan")
    top_hpa = float(clouds.top_hpa[0, n_cloud - 1]) if n_cloud else float("nan")
    return {"t_sfc": float(t[0, 0]), "surface_warm": surface_warm, "warm_aloft": warm_aloft,
            "nose": nose, "cold_below": cold_below, "cloud_top_hpa": top_hpa,
            "cloud_min_c": top_c, "n_levels": int(p.shape[1])}


def available_methods() -> tuple[str, ...] | None:
    """Names of the diagnosis methods importable here (None without the diagnosis engine)."""
    import importlib
    try:
        from ptype.engine.methods import METHOD_NAMES
        importlib.import_module("ptype.engine.diagnosis")
    except ImportError:
        return None
    names = []
    for name in METHOD_NAMES:
        try:
            importlib.import_module(f"ptype.engine.methods.{name}")
        except ImportError:
            continue
        names.append(name)
    return tuple(names)


def _diagnose(doc: dict) -> str:
    """The ptype consensus for a document, when the diagnosis engine is installed."""
    methods = available_methods()
    if not methods:
        return "-"
    from ptype.engine.diagnosis import diagnose
    return diagnose(doc, members=0, seed=0, methods=methods).ptype


def format_row(label: str, s: dict, design: str, diag: str) -> str:
    """One line of the design table printed while generating."""
    design = design.replace(" ", "/")
    def f(x, w=6, d=1):
        return f"{x:{w}.{d}f}" if math.isfinite(x) else " " * (w - 1) + "-"
    return (f"{label:34s} {design:7s} {diag:7s} {f(s['t_sfc'], 5)} {f(s['surface_warm'])} "
            f"{f(s['warm_aloft'])} {f(s['nose'], 5)} {f(s['cold_below'])} "
            f"{f(s['cloud_top_hpa'], 5, 0)} {f(s['cloud_min_c'], 6)} {s['n_levels']:3d}")


TABLE_HEAD = (f"{'profile':34s} {'design':7s} {'ptype':7s} {'Tsfc':>5s} {'PAsfc':>6s} {'PA':>6s} "
              f"{'nose':>5s} {'NA':>6s} {'ctop':>5s} {'cmin':>6s} {'lev':>3s}\n"
              + " " * 51 + "(areas in J/kg, Bourgouin 2000; cloud top in hPa and degC)")


# --- design check -------------------------------------------------------------------------

#: Bourgouin (2000) limits, J/kg (as summarised in the methods brief, section 1): weak warm
#: layers aloft are ignored below 2; a surface warm layer melts snow partly from 5.6 and
#: completely above 13.2; refreezing lines NA = 66 + 0.66 PA (ice pellets above) and
#: NA = 46 + 0.66 PA (freezing rain below).
WEAK_WARM_J_KG = 2.0
SURFACE_MIX_J_KG = (5.6, 13.2)
#: A cloud whose coldest temperature is above this makes no ice (drizzle), degC
#: (about -10 degC: NWS ice-nucleation guidance in the methods brief, section 6).
NO_ICE_ABOVE_C = -10.0


def design_type(s: dict, rate_mm_h: float) -> str:
    """The type a drawn profile shows by Bourgouin's areas plus a cloud-ice check.

    Only used to label and check the demo design (the table, the manifest timeline); the
    diagnosis itself is :func:`ptype.diagnose`.
    """
    if rate_mm_h <= 0.0 or not math.isfinite(s["cloud_min_c"]):
        return "NONE"
    if s["cloud_min_c"] > NO_ICE_ABOVE_C:
        return "FZDZ" if s["t_sfc"] <= 0.0 else "DZ"
    lo, hi = SURFACE_MIX_J_KG
    pa, na, pas = s["warm_aloft"], s["cold_below"], s["surface_warm"]

    def by_surface(frozen: str, mix: str) -> str:
        return frozen if pas < lo else ("RA" if pas > hi else mix)

    if pa < WEAK_WARM_J_KG:
        return by_surface("SN", "RASN")
    if na > 66.0 + 0.66 * pa:
        return by_surface("PL", "RAPL")
    if na < 46.0 + 0.66 * pa:
        return "FZRA" if s["t_sfc"] < 0.0 else "RA"
    return "FZRAPL" if s["t_sfc"] < 0.0 else "RAPL"


# --- main ---------------------------------------------------------------------------------

def write_text(path: Path, text: str) -> None:
    """Write UTF-8 text with LF line ends, creating the folder."""
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(text, encoding="utf-8", newline="\n")


def generate(out: Path, quiet: bool = False, diagnose: bool = False) -> list[str]:
    """Write the whole demo tree under ``out``; returns the table lines."""
    table = [TABLE_HEAD]

    def say(line: str) -> None:
        table.append(line)
        if not quiet:
            print(line)

    if not quiet:
        print(TABLE_HEAD)
    sites_doc = {"region": REGION, "note": "All sites are invented for the ptype demo.",
                 "sites": SITES}
    write_text(out / "sites.json", json.dumps(sites_doc, indent=2) + "\n")

    say("-- case library (soundings_demo/json, csv, temp)")
    for case in CASES:
        site = SITE_BY_ID[case["site"]]
        valid = STORM_DAY + timedelta(hours=case["hour"])
        prm = series_params(case["site"], case["hour"])
        prm.update(case["set"])
        name = f"{site['id']}_{_stamp(valid)}"
        doc = make_document(site, valid, prm, CASE_SOURCE, name, temp_code=True)
        write_text(out / "json" / f"{name}.json", dumps_document(doc))
        if "csv" in case.get("formats", ()):
            write_text(out / "csv" / f"{name}.csv", dumps_csv(doc))
        if "temp" in case.get("formats", ()):
            temp = write_temp(doc, station=site["temp_station"], day=valid.day, hour=valid.hour)
            write_text(out / "temp" / f"{name}.txt", temp)
        s = design_summary(doc)
        check = design_type(s, prm["rate"])
        mark = "" if check in case["design"].split() else f"  <- drawn as {check}"
        say(format_row(name, s, case["design"], _diagnose(doc) if diagnose else "-") + mark)

    manifest = {"issued_time": _iso(ISSUED), "source": SERIES_SOURCE,
                "note": ("Invented forecast of an invented storm, for the ptype demo only. "
                         "File paths are relative to this manifest; 'design' is the type each "
                         "profile was drawn to show (Bourgouin areas plus a cloud-ice check)."),
                "sites": {}}
    for site in SITES:
        say(f"-- series {site['id']}")
        files, timeline = [], []
        for hour in SERIES_HOURS:
            valid = ISSUED + timedelta(hours=hour)
            prm = series_params(site["id"], hour)
            doc = make_document(site, valid, prm, SERIES_SOURCE, f"{site['id']}/{hour}",
                                temp_code=False)
            rel = f"{site['id']}/{valid.strftime('%Y%m%dT%H%MZ')}.json"  # relative to the manifest
            write_text(out / "series" / rel, dumps_document(doc))
            files.append(rel)
            s = design_summary(doc)
            design = design_type(s, prm["rate"])
            timeline.append({"valid_time": _iso(valid), "file": rel, "design": design})
            say(format_row(f"  +{hour:02d}h {valid:%H}Z", s, design,
                           _diagnose(doc) if diagnose else "-"))
        manifest["sites"][site["id"]] = {"files": files, "timeline": timeline}
    write_text(out / "series" / "manifest.json", json.dumps(manifest, indent=2) + "\n")
    return table


def main(argv: list[str] | None = None) -> int:
    """Generate the demo tree (see the module docstring); exit status."""
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--out", type=Path, default=HERE, help="output directory (default: here)")
    parser.add_argument("--quiet", action="store_true", help="do not print the design table")
    parser.add_argument("--diagnose", action="store_true",
                        help="add the ptype consensus to the table (needs ptype.engine.diagnosis)")
    args = parser.parse_args(argv)
    generate(args.out, quiet=args.quiet, diagnose=args.diagnose)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
