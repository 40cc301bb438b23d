"""Tests of the helpers the views share (api/plumbing.py) and of the operation registry
(api/openapi.py), called directly inside an application context."""

from __future__ import annotations

import json

import numpy as np
import pytest
from flask import Blueprint, Flask
from ptype.api.errors import ApiError
from ptype.api.models import SiteIn
from ptype.api.openapi import Operation, documented_routes
from ptype.api.plumbing import json_kind, json_response, validate_body


def test_json_response_is_strict_json(app):
    # RFC 8259, section 6: "Numeric values that cannot be represented in the grammar below
    # (such as Infinity and NaN) are not permitted."  A numpy scalar that is not a Python
    # float becomes null when not finite; a Python float (numpy's float64 is one) is refused.
    with app.app_context():
        body = json_response({"a": np.float32("nan"), "b": np.int64(3), "c": np.arange(2)})
        assert json.loads(body.get_data()) == {"a": None, "b": 3, "c": [0, 1]}
        assert body.mimetype == "application/json"
        for value in (float("inf"), np.float64("nan")):
            with pytest.raises(ValueError):
                json_response({"a": value})


@pytest.mark.parametrize("value, words", [
    # RFC 8259, section 3: a JSON value is an object, array, number, string, true, false
    # or null.
    ([1], "an array"), ("x", "a string"), (True, "a boolean"), (None, "null"),
    (1, "a number"), (1.5, "a number"), ({}, "dict"),
])
def test_json_kind_names_json_values(value, words):
    assert json_kind(value) == words


@pytest.mark.parametrize("data, status, field", [
    ([1], 400, None),
    ({"latitude": 1, "longitude": 1}, 422, "name"),
    ({"name": "A", "latitude": 91, "longitude": 1}, 422, "latitude"),
    ({"name": "A", "latitude": 1, "longitude": 1, "colour": "red"}, 422, "colour"),
])
def test_validate_body_names_the_field(data, status, field):
    # WGS 84 latitudes lie within -90..90 degrees (common practice).
    with pytest.raises(ApiError) as err:
        validate_body(SiteIn, data)
    assert err.value.status == status and err.value.field == field


def test_documented_routes_follow_the_url_map():
    # OpenAPI 3.1.0, Path Templating: Flask's <int:thing_id> is documented as {thing_id}.
    bp = Blueprint("things", __name__, url_prefix="/v1")

    @bp.get("/things/<int:thing_id>")
    @Operation(id="thing_get", tag="Things", summary="One thing", description="A thing.",
               ok={"description": "Success."}, path_params={"thing_id": "Thing id."})
    def get_thing(thing_id: int) -> str:
        return str(thing_id)

    @bp.get("/hidden")
    def hidden() -> str:
        return ""

    app = Flask(__name__)
    app.register_blueprint(bp)
    routes = documented_routes(app)
    assert [(r.path, r.method, r.operation.id) for r in routes] == [
        ("/v1/things/{thing_id}", "get", "thing_get")]
    assert app.test_client().get("/v1/things/7").get_data(as_text=True) == "7"
