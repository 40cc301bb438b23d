"""``POST /v1/diagnose`` and ``POST /v1/diagnose/batch``.

The views parse the request (body in JSON, CSV or WMO TEMP; query options),
call :func:`ptype.diagnose` and serialise ``Diagnosis.to_dict()``.  Every
problem with the input becomes a 4xx JSON error naming the field.
"""

from __future__ import annotations

import json
import math
from typing import Any

from flask import Blueprint, Response, current_app, request
from pydantic import ValidationError

import ptype
from api.errors import ApiError, error_body
from api.models import DiagnoseOptions
from ptype.errors import ProfileError, ReaderError
from ptype.readers import read_document

bp = Blueprint("diagnose", __name__, url_prefix="/v1")

#: Content types accepted for a single profile, mapped to the reader format (None = detect).
TEXT_FORMATS = {"text/csv": "csv", "text/plain": None}
JSON_TYPES = ("application/json",)


#: Largest Monte-Carlo work per request, members x levels summed over its profiles.  It bounds
#: the time and memory one request can take (about 3 s and 1 GB at this limit on a 2-core
#: machine; 60 levels x 50 members is 3000).
DEFAULT_MAX_MEMBER_LEVELS = 1_000_000


def init_app(app) -> None:
    app.config.setdefault("PTYPE_MAX_MEMBER_LEVELS", DEFAULT_MAX_MEMBER_LEVELS)


def check_work(n_levels: int, kwargs: dict) -> None:
    """Refuse a request whose members x levels exceed ``PTYPE_MAX_MEMBER_LEVELS``."""
    from ptype.engine.probability import DEFAULT_MEMBERS
    members = kwargs.get("members", DEFAULT_MEMBERS)
    limit = current_app.config.get("PTYPE_MAX_MEMBER_LEVELS", DEFAULT_MAX_MEMBER_LEVELS)
    if members * n_levels > limit:
        raise ApiError(413, "too_much_work",
                       f"members = {members} x {n_levels} levels = {members * n_levels} "
                       f"member-levels; this server accepts at most {limit} per request "
                       "(ask for fewer members or send fewer levels)", "members")


# -- request parsing (shared with api.diagram) ------------------------------------------
def parse_options(model=DiagnoseOptions):
    """Validate the query string against ``model``; unknown or bad options are a 400."""
    args = {key: request.args.get(key) for key in request.args}
    for key in request.args:
        if len(request.args.getlist(key)) > 1:
            raise ApiError(400, "invalid_option", f"query option {key!r} given more than once",
                           key)
    try:
        options = model.model_validate(args)
    except ValidationError as exc:
        err = exc.errors()[0]
        field = str(err["loc"][0]) if err["loc"] else None
        if err["type"] == "extra_forbidden":
            known = sorted(f.alias or name for name, f in model.model_fields.items())
            message = f"unknown query option {field!r}; accepted: {', '.join(known)}"
        else:
            message = f"query option {field!r}: {err['msg'].lower()} (got {err.get('input')!r})"
        raise ApiError(400, "invalid_option", message, field) from None
    limit = current_app.config["PTYPE_MAX_MEMBERS"]
    if options.members is not None and options.members > limit:
        raise ApiError(400, "invalid_option",
                       f"members = {options.members}: expected at most {limit}", "members")
    return options


def diagnose_kwargs(options: DiagnoseOptions) -> dict[str, Any]:
    kwargs: dict[str, Any] = {"wetbulb": options.wetbulb}
    if options.members is not None:
        kwargs["members"] = options.members
    if options.seed is not None:
        kwargs["seed"] = options.seed
    if options.methods is not None:
        names = [m.strip() for m in options.methods.split(",") if m.strip()]
        if not names:
            raise ApiError(400, "invalid_option", "methods: expected at least one method name",
                           "methods")
        from ptype.engine.methods import get_method
        for name in names:
            get_method(name)  # an unknown name is an OptionError (400) before any work
        kwargs["methods"] = names
    return kwargs


def _reject_constant(name: str):
    raise ApiError(400, "invalid_json", f"request body: {name} is not valid JSON; "
                                        "use null for a missing value")


def load_json_body() -> Any:
    """The request body decoded as strict JSON (no NaN/Infinity); 400 when it is not JSON."""
    raw = request.get_data(cache=True)
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError:
        raise ApiError(400, "invalid_json", "request body is not UTF-8 text") from None
    if not text.strip():
        raise ApiError(400, "invalid_json", "request body is empty; expected a JSON object")
    try:
        return json.loads(text, parse_constant=_reject_constant)
    except json.JSONDecodeError as exc:
        raise ApiError(400, "invalid_json", f"request body: line {exc.lineno} column {exc.colno}: "
                                            f"invalid JSON ({exc.msg})") from None
    except RecursionError:
        raise ApiError(400, "invalid_json", "request body is nested too deeply") from None


def media_type() -> str:
    return (request.mimetype or "").lower()


