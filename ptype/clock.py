"""The injectable clock.

Everything that needs "now" (the timeline start, alert onset and expiry, the
``sent`` time of a CAP message, stored ``received_at`` stamps) asks
:func:`utcnow`, which honours a fixed time given as ``PTYPE_NOW`` (ISO 8601) in
the application config or the environment.  Tests pin the clock this way so
that their results are deterministic.

The service and the store's commands (``ptype alerts``) share *one* clock,
:func:`service_clock`: ``PTYPE_NOW`` when set, else the demo's clock when the store
holds the invented demo (the issue time of its storm, recorded in the store when the
demo is loaded), else the system clock.  :class:`Clock` carries the time together with
where it came from, so that every screen and listing can state which clock it used.
"""

from __future__ import annotations

import os
from collections.abc import Mapping
from dataclasses import dataclass
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


def from_iso(value: str) -> datetime | None:
    """The datetime an ISO 8601 string writes (a trailing ``Z`` read as UTC; naive when it
    has no offset), or None when it is not one."""
    text = value.strip()
    if text.endswith(("Z", "z")):
        text = text[:-1] + "+00:00"
    try:
        return datetime.fromisoformat(text)
    except ValueError:
        return None


def parse_time(value: Any, field: str = "time") -> datetime:
    """An aware UTC datetime from an ISO 8601 string or datetime (UTC assumed without offset).

    Times outside :data:`EARLIEST`..:data:`LATEST` are an :class:`OptionError`.
    """
    if isinstance(value, datetime):
        dt = value
    elif isinstance(value, str):
        dt = from_iso(value)
        if dt is None:
            raise OptionError(f"{field} = {value!r}: expected an ISO 8601 time such as "
                              "2026-01-15T06:00:00Z", field=field)
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


#: Where a :class:`Clock` reads its time, and how a screen names it.
CLOCK_SOURCES = {
    "PTYPE_NOW": "fixed by PTYPE_NOW",
    "demo": "demo clock: the issue time of the invented demo storm; set PTYPE_NOW to change it",
    "system": "system clock",
    "request": "the time the request asked for",
}


@dataclass(frozen=True)
class Clock:
    """A time and the clock it was read from (``PTYPE_NOW``, ``demo`` or ``system``; or
    ``request`` for a time a request asked for)."""

    now: datetime
    source: str

    def describe(self) -> str:
        """``2026-01-27T06:00:00Z (demo clock: ...)``: the time and where it came from."""
        return f"{iso(self.now)} ({CLOCK_SOURCES[self.source]})"

    def to_dict(self) -> dict[str, str | None]:
        """``{"now", "source", "text"}`` for JSON answers and page templates."""
        return {"now": iso(self.now), "source": self.source, "text": self.describe()}


def service_clock(config: Mapping[str, Any] | None = None,
                  demo_clock: datetime | None = None) -> Clock:
    """The one clock of the service and the store's commands.

    ``PTYPE_NOW`` (``config``, then the environment) wins; else ``demo_clock`` (the demo's
    clock recorded in the store, see :func:`ptype.store.demo.stored_demo_clock`); else the
    system clock.
    """
    fixed = (config or {}).get("PTYPE_NOW") or os.environ.get("PTYPE_NOW")
    if fixed:
        return Clock(parse_time(fixed, "PTYPE_NOW"), "PTYPE_NOW")
    if demo_clock is not None:
        return Clock(parse_time(demo_clock, "demo clock"), "demo")
    return Clock(datetime.now(UTC).replace(microsecond=0), "system")
