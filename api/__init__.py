"""The ptype HTTP service (Flask application factory).

``create_app(config)`` builds the application; each resource is a blueprint in its own
module listed in :data:`BLUEPRINT_MODULES` (a module exposes ``bp``).  Views only parse
the request, call the library and serialise the answer; what several views share lives in
:mod:`ptype.api.plumbing` (requests, answers, store, clock, key) and
:mod:`ptype.api.site_ops` (sites and alerts), the wire format in :mod:`ptype.api.models`,
and each view carries its OpenAPI description (:mod:`ptype.api.openapi`).  All errors are
mapped to JSON
``{"error": {"code", "message", "field"?}}`` by :mod:`ptype.api.errors`.

The API lives under ``/v1`` (each API blueprint's ``url_prefix``); the pages (``/``,
``/sites``, ``/docs``) and ``/openapi.json`` and ``/healthz`` do not.
"""

from __future__ import annotations

import importlib
import os
from collections.abc import Mapping
from pathlib import Path
from typing import Any

from flask import Flask

#: Blueprint modules, registered in this order, which is also the order of the operations
#: in the OpenAPI document.  Each exposes ``bp`` and may expose ``init_app(app)``.
BLUEPRINT_MODULES = ["ptype.api.diagnose", "ptype.api.diagram", "ptype.api.demo",
                     "ptype.api.health", "ptype.api.verify", "ptype.api.sites", "ptype.api.ingest",
                     "ptype.api.site_figures", "ptype.api.alerts", "ptype.api.page",
                     "ptype.api.docs", "ptype.api.sites_page", "ptype.api.frame"]

DEFAULT_CONFIG: dict[str, Any] = {
    # Largest request body accepted, bytes.
    "MAX_CONTENT_LENGTH": 1 * 1024 * 1024,
    # Largest number of levels in one profile.
    "PTYPE_MAX_LEVELS": 2000,
    # Largest number of profiles in one batch request.
    "PTYPE_MAX_BATCH": 500,
    # Largest Monte-Carlo member count a request may ask for.
    "PTYPE_MAX_MEMBERS": 1000,
    # Largest Monte-Carlo work per request, members x levels summed over its profiles.  It
    # bounds the time and memory one request can take (about 3 s and 1 GB at this limit on
    # a 2-core machine; 60 levels x 50 members is 3000).
    "PTYPE_MAX_MEMBER_LEVELS": 1_000_000,
    # Largest model file accepted by POST /v1/ingest, bytes.
    "PTYPE_MAX_INGEST_BYTES": 1 << 30,
    # Largest number of cases in one verification request.
    "PTYPE_MAX_VERIFY_CASES": 500,
    # Largest cases x members product in one verification request (bounds its work).
    "PTYPE_MAX_VERIFY_MEMBER_COLUMNS": 50_000,
    # Where the service keeps its database and other state.
    "PTYPE_DATA_DIR": None,
    # Load the demo sites and storm into an empty store on start.
    "PTYPE_DEMO": False,
    "JSON_SORT_KEYS": False,
}


def create_app(config: Mapping[str, Any] | None = None) -> Flask:
    """Build the application.

    Parameters
    ----------
    config : mapping, optional
        Overrides of :data:`DEFAULT_CONFIG` (and any Flask setting).  ``PTYPE_DATA_DIR``
        defaults to the environment variable of that name, else ``./.data``.
    """
    from ptype.api import budget, clients, errors, headers, plumbing, site_ops
    app = Flask(__name__, static_folder="static", static_url_path="/static")
    app.config.update(DEFAULT_CONFIG)
    app.config["PTYPE_DATA_DIR"] = os.environ.get("PTYPE_DATA_DIR") or str(Path.cwd() / ".data")
    if config:
        app.config.update(dict(config))
    app.json.sort_keys = False
    errors.init_app(app)
    headers.init_app(app)
    budget.init_app(app)
    clients.init_app(app)
    plumbing.init_app(app)
    for name in BLUEPRINT_MODULES:
        module = importlib.import_module(name)
        if hasattr(module, "init_app"):
            module.init_app(app)
        app.register_blueprint(module.bp)
    if site_ops.demo_requested(app):
        site_ops.load_demo(app)
    return app
