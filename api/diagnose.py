"""``POST /v1/diagnose`` and ``POST /v1/diagnose/batch``.

The views parse the request (body in JSON, CSV or WMO TEMP; query options), call
:func:`ptype.diagnose` and serialise ``Diagnosis.to_dict()``.  Every problem with the input
becomes a 4xx JSON error naming the field.
"""

from __future__ import annotations

from typing import Any

from flask import Blueprint, Response, current_app
from ptype.api import budget
from ptype.api.errors import ApiError, error_body
from ptype.api.examples import EXAMPLE_DOCUMENT, PROFILE_BODIES
from ptype.api.models import BatchRequest, BatchResponse, DiagnoseOptions, Diagnosis
from ptype.api.openapi import Operation
from ptype.api.plumbing import (
    check_levels,
    check_work,
    diagnose_kwargs,
    is_json_request,
    json_kind,
    json_response,
    load_json_body,
    media_type,
    parse_options,
    profile_from_request,
)

import ptype
from ptype.errors import ProfileError

bp = Blueprint("diagnose", __name__, url_prefix="/v1")


@bp.post("/diagnose")
@Operation(
    id="diagnose", tag="Diagnosis", summary="Diagnose the precipitation type of one profile",
    description="Send one profile as a JSON profile document, CSV or WMO TEMP text. The "
                "answer gives the consensus type, its probabilities, each method's result "
                "with the rule that fired, the layers, a plain-language explanation and "
                "the caution.",
    query=DiagnoseOptions, body=PROFILE_BODIES, ok=Diagnosis,
    errors=(400, 413, 415, 422, 503))
def diagnose() -> Response:
    """Diagnose the one profile of the request body."""
    options = parse_options()
    kwargs = diagnose_kwargs(options)
    profile = profile_from_request(options)
    check_work(profile.n_levels, kwargs)
    with budget.computing():
        result = ptype.diagnose(profile, **kwargs)
    return json_response(result.to_dict())


@bp.post("/diagnose/batch")
@Operation(
    id="diagnose_batch", tag="Diagnosis", summary="Diagnose several profiles in one request",
    description="Each profile is diagnosed on its own; an invalid one gets an "
                "`{\"error\": ...}` entry in its place and the others still succeed. "
                "Results keep the order of the request. The Monte-Carlo members of all "
                "profiles run in one vectorised pass; with `seed` the batch is "
                "reproducible as a whole.",
    query=DiagnoseOptions,
    body={"application/json": {"schema": BatchRequest,
                               "example": {"profiles": [EXAMPLE_DOCUMENT]}}},
    ok=BatchResponse, errors=(400, 413, 415, 422, 503),
    curl="curl -s -X POST {url} -H 'Content-Type: application/json' "
         "--data '{\"profiles\": [...]}'")
def diagnose_batch() -> Response:
    """Diagnose every profile of ``{"profiles": [...]}``; a bad one gets an error entry."""
    options = parse_options()
    kwargs = diagnose_kwargs(options)
    profiles = _batch_documents()
    results: list[dict | None] = [None] * len(profiles)
    valid: list[tuple[int, ptype.Profile]] = []
    for i, document in enumerate(profiles):
        item = _read_item(document, i)
        if isinstance(item, dict):
            results[i] = item
        else:
            valid.append((i, item))
    check_work(sum(p.n_levels for _, p in valid), kwargs)
    with budget.computing():
        diagnoses = ptype.diagnose_many([p for _, p in valid], **kwargs)
    for (i, _), diagnosis in zip(valid, diagnoses):
        results[i] = diagnosis.to_dict()
    return json_response({"results": results})


def _batch_documents() -> list[Any]:
    """The ``profiles`` array of a batch body, checked for shape and size."""
    if not is_json_request():
        raise ApiError(415, "unsupported_media_type",
                       f"Content-Type {media_type() or 'none'!r} is not accepted; send "
                       "application/json with {\"profiles\": [...]}")
    body = load_json_body()
    if not isinstance(body, dict):
        raise ApiError(422, "invalid_request", "request body must be a JSON object "
                                               f"{{\"profiles\": [...]}}, got {json_kind(body)}")
    unknown = sorted(set(body) - {"profiles"})
    if unknown:
        raise ApiError(422, "invalid_request", f"unknown field {unknown[0]!r}; expected only "
                                               "'profiles'", unknown[0])
    profiles = body.get("profiles")
    if not isinstance(profiles, list):
        raise ApiError(422, "invalid_request", "profiles: expected an array of profile documents"
                       + ("" if "profiles" in body else " (field is missing)"), "profiles")
    limit = current_app.config["PTYPE_MAX_BATCH"]
    if len(profiles) > limit:
        raise ApiError(413, "too_many_profiles",
                       f"profiles: {len(profiles)} profiles; this server accepts at most {limit} "
                       "per request", "profiles")
    return profiles


def _read_item(document: Any, i: int) -> ptype.Profile | dict:
    """The validated profile of batch item ``i``, or its error entry."""
    prefix = f"profiles[{i}]"
    try:
        if not isinstance(document, dict):
            raise ProfileError(f"{prefix}: expected a profile document (JSON object), got "
                               f"{json_kind(document)}", field=prefix)
        check_levels(document, f"{prefix}.")
        return ptype.Profile.from_document(document)
    except ApiError as exc:
        return error_body(exc.code, exc.message, exc.field)
    except ProfileError as exc:
        field = f"{prefix}.{exc.field}" if exc.field and not exc.field.startswith(prefix) \
            else (exc.field or prefix)
        message = str(exc) if str(exc).startswith(prefix) else f"{prefix}: {exc}"
        return error_body("invalid_profile", message, field)
