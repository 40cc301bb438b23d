"""The real server under load: ``ptype serve --demo`` (gunicorn master loading the demo, then
forking two threaded workers) on a free port with its own data folder.

* large requests leave the workers alone: same worker processes before and after, no fork
  warning from a compiled thread pool and no worker timeout in the log, and the wet-bulb
  temperatures and probabilities the server computes equal those computed in this process;
* slow clients (headers a byte at a time) and idle connections do not stop ``/healthz``
  from answering within a second, and a client too slow with its headers is disconnected.
"""

from __future__ import annotations

import os
import socket
import threading
import time
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import pytest
import requests
from api_support import freezing_rain_document
from test_server import start_server, stop_server

import ptype

#: The server's header time limit in this module, s (short, to keep the test short).
HEADER_TIMEOUT_S = 2.0


@pytest.fixture(scope="module")
def demo_server(tmp_path_factory):
    saved = os.environ.get("PTYPE_HEADER_TIMEOUT_S")
    os.environ["PTYPE_HEADER_TIMEOUT_S"] = str(HEADER_TIMEOUT_S)
    try:
        proc, url = start_server(tmp_path_factory.mktemp("load"), "--workers", "2", "--demo")
    finally:
        if saved is None:
            os.environ.pop("PTYPE_HEADER_TIMEOUT_S")
        else:
            os.environ["PTYPE_HEADER_TIMEOUT_S"] = saved
    yield proc, url
    stop_server(proc)


def _workers(master_pid: int) -> set[int]:
    """The worker processes of the gunicorn master (Linux /proc)."""
    children = Path(f"/proc/{master_pid}/task/{master_pid}/children").read_text()
    return {int(pid) for pid in children.split()}


def _log(proc) -> str:
    proc.log.flush()
    proc.log.seek(0)
    return proc.log.read()


def test_large_requests_keep_the_workers_and_their_numbers(demo_server):
    proc, url = demo_server
    deadline = time.monotonic() + 60  # the second worker may still be starting
    while len(_workers(proc.pid)) < 2 and time.monotonic() < deadline:
        time.sleep(0.2)
    time.sleep(1.0)  # and answering
    before = _workers(proc.pid)
    assert len(before) == 2
    document = freezing_rain_document(n_levels=400)
    query = "?members=1000&seed=3"  # 400,000 member-levels: compiled kernels on large arrays

    def post(_):
        r = requests.post(url + "/v1/diagnose" + query, json=document, timeout=60)
        assert r.status_code == 200, r.text
        return r.json()

    with ThreadPoolExecutor(4) as pool:
        answers = list(pool.map(post, range(8)))
    timeline = requests.get(url + "/v1/sites/1/timeline?hours=24&step=10min&members=40",
                            timeout=60)
    assert timeline.status_code == 200 and len(timeline.json()["steps"]) > 100

    here = ptype.diagnose(document, members=1000, seed=3).to_dict()
    for answer in answers:
        assert answer["profile"]["wetbulb_c"] == here["profile"]["wetbulb_c"]
        assert answer["probabilities"] == here["probabilities"]
    assert _workers(proc.pid) == before
    log = _log(proc)
    assert "fork()" not in log and "OpenMP" not in log
    assert "WORKER TIMEOUT" not in log and "Traceback" not in log


def _slow_client(port: int, stop: threading.Event, closed_after: list[float]) -> None:
    """Send a request head a byte at a time until the server hangs up (or ``stop``)."""
    start = time.monotonic()
    with socket.create_connection(("127.0.0.1", port), timeout=10) as s:
        s.sendall(b"GET /healthz HTTP/1.1\r\nHost: x\r\nX-Slow: ")
        try:
            while not stop.is_set():
                s.sendall(b"a")
                time.sleep(0.25)
        except OSError:
            closed_after.append(time.monotonic() - start)


def test_healthz_answers_with_slow_and_idle_clients(demo_server):
    _, url = demo_server
    port = int(url.rsplit(":", 1)[1])
    idle = [socket.create_connection(("127.0.0.1", port)) for _ in range(20)]
    stop = threading.Event()
    closed_after: list[float] = []
    slow = [threading.Thread(target=_slow_client, args=(port, stop, closed_after))
            for _ in range(30)]
    try:
        for t in slow:
            t.start()
        time.sleep(0.5)
        for _ in range(8):
            start = time.monotonic()
            assert requests.get(url + "/healthz", timeout=5).status_code == 200
            assert time.monotonic() - start < 1.0
            time.sleep(0.25)
        for t in slow:
            t.join(timeout=HEADER_TIMEOUT_S + 8)
    finally:
        stop.set()
        for s in idle:
            s.close()
    # Every slow client was disconnected a little after the header time limit.
    assert len(closed_after) == len(slow)
    assert max(closed_after) < HEADER_TIMEOUT_S + 6
    assert requests.get(url + "/healthz", timeout=5).status_code == 200
