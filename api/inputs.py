"""The one reader of request bodies, and the checks every input passes before any work.

* :func:`read_body`: the raw body within ``MAX_CONTENT_LENGTH``; a streamed (chunked) body
  that reaches the limit is a 413, never silently cut short.
* :func:`json_body`: the body as strict JSON: ``application/json`` or 415, UTF-8, no
  ``NaN``/``Infinity``, at most ``PTYPE_MAX_JSON_DEPTH`` levels of arrays and objects, and
  every string (keys too) made only of characters that XML 1.0 allows, so nothing stored can
  later break a CAP message or the Atom feed.
* :func:`check_text_body`: the same character rule for CSV and WMO TEMP bodies.
* :func:`check_id`: a path or query id within the range of the database's integers.
* :func:`query_time`: a time given in the query string, within the accepted range.

The character rules themselves live in :mod:`ptype.store.text`; the time range in
:mod:`ptype.clock`.  Every refusal is an :class:`ApiError` naming the field.
"""

from __future__ import annotations

import json
import re
from datetime import datetime
from typing import Any, NoReturn

from flask import current_app, request
from ptype.api.errors import ApiError

from ptype.clock import from_iso, parse_time, time_range_problem
from ptype.store.text import first_bad_character

#: Deepest nesting of arrays and objects accepted in a JSON body when the configuration
#: names none (a batch of profile documents needs 5).
DEFAULT_MAX_JSON_DEPTH = 32
#: Ids are 64-bit signed integers in every database we support; larger numbers name nothing.
MAX_ID = 2 ** 63 - 1


def media_type() -> str:
    """The request's media type, lower case ("" when none was sent)."""
    return (request.mimetype or "").lower()


def is_json_request() -> bool:
    """True when the request says its body is JSON (``application/json`` or ``...+json``)."""
    kind = media_type()
    return kind == "application/json" or kind.endswith("+json")


def read_body() -> bytes:
    """The raw request body, at most ``MAX_CONTENT_LENGTH`` bytes (else 413).

    With a ``Content-Length`` the limit is checked before reading.  A chunked body has no
    length: the WSGI layer stops reading at the limit, so a body that fills it is refused
    here rather than handed on truncated.
    """
    raw = request.get_data(cache=True)
    limit = current_app.config.get("MAX_CONTENT_LENGTH")
    if limit is not None and request.content_length is None and len(raw) >= limit:
        raise ApiError(413, "request_entity_too_large",
                       f"request body is larger than the limit of {limit} bytes")
    return raw


def _reject_constant(name: str) -> NoReturn:
    raise ApiError(400, "invalid_json", f"request body: {name} is not valid JSON; "
                                        "use null for a missing value")


def json_body(expected: str = "a JSON object") -> Any:
    """The body decoded as strict JSON and checked (depth, characters).

    ``expected`` says what the endpoint wants, for the messages.  Not JSON by its
    Content-Type is a 415; empty, not UTF-8 or not JSON a 400; too deep a 400; a string with
    a character XML 1.0 forbids a 422 naming the field.
    """
    if not is_json_request():
        shown = media_type() or "none"
        raise ApiError(415, "unsupported_media_type",
                       f"Content-Type {shown!r} is not accepted here; send application/json "
                       f"holding {expected}")
    raw = read_body()
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError:
        raise ApiError(400, "invalid_json", "request body is not UTF-8 text") from None
    if not text.strip():
        raise ApiError(400, "invalid_json", f"request body is empty; expected {expected}")
    limit = int(current_app.config.get("PTYPE_MAX_JSON_DEPTH") or DEFAULT_MAX_JSON_DEPTH)
    try:
        value = json.loads(text, parse_constant=_reject_constant)
    except json.JSONDecodeError as exc:
        raise ApiError(400, "invalid_json", f"request body: line {exc.lineno} column "
                                            f"{exc.colno}: invalid JSON ({exc.msg})") from None
    except RecursionError:
        raise _too_deep(limit) from None
    if nesting_depth(value, limit) > limit:
        raise _too_deep(limit)
    if may_hold_forbidden_text(text):  # only then walk the value to name the field
        check_json_value(value, limit)
    return value


#: An escape that may write a forbidden character (RFC 8259, sec. 7): ``\b`` and ``\f``, or
#: ``\u`` of a C0 control, of a surrogate (either half of a pair, too: a supplementary
#: non-character is written as a pair), of U+FDD0-U+FDEF, U+FFFE or U+FFFF.
_SUSPECT_ESCAPE = re.compile(r"\\(?:[bf]|u(?:00[01][0-9a-fA-F]|[dD][89a-fA-F][0-9a-fA-F]{2}"
                             r"|[fF][dD][dDeE][0-9a-fA-F]|[fF]{3}[eEfF]))")


