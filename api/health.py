"""``GET /healthz``: liveness and version."""

from __future__ import annotations

from flask import Blueprint, Response, jsonify
from ptype.api.models import Health
from ptype.api.openapi import Operation

import ptype

bp = Blueprint("health", __name__)


@bp.get("/healthz")
@Operation(id="health", tag="Service", summary="Liveness and version",
           description="Answers while the service is up.", ok=Health)
def healthz() -> Response:
    """``{"status": "ok", "version"}`` while the service is up."""
    return jsonify({"status": "ok", "version": ptype.__version__})
