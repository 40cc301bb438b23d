"""Alerts: ``GET /v1/alerts`` (JSON), ``GET /v1/alerts/<id>.cap`` (CAP 1.2 XML),
``GET /v1/alerts.atom`` (Atom feed) and ``POST /v1/alerts/evaluate`` (key; re-evaluate all
sites now, e.g. from cron so that alerts expire and move with the clock)."""

from __future__ import annotations

import os

from flask import (
    Blueprint,
    Flask,
    Response,
    current_app,
    jsonify,
    make_response,
    render_template,
    request,
)
from ptype.api.errors import ApiError, wants_html
from ptype.api.inputs import check_id
from ptype.api.models import AlertList, AlertListOptions, EvaluateResult
from ptype.api.openapi import Operation, text_answer
from ptype.api.plumbing import cap_sender, clock, get_store, now, secure_html
from ptype.api.site_ops import current_alerts, evaluate_alerts, site_ids
from ptype.api.tenants import read_owner, reader, require_caller

from ptype.clock import iso
from ptype.constants import CAUTION
from ptype.roads.alerts import service
from ptype.roads.alerts.atom import build_feed
from ptype.roads.alerts.cap import DEFAULT_RADIUS_KM, STATUS, deployment_scope
from ptype.store import Alert, Site

bp = Blueprint("alerts", __name__, url_prefix="/v1")

#: Longest alert id (the store's column); a longer one names no alert.
MAX_ALERT_ID = 64


def init_app(app: Flask) -> None:
    """Check the deployment's CAP scope settings when the service starts, not at the first
    CAP request."""
    try:
        deployment_scope(app.config)
    except ValueError as exc:
        raise ValueError(f"PTYPE_CAP_SCOPE: {exc}") from None


def cap_status() -> str | None:
    """The configured CAP status, or None to use the one recorded with each message."""
    status = current_app.config.get("PTYPE_CAP_STATUS") or os.environ.get("PTYPE_CAP_STATUS")
    return status if status in STATUS else None


@bp.get("/alerts")
@Operation(
    id="alerts_list", tag="Alerts", summary="Active and recently ended alerts",
    description="Road hazards found in the sites' timelines, with their lifecycle "
                "(new, updated, cancelled when the hazard leaves the forecast, expired).",
    query=AlertListOptions, ok=AlertList, errors=(400, 401, 403))
def list_alerts() -> Response:
    """The alerts, of every site or of ``?site=``; ``?active=1`` leaves out ended ones."""
    site = request.args.get("site")
    site_id = check_id(site, "site") if site is not None else None
    active_only = request.args.get("active") in ("1", "true", "yes")
    owner = read_owner(reader())
    service_clock = clock()
    return jsonify({"alerts": current_alerts(site_id, not active_only, owner=owner),
                    "now": iso(service_clock.now), "clock": service_clock.to_dict(),
                    "caution": CAUTION})


@bp.get("/alerts/<alert_id>.cap")
@Operation(
    id="alert_cap", tag="Alerts", summary="One alert as OASIS CAP 1.2 XML",
    description="The latest message of the alert (msgType Alert, Update or Cancel with "
                "`references` to the earlier messages). Description and instruction carry "
                "the caution.",
    path_params={"alert_id": "Alert id from `GET /v1/alerts`."},
    ok=text_answer("application/cap+xml"), errors=(401, 403, 404))
def alert_cap(alert_id: str) -> Response:
    """The latest CAP message of one alert."""
    owner = read_owner(reader())
    with get_store().read() as s:
        alert = s.get(Alert, alert_id) if len(alert_id) <= MAX_ALERT_ID else None
        if alert is not None and owner is not None and s.get(Site, alert.site_id).owner != owner:
            alert = None  # another owner's alert does not exist for this reader
        if alert is None:
            raise ApiError(404, "not_found", f"alert {alert_id} does not exist", "id")
        xml = service.cap_for(alert, cap_sender(), cap_status(),
                              float(current_app.config.get("PTYPE_CAP_RADIUS_KM",
                                                           DEFAULT_RADIUS_KM)),
                              **deployment_scope(current_app.config))
    return Response(xml, mimetype="application/cap+xml")


@bp.get("/alerts.atom")
@Operation(id="alerts_atom", tag="Alerts", summary="Atom feed of the alerts (RFC 4287)",
           description="One entry per alert, linking to its CAP document. A browser that "
                       "asks for HTML first gets the same entries as a page in the site's "
                       "frame; feed readers (and `?raw=1`) get the XML.",
           ok=text_answer("application/atom+xml"), errors=(401, 403))
def alerts_atom() -> Response:
    """The alerts as an Atom feed, one entry per alert (of the reader's owner when reads are
    owner-scoped; a page for browsers)."""
    alerts = current_alerts(owner=read_owner(reader()))
    if wants_html() and request.args.get("raw") != "1":
        html = render_template("feed.html", alerts=alerts)
        return secure_html(make_response(html))
    xml = build_feed(alerts, base_url=request.host_url.rstrip("/"), sender=cap_sender(),
                     now=now())
    return Response(xml, mimetype="application/atom+xml")


@bp.post("/alerts/evaluate")
@Operation(
    id="alerts_evaluate", tag="Alerts", auth=True,
    summary="Re-evaluate every site's alerts now",
    description="For a scheduler: re-runs the rules of every site the key may write to "
                "(its owner's; every site for an administrator's key) and expires due alerts.",
    ok=EvaluateResult, errors=(401, 403, 429, 503))
def evaluate() -> Response:
    """Re-run the alert rules of the caller's sites at the service clock, expire due alerts."""
    caller = require_caller()
    with get_store().read() as s:
        ids = site_ids(s, None if caller.admin else caller.owner)
    actions = []
    for site_id in ids:
        actions.extend(evaluate_alerts(site_id))
    with get_store().write() as s:
        service.expire_due(s, now())
    return jsonify({"evaluated_sites": len(ids), "actions": actions})
