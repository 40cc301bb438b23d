"""Bounded work per request: a budget checked before any work, work slots and a time limit.

* **Budget**: every computing request states its work before any is done (members x levels
  for a profile, summed over a batch; members x steps x levels for a timeline; cases x
  members for a verification) and a request over its limit is a 422 ``too_much_work``
  whose error names the ``limit``, the ``asked`` amount and their ``unit``.
* **Slots**: at most ``PTYPE_WORK_SLOTS`` computations run at once in one worker process
  (:func:`computing`, around the engine call of a view, after its budget check); a
  request that finds none free within ``PTYPE_SLOT_WAIT_S`` is a 503 ``busy`` with
  ``Retry-After``.  Everything else (``/healthz``, reads, pages, a refusal, the write of a
  write request) never waits for one, so it keeps answering while heavy work queues.
* **Time limit**: a computation runs under :func:`ptype.engine.deadline.time_limit`
  (``PTYPE_REQUEST_DEADLINE_S``); past it the engine stops between member batches and the
  answer is a 503 ``timeout`` with ``Retry-After``, never a worker killed by the server.

Every setting comes from the application config, else the environment variable of the
same name, else :data:`SETTINGS` (the table in ``docs/api.md``).
"""

from __future__ import annotations

import os
import threading
from collections.abc import Iterator
from contextlib import contextmanager
from typing import Any

from flask import Flask, Response, current_app, jsonify
from ptype.api.errors import error_body

from ptype.engine import deadline
from ptype.errors import DeadlineExceeded, WorkLimitError

#: Setting -> (default, type, meaning).  The work limits count "member-levels": one level of
#: one Monte-Carlo member (or of the control when no members are asked) diagnosed once.
SETTINGS: dict[str, tuple[Any, type, str]] = {
    "PTYPE_MAX_MEMBER_LEVELS": (
        1_000_000, int, "diagnose, diagram, batch: members x levels, summed over the profiles"),
    "PTYPE_MAX_TIMELINE_MEMBER_LEVELS": (
        5_000_000, int, "site timeline: max(members, 1) x steps x levels"),
    "PTYPE_MAX_VERIFY_MEMBER_COLUMNS": (
        50_000, int, "verification: cases x members (perturbed profiles)"),
    "PTYPE_WORK_SLOTS": (2, int, "computing requests run at once per worker process"),
    "PTYPE_SLOT_WAIT_S": (10.0, float, "seconds a computing request waits for a slot"),
    "PTYPE_REQUEST_DEADLINE_S": (30.0, float, "time limit of a computing request, seconds"),
    "PTYPE_RETRY_AFTER_S": (5, int, "Retry-After of a 503 busy or timeout answer, seconds"),
}

#: Key of the slot semaphore in ``app.extensions``.
EXTENSION = "ptype_work_slots"


class Busy(Exception):
    """No work slot came free in time."""


#: Whether this thread holds a slot already (a computation inside another takes none).
_holding = threading.local()


@contextmanager
def computing() -> Iterator[None]:
    """Run the block in a work slot of this process, under the request time limit.

    Raises :class:`Busy` when no slot comes free within ``PTYPE_SLOT_WAIT_S``; the block
    raises :class:`ptype.errors.DeadlineExceeded` past ``PTYPE_REQUEST_DEADLINE_S``.
    """
    if getattr(_holding, "slot", False):
        yield
        return
    slots = current_app.extensions[EXTENSION]
    if not slots.acquire(timeout=setting("PTYPE_SLOT_WAIT_S")):
        raise Busy()
    _holding.slot = True
    try:
        with deadline.time_limit(setting("PTYPE_REQUEST_DEADLINE_S")):
            yield
    finally:
        _holding.slot = False
        slots.release()


def setting(name: str, config: Any = None) -> Any:
    """The value of one of :data:`SETTINGS` for the application (config, then environment)."""
    default, kind, _ = SETTINGS[name]
    config = current_app.config if config is None else config
    value = config.get(name)
    if value is None or value == default:
        value = os.environ.get(name, value)
    return kind(default if value is None else value)


def describe(config: Any) -> str:
    """The limits in force, one sentence each, for the OpenAPI description."""
    parts = [f"`{name}` = {setting(name, config)} ({text})"
             for name, (_, _, text) in SETTINGS.items()]
    return ("Work limits (a request over its budget is answered 422 `too_much_work` before "
            "any work, with `limit`, `asked` and `unit` in the error; a computing request "
            "that finds the server busy or runs past its time limit is answered 503 with "
            "`Retry-After`): " + "; ".join(parts) + ".")


def refuse(asked: int, limit: int, unit: str, message: str, field: str | None) -> None:
    """Raise :class:`WorkLimitError` when ``asked`` exceeds ``limit``."""
    if asked > limit:
        raise WorkLimitError(message, asked=asked, limit=limit, unit=unit, field=field)


def init_app(app: Flask) -> None:
    """Make the slots, and register the answers to work refused or cut short."""
    app.extensions[EXTENSION] = threading.BoundedSemaphore(
        max(1, setting("PTYPE_WORK_SLOTS", app.config)))

    @app.errorhandler(WorkLimitError)
    def _too_much_work(exc: WorkLimitError) -> tuple[Response, int]:
        body = error_body("too_much_work", str(exc), exc.field)
        body["error"].update(limit=exc.limit, asked=exc.asked, unit=exc.unit)
        return jsonify(body), 422

    @app.errorhandler(DeadlineExceeded)
    def _timeout(exc: DeadlineExceeded) -> Response:
        return _unavailable("timeout", f"{exc}; the work was stopped. Ask for less (fewer "
                            "members, levels or steps) or try again later")

    @app.errorhandler(Busy)
    def _busy(_exc: Busy) -> Response:
        return _unavailable("busy", "the server is busy with other computations; try again "
                            "after the time in Retry-After")


def _unavailable(code: str, message: str) -> Response:
    response = jsonify(error_body(code, message))
    response.status_code = 503
    response.headers["Retry-After"] = str(setting("PTYPE_RETRY_AFTER_S"))
    return response
