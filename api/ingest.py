"""``POST /v1/ingest``: one model-run file (GRIB2 or CF NetCDF) for every registered site.

The body is the file itself (``application/x-grib2``, ``application/x-netcdf`` or
``application/octet-stream``), at most ``PTYPE_MAX_INGEST_BYTES``; it is streamed to a
temporary file under the data folder and handed to :func:`ptype.ingest.ingest_file`, as
``ptype ingest`` does: the same content is ingested once (200 "already ingested" after the
first 201), an unreadable file is a 422 naming the message or variable.  Needs an API key.
"""

from __future__ import annotations

import os
import tempfile
from pathlib import Path

from flask import Blueprint, Response, current_app, jsonify, request
from ptype.api.errors import ApiError
from ptype.api.models import IngestFileResult
from ptype.api.openapi import Operation
from ptype.api.plumbing import get_store, now
from ptype.api.tenants import require_caller

bp = Blueprint("ingest", __name__, url_prefix="/v1")

#: Media types of a model-run upload.
INGEST_TYPES = ("application/x-grib2", "application/grib2", "application/x-grib",
                "application/x-netcdf", "application/netcdf", "application/octet-stream")
#: Default largest upload, bytes (a regional run of a few hundred MB fits).
DEFAULT_MAX_INGEST_BYTES = 1 << 30
_BINARY = {"schema": {"type": "string", "format": "binary"},
           "example": "GRIB... (binary: GRIB2 messages of one model run)"}


def _limit() -> int:
    return int(current_app.config.get("PTYPE_MAX_INGEST_BYTES") or DEFAULT_MAX_INGEST_BYTES)


def _spool(folder: Path) -> Path:
    """The request body streamed to a temporary file (size checked as it arrives)."""
    limit = _limit()
    declared = request.content_length
    if declared is not None and declared > limit:
        raise ApiError(413, "too_large", f"request body: {declared} bytes; this server accepts "
                                         f"model files of at most {limit} bytes")
    request.max_content_length = limit  # this request only: lifts the small global limit
    folder.mkdir(parents=True, exist_ok=True)
    fd, name = tempfile.mkstemp(prefix="upload-", suffix=".part", dir=folder)
    size = 0
    try:
        with os.fdopen(fd, "wb") as out:
            while True:
                chunk = request.stream.read(1 << 20)
                if not chunk:
                    break
                size += len(chunk)
                if size > limit:
                    raise ApiError(413, "too_large", "request body: more than the limit of "
                                                     f"{limit} bytes for a model file")
                out.write(chunk)
    except BaseException:
        os.unlink(name)
        raise
    if size == 0:
        os.unlink(name)
        raise ApiError(400, "empty_body", "request body is empty; expected a GRIB2 or NetCDF "
                                          "model file")
    return Path(name)


@bp.post("/ingest")
@Operation(
    id="ingest", tag="Sites", auth=True, status=201,
    summary="Ingest a model run for every site",
    description="Send one GRIB2 or CF NetCDF model file as the body. For every registered "
                "site the model column at the site (bilinear) is moved to the site's "
                "elevation and stored as forecast profiles issued at the run's reference "
                "time; then the sites' alerts are evaluated. The same file content is "
                "ingested once (200 with status 'already ingested' afterwards). Query: "
                "`name` (shown in the answer), `source` (the profiles' source, default "
                "'model'). Needs an API key. See docs/operations.md.",
    body={t: _BINARY for t in ("application/x-grib2", "application/x-netcdf",
                               "application/octet-stream")},
    ok=IngestFileResult, errors=(400, 401, 403, 413, 415, 422))
def ingest() -> tuple[Response, int]:
    """Store the uploaded run for every site, then evaluate their alerts."""
    # A model run feeds every registered site, whoever owns it: an administrator's write.
    caller = require_caller()
    if not caller.admin:
        raise ApiError(403, "forbidden", "a model run feeds every owner's sites: ingesting "
                       f"needs an administrator's key (this key's owner is {caller.owner!r})",
                       "Authorization")
    kind = (request.mimetype or "").lower()
    if kind not in INGEST_TYPES:
        raise ApiError(415, "unsupported_media_type",
                       f"Content-Type {kind or 'none'!r} is not accepted; send the model file "
                       "as application/x-grib2, application/x-netcdf or "
                       "application/octet-stream")
    from ptype.ingest import DEFAULT_SOURCE, ingest_file
    name = (request.args.get("name") or "upload")[:200]
    source = (request.args.get("source") or DEFAULT_SOURCE)[:100]
    folder = Path(current_app.config.get("PTYPE_DATA_DIR") or ".") / "uploads"
    path = _spool(folder)
    try:
        result = ingest_file(get_store(), path, now=now(), source=source, name=name,
                             cap_status=current_app.config.get("PTYPE_CAP_STATUS")
                             or os.environ.get("PTYPE_CAP_STATUS"))
    finally:
        path.unlink(missing_ok=True)
    status = 201 if result["status"] == "ingested" else 200
    return jsonify(result), status
