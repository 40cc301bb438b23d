"""WMO BUFR radiosonde reports (FM 94 BUFR, edition 3 or 4) through ecCodes.

The reports are the radiosonde sequences of WMO Manual on Codes (WMO-No. 306) Vol. I.2,
Table D, category 02: 3 09 052 "TEMP, TEMP SHIP and TEMP MOBIL" observations with the
high-resolution level sequence 3 03 054, 3 09 057 (TEMP reports converted to BUFR),
3 09 056 (descents) and sequences built the same way (any sequence whose levels carry
these element descriptors of Table B; tests/test_bufr.py reads the three):

=========  ====================================  ===========================
descriptor element                               profile field
=========  ====================================  ===========================
0 07 004   pressure, Pa                          pressure_hpa
0 10 009   geopotential height, gpm              height_m
0 12 101   temperature/air temperature, K        temperature_c
0 12 103   dew-point temperature, K              dewpoint_c
0 11 001   wind direction, degree true           (lowest level: surface wind)
0 11 002   wind speed, m s-1                     surface.wind_speed_m_s
0 01 001   WMO block number + 0 01 002 station   site.id (five digits)
0 04 001   year ... 0 04 006 second              valid_time (launch time)
0 05 001   latitude, 0 06 001 longitude          site.latitude, site.longitude
0 07 030   height of station ground above msl    site.elevation_m
=========  ====================================  ===========================

Unlike TEMP, BUFR carries the year and month.  Every subset of every message is one
profile (several stations in one message, several messages in one file).  Levels without
a pressure or a temperature (wind-only levels) are skipped; at a repeated pressure the first
level is kept.  The message is split from the file by its own section 0 length, so a
truncated file, a message whose data section cannot be decoded or a report without the
required elements is a :class:`~ptype.errors.ReaderError` naming the message (and subset)
and the descriptor.
"""

from __future__ import annotations

import math
import os
from datetime import UTC, datetime
from pathlib import Path

import numpy as np

from ptype.errors import ReaderError

#: The start and end markers of a BUFR message (WMO-No. 306, FM 94, sections 0 and 5).
BUFR_START, BUFR_END = b"BUFR", b"7777"
#: ecCodes' values for a missing element: a double below this, or the missing long.
_MISSING_BELOW = -1e99
_MISSING_LONG = 2147483647
#: Element key -> (descriptor, what), for messages.
ELEMENTS = {
    "pressure": ("007004", "pressure"),
    "airTemperature": ("012101", "air temperature"),
    "dewpointTemperature": ("012103", "dew-point temperature"),
    "nonCoordinateGeopotentialHeight": ("010009", "geopotential height"),
    "windSpeed": ("011002", "wind speed"),
    "windDirection": ("011001", "wind direction"),
}
KELVIN = 273.15


def split_messages(data: bytes, name: str) -> list[bytes]:
    """The BUFR messages of a byte string, each checked for its length and end marker."""
    out = []
    pos = data.find(BUFR_START)
    if pos < 0:
        raise ReaderError(f"{name}: no BUFR message found (no 'BUFR' start marker)")
    index = 0
    while pos >= 0:
        index += 1
        if len(data) < pos + 8:
            raise ReaderError(f"{name}: BUFR message {index}: truncated in section 0")
        length = int.from_bytes(data[pos + 4:pos + 7], "big")
        edition = data[pos + 7]
        if edition not in (3, 4):
            raise ReaderError(f"{name}: BUFR message {index}: edition {edition}; expected 3 or 4")
        end = pos + length
        if end > len(data):
            raise ReaderError(f"{name}: BUFR message {index}: truncated: section 0 gives "
                              f"{length} bytes, only {len(data) - pos} present; the data of "
                              "its descriptors are incomplete")
        if data[end - 4:end] != BUFR_END:
            raise ReaderError(f"{name}: BUFR message {index}: no '7777' end marker at byte "
                              f"{length} (section 5); the message is damaged")
        out.append(data[pos:end])
        pos = data.find(BUFR_START, end)
    return out


