"""Invented example bodies of the OpenAPI document and the ``/docs`` page.

Every site, place and number here is made up (a fictional region); the test suite posts
the profile examples to the service, so they stay valid documents.
"""

from __future__ import annotations

from typing import Any

from ptype.profile.document import ProfileDocument

#: A freezing-rain profile at an invented site: a warm nose over a cold surface layer.
EXAMPLE_DOCUMENT: dict[str, Any] = {
    "site": {"id": "KV-03", "name": "Kestrel Vale", "elevation_m": 212},
    "valid_time": "2026-01-14T06:00Z",
    "levels": [
        {"pressure_hpa": 990, "height_m": 212, "temperature_c": -2.4, "dewpoint_c": -3.0},
        {"pressure_hpa": 950, "temperature_c": -3.6, "dewpoint_c": -4.0},
        {"pressure_hpa": 900, "temperature_c": 1.5, "dewpoint_c": 1.0},
        {"pressure_hpa": 850, "temperature_c": 4.2, "dewpoint_c": 3.8},
        {"pressure_hpa": 800, "temperature_c": 1.0, "dewpoint_c": 0.6},
        {"pressure_hpa": 700, "temperature_c": -6.5, "dewpoint_c": -7.2},
        {"pressure_hpa": 600, "temperature_c": -14.0, "dewpoint_c": -15.5},
        {"pressure_hpa": 500, "temperature_c": -23.0, "dewpoint_c": -26.0},
    ],
}
#: The same profile as CSV (docs/formats.md).
EXAMPLE_CSV = ("# site_name: Kestrel Vale\n# valid_time: 2026-01-14T06:00Z\n"
               "pressure_hpa,temperature_c,dewpoint_c\n990,-2.4,-3.0\n950,-3.6,-4.0\n"
               "900,1.5,1.0\n850,4.2,3.8\n800,1.0,0.6\n700,-6.5,-7.2\n600,-14.0,-15.5\n"
               "500,-23.0,-26.0\n")

#: The bodies a single-profile operation accepts (diagnosis and diagram).
PROFILE_BODIES: dict[str, dict[str, Any]] = {
    "application/json": {"schema": ProfileDocument, "example": EXAMPLE_DOCUMENT},
    "text/csv": {"schema": {"type": "string", "description": "CSV profile (docs/formats.md)."},
                 "example": EXAMPLE_CSV},
    "text/plain": {"schema": {"type": "string",
                              "description": "WMO TEMP message (TTAA/TTBB) or CSV text."},
                   "example": EXAMPLE_CSV},
    "application/x-bufr": {"schema": {"type": "string", "format": "binary",
                                      "description": "WMO BUFR radiosonde report (one "
                                                     "report; docs/formats.md)."},
                           "example": "BUFR... (binary: one WMO BUFR edition 4 message, "
                                      "radiosonde sequence 3 09 052)"},
}

#: A road site with one of its alert thresholds.
SITE_EXAMPLE = {"name": "Quenmoor Overpass", "latitude": 47.31, "longitude": -33.52,
                "elevation_m": 120, "code": "QMO", "thresholds": {"freezing_probability": 0.25}}

#: A forecast profile for a road site, with the screen-level and road values.
SITE_PROFILE = {
    "levels": [
        {"pressure_hpa": 995, "height_m": 120, "temperature_c": -1.8, "dewpoint_c": -2.3},
        {"pressure_hpa": 950, "temperature_c": -3.0, "dewpoint_c": -3.4},
        {"pressure_hpa": 900, "temperature_c": 1.2, "dewpoint_c": 0.8},
        {"pressure_hpa": 850, "temperature_c": 3.9, "dewpoint_c": 3.5},
        {"pressure_hpa": 800, "temperature_c": 0.8, "dewpoint_c": 0.4},
        {"pressure_hpa": 700, "temperature_c": -6.8, "dewpoint_c": -7.5},
        {"pressure_hpa": 500, "temperature_c": -24.0, "dewpoint_c": -27.0},
    ],
    "surface": {"temperature_2m_c": -1.6, "dewpoint_2m_c": -2.2, "road_surface_temperature_c": -2.4,
                "precipitation_rate_mm_h": 1.2, "wind_speed_m_s": 4.0},
}
#: One model run's profiles for a site.
PROFILES_EXAMPLE = {"issued_time": "2026-01-27T00:00Z", "source": "demo model run",
                    "profiles": [dict(SITE_PROFILE, valid_time="2026-01-27T06:00Z")]}
#: Surface observations at a site.
OBSERVATIONS_EXAMPLE = {"observations": [
    {"time": "2026-01-27T05:50Z", "air_temperature_c": -1.2, "dewpoint_c": -2.0,
     "road_surface_temperature_c": -2.5, "precipitation_rate_mm_h": 0.4,
     "wind_speed_m_s": 3.0, "present_weather": "-FZRA"}]}

#: The profile of the verification example (freezing rain).
CASE_PROFILE = {
    "levels": [
        {"pressure_hpa": 990, "temperature_c": -2.4, "dewpoint_c": -3.0},
        {"pressure_hpa": 900, "temperature_c": 1.5, "dewpoint_c": 1.0},
        {"pressure_hpa": 850, "temperature_c": 4.2, "dewpoint_c": 3.8},
        {"pressure_hpa": 800, "temperature_c": 1.0, "dewpoint_c": 0.6},
        {"pressure_hpa": 700, "temperature_c": -6.5, "dewpoint_c": -7.2},
        {"pressure_hpa": 500, "temperature_c": -23.0, "dewpoint_c": -26.0},
    ]}
#: Two paired cases to verify.
VERIFY_EXAMPLE = {"cases": [{"profile": CASE_PROFILE, "observed": "-FZRA BR"},
                            {"profile": CASE_PROFILE, "observed": "FZRA PL"}],
                  "members": 20, "seed": 0}
