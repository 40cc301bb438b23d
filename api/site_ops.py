"""Road sites and their alerts, as the sites, alerts and sites-page views share them.

Looking a site up (404 when missing), serialising it, evaluating its alerts after a write,
listing the current alerts, and loading the invented demo into an empty store on start.
The rules, lifecycle and messages themselves live in :mod:`ptype.roads.alerts`.
"""

from __future__ import annotations

import logging
import os
from datetime import datetime
from pathlib import Path
from typing import Any

import sqlalchemy as sa
from flask import Flask, current_app
from ptype.api import budget
from ptype.api.errors import ApiError
from ptype.api.plumbing import DEMO_CLOCK, cap_sender, get_store, now, store_for
from sqlalchemy.orm import Session

from ptype.clock import iso
from ptype.errors import DeadlineExceeded, OptionError, ProfileError
from ptype.roads.alerts import service
from ptype.store import Observation, Site

log = logging.getLogger("ptype.api.sites")

#: Site ids are 64-bit integers in every database we support; larger numbers name no site.
MAX_SITE_ID = 2 ** 63 - 1


def site_or_404(session: Session, site_id: int) -> Site:
    """The site ``site_id``; a 404 :class:`ApiError` naming ``id`` when there is none."""
    site = session.get(Site, site_id) if 0 < site_id <= MAX_SITE_ID else None
    if site is None:
        raise ApiError(404, "not_found", f"site {site_id} does not exist", "id")
    return site


def site_dict(site: Site, session: Session | None = None) -> dict[str, Any]:
    """A site as JSON; with a ``session``, also its latest issue of profiles and observation."""
    d: dict[str, Any] = {
        "id": site.id, "code": site.code, "name": site.name, "owner": site.owner,
        "latitude": site.latitude,
        "longitude": site.longitude, "elevation_m": site.elevation_m,
        "thresholds": site.thresholds or {}, "created": iso(site.created_at)}
    if session is not None:
        latest = service.latest_issue(session, site.id)
        d["latest_issue"] = None if not latest else {
            "issued_time": iso(latest[0].issued_time), "source": latest[0].source,
            "profiles": len(latest), "first_valid_time": iso(latest[0].valid_time),
            "last_valid_time": iso(latest[-1].valid_time)}
        obs = session.scalars(sa.select(Observation).where(Observation.site_id == site.id)
                              .order_by(Observation.time.desc()).limit(1)).first()
        d["latest_observation"] = None if obs is None else {
            k: (iso(v) if isinstance(v, datetime) else v)
            for k, v in service.observation_dict(obs).items()}
    return d


def site_ids(session: Session, owner: str | None = None) -> list[int]:
    """Every site id (of ``owner`` when given), in order."""
    query = sa.select(Site.id).order_by(Site.id)
    if owner is not None:
        query = query.where(Site.owner == owner)
    return list(session.scalars(query))


def evaluate_alerts(site_id: int) -> list[dict]:
    """Evaluate the site's alerts: timeline outside the write lock, decisions inside it."""
    store = get_store()
    t = now()
    members = int(current_app.config.get("PTYPE_ALERT_MEMBERS")
                  or os.environ.get("PTYPE_ALERT_MEMBERS") or service.ALERT_MEMBERS)
    with store.read() as s:
        site = site_or_404(s, site_id)
        inputs = service.timeline_inputs(s, site, t, covering_hours=service.ALERT_HOURS)
    with budget.computing():  # no database connection held meanwhile
        timeline = service.timeline_from_inputs(inputs, t, members=members)
        candidates = service.candidates_from_timeline(timeline, t, site)
    cap_status = current_app.config.get("PTYPE_CAP_STATUS") or os.environ.get("PTYPE_CAP_STATUS")
    with store.write() as s:
        site = site_or_404(s, site_id)
        return service.apply_candidates(s, site, candidates, t, cap_status=cap_status)


def evaluate_after_ingest(site_id: int) -> list[dict] | dict:
    """Evaluate alerts after a committed write.

    The data is stored whatever happens here, so a failure is reported in the answer (and
    logged) instead of failing the request.
    """
    try:
        return evaluate_alerts(site_id)
    except (ProfileError, OptionError) as exc:
        log.warning("alert evaluation for site %s failed: %s", site_id, exc)
        return {"error": f"alerts not evaluated: {exc}"}
    except (budget.Busy, DeadlineExceeded):
        log.warning("alert evaluation for site %s postponed: server busy", site_id)
        return {"error": "alerts not evaluated now: the server is busy; they are evaluated "
                         "again on the next write or POST /v1/alerts/evaluate"}
    except Exception:  # the write is committed; never turn it into a 500
        log.exception("alert evaluation for site %s failed", site_id)
        return {"error": "alerts not evaluated: internal error (logged)"}


def current_alerts(site_id: int | None = None, include_recent: bool = True, *,
                   owner: str | None = None) -> list[dict]:
    """The alerts as seen at the service clock, optionally of one site or of one owner's sites
    (read-only: due ones are shown expired, and are marked so in the store only by an
    evaluation)."""
    t = now()
    with get_store().read() as s:
        return service.list_alerts(s, t, cap_sender(), include_recent=include_recent,
                                   site_id=site_id, owner=owner)


def demo_requested(app: Flask) -> bool:
    """True when the configuration or ``PTYPE_DEMO`` asks for the demo on start."""
    return bool(app.config.get("PTYPE_DEMO")) or os.environ.get("PTYPE_DEMO") in ("1", "true",
                                                                                  "yes")


def load_demo(app: Flask) -> None:
    """Load the invented demo sites and storm into an empty store and evaluate their alerts.

    The series' issued time becomes the demo's clock, recorded in the store so that the
    service and ``ptype alerts`` read the same time (``PTYPE_NOW`` still overrides it), and
    CAP messages say ``Exercise``: the data is invented.
    """
    from ptype.store.demo import default_demo_dir, demo_issued_time, record_demo_clock
    from ptype.store.demo import load_demo as load_into
    demo_dir = Path(app.config.get("PTYPE_DEMO_DIR") or default_demo_dir())
    if not (demo_dir / "sites.json").is_file():
        log.warning("demo requested but %s/sites.json is missing", demo_dir)
        return
    issued = demo_issued_time(demo_dir)
    store = store_for(app)
    if issued is not None:
        record_demo_clock(store, issued)
        app.extensions[DEMO_CLOCK] = issued
    app.config.setdefault("PTYPE_CAP_STATUS", "Exercise")
    with app.app_context():
        t = now()
    added = load_into(store, demo_dir, now=t)
    if added["profiles"]:
        with app.app_context():
            with store.read() as s:
                ids = site_ids(s)
            for site_id in ids:
                evaluate_after_ingest(site_id)
