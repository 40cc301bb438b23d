"""Manifests of paired cases: a profile and the weather observed with it.

A manifest is a CSV file with a header row, or a JSON file holding a list of objects
(or ``{"cases": [...]}``).  Fields of each case:

``profile`` (required)
    Path of the profile, relative to the manifest's folder (or absolute), in any format
    :func:`ptype.read_profile` accepts (JSON, CSV, WMO TEMP, NetCDF).  In JSON manifests
    and HTTP requests it may instead be an inline profile document (an object).
``observed`` (required)
    Present weather as written in METAR/SYNOP-style reports (``-FZRA BR``, ``FZRA PL``,
    ``NSW``); see :mod:`ptype.verify.observations`.  An empty value is allowed and makes
    the case excluded as "missing observation".
``valid_time`` (optional)
    ISO 8601 time; overrides the profile's own.
``site`` (optional)
    Free text naming the site; overrides the profile's site name in the report.

CSV lines that are blank or start with ``#`` are skipped.  Every error names the
manifest, the line (CSV) or entry (JSON) and the field.
"""

from __future__ import annotations

import csv
import dataclasses
import io
import json
from collections.abc import Iterable, Iterator, Mapping
from datetime import UTC, datetime
from pathlib import Path
from typing import TYPE_CHECKING, Any

from ptype.errors import ProfileError, ReaderError

if TYPE_CHECKING:
    from ptype.profile import Profile

FIELDS = ("profile", "observed", "valid_time", "site")
REQUIRED = ("profile", "observed")


@dataclasses.dataclass(frozen=True)
class Case:
    """One manifest entry.

    ``profile`` is a resolved :class:`pathlib.Path` or an inline profile document (dict);
    ``profile_ref`` is the text shown in reports; ``where`` locates the entry for messages
    (``cases.csv line 7``, ``cases[3]``).
    """

    profile: Path | dict
    profile_ref: str
    observed: str
    valid_time: datetime | None
    site: str | None
    where: str
    field_prefix: str | None = None

    def _field(self, name: str) -> str:
        return f"{self.field_prefix}.{name}" if self.field_prefix else name

    def load_profile(self) -> Profile:
        """Read and validate the profile; errors name the manifest entry and the field."""
        from ptype.profile import Profile
        from ptype.readers import read_profile
        try:
            if isinstance(self.profile, dict):
                return Profile.from_document(self.profile)
            return read_profile(self.profile)
        except ProfileError as exc:
            field = self._field(f"profile.{exc.field}" if exc.field else "profile")
            raise type(exc)(f"{self.where}: field 'profile' ({self.profile_ref}): {exc}",
                            field=field) from None


def _parse_time(value: Any, where: str) -> datetime | None:
    if value is None or (isinstance(value, str) and not value.strip()):
        return None
    if not isinstance(value, str):
        raise ReaderError(f"{where}: field 'valid_time': expected an ISO 8601 string, got "
                          f"{type(value).__name__}", field="valid_time")
    text = value.strip()
    try:
        t = datetime.fromisoformat(text[:-1] + "+00:00" if text.endswith(("Z", "z")) else text)
    except ValueError:
        raise ReaderError(f"{where}: field 'valid_time': {value!r} is not an ISO 8601 time "
                          "(e.g. 2025-01-14T06:00Z)", field="valid_time") from None
    from ptype.clock import time_range_problem
    problem = time_range_problem(t)
    if problem is not None:
        raise ReaderError(f"{where}: field 'valid_time': {value!r}: {problem}",
                          field="valid_time")
    return t if t.tzinfo is not None else t.replace(tzinfo=UTC)


def case_from_entry(entry: Any, where: str, base_dir: Path | None, *,
                    allow_paths: bool = True, field_prefix: str | None = None) -> Case:
    """Validate one entry (a mapping) into a :class:`Case`.

    ``base_dir`` resolves relative profile paths; ``allow_paths=False`` (the HTTP service)
    accepts only inline profile documents.  ``field_prefix`` (``cases[3]``) is put in front
    of the ``field`` of every error.
    """
    try:
        return _case_from_entry(entry, where, base_dir, allow_paths, field_prefix)
    except ProfileError as exc:
        if field_prefix:
            exc.field = f"{field_prefix}.{exc.field}" if exc.field else field_prefix
        raise


