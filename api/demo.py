"""``GET /v1/demo`` and ``GET /v1/demo/<name>``: the invented demo soundings.

The soundings live in ``soundings_demo/{json,csv,temp}/`` at the project root
(override with the ``PTYPE_DEMO_DIR`` setting or environment variable).  A sounding's
name is its file name; the document is returned as stored, with the content type of its
format, so a client can post it back to ``/v1/diagnose`` unchanged.
"""

from __future__ import annotations

import json
import os
import re
from pathlib import Path

from flask import Blueprint, Flask, Response, current_app, url_for
from ptype.api.errors import ApiError
from ptype.api.models import DemoList
from ptype.api.openapi import Operation
from ptype.api.plumbing import json_response

from ptype.constants import CAUTION
from ptype.profile.document import ProfileDocument

bp = Blueprint("demo", __name__, url_prefix="/v1")

#: Sub-directory -> (format, content type, file suffixes).
FOLDERS = {
    "json": ("json", "application/json", (".json",)),
    "csv": ("csv", "text/csv", (".csv",)),
    "temp": ("temp", "text/plain", (".txt", ".temp", ".tmp")),
}
_NAME = re.compile(r"^[A-Za-z0-9][A-Za-z0-9_.-]{0,120}$")


def default_demo_dir() -> Path:
    """``soundings_demo/`` at the project root."""
    return Path(__file__).resolve().parent.parent / "soundings_demo"


def init_app(app: Flask) -> None:
    """Default ``PTYPE_DEMO_DIR`` to the environment variable, else the project's folder."""
    app.config.setdefault("PTYPE_DEMO_DIR",
                          os.environ.get("PTYPE_DEMO_DIR") or str(default_demo_dir()))


def _catalogue() -> dict[str, tuple[Path, str, str]]:
    """Name -> (path, format, content type) of every demo sounding."""
    root = Path(current_app.config.get("PTYPE_DEMO_DIR") or default_demo_dir())
    found: dict[str, tuple[Path, str, str]] = {}
    for folder, (fmt, mime, suffixes) in FOLDERS.items():
        directory = root / folder
        if not directory.is_dir():
            continue
        for path in sorted(directory.iterdir()):
            if path.is_file() and path.suffix.lower() in suffixes and _NAME.match(path.name):
                found.setdefault(path.name, (path, fmt, mime))
    return found


def _describe(name: str, path: Path, fmt: str) -> dict:
    """The list entry of one sounding: its site and time when the file names them."""
    site = valid_time = None
    try:
        text = path.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError):
        text = ""
    if fmt == "json":
        try:
            doc = json.loads(text)
            site_doc = doc.get("site") or {}
            site = site_doc.get("name") or site_doc.get("id")
            valid_time = doc.get("valid_time")
        except (ValueError, AttributeError):
            pass
    elif fmt == "csv":
        for line in text.splitlines():
            if not line.startswith("#"):
                break
            key, _, value = line[1:].partition(":")
            if key.strip() == "site_name":
                site = value.strip() or None
            elif key.strip() == "valid_time":
                valid_time = value.strip() or None
    stem = path.stem.replace("_", " ")
    title = " \u2014 ".join(x for x in (site, valid_time) if x) or stem
    if site or valid_time:
        title += f" ({fmt.upper()})"
    else:
        title = f"{stem} ({fmt.upper()})"
    return {"name": name, "format": fmt, "title": title, "site": site,
            "valid_time": str(valid_time) if valid_time is not None else None,
            "url": url_for("demo.demo_document", name=name)}


@bp.get("/demo")
@Operation(id="demo_list", tag="Demo", summary="List the demo soundings (invented data)",
           description="The demo soundings shipped with the service, from a fictional region.",
           ok=DemoList)
def demo_list() -> Response:
    """Every demo sounding with its title and URL."""
    entries = [_describe(name, path, fmt) for name, (path, fmt, _) in _catalogue().items()]
    return json_response({"soundings": entries, "caution": CAUTION})


@bp.get("/demo/<name>")
@Operation(
    id="demo_document", tag="Demo", summary="One demo sounding, as stored",
    description="Returned with the content type of its format (JSON, CSV or WMO TEMP text) "
                "so that it can be posted to `/v1/diagnose` unchanged.",
    path_params={"name": "File name from `GET /v1/demo`, e.g. "
                         "`korrim-pass_20260127T1000.json`."},
    ok={"description": "The demo sounding.",
        "content": {"application/json": {"schema": ProfileDocument},
                    "text/csv": {"schema": {"type": "string"}},
                    "text/plain": {"schema": {"type": "string"}}}},
    errors=(404,), curl="curl -s {server}/v1/demo/korrim-pass_20260127T1000.json")
def demo_document(name: str) -> Response:
    """The demo sounding ``name`` as stored, with the content type of its format."""
    entry = _catalogue().get(name)
    if entry is None:
        raise ApiError(404, "not_found", f"no demo sounding named {name!r}; "
                                         "GET /v1/demo lists them", "name")
    path, _, mime = entry
    return Response(path.read_bytes(), mimetype=mime)
