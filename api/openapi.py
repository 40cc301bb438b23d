"""The OpenAPI 3.1 description of the service, built from operations declared beside the views.

A view documents itself by carrying an :class:`Operation`, used as a decorator under the
route decorator::

    @bp.post("/diagnose")
    @Operation(id="diagnose", tag="Diagnosis", summary="...", description="...",
               query=DiagnoseOptions, body=PROFILE_BODIES, ok=Diagnosis,
               errors=(400, 413, 415, 422))
    def diagnose() -> Response: ...

:func:`documented_routes` collects them from the application's own URL map, so the path
and method of an operation are those the service serves; :func:`build_openapi` turns them
and the pydantic models of :mod:`ptype.api.models` into the document.
"""

from __future__ import annotations

import re
from collections.abc import Callable, Iterator, Mapping
from dataclasses import dataclass
from typing import Any, NamedTuple, TypeVar

from flask import Flask
from ptype.api.models import ErrorResponse
from pydantic import BaseModel
from pydantic.json_schema import models_json_schema

import ptype

View = TypeVar("View", bound=Callable[..., Any])

#: Attribute of a view function that holds its :class:`Operation`.
ATTRIBUTE = "openapi_operation"

#: Example body of each error status, ``(code, message, field)``, for the document.
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
    429: ("too_many_failed_keys", ("too many requests with a wrong API key from this "
                                   "address; try again after the time in Retry-After"),
          "Authorization"),
    503: ("busy", ("the server is busy with other computations; try again after the time in "
                   "Retry-After"), None),
}
#: What each error status means, for the document.
ERROR_TEXT = {400: "Bad query option or unreadable JSON.", 404: "No such resource.",
              401: "Missing or unknown API key.", 403: "Not allowed for this API key.",
              409: "Conflicts with what is stored.",
              413: "Body, levels, batch or members x levels larger than the server accepts.",
              415: "Content type not accepted.",
              422: "The body was read but is not valid, or the request asks for more work "
                   "than the server's budget (`too_much_work`, with `limit` and `asked`).",
              429: "Too many requests with a wrong API key from this address "
                   "(`Retry-After` says when to try again).",
              503: "Busy or past the time limit (`busy`, `timeout`); `Retry-After` says "
                   "when to try again."}

#: Pattern of a path parameter without a schema of its own (a file name or an id).
NAME_PATTERN = r"^[A-Za-z0-9][A-Za-z0-9_.-]*$"


@dataclass(frozen=True)
class Operation:
    """The OpenAPI description of one view; decorating the view attaches it.

    Parameters
    ----------
    id, tag, summary, description
        ``operationId``, the tag that groups it, a one-line summary and a paragraph
        (backticks mark code, the only markup).
    ok
        The success answer: a pydantic model (a JSON body), or an OpenAPI response object
        (``{"description", "content"}``) whose ``schema`` values may be models.
    errors
        Statuses answered with :class:`ptype.api.models.ErrorResponse`.
    query
        A model whose fields are the query parameters.
    body
        ``{media type: {"schema": model or JSON schema, "example": ...}}``.
    path_params
        ``{name: description}`` or ``{name: {"description", "schema"}}`` for each path
        parameter of the route.
    status
        Status of the success answer.
    auth
        True when the operation needs an API key.
    curl
        The example command of the ``/docs`` page; ``{server}`` stands for the root URL of
        a local server and ``{url}`` for the operation's URL on it (default: built from the
        method and path).
    """

    id: str
    tag: str
    summary: str
    description: str
    ok: type[BaseModel] | Mapping[str, Any]
    errors: tuple[int, ...] = ()
    query: type[BaseModel] | None = None
    body: Mapping[str, Mapping[str, Any]] | None = None
    path_params: Mapping[str, str | Mapping[str, Any]] | None = None
    status: int = 200
    auth: bool = False
    curl: str | None = None

    def __call__(self, view: View) -> View:
        """Attach this description to ``view`` and return the view unchanged."""
        setattr(view, ATTRIBUTE, self)
        return view


class DocumentedRoute(NamedTuple):
    """A served route with its description: OpenAPI path, lower-case method, operation."""

    path: str
    method: str
    operation: Operation


def text_answer(media_type: str) -> dict[str, Any]:
    """The success answer of an operation that returns a text document of ``media_type``."""
    return {"description": "Success.", "content": {media_type: {"schema": {"type": "string"}}}}


def documented_routes(app: Flask) -> list[DocumentedRoute]:
    """Every route of ``app`` whose view carries an :class:`Operation`, in registration order.

    Flask's ``<converter:name>`` becomes OpenAPI's ``{name}``.
    """
    routes = []
    for rule in app.url_map.iter_rules():
        op = getattr(app.view_functions.get(rule.endpoint), ATTRIBUTE, None)
        if op is None:
            continue
        path = re.sub(r"<(?:\w+:)?(\w+)>", r"{\1}", rule.rule)
        for method in sorted((rule.methods or set()) - {"HEAD", "OPTIONS"}):
            routes.append(DocumentedRoute(path, method.lower(), op))
    return routes


