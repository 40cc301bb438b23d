"""The frame every page shares: the palette stylesheet and mark, and what each page shows
in its header (caution, service clock, navigation).

``GET /style/palette.css`` is generated from :mod:`ptype.style.palette`, the one place the
colours are written; ``GET /style/mark.svg`` is the service's mark in the same colours.
Error pages for browsers (:func:`error_page`) are rendered in this frame too.
"""

from __future__ import annotations

from typing import Any

from flask import Blueprint, Flask, Response, make_response, render_template, request
from ptype.api.errors import ERROR_PAGE
from ptype.api.plumbing import now, secure_html

from ptype.clock import iso
from ptype.constants import CAUTION
from ptype.style import FIGURE, TYPE_STYLES
from ptype.style.css import palette_css

bp = Blueprint("frame", __name__)

#: The pages of the navigation: (endpoint, label), in the order shown.
NAVIGATION = (("page.index", "Forecaster"), ("sites_page.sites_page", "Road sites & alerts"),
              ("alerts.alerts_atom", "Alert feed"), ("docs.docs_page", "API reference"))


def init_app(app: Flask) -> None:
    """Give every template the caution, the service clock and the navigation; render the
    error pages of browsers."""
    app.context_processor(frame_context)
    app.extensions[ERROR_PAGE] = error_page


def frame_context() -> dict[str, Any]:
    """What the frame of every page needs."""
    return {"caution": CAUTION, "service_clock": iso(now()) or "",
            "navigation": NAVIGATION, "current": request.endpoint}


def _cached(response: Response, mimetype: str) -> Response:
    response.mimetype = mimetype
    response.headers["Cache-Control"] = "public, max-age=300"
    return response


@bp.get("/style/palette.css")
def palette() -> Response:
    """The palette as CSS custom properties and ``.ty-<CODE>`` classes."""
    return _cached(make_response(palette_css()), "text/css")


@bp.get("/style/mark.svg")
def mark() -> Response:
    """The mark: a descending trace crossing a dashed 0 degC line, in the palette."""
    svg = ('<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 32 32">'
           f'<rect width="32" height="32" rx="7" fill="{FIGURE["text"]}"/>'
           '<path d="M8 25 L14 16 L11 12 L18 6" stroke="{0}" stroke-width="3" fill="none" '
           'stroke-linecap="round" stroke-linejoin="round"/>'
           '<line x1="22" y1="26" x2="22" y2="6" stroke="{1}" stroke-width="2" '
           'stroke-dasharray="3 2"/></svg>').format(TYPE_STYLES["DZ"].colour,
                                                     TYPE_STYLES["SN"].colour)
    return _cached(make_response(svg), "image/svg+xml")


def error_page(status: int, title: str, message: str) -> Response:
    """An error as a page in the frame, for a browser (the API answers JSON otherwise)."""
    html = render_template("error.html", status=status, title=title, message=message)
    return secure_html(make_response(html, status))