def nesting_depth(value: Any, limit: int) -> int:
    """How deeply arrays and objects nest in the decoded JSON ``value`` (a scalar is 0),
    counted level by level without recursion; counting stops past ``limit``."""
    level = [value] if type(value) in (dict, list) else []
    depth = 0
    while level and depth <= limit:
        depth += 1
        deeper: list[Any] = []
        for item in level:
            children = item.values() if type(item) is dict else item
            deeper += [c for c in children if type(c) is dict or type(c) is list]
        level = deeper
    return depth


def may_hold_forbidden_text(text: str) -> bool:
    """False when no string of the JSON ``text`` can hold a forbidden character: none is
    written as itself, and no escape could write one.  (Raw control characters inside
    strings are already refused by the JSON reader.)"""
    if _SUSPECT_ESCAPE.search(text) is not None:
        return True
    return not text.isascii() and first_bad_character(text) is not None


def _too_deep(limit: int) -> ApiError:
    return ApiError(400, "invalid_json", "request body is nested too deeply: this server "
                                         f"accepts at most {limit} levels of arrays and objects")


def _path(parent: str, key: Any) -> str:
    if isinstance(key, int):
        return f"{parent}[{key}]"
    return f"{parent}.{key}" if parent else str(key)


def check_json_value(value: Any, max_depth: int) -> None:
    """Refuse a decoded JSON value nested deeper than ``max_depth`` (400) or holding a
    string, key or value, with a character XML 1.0 forbids (422 naming the field).

    Walked with an explicit stack, so no depth can exhaust Python's recursion limit.
    """
    stack: list[tuple[Any, str, int]] = [(value, "", 0)]
    while stack:
        item, path, depth = stack.pop()
        if isinstance(item, dict | list):
            if depth >= max_depth:
                raise _too_deep(max_depth)
            pairs = item.items() if isinstance(item, dict) else enumerate(item)
            for key, child in pairs:
                child_path = _path(path, key)
                if isinstance(key, str):
                    _check_string(key, child_path, "field name")
                stack.append((child, child_path, depth + 1))
        elif isinstance(item, str):
            _check_string(item, path or "body", "text")


def _check_string(text: str, field: str, what: str) -> None:
    bad = first_bad_character(text)
    if bad is not None:
        raise ApiError(422, "invalid_text", f"{field}: the {what} holds the character "
                       f"U+{ord(bad):04X}, which is not allowed (control characters other than "
                       "tab and line breaks, unpaired surrogates and non-characters)",
                       field or None)


def check_text_body(text: str) -> None:
    """Refuse (422) a text body (CSV, WMO TEMP) holding a character XML 1.0 forbids."""
    bad = first_bad_character(text)
    if bad is not None:
        line = text.count("\n", 0, text.index(bad)) + 1
        raise ApiError(422, "invalid_text", f"request body: line {line}: the character "
                       f"U+{ord(bad):04X} is not allowed in a profile", "body")


def check_id(value: Any, field: str) -> int:
    """``value`` (a path or query id) as an int in 1..2**63-1; else a 400 naming ``field``."""
    try:
        number = int(str(value).strip())
    except ValueError:
        raise ApiError(400, "invalid_option", f"{field} = {value!r}: expected a whole number",
                       field) from None
    if not 1 <= number <= MAX_ID:
        raise ApiError(400, "invalid_option", f"{field} = {value}: expected an id from 1 to "
                       f"{MAX_ID}", field)
    return number


def query_time(name: str) -> datetime | None:
    """The ISO 8601 time of query option ``name`` (None when absent): 400 when it is not a
    time, 422 when it is outside the accepted range (:data:`ptype.clock.EARLIEST` ...)."""
    if name not in request.args:
        return None
    value = request.args[name]
    problem = time_range_problem_of(value)
    if problem is not None:
        raise ApiError(422, "invalid_option", f"{name} = {value!r}: {problem}", name)
    return parse_time(value, name)


def time_range_problem_of(value: str) -> str | None:
    """Why the ISO 8601 ``value`` is outside the accepted range; None when inside or when it
    is not a time at all (that is :func:`ptype.clock.parse_time`'s to say)."""
    dt = from_iso(value)
    return None if dt is None else time_range_problem(dt)