def _eccodes():
    try:
        import eccodes
    except ImportError:
        raise ReaderError("BUFR needs the 'eccodes' package: pip install 'ptype[formats]'"
                          ) from None
    return eccodes


class _Message:
    """Access to the values of one unpacked message, per subset."""

    def __init__(self, ec, h, where: str):
        self.ec, self.h, self.where = ec, h, where
        self.n_subsets = int(ec.codes_get_long(h, "numberOfSubsets"))
        self.compressed = bool(ec.codes_get_long(h, "compressedData"))

    def array(self, key: str, subset: int) -> np.ndarray:
        """The values of ``key`` in subset ``subset`` (1-based), NaN for missing."""
        ec, h = self.ec, self.h
        try:
            if self.compressed and self.n_subsets > 1:
                n = int(ec.codes_get_size(h, key))
                raw = np.asarray(ec.codes_get_array(h, key), dtype=np.float64)
                # Compressed: level-major, one value per subset (ecCodes' layout); a value
                # common to every subset may come once.
                if n % self.n_subsets == 0:
                    raw = raw.reshape(-1, self.n_subsets)[:, subset - 1]
            elif self.n_subsets > 1:
                raw = ec.codes_get_array(h, f"/subsetNumber={subset}/{key}")
            else:
                raw = ec.codes_get_array(h, key)
        except ec.KeyValueNotFoundError:
            return np.zeros(0)
        a = np.asarray(raw, dtype=np.float64).ravel()
        return np.where((a < _MISSING_BELOW) | (a == _MISSING_LONG), np.nan, a)

    def scalar(self, key: str, subset: int) -> float:
        a = self.array(key, subset)
        return float(a[0]) if a.size else math.nan


def _required(msg: _Message, key: str, subset: int, where: str) -> np.ndarray:
    a = msg.array(key, subset)
    if not np.isfinite(a).any():
        descriptor, what = ELEMENTS[key]
        raise ReaderError(f"{where}: descriptor {descriptor} ({what}) has no value; a "
                          "radiosonde report needs pressure and temperature on its levels")
    return a


def _levels(msg: _Message, subset: int, where: str) -> list[dict]:
    """The levels with pressure and temperature, surface first, one per pressure."""
    t = _required(msg, "airTemperature", subset, where)
    n = t.size
    p = _required(msg, "pressure", subset, where)[:n]  # later pressures: wind-shear levels
    extra = {k: msg.array(k, subset)[:n] for k in
             ("dewpointTemperature", "nonCoordinateGeopotentialHeight")}
    if p.size < n:
        raise ReaderError(f"{where}: descriptor 007004 (pressure): {p.size} values for {n} "
                          "temperatures")
    levels, seen = [], set()
    for i in np.argsort(-p, kind="stable"):
        if not (np.isfinite(p[i]) and np.isfinite(t[i])) or round(p[i], 1) in seen:
            continue
        seen.add(round(p[i], 1))
        level = {"pressure_hpa": round(float(p[i]) / 100.0, 2)}
        z = extra["nonCoordinateGeopotentialHeight"]
        if i < z.size and np.isfinite(z[i]):
            level["height_m"] = float(z[i])
        level["temperature_c"] = round(float(t[i]) - KELVIN, 2)
        td = extra["dewpointTemperature"]
        if i < td.size and np.isfinite(td[i]):
            level["dewpoint_c"] = round(float(td[i]) - KELVIN, 2)
        levels.append(level)
    return levels


def _launch(msg: _Message, subset: int, where: str) -> datetime | None:
    parts = [msg.scalar(k, subset) for k in ("year", "month", "day", "hour", "minute",
                                             "second")]
    if not all(math.isfinite(x) for x in parts[:4]):
        return None
    y, mo, d, h = (int(x) for x in parts[:4])
    mi, s = (int(x) if math.isfinite(x) else 0 for x in parts[4:])
    try:
        return datetime(y, mo, d, h, mi, min(s, 59), tzinfo=UTC)
    except ValueError as exc:
        raise ReaderError(f"{where}: descriptors 004001-004006 (launch time): {exc}") from None


