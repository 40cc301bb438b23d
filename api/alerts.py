"""Alerts: ``GET /v1/alerts`` (JSON), ``GET /v1/alerts/<id>.cap`` (CAP 1.2 XML),
``GET /v1/alerts.atom`` (Atom feed) and ``POST /v1/alerts/evaluate`` (key; re-evaluate all
sites now, e.g. from cron so that alerts expire and move with the clock)."""

from __future__ import annotations

import os

from flask import Blueprint, Response, current_app, jsonify, request

from ptype import CAUTION
from ptype.alerts import service
from ptype.alerts.cap import DEFAULT_RADIUS_KM, STATUS
from ptype.store import Alert
from ptype.store.clock import iso

from .errors import ApiError
from .sites import get_store, now, require_key

bp = Blueprint("alerts", __name__)

DEFAULT_SENDER = "ptype@localhost"


def sender() -> str:
    return str(current_app.config.get("PTYPE_CAP_SENDER") or DEFAULT_SENDER)


def cap_status() -> str | None:
    """The configured CAP status, or None to use the one recorded with each message."""
    status = current_app.config.get("PTYPE_CAP_STATUS") or os.environ.get("PTYPE_CAP_STATUS")
    return status if status in STATUS else None


def _alerts(site_id=None, include_recent=True):
    t = now()
    with get_store().write() as s:
        service.expire_due(s, t)
    with get_store().read() as s:
        return service.list_alerts(s, t, sender(), include_recent=include_recent,
                                   site_id=site_id)


@bp.get("/v1/alerts")
def list_alerts():
    site = request.args.get("site")
    try:
        site_id = int(site) if site is not None else None
    except ValueError:
        raise ApiError(400, "invalid_option", f"site = {site!r}: expected a site id", "site")
    active_only = request.args.get("active") in ("1", "true", "yes")
    return jsonify({"alerts": _alerts(site_id, not active_only), "now": iso(now()),
                    "caution": CAUTION})


@bp.get("/v1/alerts/<alert_id>.cap")
def alert_cap(alert_id: str):
    with get_store().read() as s:
        alert = s.get(Alert, alert_id)
        if alert is None:
            raise ApiError(404, "not_found", f"alert {alert_id} does not exist", "id")
        xml = service.cap_for(alert, sender(), cap_status(),
                              float(current_app.config.get("PTYPE_CAP_RADIUS_KM",
                                                           DEFAULT_RADIUS_KM)))
    return Response(xml, mimetype="application/cap+xml")


@bp.get("/v1/alerts.atom")
def alerts_atom():
    from ptype.alerts.atom import build_feed
    xml = build_feed(_alerts(), base_url=request.host_url.rstrip("/"), sender=sender(),
                     now=now())
    return Response(xml, mimetype="application/atom+xml")


@bp.post("/v1/alerts/evaluate")
def evaluate():
    require_key()
    import sqlalchemy as sa

    from ptype.store import Site

    from .sites import _evaluate_alerts
    with get_store().read() as s:
        ids = list(s.scalars(sa.select(Site.id).order_by(Site.id)))
    actions = []
    for site_id in ids:
        actions.extend(_evaluate_alerts(site_id))
    with get_store().write() as s:
        service.expire_due(s, now())
    return jsonify({"evaluated_sites": len(ids), "actions": actions})
