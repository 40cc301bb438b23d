"""What several views need: reading requests, writing answers, the store, the clock, the key.

* answers: :func:`json_response` (strict, compact JSON), :func:`secure_html` (headers of
  the HTML pages);
* requests: :func:`parse_options` (query string -> model), :func:`diagnose_kwargs`,
  :func:`load_json_body` (strict JSON, :mod:`ptype.api.inputs`),
  :func:`validate_body` (JSON object -> model), :func:`profile_from_request` (a JSON, CSV
  or WMO TEMP body -> :class:`ptype.Profile`) and the work limits;
* state: :func:`store_for` / :func:`get_store`, :func:`now` (the service clock),
  :func:`clock`, :func:`require_key` (the bearer API key of a write), :func:`cap_sender`.

Every problem is raised as :class:`ptype.api.errors.ApiError` (or a ptype domain error), which
:mod:`ptype.api.errors` turns into a 4xx JSON answer naming the field.
"""

from __future__ import annotations

import hashlib
import json
import math
import threading
from datetime import datetime
from typing import Any, TypeVar

import sqlalchemy as sa
from flask import Flask, Response, current_app, request
from ptype.api import inputs
from ptype.api.errors import ApiError
from ptype.api.models import DiagnoseOptions
from pydantic import BaseModel, ValidationError

import ptype
from ptype.clock import Clock, service_clock
from ptype.errors import ReaderError
from ptype.profile.document import _loc
from ptype.readers import read_document
from ptype.store import ApiKey, Store, open_store
from ptype.store import keys as keystore

Model = TypeVar("Model", bound=BaseModel)

# ----------------------------------------------------------------------------------------
# Answers
# ----------------------------------------------------------------------------------------

#: The pages load nothing from elsewhere; the policy makes the browser hold them to it.
CONTENT_SECURITY_POLICY = ("default-src 'self'; img-src 'self' blob: data:; style-src 'self'; "
                           "script-src 'self'; connect-src 'self'; object-src 'none'; "
                           "base-uri 'none'; form-action 'self'; frame-ancestors 'none'")


def secure_html(response: Response) -> Response:
    """``response`` (an HTML page of the service) with the security headers set."""
    response.headers["Content-Security-Policy"] = CONTENT_SECURITY_POLICY
    response.headers["X-Content-Type-Options"] = "nosniff"
    response.headers["Referrer-Policy"] = "no-referrer"
    return response


def json_response(payload: Any, status: int = 200) -> Response:
    """Compact JSON; refuses NaN so a response is always valid JSON."""
    text = json.dumps(payload, separators=(",", ":"), ensure_ascii=False, allow_nan=False,
                      default=_json_default)
    return Response(text, status=status, mimetype="application/json")


def _json_default(value: Any) -> Any:
    """numpy scalars and arrays, and times, as JSON values (a non-finite float is null)."""
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


# ----------------------------------------------------------------------------------------
# Requests: query options
# ----------------------------------------------------------------------------------------

def parse_options(model: type[Model] = DiagnoseOptions) -> Model:
    """Validate the query string against ``model``; unknown or bad options are a 400.

    ``members`` above the server's ``PTYPE_MAX_MEMBERS`` is refused too.
    """
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
    members = getattr(options, "members", None)
    limit = current_app.config["PTYPE_MAX_MEMBERS"]
    if members is not None and members > limit:
        raise ApiError(400, "invalid_option",
                       f"members = {members}: expected at most {limit}", "members")
    return options


def diagnose_kwargs(options: DiagnoseOptions) -> dict[str, Any]:
    """The keyword arguments of :func:`ptype.diagnose` the options ask for.

    Method names are checked here, so an unknown one is a 400 before any work.
    """
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
            get_method(name)  # an unknown name is an OptionError (400)
        kwargs["methods"] = names
    return kwargs


def check_work(n_levels: int, kwargs: dict[str, Any]) -> None:
    """Refuse (422, :mod:`ptype.api.budget`) a request whose members x levels exceed
    ``PTYPE_MAX_MEMBER_LEVELS``, before any work."""
    from ptype.api import budget

    from ptype.engine.probability import DEFAULT_MEMBERS
    members = kwargs.get("members", DEFAULT_MEMBERS)
    limit = budget.setting("PTYPE_MAX_MEMBER_LEVELS")
    asked = max(members, 1) * n_levels
    budget.refuse(asked, limit, "member-levels",
                  f"members = {members} x {n_levels} levels = {asked} member-levels; this "
                  f"server accepts at most {limit} per request (ask for fewer members or send "
                  "fewer levels)", "members")


