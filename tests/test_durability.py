"""Durability: acknowledged writes survive SIGKILL of a real gunicorn server; concurrent
writer processes lose nothing and corrupt nothing (SQLite ``PRAGMA integrity_check``).

Traffic goes only to 127.0.0.1; every loop is bounded in count and time.
"""

import json
import os
import signal
import socket
import subprocess
import sys
import threading
import time
import urllib.error
import urllib.request
from pathlib import Path

import pytest
import sqlalchemy as sa

from ptype.clock import utcnow
from ptype.store import Store, database_url, keys

ROOT = Path(__file__).resolve().parents[1]
GUNICORN = Path(sys.executable).parent / "gunicorn"

pytestmark = pytest.mark.slow


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _start(data_dir: Path, port: int) -> subprocess.Popen:
    env = {**os.environ, "PTYPE_DATA_DIR": str(data_dir), "PTYPE_NOW": "2026-01-27T00:00:00Z"}
    env.pop("PTYPE_DEMO", None)
    env.pop("PTYPE_DATABASE_URL", None)
    # --preload as "ptype serve" runs it: the app (and the store) is created before the fork.
    proc = subprocess.Popen([str(GUNICORN), "-w", "2", "-b", f"127.0.0.1:{port}",
                             "--graceful-timeout", "1", "--preload", "ptype.api:create_app()"],
                            cwd=ROOT, env=env,
                            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                            start_new_session=True)
    deadline = time.monotonic() + 30
    while time.monotonic() < deadline:
        try:
            urllib.request.urlopen(f"http://127.0.0.1:{port}/healthz", timeout=1).read()
            return proc
        except OSError:
            time.sleep(0.2)
    _kill(proc)
    raise RuntimeError("gunicorn did not start")


def _kill(proc: subprocess.Popen) -> None:
    """SIGKILL the server's process group (master and its workers: all started by this test)."""
    try:
        os.killpg(proc.pid, signal.SIGKILL)
    except ProcessLookupError:
        pass
    proc.wait(timeout=10)


def _post(port, path, body, key, timeout=5.0):
    req = urllib.request.Request(f"http://127.0.0.1:{port}{path}", data=json.dumps(body).encode(),
                                 headers={"Content-Type": "application/json",
                                          "Authorization": f"Bearer {key}"}, method="POST")
    with urllib.request.urlopen(req, timeout=timeout) as r:
        return r.status, json.loads(r.read())


def _make_key(data_dir: Path) -> str:
    store = Store(database_url({"PTYPE_DATA_DIR": str(data_dir)}))
    with store.write() as s:
        key, _ = keys.create_key(s, "durability", utcnow())
    store.dispose()
    return key


@pytest.mark.skipif(not GUNICORN.exists(), reason="gunicorn is not installed in this environment")
def test_acknowledged_writes_survive_sigkill(tmp_path):
    key = _make_key(tmp_path)
    port = _free_port()
    proc = _start(tmp_path, port)
    try:
        status, site = _post(port, "/v1/sites", {"name": "Durable", "latitude": 1,
                                                 "longitude": 1}, key)
        assert status == 201
        site_id = site["id"]
        acked: list[str] = []
        stop = threading.Event()

        def writer(offset):
            for i in range(400):  # bounded
                if stop.is_set():
                    return
                t = f"2026-01-26T{(offset + i) // 60 % 24:02d}:{(offset + i) % 60:02d}:00Z"
                try:
                    st, _ = _post(port, f"/v1/sites/{site_id}/observations",
                                  {"time": t, "air_temperature_c": -1.0}, key, timeout=3)
                except Exception:  # noqa: BLE001, S112 - refused, reset, cut short: not acknowledged
                    continue
                if 200 <= st < 300:
                    acked.append(t)
        threads = [threading.Thread(target=writer, args=(o,)) for o in (0, 700)]
        for t in threads:
            t.start()
        deadline = time.monotonic() + 10
        while len(acked) < 30 and time.monotonic() < deadline:
            time.sleep(0.05)
        _kill(proc)  # SIGKILL in the middle of the burst
        stop.set()
        for t in threads:
            t.join(timeout=15)
        assert len(acked) >= 10, "too few writes were acknowledged before the kill"
        proc = _start(tmp_path, port)
        store = Store(database_url({"PTYPE_DATA_DIR": str(tmp_path)}))
        assert store.integrity_check() == "ok"
        with store.read() as s:
            stored = set(s.execute(sa.text("SELECT time FROM observations")).scalars())
        stored = {str(x)[:19].replace(" ", "T") + "Z" for x in stored}
        missing = set(acked) - stored
        assert not missing, f"{len(missing)} acknowledged writes lost"
        # The restarted server answers and still takes writes.
        assert _post(port, f"/v1/sites/{site_id}/observations",
                     {"time": "2026-01-27T00:00:00Z", "air_temperature_c": 0.0}, key)[0] == 201
        store.dispose()
    finally:
        _kill(proc)


WRITER = r"""
import sys
from datetime import datetime, timedelta, timezone
from ptype.store import Store, Observation
store = Store(sys.argv[1])
base = datetime(2026, 1, 1, tzinfo=timezone.utc)
offset = int(sys.argv[2])
for i in range(int(sys.argv[3])):
    with store.write() as s:
        s.add(Observation(site_id=1, time=base + timedelta(minutes=offset + i),
                          air_temperature_c=float(i), received_at=base))
print("done")
"""


def test_concurrent_writer_processes_lose_nothing(tmp_path):
    url = database_url({"PTYPE_DATA_DIR": str(tmp_path)})
    store = Store(url)
    with store.write() as s:
        s.execute(sa.text("INSERT INTO sites (name, latitude, longitude, thresholds, created_at)"
                          " VALUES ('w', 0, 0, '{}', '2026-01-01 00:00:00')"))
    n = 150
    procs = [subprocess.Popen([sys.executable, "-c", WRITER, url, str(off), str(n)], cwd=ROOT,
                              stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
             for off in (0, 100_000)]
    for p in procs:
        _, err = p.communicate(timeout=120)
        assert p.returncode == 0, err
    assert store.integrity_check() == "ok"
    with store.read() as s:
        assert s.execute(sa.text("SELECT count(*) FROM observations")).scalar() == 2 * n
    store.dispose()
