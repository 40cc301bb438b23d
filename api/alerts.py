"""Alerts: ``GET /v1/alerts`` (JSON), ``GET /v1/alerts/<id>.cap`` (CAP 1.2 XML),
``GET /v1/alerts.atom`` (Atom feed) and ``POST /v1/alerts/evaluate`` (key; re-evaluate all
sites now, e.g. from cron so that alerts expire and move with the clock)."""

from __future__ import annotations

import os

from flask import Blueprint, Response, current_app, jsonify, request
from ptype.api.errors import ApiError
from ptype.api.models import AlertList, AlertListOptions, EvaluateResult
from ptype.api.openapi import Operation, text_answer
from ptype.api.plumbing import cap_sender, clock, get_store, now, require_key
from ptype.api.site_ops import current_alerts, evaluate_alerts, site_ids

from ptype.clock import iso
from ptype.constants import CAUTION
from ptype.roads.alerts import service
from ptype.roads.alerts.atom import build_feed
from ptype.roads.alerts.cap import DEFAULT_RADIUS_KM, STATUS
from ptype.store import Alert

bp = Blueprint("alerts", __name__, url_prefix="/v1")


def cap_status() -> str | None:
    """The configured CAP status, or None to use the one recorded with each message."""
    status = current_app.config.get("PTYPE_CAP_STATUS") or os.environ.get("PTYPE_CAP_STATUS")
    return status if status in STATUS else None


@bp.get("/alerts")
@Operation(
    id="alerts_list", tag="Alerts", summary="Active and recently ended alerts",
    description="Road hazards found in the sites' timelines, with their lifecycle "
                "(new, updated, cancelled when the hazard leaves the forecast, expired).",
    query=AlertListOptions, ok=AlertList, errors=(400,))
def list_alerts() -> Response:
    """The alerts, of every site or of ``?site=``; ``?active=1`` leaves out ended ones."""
    site = request.args.get("site")
    try:
        site_id = int(site) if site is not None else None
    except ValueError:
        raise ApiError(400, "invalid_option", f"site = {site!r}: expected a site id",
                       "site") from None
    active_only = request.args.get("active") in ("1", "true", "yes")
    service_clock = clock()
    return jsonify({"alerts": current_alerts(site_id, not active_only),
                    "now": iso(service_clock.now), "clock": service_clock.to_dict(),
                    "caution": CAUTION})


@bp.get("/alerts/<alert_id>.cap")
@Operation(
    id="alert_cap", tag="Alerts", summary="One alert as OASIS CAP 1.2 XML",
    description="The latest message of the alert (msgType Alert, Update or Cancel with "
                "`references` to the earlier messages). Description and instruction carry "
                "the caution.",
    path_params={"alert_id": "Alert id from `GET /v1/alerts`."},
    ok=text_answer("application/cap+xml"), errors=(404,))
def alert_cap(alert_id: str) -> Response:
    """The latest CAP message of one alert."""
    with get_store().read() as s:
        alert = s.get(Alert, alert_id)
        if alert is None:
            raise ApiError(404, "not_found", f"alert {alert_id} does not exist", "id")
        xml = service.cap_for(alert, cap_sender(), cap_status(),
                              float(current_app.config.get("PTYPE_CAP_RADIUS_KM",
                                                           DEFAULT_RADIUS_KM)))
    return Response(xml, mimetype="application/cap+xml")


@bp.get("/alerts.atom")
@Operation(id="alerts_atom", tag="Alerts", summary="Atom feed of the alerts (RFC 4287)",
           description="One entry per alert, linking to its CAP document.",
           ok=text_answer("application/atom+xml"))
def alerts_atom() -> Response:
    """The alerts as an Atom feed, one entry per alert."""
    xml = build_feed(current_alerts(), base_url=request.host_url.rstrip("/"),
                     sender=cap_sender(), now=now())
    return Response(xml, mimetype="application/atom+xml")


@bp.post("/alerts/evaluate")
@Operation(
    id="alerts_evaluate", tag="Alerts", auth=True,
    summary="Re-evaluate every site's alerts now",
    description="For a scheduler: re-runs the rules of every site and expires due alerts.",
    ok=EvaluateResult, errors=(401, 403))
def evaluate() -> Response:
    """Re-run every site's alert rules at the service clock and expire due alerts."""
    require_key()
    with get_store().read() as s:
        ids = site_ids(s)
    actions = []
    for site_id in ids:
        actions.extend(evaluate_alerts(site_id))
    with get_store().write() as s:
        service.expire_due(s, now())
    return jsonify({"evaluated_sites": len(ids), "actions": actions})