def check_levels(document: Any, field_prefix: str = "") -> None:
    """Refuse (413) a document with more levels than the server accepts, before any work."""
    if isinstance(document, dict) and isinstance(document.get("levels"), list):
        limit = current_app.config["PTYPE_MAX_LEVELS"]
        n = len(document["levels"])
        if n > limit:
            raise ApiError(413, "too_many_levels",
                           f"{field_prefix}levels: {n} levels; this server accepts at most {limit}",
                           f"{field_prefix}levels")


# ----------------------------------------------------------------------------------------
# Requests: bodies
# ----------------------------------------------------------------------------------------

#: Content types of a single profile in text, mapped to the reader format (None = detect).
TEXT_FORMATS = {"text/csv": "csv", "text/plain": None}
#: Media types of a WMO BUFR body (the ``x-`` form is the common one; both accepted).
BUFR_TYPES = ("application/x-bufr", "application/bufr")

media_type = inputs.media_type
is_json_request = inputs.is_json_request


def json_kind(value: Any) -> str:
    """What a decoded JSON value is, in words, for error messages ("an array")."""
    return {list: "an array", str: "a string", bool: "a boolean", type(None): "null",
            int: "a number", float: "a number"}.get(type(value), type(value).__name__)


def load_json_body(expected: str = "a JSON object") -> Any:
    """The request body as strict, checked JSON (:func:`ptype.api.inputs.json_body`)."""
    return inputs.json_body(expected)


def validate_body(model: type[Model], data: Any) -> Model:
    """``data`` (a decoded JSON body) validated against ``model``.

    Not an object is a 400; the first field that fails is a 422 naming it.
    """
    if not isinstance(data, dict):
        raise ApiError(400, "invalid_body", "request body must be a JSON object")
    try:
        return model.model_validate(data)
    except ValidationError as exc:
        err = exc.errors()[0]
        field = _loc(err["loc"])
        kind = err["type"]
        if kind == "extra_forbidden":
            msg = f"{field}: unknown field"
        elif kind == "missing":
            msg = f"{field}: required field is missing"
        else:
            msg = f"{field}: {_short(err['msg'])} (got {_shown(err.get('input'))})"
        raise ApiError(422, "invalid_body", msg, field) from None


def _short(message: str) -> str:
    """A pydantic message without its "Value error, " prefix."""
    return message.removeprefix("Value error, ")


def _shown(value: Any) -> str:
    """``repr(value)``, cut to a readable length for a message."""
    shown = repr(value)
    return shown if len(shown) <= 60 else shown[:57] + "..."


def _profile_text(options: DiagnoseOptions, kind: str) -> dict:
    """The profile document of a CSV or WMO TEMP body."""
    raw = inputs.read_body()
    if not raw.strip():
        raise ApiError(400, "empty_body", "request body is empty; expected a profile")
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError:
        raise ApiError(400, "invalid_text", "request body is not UTF-8 text") from None
    inputs.check_text_body(text)
    # Always hand the reader text with a line break, so that it is never taken for a
    # file path (the service reads nothing from its own disk on a client's behalf).
    if "\n" not in text:
        text += "\n"
    fmt = TEXT_FORMATS[kind] or options.input_format
    try:
        document, _ = read_document(text, format=fmt)
    except ReaderError as exc:
        message = str(exc).replace("pass format= explicitly", "name it with ?input=csv|temp|json")
        raise ReaderError(message, field=exc.field) from None
    return document


def _profile_bufr() -> dict:
    """The profile document of a WMO BUFR body (exactly one report)."""
    from ptype.readers import bufr_format
    raw = request.get_data(cache=True)
    if not raw:
        raise ApiError(400, "empty_body", "request body is empty; expected a BUFR message")
    documents = bufr_format.read_bufr_documents(raw, "request body")
    if len(documents) != 1:
        raise ReaderError(f"request body: holds {len(documents)} radiosonde reports; send one "
                          "per request")
    return documents[0]


