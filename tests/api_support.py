"""Invented test soundings and helpers shared by the HTTP tests (test_api_*, test_server,
test_browser, test_schemathesis).

The soundings are invented for the tests (fictional site); what they should give is stated
beside each with the published rule that decides it.
"""

from __future__ import annotations

import math
import socket
import sqlite3
from pathlib import Path

import numpy as np


def _levels(knots_p, knots_t, depression, n_levels, p_top=300.0, p_bottom=None):
    """``n_levels`` levels from ``p_bottom`` to ``p_top``, temperature interpolated linearly in
    ln p between knots (pressure, degC), dew point = temperature - depression(p)."""
    p_bottom = p_bottom or knots_p[0]
    p = np.exp(np.linspace(math.log(p_bottom), math.log(p_top), n_levels))
    t = np.interp(-np.log(p), -np.log(np.asarray(knots_p, float)), np.asarray(knots_t, float))
    return [{"pressure_hpa": round(float(pi), 1), "temperature_c": round(float(ti), 2),
             "dewpoint_c": round(float(ti - depression(pi)), 2)} for pi, ti in zip(p, t)]


def freezing_rain_document(n_levels: int = 60) -> dict:
    """A classic freezing-rain sounding: saturated, a warm nose of about +5 degC near 850 hPa
    over a 1 km deep surface cold layer of about -4 degC, cloud top near -20 degC.

    Expected type: FZRA.  Bourgouin (2000, Wea. Forecasting 15, 583-592): a warm area aloft
    well above 13.2 J/kg melts snow fully, and a refreezing area below
    NA = 46 + 0.66 PA leaves the drops liquid; a surface below 0 degC makes them freeze on
    contact.
    """
    knots_p = [1000, 930, 850, 780, 700, 500, 300]
    knots_t = [-4.0, -1.0, 5.5, 0.0, -5.0, -21.0, -45.0]
    return {"site": {"id": "T-FZ", "name": "Gullmere Flats (invented)", "elevation_m": 110},
            "valid_time": "2026-01-20T06:00Z", "source": "invented test sounding",
            "levels": _levels(knots_p, knots_t, lambda p: 0.5 if p > 450 else 12.0, n_levels)}


def snow_document(n_levels: int = 30) -> dict:
    """A saturated column below 0 degC everywhere, cloud top near -20 degC.

    Expected type: SN (no melting layer: every method keeps ice crystals frozen; Bourgouin
    2000, Ramer 1993 - common practice).
    """
    knots_p = [1000, 850, 700, 500, 300]
    knots_t = [-3.0, -8.0, -15.0, -28.0, -50.0]
    return {"site": {"id": "T-SN", "name": "Hobb's Saddle (invented)", "elevation_m": 40},
            "valid_time": "2026-01-21T00:00Z",
            "levels": _levels(knots_p, knots_t, lambda p: 0.3 if p > 450 else 10.0, n_levels)}


def document_to_csv(document: dict) -> str:
    lines = []
    site = document.get("site") or {}
    if site.get("name"):
        lines.append(f"# site_name: {site['name']}")
    if site.get("elevation_m") is not None:
        lines.append(f"# elevation_m: {site['elevation_m']}")
    if document.get("valid_time"):
        lines.append(f"# valid_time: {document['valid_time']}")
    lines.append("pressure_hpa,temperature_c,dewpoint_c")
    for lvl in document["levels"]:
        lines.append(f"{lvl['pressure_hpa']},{lvl['temperature_c']},{lvl['dewpoint_c']}")
    return "\n".join(lines) + "\n"


def free_port() -> int:
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def store_dump(data_dir: Path) -> list[str]:
    """Every table of the SQLite store in ``data_dir`` as SQL statements (schema and rows):
    equal before and after means nothing was written."""
    from ptype.store import DB_FILENAME
    conn = sqlite3.connect(Path(data_dir) / DB_FILENAME)
    try:
        return list(conn.iterdump())
    finally:
        conn.close()
