"""One place that turns every error into a JSON body ``{"error": {"code", "message", "field"?}}``,
or, for a browser that asks for HTML first, a page in the site's frame saying the same.

Bad input is a 4xx with a message naming the field; an unexpected failure is a
500 with a generic message (never a traceback in a response).
"""

from __future__ import annotations

import logging

from flask import Flask, Response, current_app, jsonify, request
from werkzeug.exceptions import HTTPException

from ptype.errors import OptionError, ProfileError

log = logging.getLogger("ptype.api")

#: Key in ``app.extensions`` of the function that renders an error page for browsers
#: (:func:`ptype.api.frame.error_page`, registered by that module).
ERROR_PAGE = "ptype_error_page"

#: What an error handler returns: the JSON body and the status.
Answer = tuple[Response, int]


class ApiError(Exception):
    """An error with an HTTP status, a stable code and a message (and optionally the field)."""

    def __init__(self, status: int, code: str, message: str, field: str | None = None) -> None:
        super().__init__(message)
        self.status = status
        self.code = code
        self.message = message
        self.field = field


def error_body(code: str, message: str, field: str | None = None) -> dict[str, dict[str, str]]:
    """The JSON body of an error: ``{"error": {"code", "message", "field"?}}``."""
    body = {"code": code, "message": message}
    if field:
        body["field"] = field
    return {"error": body}


def wants_html() -> bool:
    """True when the client prefers a page to JSON (a browser's ``Accept``); API clients,
    which send ``application/json``, ``*/*`` or nothing, get JSON."""
    best = request.accept_mimetypes.best_match(["application/json", "text/html"])
    return best == "text/html"


def answer(status: int, code: str, message: str, field: str | None = None) -> Answer:
    """The error as JSON, or as a page in the site's frame for a browser."""
    page = current_app.extensions.get(ERROR_PAGE)
    if page is not None and wants_html():
        text = message + (f" (field: {field})" if field else "")
        return page(status, code.replace("_", " "), text), status
    return jsonify(error_body(code, message, field)), status


def init_app(app: Flask) -> None:
    """Register the one set of error handlers of the service on ``app``."""

    @app.errorhandler(ApiError)
    def _api_error(exc: ApiError) -> Answer:
        return answer(exc.status, exc.code, exc.message, exc.field)

    @app.errorhandler(ProfileError)
    def _profile_error(exc: ProfileError) -> Answer:
        return answer(422, "invalid_profile", str(exc), exc.field)

    @app.errorhandler(OptionError)
    def _option_error(exc: OptionError) -> Answer:
        return answer(400, "invalid_option", str(exc), exc.field)

    @app.errorhandler(HTTPException)
    def _http_error(exc: HTTPException) -> Answer:
        code = (exc.name or "error").lower().replace(" ", "_")
        if exc.code == 413:
            limit = app.config.get("MAX_CONTENT_LENGTH")
            message = f"request body is larger than the limit of {limit} bytes"
        else:
            message = exc.description or exc.name
        return answer(exc.code or 500, code, message)

    @app.errorhandler(Exception)
    def _unexpected(exc: Exception) -> Answer:  # pragma: no cover - exercised only by bugs
        log.exception("unexpected error")
        return jsonify(error_body("internal_error", "the server failed to handle this request; "
                                  "it has been logged")), 500
