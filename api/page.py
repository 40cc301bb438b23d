"""``GET /``: the forecaster page (own HTML, CSS and JavaScript; no external assets)."""

from __future__ import annotations

from flask import Blueprint, render_template

from ptype import CAUTION

bp = Blueprint("page", __name__)


@bp.get("/")
def index():
    return render_template("index.html", caution=CAUTION)
