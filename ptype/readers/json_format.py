"""Our JSON profile document (see :mod:`ptype.profile.document` and
``docs/profile.schema.json``)."""

from __future__ import annotations

import json
from typing import Any

from ptype.errors import ReaderError


def loads_json(text: str, name: str = "<text>") -> Any:
    """Parse JSON text with a one-line error naming the line and column."""
    try:
        return json.loads(text)
    except json.JSONDecodeError as exc:
        raise ReaderError(f"{name}: line {exc.lineno} column {exc.colno}: invalid JSON "
                          f"({exc.msg})") from None


def read_json_document(text: str, name: str = "<text>") -> dict:
    """Decode JSON text into a profile document dict (structure is checked later)."""
    data = loads_json(text, name)
    if not isinstance(data, dict):
        raise ReaderError(f"{name}: expected a JSON object (a profile document), got "
                          f"{type(data).__name__}")
    return data
