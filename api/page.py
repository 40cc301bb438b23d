"""``GET /``: the forecaster page (own HTML, CSS and JavaScript; no external assets)."""

from __future__ import annotations

from flask import Blueprint, Response, make_response, render_template
from ptype.api.plumbing import secure_html

from ptype.constants import CAUTION

bp = Blueprint("page", __name__)


@bp.get("/")
def index() -> Response:
    """The forecaster page; it talks to the API from the browser."""
    return secure_html(make_response(render_template("index.html", caution=CAUTION)))
