"""``GET /openapi.json`` (OpenAPI 3.1) and ``GET /docs`` (the API reference page).

The document is built by :mod:`ptype.api.openapi` from the operations the views declare and the
pydantic models of :mod:`ptype.api.models`; the reference page is rendered on the server from the
same document with our own template and stylesheet, so it works offline.
"""

from __future__ import annotations

import json
from typing import Any

from flask import Blueprint, Flask, Response, current_app, make_response, render_template
from markupsafe import Markup, escape
from ptype.api import budget
from ptype.api.openapi import DocumentedRoute, build_openapi, documented_routes
from ptype.api.plumbing import json_response, secure_html

from ptype.constants import CAUTION

bp = Blueprint("docs", __name__)

#: Key of the cached OpenAPI document in ``app.extensions``.
EXTENSION = "ptype_openapi"
#: Root URL of the server in the examples of the reference page.
EXAMPLE_SERVER = "http://127.0.0.1:8080"


def init_app(app: Flask) -> None:
    """Make room for the cached document; register the ``inline_code`` template filter."""
    app.extensions[EXTENSION] = None
    app.add_template_filter(inline_code, "inline_code")


def inline_code(text: str | None) -> Markup:
    """Escape text and turn `backticked` spans into <code> (the descriptions' only markup)."""
    parts = str(escape(text or "")).split("`")
    return Markup("".join(f"<code>{p}</code>" if i % 2 else p for i, p in enumerate(parts)))


def openapi_document() -> dict:
    """The OpenAPI document of the current application (built once, then cached)."""
    cached = current_app.extensions.get(EXTENSION)
    if cached is None:
        routes = documented_routes(current_app)
        cached = build_openapi(routes, current_app.config.get("MAX_CONTENT_LENGTH"),
                               budget.describe(current_app.config))
        current_app.extensions[EXTENSION] = cached
    return cached


@bp.get("/openapi.json")
def openapi() -> Response:
    """The OpenAPI 3.1 document."""
    return json_response(openapi_document())


def curl_example(route: DocumentedRoute) -> str:
    """The example command of an operation on the reference page."""
    url = EXAMPLE_SERVER + route.path
    if route.operation.curl:
        return route.operation.curl.replace("{server}", EXAMPLE_SERVER).replace("{url}", url)
    if route.method == "get":
        return f"curl -s {url}"
    # The profile operations' form: a JSON profile document with reproducible members.
    return f"curl -s -X POST '{url}?members=50&seed=7' -H 'Content-Type: application/json' " \
           "--data @profile.json"


def _type_text(prop: dict) -> str:
    """A JSON schema as a short type, e.g. ``array of Step`` or ``"png" | "svg"``."""
    if "$ref" in prop:
        return prop["$ref"].rsplit("/", 1)[-1]
    if "anyOf" in prop:
        return " | ".join(_type_text(p) for p in prop["anyOf"])
    if "enum" in prop:
        return " | ".join(json.dumps(v) for v in prop["enum"])
    if "const" in prop:
        return json.dumps(prop["const"])
    kind = prop.get("type", "any")
    if kind == "array":
        return f"array of {_type_text(prop.get('items') or {})}"
    if kind == "object" and isinstance(prop.get("additionalProperties"), dict):
        return f"object of {_type_text(prop['additionalProperties'])}"
    return str(kind)


def _schema_rows(schema: dict) -> list[dict]:
    """The fields of a component schema as table rows."""
    required = set(schema.get("required", []))
    return [{"name": name, "type": _type_text(prop), "required": name in required,
             "description": prop.get("description", "")}
            for name, prop in (schema.get("properties") or {}).items()]


def _example_text(example: Any) -> str:
    return example if isinstance(example, str) else json.dumps(example, indent=2)


def _operation_view(route: DocumentedRoute, spec: dict) -> dict[str, Any]:
    """One operation of the document as the reference page shows it."""
    content = (spec.get("requestBody") or {}).get("content", {})
    responses = []
    for status, answer in spec["responses"].items():
        kinds = answer.get("content", {})
        example = None
        if status != "200":
            example = json.dumps(next(iter(kinds.values()), {}).get("example"), indent=2)
        responses.append((status, answer["description"], ", ".join(kinds.keys()), example))
    return {
        "anchor": route.operation.id, "method": route.method.upper(), "path": route.path,
        "summary": spec["summary"], "description": spec["description"],
        "parameters": spec.get("parameters", []),
        "bodies": [(mime, _example_text(c["example"]), _type_text(c["schema"]))
                   for mime, c in content.items()],
        "responses": responses,
        "curl": curl_example(route),
    }


@bp.get("/docs")
def docs_page() -> Response:
    """The API reference page: every operation and schema of the document."""
    doc = openapi_document()
    operations = [_operation_view(route, doc["paths"][route.path][route.method])
                  for route in documented_routes(current_app)]
    schemas = [{"name": name, "description": s.get("description", ""), "rows": _schema_rows(s)}
               for name, s in doc["components"]["schemas"].items()]
    return secure_html(make_response(render_template(
        "docs.html", info=doc["info"], operations=operations, schemas=schemas,
        caution=CAUTION)))
