"""Preload the invented demo sites and storm series into the store (idempotent).

Reads ``sites.json`` and ``series/manifest.json`` under the demo directory
(``soundings_demo/`` at the project root, or ``PTYPE_DEMO_DIR``).  Sites are keyed by
their ``code`` (the demo id), so loading twice, or from several worker processes at
once, stores everything once.  The demo clock is the series' issued time, so the
alerts shown on first start are the same on every machine.
"""

from __future__ import annotations

import json
from collections.abc import Mapping
from datetime import datetime
from pathlib import Path
from typing import Any

import sqlalchemy as sa

from ptype.clock import Clock, iso, parse_time, service_clock
from ptype.readers import read_profile
from ptype.store import Store
from ptype.store.models import ADMIN_OWNER, ProfileRecord, Setting, Site

#: Name of the setting that holds the demo's clock (ISO 8601 UTC) in a demo store.
DEMO_CLOCK = "demo_clock"


def default_demo_dir() -> Path:
    """The ``soundings_demo`` folder of a source checkout."""
    return Path(__file__).resolve().parents[2] / "soundings_demo"


def demo_issued_time(demo_dir: Path) -> datetime | None:
    """Issue time of the demo series (its manifest), or None when there is no series."""
    manifest = demo_dir / "series" / "manifest.json"
    if not manifest.is_file():
        return None
    return parse_time(json.loads(manifest.read_text())["issued_time"])


def load_demo(store: Store, demo_dir: Path | None = None, *, now: datetime) -> dict[str, Any]:
    """Store the demo sites and series that are not yet stored; returns what was added.

    Returns ``{"sites": [site ids added], "profiles": n}``; alerts are evaluated by the caller.
    """
    demo_dir = Path(demo_dir or default_demo_dir())
    sites_doc = json.loads((demo_dir / "sites.json").read_text())
    manifest_path = demo_dir / "series" / "manifest.json"
    manifest = json.loads(manifest_path.read_text()) if manifest_path.is_file() else None
    added_sites: list[int] = []
    n_profiles = 0
    with store.write() as s:
        for entry in sites_doc["sites"]:
            code = entry["id"]
            site = s.scalars(sa.select(Site).where(Site.code == code)).first()
            if site is None:
                site = Site(code=code, name=entry["name"], latitude=entry["latitude"],
                            longitude=entry["longitude"], elevation_m=entry.get("elevation_m"),
                            thresholds={}, created_at=now, owner=ADMIN_OWNER)
                s.add(site)
                s.flush()
                added_sites.append(site.id)
            if manifest is None or code not in manifest["sites"]:
                continue
            have = s.scalar(sa.select(sa.func.count()).select_from(ProfileRecord)
                            .where(ProfileRecord.site_id == site.id))
            if have:
                continue
            issued = parse_time(manifest["issued_time"])
            source = manifest.get("source") or "demo"
            for rel in manifest["sites"][code]["files"]:
                # Paths are relative to the manifest's folder (or, failing that, the demo root).
                path = manifest_path.parent / rel
                pr = read_profile(path if path.is_file() else demo_dir / rel)
                s.add(ProfileRecord(site_id=site.id, source=source,
                                    valid_time=pr.valid_time, issued_time=issued,
                                    document=pr.to_document(), received_at=now))
                n_profiles += 1
    return {"sites": added_sites, "profiles": n_profiles}


def record_demo_clock(store: Store, clock: datetime) -> None:
    """Write the demo's clock into the store, so that every reader of it uses the same time."""
    with store.write() as s:
        row = s.get(Setting, DEMO_CLOCK)
        if row is None:
            s.add(Setting(name=DEMO_CLOCK, value=iso(clock)))
        elif row.value != iso(clock):
            row.value = iso(clock)


def stored_demo_clock(store: Store) -> datetime | None:
    """The demo's clock recorded in the store, or None when the store is not a demo store."""
    with store.read() as s:
        row = s.get(Setting, DEMO_CLOCK)
    return None if row is None else parse_time(row.value, DEMO_CLOCK)


def store_clock(store: Store | None, config: Mapping[str, Any] | None = None) -> Clock:
    """The one clock for ``store``: ``PTYPE_NOW``, else its demo clock, else the system's."""
    return service_clock(config, stored_demo_clock(store) if store is not None else None)
