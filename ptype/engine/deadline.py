"""A time limit for long computations, checked between their batches.

A caller (the HTTP service, per request) sets a limit with :func:`time_limit`; the engine
calls :func:`check` between member batches (:func:`ptype.engine.run.run_columns`), so a
computation that runs too long stops at the next batch boundary with
:class:`ptype.errors.DeadlineExceeded` instead of holding its process.  The limit lives in a
context variable: each thread (each request of a threaded server) has its own, and code
run without a limit never stops.
"""

from __future__ import annotations

import time
from collections.abc import Iterator
from contextlib import contextmanager
from contextvars import ContextVar

from ptype.errors import DeadlineExceeded

#: Monotonic time after which :func:`check` raises, and the limit in seconds; None: no limit.
_deadline: ContextVar[tuple[float, float] | None] = ContextVar("ptype_deadline", default=None)


@contextmanager
def time_limit(seconds: float | None) -> Iterator[None]:
    """Run the block with a limit of ``seconds`` (None or 0: no limit); nested limits keep
    the earlier deadline."""
    if not seconds or seconds <= 0:
        yield
        return
    end = time.monotonic() + float(seconds)
    outer = _deadline.get()
    if outer is not None and outer[0] < end:
        end, seconds = outer
    token = _deadline.set((end, float(seconds)))
    try:
        yield
    finally:
        _deadline.reset(token)


def remaining() -> float | None:
    """Seconds left before the deadline (negative when past); None without a limit."""
    current = _deadline.get()
    return None if current is None else current[0] - time.monotonic()


def check() -> None:
    """Raise :class:`~ptype.errors.DeadlineExceeded` when the current deadline has passed."""
    current = _deadline.get()
    if current is not None and time.monotonic() > current[0]:
        raise DeadlineExceeded(f"the computation took longer than its limit of "
                               f"{current[1]:g} s", seconds=current[1])
