"""Alerts: ``GET /v1/alerts`` (JSON), ``GET /v1/alerts/<id>.cap`` (CAP 1.2 XML),
``GET /v1/alerts.atom`` (Atom feed) and ``POST /v1/alerts/evaluate`` (key; re-evaluate all
sites now, e.g. from cron so that alerts expire and move with the clock)."""

from __future__ import annotations

import os

from flask import Blueprint, Response, current_app, jsonify, request

from api.errors import ApiError
from api.sites import get_store, now, require_key
from ptype.clock import iso
from ptype.constants import CAUTION
from ptype.roads.alerts import service
from ptype.roads.alerts.cap import DEFAULT_RADIUS_KM, STATUS
from ptype.store import Alert

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
    from ptype.roads.alerts.atom import build_feed
    xml = build_feed(_alerts(), base_url=request.host_url.rstrip("/"), sender=sender(),
                     now=now())
    return Response(xml, mimetype="application/atom+xml")


@bp.post("/v1/alerts/evaluate")
def evaluate():
    require_key()
    import sqlalchemy as sa

    from api.sites import _evaluate_alerts
    from ptype.store import Site
    with get_store().read() as s:
        ids = list(s.scalars(sa.select(Site.id).order_by(Site.id)))
    actions = []
    for site_id in ids:
        actions.extend(_evaluate_alerts(site_id))
    with get_store().write() as s:
        service.expire_due(s, now())
    return jsonify({"evaluated_sites": len(ids), "actions": actions})


# -- OpenAPI description (api.docs collects OPENAPI_OPERATIONS) -------------------------
from pydantic import BaseModel, ConfigDict, Field


class _Out(BaseModel):
    model_config = ConfigDict(extra="allow")


class AlertOut(_Out):
    """One alert and its latest message (CAP vocabulary for severity, certainty, urgency)."""

    id: str
    status: str = Field(..., description="`active`, `cancelled` or `expired`.")
    event: str
    onset: str | None = None
    expires: str | None = None
    sent: str
    site: dict
    severity: str
    certainty: str
    urgency: str
    msg_type: str = Field(..., description="CAP msgType of the latest message: Alert, Update, Cancel.")
    references: list


class AlertList(_Out):
    alerts: list[AlertOut]
    now: str
    caution: str


class AlertListOptions(BaseModel):
    model_config = ConfigDict(extra="forbid")
    site: int | None = Field(None, description="Only this site's alerts.")
    active: str | None = Field(None, description="`1` for active alerts only (default: active "
                                                 "and recently ended).")


class EvaluateResult(_Out):
    evaluated_sites: int
    actions: list


OPENAPI_OPERATIONS = [
    {"path": "/v1/alerts", "method": "get", "id": "alerts_list", "tag": "Alerts",
     "summary": "Active and recently ended alerts",
     "description": "Road hazards found in the sites' timelines, with their lifecycle "
                    "(new, updated, cancelled when the hazard leaves the forecast, expired).",
     "query": AlertListOptions, "ok": ("application/json", AlertList), "errors": (400,)},
    {"path": "/v1/alerts/{alert_id}.cap", "method": "get", "id": "alert_cap", "tag": "Alerts",
     "summary": "One alert as OASIS CAP 1.2 XML",
     "description": "The latest message of the alert (msgType Alert, Update or Cancel with "
                    "`references` to the earlier messages). Description and instruction carry "
                    "the caution.",
     "path_params": {"alert_id": "Alert id from `GET /v1/alerts`."},
     "ok": ("application/cap+xml", None), "errors": (404,)},
    {"path": "/v1/alerts.atom", "method": "get", "id": "alerts_atom", "tag": "Alerts",
     "summary": "Atom feed of the alerts (RFC 4287)", "description": "One entry per alert, "
     "linking to its CAP document.", "ok": ("application/atom+xml", None), "errors": ()},
    {"path": "/v1/alerts/evaluate", "method": "post", "id": "alerts_evaluate", "tag": "Alerts",
     "auth": True, "summary": "Re-evaluate every site's alerts now",
     "description": "For a scheduler: re-runs the rules of every site and expires due alerts.",
     "ok": ("application/json", EvaluateResult), "errors": (401, 403)},
]
