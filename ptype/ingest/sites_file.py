"""Road sites from a JSON file, so that a model run can be ingested without the HTTP API.

The file is the one the demo uses (``soundings_demo/sites.json``)::

    {"sites": [{"id": "mistleby-bridge", "name": "Mistleby Bridge", "latitude": 47.1,
                "longitude": -33.2, "elevation_m": 120.0, "thresholds": {...}}, ...]}

``id`` is the site's code: a site with that code is updated (name, position, elevation,
thresholds), else added.  Unknown keys (descriptions, notes) are ignored.
"""

from __future__ import annotations

import json
import math
import os
from datetime import datetime
from typing import Any

import sqlalchemy as sa

from ptype.errors import ReaderError
from ptype.store import Site, Store

#: (field, lowest, highest) of the numbers of a site (ISO 6709 ranges; elevation as the
#: profile document's).
RANGES = (("latitude", -90.0, 90.0), ("longitude", -180.0, 360.0),
          ("elevation_m", -500.0, 9000.0))


def _number(entry: dict, field: str, lo: float, hi: float, where: str,
            required: bool) -> float | None:
    value = entry.get(field)
    if value is None:
        if required:
            raise ReaderError(f"{where}.{field}: required", field=f"{where}.{field}")
        return None
    if isinstance(value, bool) or not isinstance(value, (int, float)) \
            or not math.isfinite(value) or not lo <= value <= hi:
        raise ReaderError(f"{where}.{field} = {value!r}: expected a number from {lo:g} to "
                          f"{hi:g}", field=f"{where}.{field}")
    return float(value)


def parse_sites(data: Any, name: str) -> list[dict]:
    """The sites of a decoded file, checked; a :class:`ReaderError` names the first bad
    field."""
    if not isinstance(data, dict) or not isinstance(data.get("sites"), list):
        raise ReaderError(f"{name}: expected a JSON object with a 'sites' array", field="sites")
    out = []
    for k, entry in enumerate(data["sites"]):
        where = f"{name}: sites[{k}]"
        if not isinstance(entry, dict):
            raise ReaderError(f"{where}: expected an object", field=f"sites[{k}]")
        site_name = entry.get("name")
        if not isinstance(site_name, str) or not site_name.strip():
            raise ReaderError(f"{where}.name: required text", field=f"sites[{k}].name")
        code = entry.get("id")
        if code is not None and (not isinstance(code, str) or not code.strip()):
            raise ReaderError(f"{where}.id: expected text", field=f"sites[{k}].id")
        thresholds = entry.get("thresholds") or {}
        if not isinstance(thresholds, dict):
            raise ReaderError(f"{where}.thresholds: expected an object",
                              field=f"sites[{k}].thresholds")
        values = {f: _number(entry, f, lo, hi, where, f != "elevation_m")
                  for f, lo, hi in RANGES}
        out.append({"code": code, "name": site_name.strip()[:200], "thresholds": thresholds,
                    **values})
    return out


def load_sites(store: Store, path: str | os.PathLike, now: datetime) -> dict[str, int]:
    """Add or update the sites of a JSON file (by ``id``); counts ``added``, ``updated``."""
    name = os.fspath(path)
    try:
        with open(name, encoding="utf-8-sig") as f:
            data = json.load(f)
    except OSError as exc:
        raise ReaderError(f"{name}: cannot be read ({exc.strerror})", field="sites") from None
    except json.JSONDecodeError as exc:
        raise ReaderError(f"{name}: line {exc.lineno} column {exc.colno}: invalid JSON "
                          f"({exc.msg})", field="sites") from None
    sites = parse_sites(data, name)
    counts = {"added": 0, "updated": 0}
    with store.write() as s:
        for entry in sites:
            site = None
            if entry["code"]:
                site = s.scalars(sa.select(Site).where(Site.code == entry["code"])).first()
            if site is None:
                s.add(Site(created_at=now, **entry))
                counts["added"] += 1
            else:
                for key, value in entry.items():
                    setattr(site, key, value)
                counts["updated"] += 1
    return counts
