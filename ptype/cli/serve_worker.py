"""The gunicorn worker of ``ptype serve``: threads, and a time limit on reading each request.

gunicorn's threaded worker (``gthread``) keeps idle and kept-alive connections in a poller,
so they cost no thread; but once a client has sent its first byte, a thread reads the
request head and body, and a client that sends a byte a second would hold that thread for
as long as it likes.  :class:`BoundedThreadWorker` gives every read a deadline: the request
head must arrive within :data:`HEADER_TIMEOUT_S` of the thread starting to read it, and the
body within :data:`BODY_TIMEOUT_S` of the head; past it the read ends as if the client had
closed the connection, and the thread is free again.  A response to a client that does not
read it is given up after :data:`SEND_TIMEOUT_S`.

This complements, not replaces, a buffering reverse proxy in front of the service
(docs/operations.md, "Behind a reverse proxy").
"""

from __future__ import annotations

import os
import socket
import time
from typing import Any

from gunicorn.workers import gthread


def _seconds(name: str, default: float) -> float:
    try:
        return max(0.1, float(os.environ.get(name, default)))
    except ValueError:
        return default


#: Seconds a client has to send the request line and headers once a thread reads them.
HEADER_TIMEOUT_S = _seconds("PTYPE_HEADER_TIMEOUT_S", 10.0)
#: Seconds a client has to send the request body after its headers.
BODY_TIMEOUT_S = _seconds("PTYPE_BODY_TIMEOUT_S", 30.0)
#: Seconds a send of the response may block on a client that does not read.
SEND_TIMEOUT_S = _seconds("PTYPE_SEND_TIMEOUT_S", 30.0)
#: Seconds a new connection may keep a thread waiting for its first byte before it goes
#: back to the poller (gunicorn's own default is 5 s, long enough for a few dozen idle
#: connections to queue every other request behind them).
FIRST_BYTE_WAIT_S = 0.5


class DeadlineSocket:
    """A client socket whose reads stop at a deadline (reading returns ``b""`` past it).

    Everything else is the socket's own (``fileno``, ``sendall``, ``setblocking``...), so
    gunicorn's poller, parser and response writer use it as the socket itself.
    """

    def __init__(self, sock: socket.socket) -> None:
        self._sock = sock
        self._deadline = float("inf")

    def start(self, seconds: float) -> None:
        """Reads from now on must be done within ``seconds``."""
        self._deadline = time.monotonic() + seconds

    def recv(self, size: int, *flags: int) -> bytes:
        left = self._deadline - time.monotonic()
        if left <= 0:
            return b""
        self._sock.settimeout(left)
        try:
            return self._sock.recv(size, *flags)
        except TimeoutError:
            return b""
        finally:
            self._sock.settimeout(SEND_TIMEOUT_S)

    def __getattr__(self, name: str) -> Any:
        return getattr(self._sock, name)


class BoundedThreadWorker(gthread.ThreadWorker):
    """gunicorn's threaded worker with a deadline on reading every request."""

    def init_process(self) -> None:
        # Read at call time by gthread's handler: a new connection gives its thread back
        # quickly when it has nothing to say yet.
        gthread.DEFAULT_WORKER_DATA_TIMEOUT = FIRST_BYTE_WAIT_S
        super().init_process()

    def enqueue_req(self, conn: Any) -> None:
        if not isinstance(conn.sock, DeadlineSocket) and not self.cfg.is_ssl:
            conn.sock = DeadlineSocket(conn.sock)
        super().enqueue_req(conn)

    def handle(self, conn: Any) -> Any:
        if isinstance(conn.sock, DeadlineSocket):
            conn.sock.start(HEADER_TIMEOUT_S)
        return super().handle(conn)

    def handle_request(self, req: Any, conn: Any) -> Any:
        if isinstance(conn.sock, DeadlineSocket):
            conn.sock.start(BODY_TIMEOUT_S)
        return super().handle_request(req, conn)