def _site(msg: _Message, subset: int) -> dict:
    block, number = msg.scalar("blockNumber", subset), msg.scalar("stationNumber", subset)
    site: dict = {}
    if math.isfinite(block) and math.isfinite(number):
        site["id"] = f"{int(block):02d}{int(number):03d}"
    for key, field, lo, hi in (("latitude", "latitude", -90, 90),
                               ("longitude", "longitude", -180, 360),
                               ("heightOfStationGroundAboveMeanSeaLevel", "elevation_m",
                                -500, 9000)):
        v = msg.scalar(key, subset)
        if math.isfinite(v) and lo <= v <= hi:
            site[field] = round(v, 5)
    return site


def _subset_document(msg: _Message, subset: int, where: str, sequence: str) -> dict:
    levels = _levels(msg, subset, where)
    doc: dict = {"levels": levels}
    site = _site(msg, subset)
    if site:
        doc["site"] = site
    launch = _launch(msg, subset, where)
    if launch is not None:
        doc["valid_time"] = launch.isoformat()
    speed = msg.array("windSpeed", subset)
    pressure = msg.array("pressure", subset)[:speed.size]
    if speed.size and np.isfinite(pressure).any():
        lowest = int(np.nanargmax(pressure))
        if np.isfinite(speed[lowest]) and 0 <= speed[lowest] <= 150:
            doc["surface"] = {"wind_speed_m_s": round(float(speed[lowest]), 1)}
    station = site.get("id", "unknown station")
    doc["source"] = (f"WMO BUFR radiosonde report (sequence {sequence}), station {station}"
                     + (f", launch {launch:%Y-%m-%dT%H:%MZ}" if launch else ""))
    return doc


def _message_documents(ec, raw: bytes, index: int, name: str) -> list[dict]:
    where = f"{name}: BUFR message {index}"
    try:
        h = ec.codes_new_from_message(raw)
    except (ec.CodesInternalError, ValueError) as exc:
        raise ReaderError(f"{where}: cannot be read ({_reason(exc)})") from None
    try:
        try:
            sequence = " ".join(f"{int(d):06d}" for d in
                                np.atleast_1d(ec.codes_get_array(h, "unexpandedDescriptors")))
        except ec.CodesInternalError as exc:
            raise ReaderError(f"{where}: section 3 (data description) cannot be decoded "
                              f"({_reason(exc)})") from None
        try:
            ec.codes_set(h, "unpack", 1)
        except ec.CodesInternalError as exc:
            raise ReaderError(f"{where}: the data of descriptors {sequence} cannot be decoded "
                              f"({_reason(exc)}); the message is damaged or uses tables this "
                              "ecCodes does not have") from None
        msg = _Message(ec, h, where)
        docs = []
        for k in range(1, msg.n_subsets + 1):
            sub = f"{where}, subset {k}" if msg.n_subsets > 1 else where
            docs.append(_subset_document(msg, k, sub, sequence))
        return docs
    finally:
        ec.codes_release(h)


def _reason(exc: Exception) -> str:
    return (str(exc).strip().splitlines() or [type(exc).__name__])[0]


def read_bufr_documents(source: str | os.PathLike | bytes, name: str | None = None) -> list[dict]:
    """Every radiosonde profile of a BUFR file or byte string, as profile documents (one
    per subset of every message, in file order)."""
    if isinstance(source, (bytes, bytearray)):
        data, name = bytes(source), name or "<bytes>"
    else:
        name = name or str(source)
        try:
            data = Path(source).read_bytes()
        except OSError as exc:
            raise ReaderError(f"{name}: cannot be read ({exc.strerror})") from None
    ec = _eccodes()
    documents = []
    for index, raw in enumerate(split_messages(data, name), start=1):
        documents.extend(_message_documents(ec, raw, index, name))
    return documents


def is_bufr(data: bytes) -> bool:
    """True when the bytes start (after any bulletin heading) with a BUFR message."""
    return BUFR_START in data[:200]
