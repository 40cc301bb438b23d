"""Sphinx extension: the HTTP API reference rendered from the service's OpenAPI document.

At build time it builds the service application (on a temporary data folder), asks it for
its OpenAPI 3.1 document (:func:`ptype.api.openapi.build_openapi` over the routes the
application serves), appends the operations and schemas as reStructuredText to the page
``http-reference`` and writes the document itself next to the HTML as ``openapi.json``.
So the manual describes exactly what the code serves, with no copy to keep in step.
"""

from __future__ import annotations

import json
import re
import tempfile
from pathlib import Path
from typing import Any

#: The page that receives the generated text.
PAGE = "http-reference"
METHODS = ("get", "post", "put", "patch", "delete")
#: Names of the schemas of the document being rendered (links are made only to these).
_SCHEMAS: set[str] = set()


def openapi_document() -> dict:
    """The OpenAPI document of a freshly built service application."""
    from ptype.api import create_app
    from ptype.api.openapi import build_openapi, documented_routes
    from ptype.api.plumbing import EXTENSION
    with tempfile.TemporaryDirectory() as data_dir:
        app = create_app({"TESTING": True, "PTYPE_DATA_DIR": data_dir})
        try:
            return build_openapi(documented_routes(app), app.config.get("MAX_CONTENT_LENGTH"))
        finally:
            store = app.extensions.get(EXTENSION)
            if store is not None:
                store.dispose()


def text(value: Any) -> str:
    """Plain text as reST: `backticks` become literals, markup characters are escaped."""
    parts = str(value or "").split("`")
    out = []
    for i, part in enumerate(parts):
        if i % 2:
            out.append(f"``{part}``" if part else "")
        else:
            out.append(re.sub(r"([\\*_|<>\[\]])", r"\\\1", part))
    return " ".join("".join(out).split())


def schema_type(schema: dict | None) -> str:
    """A JSON schema as a short type: ``Diagnosis``, ``array of Step``, ``"png" | "svg"``."""
    schema = schema or {}
    if "$ref" in schema:
        return schema["$ref"].rsplit("/", 1)[-1]
    for key in ("anyOf", "oneOf"):
        if key in schema:
            return " | ".join(schema_type(s) for s in schema[key])
    if "enum" in schema:
        return " | ".join(json.dumps(v) for v in schema["enum"])
    if "const" in schema:
        return json.dumps(schema["const"])
    kind = schema.get("type", "any")
    if isinstance(kind, list):
        return " | ".join(kind)
    if kind == "array":
        return f"array of {schema_type(schema.get('items'))}"
    if kind == "object" and isinstance(schema.get("additionalProperties"), dict):
        return f"object of {schema_type(schema['additionalProperties'])}"
    return kind


def _type_cell(schema: dict | None) -> str:
    """A type for a table cell; the names of the document's schemas link to their section."""
    alternatives = []
    for alt in schema_type(schema).split(" | "):
        if alt.startswith('"'):
            alternatives.append(f"``{alt}``")
            continue
        words = [f":ref:`{w} <openapi-schema-{w.lower()}>`" if w in _SCHEMAS else text(w)
                 for w in alt.split(" ")]
        alternatives.append(" ".join(words))
    return " or ".join(alternatives)


def _table(header: list[str], rows: list[list[str]], widths: str) -> list[str]:
    lines = [".. list-table::", "   :header-rows: 1", f"   :widths: {widths}", ""]
    for row in [header, *rows]:
        lines.append(f"   * - {row[0] or '-'}")
        lines.extend(f"     - {cell or '-'}" for cell in row[1:])
    return [*lines, ""]


def _heading(title: str, mark: str) -> list[str]:
    return [title, mark * len(title), ""]


