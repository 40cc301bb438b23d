"""CSV profiles: a header naming columns with their units, ``#`` comment lines for metadata.

Example::

    # site_name: Harrowgate Pass
    # latitude: 47.1
    # longitude: 8.3
    # elevation_m: 640
    # valid_time: 2026-01-14T06:00Z
    # surface.temperature_2m_c: -1.2
    pressure_hpa,height_m,temperature_c,dewpoint_c
    950,640,-1.0,-1.8
    ...

Columns are any of the level fields of the profile document
(``pressure_hpa``, ``height_m``, ``temperature_c``, ``dewpoint_c``,
``relative_humidity_pct``, ``mixing_ratio_g_kg``, ``wetbulb_c``); an empty
cell is a missing value.  Metadata keys: ``site_id``, ``site_name``,
``latitude``, ``longitude``, ``elevation_m``, ``valid_time``, ``source`` and
``surface.<field>`` for any surface field.
"""

from __future__ import annotations

import csv
import io

from ptype.errors import ReaderError
from ptype.profile import LEVEL_FIELDS

_SITE_KEYS = {"site_id": "id", "site_name": "name", "latitude": "latitude",
              "longitude": "longitude", "elevation_m": "elevation_m"}
_NUMERIC_SITE = {"latitude", "longitude", "elevation_m"}


_DOC_KEYS = ("valid_time", "source")


def _number(text: str, name: str, line: int, column: str) -> float:
    try:
        return float(text)
    except ValueError:
        raise ReaderError(f"{name}: line {line}: column {column}: {text!r} is not a "
                          "number") from None


def read_csv_document(text: str, name: str = "<text>") -> dict:
    """Parse CSV text into a profile document dict.

    Parameters
    ----------
    text : str
        The CSV content: ``# key: value`` metadata lines, a header naming the level fields
        (:data:`ptype.profile.LEVEL_FIELDS`), one row per level.
    name : str
        The source, for messages.

    Returns
    -------
    dict
        A profile document (``levels`` and, when given, ``site``, ``surface``,
        ``valid_time``, ``source``).

    Raises
    ------
    ptype.errors.ReaderError
        Naming the line and the column or key at fault.
    """
    doc: dict = {}
    site: dict = {}
    surface: dict = {}
    data_lines: list[tuple[int, str]] = []
    for lineno, raw in enumerate(text.splitlines(), start=1):
        line = raw.strip()
        if line.startswith("#"):
            _read_metadata(line, doc, site, surface, name, lineno)
        elif line:
            data_lines.append((lineno, raw))
    if not data_lines:
        raise ReaderError(f"{name}: no header line found; expected e.g. "
                          "'pressure_hpa,height_m,temperature_c,dewpoint_c'")
    columns = _read_header(*data_lines[0], name)
    doc["levels"] = _read_rows(data_lines[1:], columns, name)
    if site:
        doc["site"] = site
    if surface:
        doc["surface"] = surface
    return doc


def _read_metadata(line: str, doc: dict, site: dict, surface: dict, name: str,
                   lineno: int) -> None:
    """One ``# key: value`` line into the document, site or surface (a plain comment has no
    colon and is skipped)."""
    body = line.lstrip("#").strip()
    if ":" not in body:
        return
    key, _, value = body.partition(":")
    key, value = key.strip(), value.strip()
    if key in _SITE_KEYS:
        site[_SITE_KEYS[key]] = (_number(value, name, lineno, key)
                                 if key in _NUMERIC_SITE else value)
    elif key in _DOC_KEYS:
        doc[key] = value
    elif key.startswith("surface."):
        surface[key[len("surface."):]] = _number(value, name, lineno, key)
    else:
        expected = ", ".join([*_SITE_KEYS, *_DOC_KEYS, "surface.<field>"])
        raise ReaderError(f"{name}: line {lineno}: unknown metadata key {key!r}; expected one "
                          f"of {expected}")


def _read_header(header_line: int, header: str, name: str) -> list[str]:
    """The column names of the header, checked: known, distinct, pressure and temperature."""
    try:
        columns = [c.strip().lower() for c in next(csv.reader([header]))]
    except csv.Error as exc:  # e.g. a field longer than the csv module's limit (128 KiB)
        raise ReaderError(f"{name}: line {header_line}: not a CSV header ({exc})") from None
    unknown = [c for c in columns if c not in LEVEL_FIELDS]
    if unknown:
        raise ReaderError(f"{name}: line {header_line}: unknown column {unknown[0]!r}; "
                          f"expected names with units from: {', '.join(LEVEL_FIELDS)}")
    if len(set(columns)) != len(columns):
        raise ReaderError(f"{name}: line {header_line}: a column name is repeated")
    for required in ("pressure_hpa", "temperature_c"):
        if required not in columns:
            raise ReaderError(f"{name}: line {header_line}: the header has no {required} column")
    return columns


def _read_rows(data_lines: list[tuple[int, str]], columns: list[str], name: str) -> list[dict]:
    """One level per row; an empty cell is a missing value."""
    reader = csv.reader(io.StringIO("\n".join(raw for _, raw in data_lines)))
    try:
        rows = list(reader)
    except csv.Error as exc:  # e.g. a field longer than the csv module's limit (128 KiB)
        lineno = data_lines[min(reader.line_num, len(data_lines)) - 1][0] if data_lines else 0
        raise ReaderError(f"{name}: line {lineno}: not a CSV row ({exc})") from None
    levels = []
    for (lineno, _), row in zip(data_lines, rows):
        if len(row) != len(columns):
            raise ReaderError(f"{name}: line {lineno}: {len(row)} value(s) for {len(columns)} "
                              "columns")
        levels.append({column: _number(cell.strip(), name, lineno, column)
                       for column, cell in zip(columns, row) if cell.strip() != ""})
    return levels