def _models_in(value: Any) -> Iterator[type[BaseModel]]:
    """The pydantic models named anywhere in ``value`` (a model, or nested dicts)."""
    if isinstance(value, type) and issubclass(value, BaseModel):
        yield value
    elif isinstance(value, Mapping):
        for item in value.values():
            yield from _models_in(item)


def _with_refs(value: Any, refs: Mapping[type[BaseModel], str]) -> Any:
    """A copy of ``value`` with every model replaced by its ``$ref``."""
    if isinstance(value, type) and issubclass(value, BaseModel):
        return {"$ref": refs[value]}
    if isinstance(value, Mapping):
        return {key: _with_refs(item, refs) for key, item in value.items()}
    return value


def _schemas(routes: list[DocumentedRoute]) -> tuple[dict[str, dict], dict]:
    """Component schemas of every model used, with `#/components/schemas/...` references."""
    used: list[type[BaseModel]] = [ErrorResponse]
    for route in routes:
        used += _models_in(route.operation.body or {})
        used += _models_in(route.operation.ok)
    unique = list(dict.fromkeys(used))
    keys, defs = models_json_schema([(model, "validation") for model in unique],
                                    ref_template="#/components/schemas/{model}")
    refs = {model: keys[(model, "validation")]["$ref"] for model in unique}
    return defs.get("$defs", {}), refs


def _query_parameters(model: type[BaseModel]) -> list[dict]:
    """The fields of ``model`` as optional query parameters (by alias)."""
    schema = model.model_json_schema(by_alias=True)
    out = []
    for name, prop in schema.get("properties", {}).items():
        prop = dict(prop)
        description = prop.pop("description", "")
        examples = prop.pop("examples", None)
        prop.pop("title", None)
        param = {"name": name, "in": "query", "required": False, "description": description,
                 "schema": prop}
        if examples:
            param["example"] = examples[0]
        out.append(param)
    return out


def _path_parameters(op: Operation) -> list[dict]:
    """The path parameters of ``op``, described by its ``path_params``."""
    params = []
    for name, text in (op.path_params or {}).items():
        schema: Mapping[str, Any] = {"type": "string", "pattern": NAME_PATTERN}
        if isinstance(text, Mapping):  # {"description": ..., "schema": ...}
            text, schema = text["description"], text["schema"]
        params.append({"name": name, "in": "path", "required": True, "description": text,
                       "schema": schema})
    return params


def _error_response(status: int, ref: str) -> dict:
    """The documented answer of an error status, with an example body."""
    code, message, field = EXAMPLE_ERRORS.get(status, ("error", "what went wrong", None))
    example = {"error": {"code": code, "message": message}}
    if field:
        example["error"]["field"] = field
    answer: dict[str, Any] = {
        "description": ERROR_TEXT.get(status, "Error."),
        "content": {"application/json": {"schema": {"$ref": ref}, "example": example}}}
    if status in (429, 503):
        answer["headers"] = {"Retry-After": {"description": "Seconds to wait before trying "
                                                            "again.",
                                             "schema": {"type": "integer", "minimum": 0}}}
    return answer


def _operation_object(op: Operation, refs: Mapping[type[BaseModel], str]) -> dict[str, Any]:
    """The OpenAPI operation object of ``op``."""
    operation: dict[str, Any] = {"operationId": op.id, "tags": [op.tag],
                                 "summary": op.summary, "description": op.description}
    params = _path_parameters(op) + (_query_parameters(op.query) if op.query else [])
    if params:
        operation["parameters"] = params
    if op.body:
        operation["requestBody"] = {"required": True, "content": _with_refs(op.body, refs)}
    if isinstance(op.ok, type):
        ok = {"description": "Success.", "content": {"application/json": {"schema": op.ok}}}
    else:
        ok = op.ok
    if op.auth:
        operation["security"] = [{"bearerKey": []}]
    operation["responses"] = {str(op.status): _with_refs(ok, refs)}
    for status in op.errors:
        operation["responses"][str(status)] = _error_response(status, refs[ErrorResponse])
    return operation


def build_openapi(routes: list[DocumentedRoute], max_body_bytes: int | None = None,
                  limits: str = "") -> dict:
    """The OpenAPI 3.1 document of ``routes`` (see :func:`documented_routes`).

    ``max_body_bytes``, when given, and ``limits`` (a sentence on the work limits) are
    stated in the description.
    """
    schemas, refs = _schemas(routes)
    paths: dict[str, dict] = {}
    tags: list[str] = []
    for route in routes:
        if route.operation.tag not in tags:
            tags.append(route.operation.tag)
        paths.setdefault(route.path, {})[route.method] = _operation_object(route.operation, refs)
    limit = f" Request bodies are limited to {max_body_bytes} bytes." if max_body_bytes else ""
    return {
        "openapi": "3.1.0",
        "info": {"title": "ptype precipitation-type service", "version": ptype.__version__,
                 "description": "Diagnose the type of precipitation reaching the ground from a "
                                "vertical sounding, with each method's reasoning, "
                                "probabilities and a diagram. Every error is "
                                "`{\"error\": {\"code\", \"message\", \"field\"?}}`."
                                + limit + ("\n\n" + limits if limits else "")
                                + "\n\n" + ptype.CAUTION,
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
