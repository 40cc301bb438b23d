"""``GET /openapi.json`` (OpenAPI 3.1, generated from :mod:`api.models`) and ``GET /docs``.

The document is built from a small registry of operations (:data:`OPERATIONS`)
and the pydantic models; the reference page is rendered on the server from the
same document with our own template and stylesheet, so it works offline.
"""

from __future__ import annotations

import copy
import json
from typing import Any

from flask import Blueprint, current_app, render_template
from pydantic import BaseModel
from pydantic.json_schema import models_json_schema

import ptype
from api import models as m
from api.diagnose import json_response
from ptype.profile.document import ProfileDocument

bp = Blueprint("docs", __name__)

# -- examples (invented data) -----------------------------------------------------------
EXAMPLE_DOCUMENT = {
    "site": {"id": "KV-03", "name": "Kestrel Vale", "elevation_m": 212},
    "valid_time": "2026-01-14T06:00Z",
    "levels": [
        {"pressure_hpa": 990, "height_m": 212, "temperature_c": -2.4, "dewpoint_c": -3.0},
        {"pressure_hpa": 950, "temperature_c": -3.6, "dewpoint_c": -4.0},
        {"pressure_hpa": 900, "temperature_c": 1.5, "dewpoint_c": 1.0},
        {"pressure_hpa": 850, "temperature_c": 4.2, "dewpoint_c": 3.8},
        {"pressure_hpa": 800, "temperature_c": 1.0, "dewpoint_c": 0.6},
        {"pressure_hpa": 700, "temperature_c": -6.5, "dewpoint_c": -7.2},
        {"pressure_hpa": 600, "temperature_c": -14.0, "dewpoint_c": -15.5},
        {"pressure_hpa": 500, "temperature_c": -23.0, "dewpoint_c": -26.0},
    ],
}
EXAMPLE_CSV = ("# site_name: Kestrel Vale\n# valid_time: 2026-01-14T06:00Z\n"
               "pressure_hpa,temperature_c,dewpoint_c\n990,-2.4,-3.0\n950,-3.6,-4.0\n"
               "900,1.5,1.0\n850,4.2,3.8\n800,1.0,0.6\n700,-6.5,-7.2\n600,-14.0,-15.5\n"
               "500,-23.0,-26.0\n")
EXAMPLE_ERRORS = {
    401: ("unauthorized", "this operation needs an API key", None),
    403: ("forbidden", "this API key may not do that", None),
    409: ("conflict", "a resource with that identifier already exists", "id"),
    400: ("invalid_option", ("unknown query option 'member'; accepted: input, members, methods, "
                            "seed, wetbulb"), "member"),
    404: ("not_found", "no demo sounding named 'nowhere.json'; GET /v1/demo lists them", "name"),
    413: ("request_entity_too_large", "request body is larger than the limit of 1048576 bytes",
          None),
    415: ("unsupported_media_type", ("Content-Type 'application/xml' is not accepted; send "
                                    "application/json (profile document), text/csv or "
                                    "text/plain (WMO TEMP or CSV)"), None),
    422: ("invalid_profile", "levels[2].temperature_c = 'warm': expected a number",
           "levels[2].temperature_c"),
}
ERROR_TEXT = {400: "Bad query option or unreadable JSON.", 404: "No such resource.",
              401: "Missing or unknown API key.", 403: "Not allowed for this API key.",
              409: "Conflicts with what is stored.",
              413: "Body, levels, batch or members x levels larger than the server accepts.",
              415: "Content type not accepted.",
              422: "The body was read but is not a valid profile."}

_PROFILE_BODIES = {
    "application/json": {"model": ProfileDocument, "example": EXAMPLE_DOCUMENT},
    "text/csv": {"schema": {"type": "string", "description": "CSV profile (docs/formats.md)."},
                 "example": EXAMPLE_CSV},
    "text/plain": {"schema": {"type": "string",
                              "description": "WMO TEMP message (TTAA/TTBB) or CSV text."},
                   "example": EXAMPLE_CSV},
}

