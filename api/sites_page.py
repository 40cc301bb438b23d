"""``GET /sites``: the page of sites — a timeline strip per site and the active alerts.

Rendered on the server from ``templates/sites.html`` (no script needed, no external
assets): every strip cell carries its type code as text as well as its colour and pattern
(:mod:`ptype.style`), badges for road hazards and ice pellets, and a table repeats the
transitions for screen readers.  A type is named the same way everywhere on the page: its
code (``NONE``, ``FZRA``) and its label.  The strip of "the next N hours" has exactly N
hourly cells, and the page links the timeline JSON of exactly those cells.
"""

from __future__ import annotations

from typing import Any

import sqlalchemy as sa
from flask import Blueprint, Response, make_response, render_template, request, url_for
from ptype.api import budget
from ptype.api.plumbing import cap_sender, get_store, now, secure_html
from ptype.api.tenants import read_owner, reader

from ptype.clock import iso, parse_time
from ptype.codes import LABELS, Code
from ptype.roads.alerts import service
from ptype.store import Site
from ptype.style import HAZARD_STYLES, TYPE_STYLES

bp = Blueprint("sites_page", __name__)

#: Hours of timeline the page shows: the default and the range a request may ask for.
DEFAULT_HOURS = 24
MIN_HOURS, MAX_HOURS = 1, 48
#: Codes with ice pellets in them: their cells carry the pellets badge.
PELLET_CODES = frozenset({"PL", "RAPL", "FZRAPL"})


def _label(code: str) -> str:
    return LABELS[Code[code]]


def strip_cell(step: dict[str, Any]) -> dict[str, Any]:
    """One timeline step as a strip cell: time, type code, badges and spoken title."""
    hazards = step["hazards"]
    keys = [key for key, on in (("ice", hazards["freezing_on_road"]),
                                ("frost", hazards["frost"]),
                                ("pellets", step["ptype"] in PELLET_CODES)) if on]
    badges = [(key, HAZARD_STYLES[key].badge) for key in keys]
    marks = [HAZARD_STYLES[key].label for key in keys]
    time = step["valid_time"][11:16]
    code = step["ptype"]
    title = f"{time} UTC: {code} ({_label(code)})" + (f"; {', '.join(marks)}" if marks else "")
    return {"code": code, "time": time, "title": title, "badges": badges}


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
        "transitions": [{"time": t["time"][11:16], "before": f"{t['from']} ({_label(t['from'])})",
                         "after": f"{t['to']} ({_label(t['to'])})"}
                        for t in timeline.get("transitions", [])],
    }


def alert_view(alert: dict[str, Any]) -> dict[str, Any]:
    """An alert as the page lists it (its headline, else its event)."""
    return dict(alert, headline=alert["headline"] or alert["event"])


def site_view(site: Site, timeline: dict[str, Any], alerts: list[dict],
              query: dict[str, str]) -> dict[str, Any]:
    """One site's section of the page; ``query`` is the timeline request it shows."""
    elevation = f"{site.elevation_m:.0f} m" if site.elevation_m is not None else "elevation ?"
    return {"id": site.id, "name": site.name,
            "position": f"{site.latitude:.3f}, {site.longitude:.3f}", "elevation": elevation,
            "alerts": [alert_view(a) for a in alerts], "strip": strip_view(timeline),
            "timeline_url": url_for("sites.get_timeline", site_id=site.id, **query),
            "figure_url": url_for("site_figures.timeline_figure", site_id=site.id, fmt="svg",
                                  hours=query["hours"], now=query["now"])}


def page_hours(text: str | None) -> int:
    """The ``hours`` option, clipped to the range the page shows; unreadable is the default."""
    try:
        hours = round(float(text if text is not None else DEFAULT_HOURS))
    except (ValueError, OverflowError):
        return DEFAULT_HOURS
    return min(max(hours, MIN_HOURS), MAX_HOURS)


def timeline_query(hours: int, t_iso: str) -> dict[str, str]:
    """The timeline request of the page: ``hours`` hourly cells starting now.

    A timeline includes both ends of its span, so N cells span N - 1 hours.  The same
    parameters make the page's "timeline JSON" link, so the link returns what is shown.
    """
    return {"hours": f"{hours - 1:g}", "step": "1h", "members": "0", "now": t_iso}


def legend() -> list[tuple[str, str, str]]:
    """(code, label, pattern) of every type, then the badges."""
    return [(s.code, s.label, s.pattern) for s in TYPE_STYLES.values()]


@bp.get("/sites")
def sites_page() -> Response:
    """Every site with its active alerts and an hourly type strip (``?hours=``, 1 to 48)."""
    t = now()
    hours = page_hours(request.args.get("hours"))
    owner = read_owner(reader())  # owner-scoped reads: a key, and only its owner's sites
    sites = sa.select(Site).order_by(Site.id)
    if owner is not None:
        sites = sites.where(Site.owner == owner)
    query = timeline_query(hours, iso(t) or "")
    store = get_store()
    sections = []
    with store.read() as s:
        sender = cap_sender()
        for site in list(s.scalars(sites)):
            with budget.computing():
                timeline = service.site_timeline(s, site, t, hours=float(query["hours"]),
                                                 step="1h", members=0)
            alerts = [a for a in service.list_alerts(s, t, sender, include_recent=False,
                                                     site_id=site.id)
                      if parse_time(a["expires"]) > t]  # due to expire: read, never written
            sections.append(site_view(site, timeline, alerts, query))
    html = render_template("sites.html", sites=sections, hours=hours, legend=legend(),
                           badges=list(HAZARD_STYLES.values()))
    return secure_html(make_response(html))
