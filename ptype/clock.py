"""The injectable clock.

Everything that needs "now" (the timeline start, alert onset and expiry, the
``sent`` time of a CAP message, stored ``received_at`` stamps) asks
:func:`utcnow`, which honours a fixed time given as ``PTYPE_NOW`` (ISO 8601) in
the application config or the environment.  Tests and the demo pin the clock
this way so that their results are deterministic.
"""

from __future__ import annotations

import os
from collections.abc import Mapping
from datetime import UTC, datetime
from typing import Any

from ptype.errors import OptionError

#: The times accepted anywhere (ours): from 1900 up to, not including, 2200.  Soundings and
#: forecasts fall well inside; the bounds keep time arithmetic (a timeline's horizon, a
#: time zone's offset) away from the ends of the calendar, where it overflows.
EARLIEST = datetime(1900, 1, 1, tzinfo=UTC)
LATEST = datetime(2200, 1, 1, tzinfo=UTC)
TIME_RANGE_TEXT = "from 1900-01-01T00:00:00Z up to (not including) 2200-01-01T00:00:00Z"


def time_range_problem(dt: datetime) -> str | None:
    """Why ``dt`` is outside :data:`EARLIEST`..:data:`LATEST` (None when inside).

    The year is checked before any conversion to UTC, which itself overflows at the ends
    of the calendar (``0001-01-01T00:00:00+14:00``).
    """
    if not EARLIEST.year <= dt.year < LATEST.year:
        return f"expected a time {TIME_RANGE_TEXT}"
    aware = dt if dt.tzinfo is not None else dt.replace(tzinfo=UTC)
    if not EARLIEST <= aware < LATEST:
        return f"expected a time {TIME_RANGE_TEXT}"
    return None


def in_time_range(dt: datetime) -> datetime:
    """``dt`` when inside the accepted range; a ValueError saying the range otherwise (for
    pydantic validators, which name the field)."""
    problem = time_range_problem(dt)
    if problem is not None:
        raise ValueError(problem)
    return dt


def parse_time(value: Any, field: str = "time") -> datetime:
    """An aware UTC datetime from an ISO 8601 string or datetime (UTC assumed without offset).

    Times outside :data:`EARLIEST`..:data:`LATEST` are an :class:`OptionError`.
    """
    if isinstance(value, datetime):
        dt = value
    elif isinstance(value, str):
        text = value.strip()
        if text.endswith(("Z", "z")):
            text = text[:-1] + "+00:00"
        try:
            dt = datetime.fromisoformat(text)
        except ValueError:
            raise OptionError(f"{field} = {value!r}: expected an ISO 8601 time such as "
                              "2026-01-15T06:00:00Z", field=field) from None
    else:
        raise OptionError(f"{field} = {value!r}: expected an ISO 8601 time string", field=field)
    problem = time_range_problem(dt)
    if problem is not None:
        raise OptionError(f"{field} = {value!r}: {problem}", field=field)
    if dt.tzinfo is None:
        dt = dt.replace(tzinfo=UTC)
    return dt.astimezone(UTC)


def utcnow(config: Mapping[str, Any] | None = None) -> datetime:
    """The current time (aware UTC), or the fixed ``PTYPE_NOW`` from ``config`` or the
    environment."""
    fixed = (config or {}).get("PTYPE_NOW") or os.environ.get("PTYPE_NOW")
    if fixed:
        return parse_time(fixed, "PTYPE_NOW")
    return datetime.now(UTC).replace(microsecond=0)


def iso(dt: datetime | None) -> str | None:
    """``YYYY-MM-DDThh:mm:ssZ`` (UTC, whole seconds) for JSON bodies."""
    if dt is None:
        return None
    return dt.astimezone(UTC).replace(microsecond=0).strftime("%Y-%m-%dT%H:%M:%SZ")
