"""Who the client is, and how many wrong API keys it may send.

* **Address**: the peer's address, or with ``PTYPE_PROXY_HOPS`` = N (the service behind N
  reverse proxies of its own) the address the nearest of them saw, from
  ``X-Forwarded-For`` (werkzeug's ``ProxyFix``).  Never trust that header without a proxy
  that sets it: a client could name any address.
* **Failed keys**: each address may send ``PTYPE_AUTH_FAILURES`` wrong keys (a bearer
  token that is no valid key) per ``PTYPE_AUTH_WINDOW_S`` seconds; past that its writes are answered
  429 ``too_many_failed_keys`` with ``Retry-After`` before the key is even looked at, so
  guessing keys is slow and costs the server nothing.  A good key is never refused for
  earlier failures of its address once the window has passed.

The counts live in each worker process (a client spread over workers gets a few more tries).
"""

from __future__ import annotations

import math
import os
import threading
import time
from collections import OrderedDict

from flask import Flask, Response, current_app, jsonify, request
from ptype.api.errors import ApiError, error_body

#: Setting -> default.
SETTINGS = {"PTYPE_AUTH_FAILURES": 10, "PTYPE_AUTH_WINDOW_S": 60.0, "PTYPE_PROXY_HOPS": 0}
#: Addresses remembered at most (the oldest are forgotten first).
MAX_ADDRESSES = 10_000
#: Key of the limiter in ``app.extensions``.
EXTENSION = "ptype_failed_keys"


def _setting(app: Flask, name: str) -> float:
    value = app.config.get(name)
    if value is None:
        value = os.environ.get(name, SETTINGS[name])
    return float(value)


class FailureLimiter:
    """Failures per key (an address) in a sliding window; thread-safe, bounded memory."""

    def __init__(self, allowed: int, window_s: float) -> None:
        self.allowed = allowed
        self.window_s = window_s
        self._failures: OrderedDict[str, list[float]] = OrderedDict()
        self._lock = threading.Lock()

    def _recent(self, who: str, now: float) -> list[float]:
        times = [t for t in self._failures.get(who, ()) if now - t < self.window_s]
        if times:
            self._failures[who] = times
        else:
            self._failures.pop(who, None)
        return times

    def blocked_for(self, who: str) -> float:
        """Seconds until ``who`` may try again (0: may try now)."""
        now = time.monotonic()
        with self._lock:
            times = self._recent(who, now)
            if len(times) < self.allowed:
                return 0.0
            return times[-self.allowed] + self.window_s - now

    def failed(self, who: str) -> None:
        """Count one failure of ``who``."""
        now = time.monotonic()
        with self._lock:
            times = self._recent(who, now)
            times.append(now)
            self._failures[who] = times[-max(self.allowed, 1):]
            self._failures.move_to_end(who)
            while len(self._failures) > MAX_ADDRESSES:
                self._failures.popitem(last=False)


def init_app(app: Flask) -> None:
    """The limiter of wrong keys, and the proxy headers when ``PTYPE_PROXY_HOPS`` is set."""
    app.extensions[EXTENSION] = FailureLimiter(int(_setting(app, "PTYPE_AUTH_FAILURES")),
                                               _setting(app, "PTYPE_AUTH_WINDOW_S"))

    @app.errorhandler(TooManyFailures)
    def _too_many(exc: TooManyFailures) -> Response:
        response = jsonify(error_body(exc.code, exc.message, exc.field))
        response.status_code = 429
        response.headers["Retry-After"] = str(exc.retry_after_s)
        return response

    hops = int(_setting(app, "PTYPE_PROXY_HOPS"))
    if hops > 0:
        from werkzeug.middleware.proxy_fix import ProxyFix
        app.wsgi_app = ProxyFix(app.wsgi_app, x_for=hops, x_proto=hops, x_host=0)


def client_address() -> str:
    """The client's address (see the module's description)."""
    return request.remote_addr or "unknown"


def refuse_if_blocked() -> None:
    """A 429 when the client has sent too many wrong keys lately."""
    wait = current_app.extensions[EXTENSION].blocked_for(client_address())
    if wait > 0:
        raise TooManyFailures(math.ceil(wait))


def count_failure() -> None:
    """Count a wrong key sent by the client."""
    current_app.extensions[EXTENSION].failed(client_address())


class TooManyFailures(ApiError):
    """429 with the seconds to wait."""

    def __init__(self, retry_after_s: int) -> None:
        super().__init__(429, "too_many_failed_keys",
                         "too many requests with a wrong API key from this address; "
                         f"try again in {retry_after_s} s", "Authorization")
        self.retry_after_s = retry_after_s