def profile_from_request(options: DiagnoseOptions) -> ptype.Profile:
    """Read the single profile of the request body (JSON document, CSV or WMO TEMP text)."""
    kind = media_type()
    if is_json_request():
        document = load_json_body()
        if not isinstance(document, dict):
            raise ApiError(422, "invalid_profile", "request body must be a JSON object (a profile "
                                                   f"document), got {json_kind(document)}")
    elif kind in TEXT_FORMATS:
        document = _profile_text(options, kind)
    elif kind in BUFR_TYPES:
        document = _profile_bufr()
    else:
        shown = kind or "none"
        raise ApiError(415, "unsupported_media_type",
                       f"Content-Type {shown!r} is not accepted; send application/json (profile "
                       "document), text/csv, text/plain (WMO TEMP or CSV) or application/x-bufr "
                       "(WMO BUFR radiosonde report)")
    check_levels(document)
    return ptype.Profile.from_document(document)


# ----------------------------------------------------------------------------------------
# State: store, clock, API key
# ----------------------------------------------------------------------------------------

#: Key of the store in ``app.extensions``.
EXTENSION = "ptype_store"

_open_lock = threading.Lock()


def init_app(app: Flask) -> None:
    """Make room for the store; it is opened (and migrated) on first use."""
    app.extensions.setdefault(EXTENSION, None)


def store_for(app: Flask) -> Store:
    """The store of ``app`` (opened and migrated on first use in this process)."""
    store = app.extensions.get(EXTENSION)
    if store is None:
        with _open_lock:
            store = app.extensions.get(EXTENSION)
            if store is None:
                store = app.extensions[EXTENSION] = open_store(app.config)
    return store


def get_store() -> Store:
    """The store of the application handling this request."""
    return store_for(current_app._get_current_object())


#: Key of ``app.extensions`` caching the demo's clock read from the store (or None).
DEMO_CLOCK = "ptype.demo_clock"


def clock() -> Clock:
    """The service clock and its source: ``PTYPE_NOW`` when set (tests), else the demo's
    clock recorded in the store (a demo store), else the system clock."""
    app = current_app._get_current_object()
    if DEMO_CLOCK not in app.extensions:
        from ptype.store.demo import stored_demo_clock
        app.extensions[DEMO_CLOCK] = stored_demo_clock(store_for(app))
    return service_clock(app.config, app.extensions[DEMO_CLOCK])


def now() -> datetime:
    """The time of the service clock (:func:`clock`)."""
    return clock().now


#: Keys already verified in this process, by SHA-256 of the key (never the key itself).
_verified: dict[str, str] = {}
_verified_lock = threading.Lock()


def require_key() -> str:
    """Check the bearer key of a write; returns its key id.

    A missing or unknown key is a 401, a revoked one a 403 (:class:`ApiError`); an address
    that sent too many wrong keys lately is refused (429) before its key is looked at
    (:mod:`ptype.api.clients`).
    """
    from ptype.api import clients
    clients.refuse_if_blocked()
    header = request.headers.get("Authorization", "")
    scheme, _, token = header.partition(" ")
    if not header:
        raise ApiError(401, "unauthorized", "this request changes data and needs an API key: "
                       "send 'Authorization: Bearer <key>' (create one with 'ptype keys create')",
                       "Authorization")
    if scheme.lower() != "bearer" or not token.strip():
        raise ApiError(401, "unauthorized", "Authorization header: expected 'Bearer <key>'",
                       "Authorization")
    token = token.strip()
    # The scrypt check is deliberately slow; the memo of keys already verified keeps bursts
    # fast.  Revocation is still read from the database on every request.
    memo = hashlib.sha256(token.encode()).hexdigest()
    with _verified_lock:
        key_id = _verified.get(memo)
    with get_store().read() as s:
        if key_id is None:
            status, info = keystore.verify_key(s, token)
            if status == "unknown":
                clients.count_failure()
                raise ApiError(401, "unauthorized", "the API key is not valid", "Authorization")
            key_id = info.key_id
            if status == "ok":
                with _verified_lock:
                    _verified[memo] = key_id
        revoked = s.scalar(sa.select(ApiKey.revoked_at).where(ApiKey.key_id == key_id))
    if revoked is not None:
        raise ApiError(403, "forbidden", "the API key has been revoked", "Authorization")
    return key_id


#: Sender of the CAP messages and Atom feed unless ``PTYPE_CAP_SENDER`` names one.
DEFAULT_SENDER = "ptype@localhost"


def cap_sender() -> str:
    """The sender named in CAP messages and the Atom feed."""
    return str(current_app.config.get("PTYPE_CAP_SENDER") or DEFAULT_SENDER)
