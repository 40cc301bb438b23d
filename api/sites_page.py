"""``GET /sites``: the page of sites — a timeline strip per site and the active alerts.

Rendered on the server from ``templates/sites.html`` (no script needed, no external
assets): every strip cell carries its type as text as well as colour, and a table repeats
the transitions for screen readers.  The functions here turn timelines and alerts into the
plain values the template shows.
"""

from __future__ import annotations

from typing import Any

import sqlalchemy as sa
from flask import Blueprint, Response, make_response, render_template, request
from ptype.api.plumbing import cap_sender, get_store, now, secure_html

from ptype.clock import iso
from ptype.codes import LABELS, Code
from ptype.constants import CAUTION
from ptype.roads.alerts import service
from ptype.store import Site

bp = Blueprint("sites_page", __name__)

#: Our own palette: cold blues for frozen, magenta-reds for freezing, greens for liquid.
#: (Background, text) pairs; the stylesheet's ``.ty-<CODE>`` classes are these colours
#: (the page's Content-Security-Policy allows no inline styles).
COLOURS = {
    "NONE": ("#eef0f2", "#333"), "SN": ("#2f6fb5", "#fff"), "PL": ("#7a5cc2", "#fff"),
    "FZRA": ("#c2185b", "#fff"), "FZDZ": ("#e0609a", "#111"), "FZRAPL": ("#8e1f5c", "#fff"),
    "RA": ("#237045", "#fff"), "DZ": ("#8fcf9f", "#111"), "RASN": ("#5aa0a8", "#111"),
    "RAPL": ("#55701b", "#fff"),
}

#: Hours of timeline the page shows: the default and the range a request may ask for.
DEFAULT_HOURS = 24.0
MIN_HOURS, MAX_HOURS = 1.0, 48.0


def _label(code: str) -> str:
    return LABELS[Code[code]]


def strip_cell(step: dict[str, Any]) -> dict[str, str]:
    """One timeline step as a strip cell: time, type code, hazard flag and spoken title."""
    hazards = step["hazards"]
    marks, short = [], []
    if hazards["freezing_on_road"]:
        marks.append("ice on road")
        short.append("ice")
    if hazards["frost"]:
        marks.append("frost")
        short.append("frost")
    time = step["valid_time"][11:16]
    title = f"{time} UTC: {_label(step['ptype'])}" + (f" ({', '.join(marks)})" if marks else "")
    return {"code": step["ptype"], "time": time, "title": title, "flag": "/".join(short),
            "text": "dry" if step["ptype"] == "NONE" else step["ptype"]}


def totals_text(totals: dict[str, Any]) -> str:
    """The hazard totals of a timeline as one line."""
    return (f"Ice accretion {totals.get('ice_accretion_mm', 0):.1f} mm · "
            f"glaze {totals.get('flat_glaze_mm', 0):.1f} mm · "
            f"snow {totals.get('snow_cm', 0):.0f} cm · "
            f"freezing on road {totals.get('freezing_on_road_hours', 0):g} h · "
            f"frost {totals.get('frost_hours', 0):g} h")


def strip_view(timeline: dict[str, Any]) -> dict[str, Any]:
    """A site's timeline as the page shows it: cells, totals, changes of type."""
    return {
        "cells": [strip_cell(step) for step in timeline.get("steps") or []],
        "message": timeline.get("message", "No forecast."),
        "totals": totals_text(timeline.get("totals") or {}),
        "transitions": [{"time": t["time"][11:16], "before": _label(t["from"]),
                         "after": _label(t["to"])} for t in timeline.get("transitions", [])],
    }


def alert_view(alert: dict[str, Any]) -> dict[str, Any]:
    """An alert as the page lists it (its headline, else its event)."""
    return dict(alert, headline=alert["headline"] or alert["event"])


def site_view(site: Site, timeline: dict[str, Any], alerts: list[dict]) -> dict[str, Any]:
    """One site's section of the page."""
    elevation = f"{site.elevation_m:.0f} m" if site.elevation_m is not None else "elevation ?"
    return {"id": site.id, "name": site.name,
            "position": f"{site.latitude:.3f}, {site.longitude:.3f}", "elevation": elevation,
            "alerts": [alert_view(a) for a in alerts], "strip": strip_view(timeline)}


def page_hours(text: str | None) -> float:
    """The ``hours`` option, clipped to the range the page shows; unreadable is the default."""
    try:
        return min(max(float(text if text is not None else DEFAULT_HOURS), MIN_HOURS), MAX_HOURS)
    except ValueError:
        return DEFAULT_HOURS


@bp.get("/sites")
def sites_page() -> Response:
    """Every site with its active alerts and an hourly type strip (``?hours=``, 1 to 48)."""
    t = now()
    hours = page_hours(request.args.get("hours"))
    store = get_store()
    sections = []
    with store.read() as s:
        sender = cap_sender()
        for site in list(s.scalars(sa.select(Site).order_by(Site.id))):
            timeline = service.site_timeline(s, site, t, hours=hours, step="1h", members=0)
            alerts = service.list_alerts(s, t, sender, include_recent=False, site_id=site.id)
            sections.append(site_view(site, timeline, alerts))
    html = render_template("sites.html", sites=sections, hours=f"{hours:g}", now=iso(t) or "",
                           legend=[(code, _label(code)) for code in COLOURS], caution=CAUTION)
    return secure_html(make_response(html))