#: The operations of the service. ``query`` is a model whose fields are query parameters.
OPERATIONS: list[dict[str, Any]] = [
    {"path": "/v1/diagnose", "method": "post", "id": "diagnose", "tag": "Diagnosis",
     "summary": "Diagnose the precipitation type of one profile",
     "description": "Send one profile as a JSON profile document, CSV or WMO TEMP text. The "
                    "answer gives the consensus type, its probabilities, each method's result "
                    "with the rule that fired, the layers, a plain-language explanation and "
                    "the caution.",
     "query": m.DiagnoseOptions, "body": _PROFILE_BODIES,
     "ok": ("application/json", m.Diagnosis), "errors": (400, 413, 415, 422)},
    {"path": "/v1/diagnose/batch", "method": "post", "id": "diagnose_batch", "tag": "Diagnosis",
     "summary": "Diagnose several profiles in one request",
     "description": "Each profile is diagnosed on its own; an invalid one gets an "
                    "`{\"error\": ...}` entry in its place and the others still succeed. "
                    "Results keep the order of the request. The Monte-Carlo members of all "
                    "profiles run in one vectorised pass; with `seed` the batch is "
                    "reproducible as a whole.",
     "query": m.DiagnoseOptions,
     "body": {"application/json": {"model": m.BatchRequest,
                                   "example": {"profiles": [EXAMPLE_DOCUMENT]}}},
     "ok": ("application/json", m.BatchResponse), "errors": (400, 413, 415, 422)},
    {"path": "/v1/diagram", "method": "post", "id": "diagram", "tag": "Diagram",
     "summary": "Skew-T log-p diagram of a profile (PNG or SVG)",
     "description": "Temperature, dew point and wet-bulb against log pressure with the 0 degC "
                    "isotherm, melting and refreezing areas labelled in J/kg, cloud layers, the "
                    "consensus type and probabilities in the title and the caution. Choose the "
                    "image with `?format=` or the `Accept` header (PNG by default).",
     "query": m.DiagramOptions, "body": _PROFILE_BODIES,
     "ok": ("image", None), "errors": (400, 413, 415, 422)},
    {"path": "/v1/demo", "method": "get", "id": "demo_list", "tag": "Demo",
     "summary": "List the demo soundings (invented data)",
     "description": "The demo soundings shipped with the service, from a fictional region.",
     "ok": ("application/json", m.DemoList), "errors": ()},
    {"path": "/v1/demo/{name}", "method": "get", "id": "demo_document", "tag": "Demo",
     "summary": "One demo sounding, as stored",
     "description": "Returned with the content type of its format (JSON, CSV or WMO TEMP text) "
                    "so that it can be posted to `/v1/diagnose` unchanged.",
     "path_params": {"name": "File name from `GET /v1/demo`, e.g. "
                                    "`korrim-pass_20260127T1000.json`."},
     "ok": ("document", None), "errors": (404,)},
    {"path": "/healthz", "method": "get", "id": "health", "tag": "Service",
     "summary": "Liveness and version", "description": "Answers while the service is up.",
     "ok": ("application/json", m.Health), "errors": ()},
]


def all_operations() -> list[dict[str, Any]]:
    """:data:`OPERATIONS` plus those other resource modules declare.

    A blueprint module listed in ``api.BLUEPRINT_MODULES`` documents itself by exposing
    ``OPENAPI_OPERATIONS``: a list of dicts of the same shape as :data:`OPERATIONS`
    (``path``, ``method``, ``id``, ``tag``, ``summary``, ``description``, optional ``query``
    model, ``path_params``, ``body`` {media type: {"model"|"schema", "example"}}, ``ok``
    (media type, model) and ``errors`` (statuses answered with :class:`ErrorResponse`)).
    """
    import importlib

    from api import BLUEPRINT_MODULES
    ops = list(OPERATIONS)
    for name in BLUEPRINT_MODULES:
        module = importlib.import_module(name)
        ops += list(getattr(module, "OPENAPI_OPERATIONS", ()))
    return ops