def _case_from_entry(entry, where, base_dir, allow_paths, field_prefix) -> Case:
    if not isinstance(entry, Mapping):
        raise ReaderError(f"{where}: expected an object with fields {', '.join(FIELDS)}, got "
                          f"{type(entry).__name__}")
    unknown = [k for k in entry if k not in FIELDS]
    if unknown:
        raise ReaderError(f"{where}: unknown field {unknown[0]!r}; expected "
                          f"{', '.join(FIELDS)}", field=str(unknown[0]))
    for name in REQUIRED:
        if name not in entry or entry[name] is None:
            raise ReaderError(f"{where}: field '{name}' is missing", field=name)
    observed = entry["observed"]
    if not isinstance(observed, str):
        raise ReaderError(f"{where}: field 'observed': expected present-weather text such as "
                          f"'-FZRA BR', got {type(observed).__name__}", field="observed")
    if len(observed) > 200:
        raise ReaderError(f"{where}: field 'observed': longer than 200 characters",
                          field="observed")
    site = entry.get("site")
    if site is not None and not isinstance(site, str):
        raise ReaderError(f"{where}: field 'site': expected text, got {type(site).__name__}",
                          field="site")
    site = site.strip() or None if isinstance(site, str) else None
    profile = entry["profile"]
    if isinstance(profile, Mapping):
        resolved: Path | dict = dict(profile)
        ref = profile.get("source") if isinstance(profile.get("source"), str) else where
    elif isinstance(profile, str):
        if not allow_paths:
            raise ReaderError(f"{where}: field 'profile': expected an inline profile document "
                              "(a JSON object); file paths are not accepted here",
                              field="profile")
        ref = profile.strip()
        if not ref:
            raise ReaderError(f"{where}: field 'profile' is empty", field="profile")
        path = Path(ref)
        if not path.is_absolute() and base_dir is not None:
            path = base_dir / path
        if not path.is_file():
            raise ReaderError(f"{where}: field 'profile': no such file {ref!r} (relative to "
                              f"{base_dir if base_dir is not None else 'the current folder'})",
                              field="profile")
        resolved = path
    else:
        raise ReaderError(f"{where}: field 'profile': expected a path or a profile document, "
                          f"got {type(profile).__name__}", field="profile")
    return Case(profile=resolved, profile_ref=str(ref), observed=observed,
                valid_time=_parse_time(entry.get("valid_time"), where), site=site, where=where,
                field_prefix=field_prefix)


def cases_from_entries(entries: Any, *, name: str = "cases", base_dir: Path | None = None,
                       allow_paths: bool = True) -> list[Case]:
    """Validate a list of entries (JSON manifests and HTTP bodies).

    Messages locate entry ``i`` as ``name[i]``; error fields read ``cases[i].<field>``.
    """
    if not isinstance(entries, list):
        raise ReaderError(f"{name}: expected a list of cases, got {type(entries).__name__}",
                          field="cases")
    return [case_from_entry(e, f"{name}[{i}]", base_dir, allow_paths=allow_paths,
                            field_prefix=f"cases[{i}]")
            for i, e in enumerate(entries)]


def _read_csv(text: str, label: str, base_dir: Path) -> list[Case]:
    lines = [(i + 1, line) for i, line in enumerate(text.splitlines())
             if line.strip() and not line.lstrip().startswith("#")]
    if not lines:
        raise ReaderError(f"{label}: empty manifest; expected a header row naming "
                          f"{', '.join(REQUIRED)}")
    header_line, header = lines[0]
    columns = [c.strip().lower() for c in next(csv.reader([header]))]
    for name in REQUIRED:
        if name not in columns:
            raise ReaderError(f"{label} line {header_line}: header has no '{name}' column "
                              f"(found {', '.join(columns)})", field=name)
    for c in columns:
        if c not in FIELDS:
            raise ReaderError(f"{label} line {header_line}: unknown column {c!r}; expected "
                              f"{', '.join(FIELDS)}", field=c)
    cases = []
    reader = csv.reader(io.StringIO("\n".join(line for _, line in lines[1:])))
    for (number, _), row in zip(lines[1:], reader):
        where = f"{label} line {number}"
        if len(row) != len(columns):
            raise ReaderError(f"{where}: {len(row)} fields, expected {len(columns)} "
                              f"({', '.join(columns)})")
        entry = {c: v.strip() for c, v in zip(columns, row)}
        cases.append(case_from_entry(entry, where, base_dir))
    return cases


def read_manifest(path: str | Path) -> list[Case]:
    """Read a CSV (``.csv``) or JSON (``.json`` or content starting with ``[``/``{``) manifest."""
    path = Path(path)
    label = path.name
    if not path.is_file():
        raise ReaderError(f"{path}: no such manifest file")
    try:
        text = path.read_text(encoding="utf-8-sig")
    except UnicodeDecodeError:
        raise ReaderError(f"{label}: not a UTF-8 text file") from None
    base_dir = path.resolve().parent
    stripped = text.lstrip()
    if path.suffix.lower() == ".json" or stripped.startswith(("[", "{")):
        try:
            data = json.loads(text)
        except json.JSONDecodeError as exc:
            raise ReaderError(f"{label}: line {exc.lineno} column {exc.colno}: invalid JSON "
                              f"({exc.msg})") from None
        if isinstance(data, dict):
            if set(data) - {"cases"}:
                extra = min(set(data) - {"cases"})
                raise ReaderError(f"{label}: unknown top-level field {extra!r}; expected "
                                  "'cases'", field=extra)
            if "cases" not in data:
                raise ReaderError(f"{label}: field 'cases' is missing", field="cases")
            data = data["cases"]
        cases = cases_from_entries(data, name=f"{label} cases", base_dir=base_dir)
    else:
        cases = _read_csv(text, label, base_dir)
    if not cases:
        raise ReaderError(f"{label}: the manifest lists no cases")
    return cases


def iter_profiles(cases: Iterable[Case]) -> Iterator[Profile]:
    """Load each case's profile (errors name the entry)."""
    for case in cases:
        yield case.load_profile()
