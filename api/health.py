"""``GET /healthz``: liveness and version."""

from __future__ import annotations

from flask import Blueprint, jsonify

import ptype

bp = Blueprint("health", __name__)


@bp.get("/healthz")
def healthz():
    return jsonify({"status": "ok", "version": ptype.__version__})