def _schemas(operations: list[dict]) -> tuple[dict[str, dict], dict]:
    """Component schemas of every model used, with `#/components/schemas/...` references."""
    used: list[type[BaseModel]] = [m.ErrorResponse]
    for op in operations:
        for spec in (op.get("body") or {}).values():
            if "model" in spec:
                used.append(spec["model"])
        if op["ok"][1] is not None:
            used.append(op["ok"][1])
    unique = list(dict.fromkeys(used))
    keys, defs = models_json_schema([(model, "validation") for model in unique],
                                    ref_template="#/components/schemas/{model}")
    refs = {model: keys[(model, "validation")]["$ref"] for model in unique}
    return defs.get("$defs", {}), refs


def _query_parameters(model: type[BaseModel]) -> list[dict]:
    schema = model.model_json_schema(by_alias=True)
    out = []
    for name, prop in schema.get("properties", {}).items():
        prop = copy.deepcopy(prop)
        description = prop.pop("description", "")
        examples = prop.pop("examples", None)
        prop.pop("title", None)
        param = {"name": name, "in": "query", "required": False, "description": description,
                 "schema": prop}
        if examples:
            param["example"] = examples[0]
        out.append(param)
    return out


def _error_response(status: int, ref: str) -> dict:
    code, message, field = EXAMPLE_ERRORS.get(status, ("error", "what went wrong", None))
    example = {"error": {"code": code, "message": message}}
    if field:
        example["error"]["field"] = field
    return {"description": ERROR_TEXT.get(status, "Error."),
            "content": {"application/json": {"schema": {"$ref": ref}, "example": example}}}


def build_openapi(max_body_bytes: int | None = None) -> dict:
    """The OpenAPI 3.1 document of the service."""
    operations = all_operations()
    schemas, refs = _schemas(operations)
    error_ref = refs[m.ErrorResponse]
    paths: dict[str, dict] = {}
    tags: list[str] = []
    for op in operations:
        if op["tag"] not in tags:
            tags.append(op["tag"])
        operation: dict[str, Any] = {"operationId": op["id"], "tags": [op["tag"]],
                                     "summary": op["summary"], "description": op["description"]}
        params = []
        for name, text in (op.get("path_params") or {}).items():
            schema = {"type": "string", "pattern": r"^[A-Za-z0-9][A-Za-z0-9_.-]*$"}
            if isinstance(text, dict):  # {"description": ..., "schema": ...}
                text, schema = text["description"], text["schema"]
            params.append({"name": name, "in": "path", "required": True, "description": text,
                           "schema": schema})
        if op.get("query"):
            params += _query_parameters(op["query"])
        if params:
            operation["parameters"] = params
        if op.get("body"):
            content = {}
            for mime, spec in op["body"].items():
                schema = {"$ref": refs[spec["model"]]} if "model" in spec else spec["schema"]
                content[mime] = {"schema": schema, "example": spec["example"]}
            operation["requestBody"] = {"required": True, "content": content}
        kind, model = op["ok"]
        if model is None and kind not in ("image", "document"):
            ok = {"description": "Success.", "content": {kind: {"schema": {"type": "string"}}}}
        elif kind == "image":
            ok = {"description": "The diagram.",
                  "content": {"image/png": {"schema": {"type": "string", "format": "binary"}},
                              "image/svg+xml": {"schema": {"type": "string"}}}}
        elif kind == "document":
            ok = {"description": "The demo sounding.",
                  "content": {"application/json": {"schema": {"$ref": refs[ProfileDocument]}},
                              "text/csv": {"schema": {"type": "string"}},
                              "text/plain": {"schema": {"type": "string"}}}}
        else:
            ok = {"description": "Success.",
                  "content": {"application/json": {"schema": {"$ref": refs[model]}}}}
        if op.get("auth"):
            operation["security"] = [{"bearerKey": []}]
        operation["responses"] = {str(op.get("status", 200)): ok}
        for status in op["errors"]:
            operation["responses"][str(status)] = _error_response(status, error_ref)
        paths.setdefault(op["path"], {})[op["method"]] = operation
    limit = f" Request bodies are limited to {max_body_bytes} bytes." if max_body_bytes else ""
    return {
        "openapi": "3.1.0",
        "info": {"title": "ptype precipitation-type service", "version": ptype.__version__,
                 "description": "Diagnose the type of precipitation reaching the ground from a "
                                "vertical sounding, with each method's reasoning, "
                                "probabilities and a diagram. Every error is "
                                "`{\"error\": {\"code\", \"message\", \"field\"?}}`."
                                + limit + "\n\n" + ptype.CAUTION,
                 "license": {"name": "Apache-2.0", "identifier": "Apache-2.0"}},
        "jsonSchemaDialect": "https://spec.openapis.org/oas/3.1/dialect/base",
        "tags": [{"name": tag} for tag in tags],
        "paths": paths,
        "components": {"schemas": schemas,
                       "securitySchemes": {"bearerKey": {
                           "type": "http", "scheme": "bearer",
                           "description": "An API key from `ptype keys create --name NAME`; "
                                          "needed for writes only."}}},
    }


