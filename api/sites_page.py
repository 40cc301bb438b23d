"""``GET /sites``: the page of sites — a timeline strip per site and the active alerts.

Rendered on the server (no script needed, no external assets): every strip cell carries its
type as text as well as colour, and a table repeats the transitions for screen readers.
"""

from __future__ import annotations

from html import escape

import sqlalchemy as sa
from flask import Blueprint, Response, request

from api.plumbing import cap_sender, get_store, now, secure_html
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


def _strip(timeline: dict) -> str:
    steps = timeline.get("steps") or []
    if not steps:
        return f"<p class='empty'>{escape(timeline.get('message', 'No forecast.'))}</p>"
    cells = []
    for s in steps:
        hz = s["hazards"]
        marks, short = [], []
        if hz["freezing_on_road"]:
            marks.append("ice on road")
            short.append("ice")
        if hz["frost"]:
            marks.append("frost")
            short.append("frost")
        title = (f"{s['valid_time'][11:16]} UTC: {LABELS[Code[s['ptype']]]}"
                 + (f" ({', '.join(marks)})" if marks else ""))
        flag = (f"<span class='h' aria-hidden='true'>{'/'.join(short)}</span>" if short
                else "<span class='h none' aria-hidden='true'>&nbsp;</span>")
        cells.append(f"<li class='ty-{escape(s['ptype'])}' title='{escape(title)}'>"
                     f"<span class='t'>{s['valid_time'][11:16]}</span>"
                     f"<span class='c'>{'dry' if s['ptype'] == 'NONE' else escape(s['ptype'])}</span>"
                     f"{flag}"
                     f"<span class='sr'>{escape(title)}</span></li>")
    rows = "".join(f"<tr><td>{t['time'][11:16]} UTC</td><td>{escape(LABELS[Code[t['from']]])}"
                   f"</td><td>{escape(LABELS[Code[t['to']]])}</td></tr>"
                   for t in timeline.get("transitions", []))
    tot = timeline.get("totals") or {}
    totals = (f"<p class='totals'>Ice accretion {tot.get('ice_accretion_mm', 0):.1f} mm · "
              f"glaze {tot.get('flat_glaze_mm', 0):.1f} mm · snow {tot.get('snow_cm', 0):.0f} cm · "
              f"freezing on road {tot.get('freezing_on_road_hours', 0):g} h · "
              f"frost {tot.get('frost_hours', 0):g} h</p>")
    table = (f"<table><caption>Changes of type</caption><thead><tr><th>Time</th><th>From</th>"
             f"<th>To</th></tr></thead><tbody>{rows}</tbody></table>" if rows else
             "<p class='note'>No change of type in this period.</p>")
    return f"<ol class='strip' aria-label='precipitation type by time'>{''.join(cells)}</ol>" \
           f"{totals}{table}"


def _alert_list(alerts: list[dict]) -> str:
    if not alerts:
        return "<p class='note'>No active alerts.</p>"
    items = []
    for a in alerts:
        items.append(
            f"<li class='alert sev-{escape(a['severity'].lower())}'>"
            f"<strong>{escape(a['severity'])}</strong> · {escape(a['headline'] or a['event'])}"
            f"<br><span class='when'>{escape(a['onset'])} to {escape(a['expires'])} · "
            f"{escape(a['certainty'])} · {escape(a['urgency'])} · {escape(a['msg_type'])}</span>"
            f" · <a href='/v1/alerts/{escape(a['id'])}.cap'>CAP</a></li>")
    return "<ul class='alerts'>" + "".join(items) + "</ul>"


def _legend() -> str:
    items = "".join(f"<li><span class='sw ty-{code}'>{code}</span> "
                    f"{escape(LABELS[Code[code]])}</li>" for code in COLOURS)
    items += ("<li><span class='sw key'>ice</span> freezing precipitation on the road</li>"
              "<li><span class='sw key'>frost</span> hoar frost on the road</li>")
    return f"<ul class='legend' aria-label='legend'>{items}</ul>"


@bp.get("/sites")
def sites_page():
    t = now()
    try:
        hours = min(max(float(request.args.get("hours", 24)), 1.0), 48.0)
    except ValueError:
        hours = 24.0
    store = get_store()
    with store.write() as s:
        service.expire_due(s, t)
    sections = []
    with store.read() as s:
        sites = list(s.scalars(sa.select(Site).order_by(Site.id)))
        sender = cap_sender()
        for site in sites:
            timeline = service.site_timeline(s, site, t, hours=hours, step="1h", members=0)
            alerts = service.list_alerts(s, t, sender, include_recent=False, site_id=site.id)
            elev = f"{site.elevation_m:.0f} m" if site.elevation_m is not None else "elevation ?"
            sections.append(
                f"<section class='site' aria-labelledby='site-{site.id}'>"
                f"<h2 id='site-{site.id}'>{escape(site.name)}</h2>"
                f"<p class='meta'>{site.latitude:.3f}, {site.longitude:.3f} · {elev} · "
                f"<a href='/v1/sites/{site.id}/timeline'>timeline JSON</a></p>"
                f"<h3>Active alerts</h3>{_alert_list(alerts)}"
                f"<h3>Next {hours:g} hours</h3>{_strip(timeline)}</section>")
    body = "".join(sections) or "<p>No sites yet. Create one with <code>POST /v1/sites</code>.</p>"
    html = f"""<!doctype html>
<html lang="en"><head><meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>ptype · sites</title><link rel="icon" href="/static/mark.svg" type="image/svg+xml">
<link rel="stylesheet" href="/static/sites.css"></head>
<body><header><h1>Sites: type timeline and road alerts</h1>
<nav><a href="/">Forecaster view</a> · <a href="/v1/alerts.atom">Alert feed (Atom)</a> ·
<a href="/v1/alerts">Alerts JSON</a></nav>
<p class="now">Time now: {escape(iso(t) or '')}</p>
<p class="caution" role="note">{escape(CAUTION)}</p></header>
<main>{_legend()}{body}</main>
<footer><p>{escape(CAUTION)}</p></footer></body></html>"""
    return secure_html(Response(html, mimetype="text/html"))
