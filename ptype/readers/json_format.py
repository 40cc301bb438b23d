"""Our JSON profile document (see :mod:`ptype.profile.document` and ``docs/profile.schema.json``)."""

from __future__ import annotations

from ptype.errors import ReaderError


def read_json_document(text: str, name: str = "<text>") -> dict:
    """Decode JSON text into a profile document dict (structure is checked later)."""
    from ptype.readers import loads_json
    data = loads_json(text, name)
    if not isinstance(data, dict):
        raise ReaderError(f"{name}: expected a JSON object (a profile document), got {type(data).__name__}")
    return data