def init_app(app) -> None:
    app.extensions["ptype_openapi"] = None
    app.add_template_filter(_inline_code, "inline_code")


def _inline_code(text: str):
    """Escape text and turn `backticked` spans into <code> (the descriptions' only markup)."""
    from markupsafe import Markup, escape
    parts = str(escape(text or "")).split("`")
    return Markup("".join(f"<code>{p}</code>" if i % 2 else p for i, p in enumerate(parts)))


def _document() -> dict:
    cached = current_app.extensions.get("ptype_openapi")
    if cached is None:
        cached = build_openapi(current_app.config.get("MAX_CONTENT_LENGTH"))
        current_app.extensions["ptype_openapi"] = cached
    return cached


@bp.get("/openapi.json")
def openapi():
    return json_response(_document())


def _curl(op: dict) -> str:
    url = "http://127.0.0.1:8080" + op["path"].replace("{name}", "korrim-pass_20260127T1000.json")
    if op["method"] == "get":
        return f"curl -s {url}"
    if op["id"] == "diagram":
        return (f"curl -s -X POST '{url}?format=svg' -H 'Content-Type: application/json' "
                "--data @profile.json -o diagram.svg")
    if op["id"] == "diagnose_batch":
        return (f"curl -s -X POST {url} -H 'Content-Type: application/json' "
                "--data '{\"profiles\": [...]}'")
    return f"curl -s -X POST '{url}?members=50&seed=7' -H 'Content-Type: application/json' " \
           "--data @profile.json"


def _schema_rows(schema: dict) -> list[dict]:
    rows = []
    required = set(schema.get("required", []))
    for name, prop in (schema.get("properties") or {}).items():
        rows.append({"name": name, "type": _type_text(prop), "required": name in required,
                     "description": prop.get("description", "")})
    return rows


def _type_text(prop: dict) -> str:
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


@bp.get("/docs")
def docs_page():
    doc = _document()
    operations = []
    for op in all_operations():
        spec = doc["paths"][op["path"]][op["method"]]
        operations.append({
            "anchor": op["id"], "method": op["method"].upper(), "path": op["path"],
            "summary": spec["summary"], "description": spec["description"],
            "parameters": spec.get("parameters", []),
            "bodies": [(mime, json.dumps(c["example"], indent=2) if not isinstance(c["example"], str)
                        else c["example"], _type_text(c["schema"]))
                       for mime, c in (spec.get("requestBody") or {}).get("content", {}).items()],
            "responses": [(status, r["description"], ", ".join(r.get("content", {}).keys()),
                           json.dumps(next(iter(r.get("content", {}).values()), {}).get("example"),
                                      indent=2) if status != "200" else None)
                          for status, r in spec["responses"].items()],
            "curl": _curl(op),
        })
    schemas = [{"name": name, "description": s.get("description", ""), "rows": _schema_rows(s)}
               for name, s in doc["components"]["schemas"].items()]
    from flask import make_response

    from api.page import secure_html
    return secure_html(make_response(render_template(
        "docs.html", info=doc["info"], operations=operations, schemas=schemas,
        caution=ptype.CAUTION)))
