"""Tests of ``GET /openapi.json``, ``GET /docs`` (api/docs.py, api/openapi.py) and the
forecaster page ``GET /`` (api/page.py)."""

from __future__ import annotations

import re
from html.parser import HTMLParser

import jsonschema_rs
import pytest
from ptype.api.openapi import documented_routes
from schemathesis.specs.openapi.definitions import OPENAPI_31  # the OAS 3.1 meta-schema

import ptype


@pytest.fixture(scope="module")
def spec(app):
    return app.test_client().get("/openapi.json").get_json()


def test_openapi_is_valid_openapi_3_1(spec):
    # Validated against the official OpenAPI 3.1 JSON Schema (OpenAPI Initiative, 2021),
    # as bundled by schemathesis.
    assert spec["openapi"] == "3.1.0"
    errors = [str(e) for e in jsonschema_rs.validator_for(OPENAPI_31).iter_errors(spec)]
    assert errors == []


#: Routes that are pages or the document itself, not operations of the API.
#: Pages and the assets of their frame (not part of the versioned API).
PAGES = ("/", "/docs", "/openapi.json", "/sites", "/style/palette.css", "/style/mark.svg")


def test_openapi_documents_every_route(app, spec):
    documented = {(path, method) for path, item in spec["paths"].items() for method in item}
    served = set()
    for rule in app.url_map.iter_rules():
        if rule.endpoint == "static" or rule.rule in PAGES:
            continue
        # OpenAPI 3.1.0, Path Templating: a template expression {name} marks a path parameter.
        path = re.sub(r"<(?:\w+:)?(\w+)>", r"{\1}", rule.rule)
        for method in rule.methods - {"HEAD", "OPTIONS"}:
            served.add((path, method.lower()))
    assert served == documented


def test_openapi_operation_ids_unique_and_tags_declared(spec):
    # OpenAPI 3.1.0, Operation Object, operationId: "The id MUST be unique among all
    # operations described in the API."
    ids = [op["operationId"] for item in spec["paths"].values() for op in item.values()]
    assert len(ids) == len(set(ids))
    tags = {t["name"] for t in spec["tags"]}
    assert {tag for item in spec["paths"].values() for op in item.values()
            for tag in op["tags"]} == tags


def test_openapi_path_parameters_match_the_path(spec):
    # OpenAPI 3.1.0, Parameter Object: the name of a path parameter MUST correspond to a
    # template expression of the path, and its `required` MUST be true.
    for path, item in spec["paths"].items():
        names = set(re.findall(r"{(\w+)}", path))
        for op in item.values():
            params = {p["name"] for p in op.get("parameters", []) if p["in"] == "path"}
            assert params == names, (path, op["operationId"])
            assert all(p["required"] for p in op.get("parameters", []) if p["in"] == "path")


def test_api_routes_live_under_v1_and_pages_do_not(app):
    # URL-path versioning of the API (common practice); pages and the liveness check are
    # outside it so that they never move with a version.
    for rule in app.url_map.iter_rules():
        if rule.endpoint == "static":
            continue
        unversioned = rule.rule in PAGES or rule.rule == "/healthz"
        assert rule.rule.startswith("/v1/") != unversioned, rule.rule


def test_openapi_errors_examples_and_refs_resolve(app, spec):
    schemas = spec["components"]["schemas"]
    text = str(spec)
    for ref in re.findall(r"#/components/schemas/([A-Za-z0-9_.-]+)", text):
        assert ref in schemas
    routes = documented_routes(app)
    assert routes
    for route in routes:
        operation = spec["paths"][route.path][route.method]
        for status in route.operation.errors:
            response = operation["responses"][str(status)]
            media = response["content"]["application/json"]
            assert media["schema"] == {"$ref": "#/components/schemas/ErrorResponse"}
            assert set(media["example"]["error"]) >= {"code", "message"}
        for media in (operation.get("requestBody") or {}).get("content", {}).values():
            assert media["example"]
    assert "ProfileDocument" in schemas and "Diagnosis" in schemas


def test_openapi_request_example_is_accepted(app, spec):
    client = app.test_client()
    body = spec["paths"]["/v1/diagnose"]["post"]["requestBody"]["content"]
    assert client.post("/v1/diagnose", json=body["application/json"]["example"]).status_code == 200
    assert client.post("/v1/diagnose", data=body["text/csv"]["example"],
                       content_type="text/csv").status_code == 200


class _Collector(HTMLParser):
    def __init__(self):
        super().__init__()
        self.tags: list[tuple[str, dict]] = []

    def handle_starttag(self, tag, attrs):
        self.tags.append((tag, dict(attrs)))


def _tags(html: str) -> list[tuple[str, dict]]:
    parser = _Collector()
    parser.feed(html)
    return parser.tags


def _no_external_assets(tags):
    for tag, attrs in tags:
        for key in ("src", "href"):
            value = attrs.get(key) or ""
            assert not re.match(r"^(https?:)?//", value), (tag, value)


def test_docs_page_lists_every_operation(app, spec):
    html = app.test_client().get("/docs").get_data(as_text=True)
    for path, item in spec["paths"].items():
        for method in item:
            assert f"<code>{path}</code>" in html
    assert "curl -s" in html and ptype.CAUTION in html
    _no_external_assets(_tags(html))


def test_page_is_self_contained_and_labelled(app):
    client = app.test_client()
    response = client.get("/")
    assert response.status_code == 200
    html = response.get_data(as_text=True)
    tags = _tags(html)
    _no_external_assets(tags)
    # Every form control has a <label for=...> (WCAG 2.1 SC 1.3.1 / 4.1.2).
    labelled = {attrs.get("for") for tag, attrs in tags if tag == "label"}
    controls = [attrs for tag, attrs in tags if tag in ("input", "select", "textarea")]
    assert controls
    for attrs in controls:
        assert attrs.get("id") in labelled, attrs
    # Local assets are served.
    for tag, attrs in tags:
        ref = attrs.get("src") or (attrs.get("href") if tag == "link" else None)
        if ref and ref.startswith("/static/"):
            with client.get(ref) as asset:
                assert asset.status_code == 200, ref
    assert ptype.CAUTION in html
    with client.get("/static/page.js") as asset:
        js = asset.get_data(as_text=True)
    assert "http://" not in js and "https://" not in js


def test_pages_carry_security_headers(app):
    client = app.test_client()
    for path in ("/", "/docs"):
        response = client.get(path)
        policy = response.headers["Content-Security-Policy"]
        assert "default-src 'self'" in policy and "script-src 'self'" in policy
        assert response.headers["X-Content-Type-Options"] == "nosniff"
