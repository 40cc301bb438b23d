"""Headers every answer carries, whatever produced it (views, errors, static files).

* ``X-Content-Type-Options: nosniff``: a browser takes each answer as the type it is sent as
  (JSON, SVG, Atom, CSS, PNG, HTML), never guesses another;
* ``X-Frame-Options: DENY``: no page of ours inside another site's frame (the HTML pages
  also say ``frame-ancestors 'none'`` in their Content-Security-Policy);
* no CORS headers, unless ``PTYPE_CORS_ORIGINS`` (configuration or environment; a list or a
  comma-separated string of origins such as ``https://ops.example``) names the requesting
  ``Origin``: then that origin, and only it, may read the answers from a script.
"""

from __future__ import annotations

import os

from flask import Flask, Response, current_app, request


def cors_origins() -> set[str]:
    """The origins allowed to read answers from a script (empty: none)."""
    value = current_app.config.get("PTYPE_CORS_ORIGINS") or os.environ.get("PTYPE_CORS_ORIGINS")
    if not value:
        return set()
    items = value.split(",") if isinstance(value, str) else value
    return {str(item).strip().rstrip("/") for item in items if str(item).strip()}


def add_headers(response: Response) -> Response:
    """``response`` with the headers of every answer (and CORS when configured)."""
    response.headers["X-Content-Type-Options"] = "nosniff"
    response.headers.setdefault("X-Frame-Options", "DENY")
    origin = request.headers.get("Origin")
    if origin and origin.rstrip("/") in cors_origins():
        response.headers["Access-Control-Allow-Origin"] = origin
        response.headers["Access-Control-Allow-Headers"] = "Authorization, Content-Type"
        response.headers["Access-Control-Allow-Methods"] = "GET, POST, OPTIONS"
        response.vary.add("Origin")
    return response


def init_app(app: Flask) -> None:
    """Add the headers to every answer of ``app``."""
    app.after_request(add_headers)