def _operation(path: str, method: str, op: dict) -> list[str]:
    lines = [f".. _openapi-op-{op.get('operationId', method + path)}:", ""]
    lines += _heading(f"{method.upper()} {path}", "~")
    lines += [f"**{text(op.get('summary'))}**", ""]
    if op.get("description"):
        lines += [text(op["description"]), ""]
    if op.get("security"):
        lines += ["Needs an API key: ``Authorization: Bearer KEY`` (``ptype keys create``).", ""]
    params = op.get("parameters") or []
    if params:
        rows = [[f"``{p['name']}``", p.get("in", ""), _type_cell(p.get("schema")),
                 "yes" if p.get("required") else "no", text(p.get("description"))]
                for p in params]
        lines += _table(["Parameter", "In", "Type", "Required", "Meaning"], rows,
                        "18 8 20 9 45")
    body = (op.get("requestBody") or {}).get("content") or {}
    if body:
        rows = [[f"``{media}``", _type_cell(spec.get("schema"))] for media, spec in body.items()]
        lines += ["Request body:", ""] + _table(["Content type", "Schema"], rows, "30 70")
    rows = []
    for status, answer in (op.get("responses") or {}).items():
        content = answer.get("content") or {}
        kinds = ", ".join(f"``{media}`` {_type_cell(spec.get('schema'))}"
                          for media, spec in content.items())
        rows.append([f"``{status}``", text(answer.get("description")), kinds])
    lines += ["Answers:", ""] + _table(["Status", "Meaning", "Body"], rows, "10 45 45")
    return lines


def _schema(name: str, schema: dict) -> list[str]:
    lines = [f".. _openapi-schema-{name.lower()}:", ""] + _heading(name, "~")
    if schema.get("description"):
        lines += [text(schema["description"]), ""]
    props = schema.get("properties") or {}
    if not props:
        return [*lines, f"Type: {_type_cell(schema)}.", ""]
    required = set(schema.get("required") or [])
    rows = [[f"``{key}``", _type_cell(prop), "yes" if key in required else "no",
             text(prop.get("description"))] for key, prop in props.items()]
    return lines + _table(["Field", "Type", "Required", "Meaning"], rows, "22 25 9 44")


def render(document: dict) -> str:
    """The reST text of the operations (grouped by tag) and the schemas of ``document``."""
    _SCHEMAS.clear()
    _SCHEMAS.update(document.get("components", {}).get("schemas", {}))
    info = document.get("info", {})
    lines = [(f"Service version {text(info.get('version'))}, OpenAPI "
              f"{text(document.get('openapi'))}. {text(info.get('description'))}"), "",
             ("The same document, as served at ``GET /openapi.json``: "
              ":download:`openapi.json <_generated/openapi.json>`."), ""]
    by_tag: dict[str, list[tuple[str, str, dict]]] = {}
    for path, item in document.get("paths", {}).items():
        for method in METHODS:
            if method in item:
                op = item[method]
                by_tag.setdefault((op.get("tags") or ["Other"])[0], []).append((path, method, op))
    for tag, operations in by_tag.items():
        lines += _heading(tag, "-")
        for path, method, op in operations:
            lines += _operation(path, method, op)
    lines += _heading("Schemas", "-")
    for name, schema in sorted(document.get("components", {}).get("schemas", {}).items()):
        lines += _schema(name, schema)
    return "\n".join(lines) + "\n"


def _on_builder_inited(app) -> None:
    document = openapi_document()
    app.env.ptype_openapi = document  # type: ignore[attr-defined]
    generated = Path(app.srcdir) / "_generated"
    generated.mkdir(exist_ok=True)
    target = generated / "openapi.json"
    new = json.dumps(document, indent=2, ensure_ascii=False) + "\n"
    if not target.is_file() or target.read_text(encoding="utf-8") != new:
        target.write_text(new, encoding="utf-8")


def _on_source_read(app, docname: str, source: list[str]) -> None:
    if docname == PAGE:
        source[0] = source[0].rstrip() + "\n\n" + render(app.env.ptype_openapi) + "\n"


def setup(app) -> dict:
    app.connect("builder-inited", _on_builder_inited)
    app.connect("source-read", _on_source_read)
    return {"version": "1", "parallel_read_safe": True, "parallel_write_safe": True}