def check_levels(document: Any, field_prefix: str = "") -> None:
    """Refuse a document with more levels than the server accepts (before any work)."""
    if isinstance(document, dict) and isinstance(document.get("levels"), list):
        limit = current_app.config["PTYPE_MAX_LEVELS"]
        n = len(document["levels"])
        if n > limit:
            raise ApiError(413, "too_many_levels",
                           f"{field_prefix}levels: {n} levels; this server accepts at most {limit}",
                           f"{field_prefix}levels")


def profile_from_request(options: DiagnoseOptions) -> ptype.Profile:
    """Read the single profile of the request body (JSON document, CSV or WMO TEMP text)."""
    kind = media_type()
    if kind in JSON_TYPES or kind.endswith("+json"):
        document = load_json_body()
        if not isinstance(document, dict):
            raise ApiError(422, "invalid_profile", "request body must be a JSON object (a profile "
                                                   f"document), got {_json_kind(document)}")
    elif kind in TEXT_FORMATS:
        raw = request.get_data(cache=True)
        if not raw.strip():
            raise ApiError(400, "empty_body", "request body is empty; expected a profile")
        try:
            text = raw.decode("utf-8")
        except UnicodeDecodeError:
            raise ApiError(400, "invalid_text", "request body is not UTF-8 text") from None
        # Always hand the reader text with a line break, so that it is never taken for a
        # file path (the service reads nothing from its own disk on a client's behalf).
        if "\n" not in text:
            text += "\n"
        fmt = TEXT_FORMATS[kind] or options.input_format
        try:
            document, _ = read_document(text, format=fmt)
        except ReaderError as exc:
            message = str(exc).replace("pass format= explicitly",
                                       "name it with ?input=csv|temp|json")
            raise ReaderError(message, field=exc.field) from None
    else:
        shown = kind or "none"
        raise ApiError(415, "unsupported_media_type",
                       f"Content-Type {shown!r} is not accepted; send application/json (profile "
                       "document), text/csv or text/plain (WMO TEMP or CSV)")
    check_levels(document)
    return ptype.Profile.from_document(document)


def _json_kind(value: Any) -> str:
    return {list: "an array", str: "a string", bool: "a boolean", type(None): "null",
            int: "a number", float: "a number"}.get(type(value), type(value).__name__)


def json_response(payload: Any, status: int = 200) -> Response:
    """Compact JSON; refuses NaN so a response is always valid JSON."""
    text = json.dumps(payload, separators=(",", ":"), ensure_ascii=False, allow_nan=False,
                      default=_json_default)
    return Response(text, status=status, mimetype="application/json")


def _json_default(value: Any):
    import numpy as np
    if isinstance(value, np.integer):
        return int(value)
    if isinstance(value, np.floating):
        v = float(value)
        return v if math.isfinite(v) else None
    if isinstance(value, np.ndarray):
        return value.tolist()
    if hasattr(value, "isoformat"):
        return value.isoformat()
    raise TypeError(f"not JSON serialisable: {type(value).__name__}")


# -- views ------------------------------------------------------------------------------
@bp.post("/diagnose")
def diagnose():
    options = parse_options()
    kwargs = diagnose_kwargs(options)
    profile = profile_from_request(options)
    check_work(profile.n_levels, kwargs)
    result = ptype.diagnose(profile, **kwargs)
    return json_response(result.to_dict())


@bp.post("/diagnose/batch")
def diagnose_batch():
    options = parse_options()
    kwargs = diagnose_kwargs(options)
    kind = media_type()
    if not (kind in JSON_TYPES or kind.endswith("+json")):
        raise ApiError(415, "unsupported_media_type",
                       f"Content-Type {kind or 'none'!r} is not accepted; send application/json "
                       "with {\"profiles\": [...]}")
    body = load_json_body()
    if not isinstance(body, dict):
        raise ApiError(422, "invalid_request", "request body must be a JSON object "
                                               f"{{\"profiles\": [...]}}, got {_json_kind(body)}")
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
    results: list[dict | None] = [None] * len(profiles)
    valid: list[tuple[int, ptype.Profile]] = []
    for i, document in enumerate(profiles):
        item = _read_item(document, i)
        if isinstance(item, dict):
            results[i] = item
        else:
            valid.append((i, item))
    check_work(sum(p.n_levels for _, p in valid), kwargs)
    for i, diagnosis in zip((i for i, _ in valid),
                            ptype.diagnose_many([p for _, p in valid], **kwargs)):
        results[i] = diagnosis.to_dict()
    return json_response({"results": results})


def _read_item(document: Any, i: int):
    """The validated profile of batch item ``i``, or its error entry."""
    prefix = f"profiles[{i}]"
    try:
        if not isinstance(document, dict):
            raise ProfileError(f"{prefix}: expected a profile document (JSON object), got "
                               f"{_json_kind(document)}", field=prefix)
        check_levels(document, f"{prefix}.")
        return ptype.Profile.from_document(document)
    except ApiError as exc:
        return error_body(exc.code, exc.message, exc.field)
    except ProfileError as exc:
        field = f"{prefix}.{exc.field}" if exc.field and not exc.field.startswith(prefix) \
            else (exc.field or prefix)
        message = str(exc) if str(exc).startswith(prefix) else f"{prefix}: {exc}"
        return error_body("invalid_profile", message, field)
