"""``GET /``: the forecaster page (own HTML, CSS and JavaScript; no external assets)."""

from __future__ import annotations

from flask import Blueprint, make_response, render_template

from ptype.constants import CAUTION

bp = Blueprint("page", __name__)

#: The pages load nothing from elsewhere; the policy makes the browser hold them to it.
CONTENT_SECURITY_POLICY = ("default-src 'self'; img-src 'self' blob: data:; style-src 'self'; "
                           "script-src 'self'; connect-src 'self'; object-src 'none'; "
                           "base-uri 'none'; form-action 'self'; frame-ancestors 'none'")


def secure_html(response):
    """Headers for an HTML page of the service."""
    response.headers["Content-Security-Policy"] = CONTENT_SECURITY_POLICY
    response.headers["X-Content-Type-Options"] = "nosniff"
    response.headers["Referrer-Policy"] = "no-referrer"
    return response


@bp.get("/")
def index():
    return secure_html(make_response(render_template("index.html", caution=CAUTION)))
