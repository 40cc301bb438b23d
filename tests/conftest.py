"""Fixtures shared by the test modules.

* ``make_app(**config)``: a fresh service application on a temporary data folder (its store
  is closed after the test); ``app`` and ``client``: one such application per module, for
  the stateless endpoints.
* ``tests/api_support.py`` and ``tests/series_helpers.py`` hold the invented soundings the
  HTTP and timeline tests share (plain helpers, imported by name).
"""

from __future__ import annotations

import pytest
from ptype.api import create_app


def _dispose(app) -> None:
    from ptype.api.plumbing import EXTENSION
    store = app.extensions.get(EXTENSION)
    if store is not None:
        store.dispose()


@pytest.fixture
def make_app(tmp_path):
    """``make_app(**config)`` -> a new application with ``TESTING`` on and its data in a
    temporary folder (``PTYPE_DATA_DIR``), unless the config says otherwise."""
    made = []

    def make(**config):
        app = create_app({"TESTING": True, "PTYPE_DATA_DIR": str(tmp_path / f"data{len(made)}"),
                          **config})
        made.append(app)
        return app

    yield make
    for app in made:
        _dispose(app)


@pytest.fixture(scope="module")
def app(tmp_path_factory):
    """One stateless application for the module (diagnose, diagram, docs, demo)."""
    app = create_app({"TESTING": True, "PTYPE_DATA_DIR": str(tmp_path_factory.mktemp("data"))})
    yield app
    _dispose(app)


@pytest.fixture
def client(app):
    return app.test_client()
