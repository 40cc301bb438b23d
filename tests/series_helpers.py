"""Synthetic profile series for the timeline, alert and API tests (made up, no real place)."""

from datetime import UTC, datetime, timedelta

import numpy as np

T0 = datetime(2026, 1, 27, 0, 0, tzinfo=UTC)
PRESSURES = np.array([1000, 975, 950, 925, 900, 875, 850, 825, 800, 750, 700, 600, 500])


def profile_doc(valid_time, *, sfc_c=-3.0, nose_c=0.0, rate=1.0, road=-2.0, wind=6.0,
                dry_below_hpa=None):
    """A column cooling 6.5 K/km with a Gaussian warm nose (peak ``nose_c`` K) near 860 hPa."""
    z_km = 7.29 * np.log(1000.0 / PRESSURES)
    temp = sfc_c - 6.5 * z_km + nose_c * np.exp(-((PRESSURES - 860.0) / 45.0) ** 2)
    dep = np.full(PRESSURES.shape, 0.5)
    if dry_below_hpa is not None:
        dep = np.where(PRESSURES > dry_below_hpa, 8.0, 0.5)
    levels = [{"pressure_hpa": float(p), "temperature_c": round(float(t), 2),
               "dewpoint_c": round(float(t - d), 2)} for p, t, d in zip(PRESSURES, temp, dep)]
    surface = {"road_surface_temperature_c": road, "wind_speed_m_s": wind}
    if rate is not None:
        surface["precipitation_rate_mm_h"] = rate
    return {"valid_time": valid_time.strftime("%Y-%m-%dT%H:%M:%SZ"),
            "site": {"elevation_m": 100.0}, "levels": levels, "surface": surface}


def storm_docs():
    """Snow, then a strengthening warm nose (ice pellets, freezing rain), then rain at a thaw."""
    plan = [(0, 0, -3, 1.0, -2), (2, 12, -3, 1.5, -2), (4, 16, -2, 2.0, -1.5), (6, 18, 2, 2.0, 1.0)]
    return [profile_doc(T0 + timedelta(hours=h), sfc_c=s, nose_c=n, rate=r, road=rd)
            for h, n, s, r, rd in plan]
