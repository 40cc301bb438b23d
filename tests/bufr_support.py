"""Radiosonde reports encoded as WMO BUFR by ecCodes from its shipped BUFR4 sample, for the
tests: the real encoder, invented values (sequence 3 09 052, WMO-No. 306 Table D)."""

from __future__ import annotations

from collections.abc import Sequence
from datetime import datetime

import numpy as np

KELVIN = 273.15


def encode_temp_bufr(reports: Sequence[dict], *, compressed: bool = False) -> bytes:
    """One BUFR message with one subset per report.

    A report: ``station`` (five digits), ``launch`` (datetime), ``latitude``,
    ``longitude``, ``elevation_m`` and ``levels`` (dicts with pressure_hpa, temperature_c,
    dewpoint_c, height_m, and optional wind_speed_m_s / wind_direction_deg).  Compressed
    messages need the same number of levels in every report.
    """
    import eccodes as ec
    h = ec.codes_bufr_new_from_samples("BUFR4")
    try:
        for key, value in (("masterTableNumber", 0), ("dataCategory", 2),
                           ("internationalDataSubCategory", 4),
                           ("masterTablesVersionNumber", 32),
                           ("numberOfSubsets", len(reports)), ("observedData", 1),
                           ("compressedData", int(compressed))):
            ec.codes_set(h, key, value)
        counts = [len(r["levels"]) for r in reports]
        ec.codes_set_array(h, "inputExtendedDelayedDescriptorReplicationFactor",
                           counts[:1] if compressed else counts)
        ec.codes_set_array(h, "inputDelayedDescriptorReplicationFactor",
                           [0] if compressed else [0] * len(reports))
        ec.codes_set(h, "unexpandedDescriptors", 309052)
        _set_header(ec, h, reports, compressed)
        _set_levels(ec, h, reports, compressed)
        ec.codes_set(h, "pack", 1)
        return ec.codes_get_message(h)
    finally:
        ec.codes_release(h)


def _set_header(ec, h, reports, compressed):
    def put(key, values):
        if compressed:
            ec.codes_set_array(h, key, list(values))
        else:
            for k, v in enumerate(values, start=1):
                ec.codes_set(h, f"#{k}#{key}", v)
    put("blockNumber", [int(r["station"][:2]) for r in reports])
    put("stationNumber", [int(r["station"][2:]) for r in reports])
    launch: list[datetime] = [r["launch"] for r in reports]
    for key in ("year", "month", "day", "hour", "minute", "second"):
        put(key, [getattr(t, key) for t in launch])
    put("latitude", [float(r["latitude"]) for r in reports])
    put("longitude", [float(r["longitude"]) for r in reports])
    put("heightOfStationGroundAboveMeanSeaLevel", [float(r["elevation_m"]) for r in reports])


_LEVEL_KEYS = (("pressure", "pressure_hpa", lambda v: v * 100.0),
               ("airTemperature", "temperature_c", lambda v: v + KELVIN),
               ("dewpointTemperature", "dewpoint_c", lambda v: v + KELVIN),
               ("nonCoordinateGeopotentialHeight", "height_m", float),
               ("windSpeed", "wind_speed_m_s", float),
               ("windDirection", "wind_direction_deg", float))
MISSING = -1e100


def _set_levels(ec, h, reports, compressed):
    for key, field, convert in _LEVEL_KEYS:
        per = [[convert(lv[field]) if lv.get(field) is not None else MISSING
                for lv in r["levels"]] for r in reports]
        if compressed:
            arr = np.array(per, dtype=np.float64)  # (subsets, levels)
            for k in range(arr.shape[1]):
                ec.codes_set_array(h, f"#{k + 1}#{key}", arr[:, k])
        else:
            ec.codes_set_array(h, key, np.concatenate([np.array(p, dtype=np.float64)
                                                       for p in per]))
