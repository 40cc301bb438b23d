"""``GET /v1/sites/<id>/timeline.png`` (and ``.svg``): the site's time-height view.

The stored forecast profiles of the site's latest issue as a time-height picture with the
hourly type strip of its timeline underneath (:mod:`ptype.plot.timeheight`).  The
``hours`` and ``now`` options are those of ``GET /v1/sites/<id>/timeline``.
"""

from __future__ import annotations

from datetime import timedelta

from flask import Blueprint, Response, request
from ptype.api.openapi import Operation
from ptype.api.plumbing import get_store, now
from ptype.api.site_ops import site_or_404

from ptype.clock import parse_time
from ptype.errors import OptionError
from ptype.profile import Profile
from ptype.roads.alerts import service

bp = Blueprint("site_figures", __name__, url_prefix="/v1")

SITE_ID = {"site_id": "Site id."}


def _hours() -> float:
    text = request.args.get("hours", "23")
    try:
        hours = float(text)
    except ValueError:
        raise OptionError(f"hours = {text!r}: expected a number", field="hours") from None
    if not 1.0 <= hours <= 72.0:
        raise OptionError(f"hours = {hours:g}: expected 1 to 72", field="hours")
    return hours


@bp.get("/sites/<int:site_id>/timeline.<fmt>")
@Operation(
    id="site_timeline_figure", tag="Sites",
    summary="Time-height view of the site's forecast profiles (PNG or SVG)",
    description="Air temperature filled, wet-bulb as lines, the 0 degC lines, layers above "
                "0 degC hatched, and the hourly type strip underneath, in the palette of "
                "docs/palette.md. `fmt` is `png` or `svg`; `hours` (1 to 72, default 23) and "
                "`now` as for the timeline.",
    path_params={"site_id": "Site id.", "fmt": "`png` or `svg`."},
    ok={"description": "The figure.",
        "content": {"image/png": {"schema": {"type": "string", "format": "binary"}},
                    "image/svg+xml": {"schema": {"type": "string"}}}},
    errors=(400, 404))
def timeline_figure(site_id: int, fmt: str) -> Response:
    """Draw the time-height view of the site's latest issue of profiles."""
    from ptype.plot.timeheight import FORMATS, draw_time_height
    if fmt not in FORMATS:
        raise OptionError(f"format {fmt!r}: expected png or svg", field="fmt")
    hours = _hours()
    t = parse_time(request.args["now"], "now") if "now" in request.args else now()
    with get_store().read() as s:
        site = site_or_404(s, site_id)
        records = service.latest_issue(s, site.id)
        if not records:
            raise OptionError(f"site {site_id}: no profiles have been posted", field="site_id")
        profiles = [Profile.from_document(r.document) for r in records]
        timeline = service.site_timeline(s, site, t, hours=hours, step="1h", members=0)
        name = site.name
    image = draw_time_height(profiles, timeline["steps"], fmt, title=name, start=t,
                             end=t + timedelta(hours=hours))
    response = Response(image, mimetype=FORMATS[fmt])
    response.headers["Cache-Control"] = "no-store"
    return response
