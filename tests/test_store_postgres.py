"""The store and the sites/alerts API on PostgreSQL.

Runs only where Debian's PostgreSQL server binaries (``initdb``, ``pg_ctl``) and the psycopg
driver are installed: a throw-away cluster is created in a temporary directory, listening on
127.0.0.1 only, and removed afterwards.  Elsewhere the tests are skipped (and say why).
"""

import glob
import os
import shutil
import socket
import subprocess
import tempfile
import threading
from datetime import UTC, datetime

import pytest
import sqlalchemy as sa

pytest.importorskip("psycopg", reason="the psycopg driver is not installed")

from ptype.api import create_app
from ptype.api.sites import store_for
from series_helpers import storm_docs

from ptype.store import Store, keys, migrations

NOW = datetime(2026, 1, 27, tzinfo=UTC)


def _pg_bin(name):
    found = shutil.which(name) or next(iter(sorted(glob.glob(
        f"/usr/lib/postgresql/*/bin/{name}"), reverse=True)), None)
    return found


def _as_pg_user(cmd):
    if os.geteuid() != 0:
        return cmd
    return ["runuser", "-u", "postgres", "--", *cmd]


@pytest.fixture(scope="module")
def pg_url():
    initdb, pg_ctl = _pg_bin("initdb"), _pg_bin("pg_ctl")
    if not (initdb and pg_ctl):
        pytest.skip("PostgreSQL server binaries (initdb, pg_ctl) are not installed")
    if os.geteuid() == 0 and not shutil.which("runuser"):
        pytest.skip("running as root without runuser: cannot start PostgreSQL")
    root = tempfile.mkdtemp(prefix="ptype-pg-")
    data = os.path.join(root, "data")
    if os.geteuid() == 0:
        try:
            shutil.chown(root, "postgres")
        except (LookupError, PermissionError):
            shutil.rmtree(root)
            pytest.skip("no 'postgres' system user to run the server as")
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    try:
        subprocess.run(_as_pg_user([initdb, "-D", data, "-A", "trust", "-U", "ptype",
                                    "--no-sync"]), check=True, capture_output=True, timeout=120)
        opts = f"-p {port} -k {root} -c listen_addresses=127.0.0.1 -c fsync=off"
        subprocess.run(_as_pg_user([pg_ctl, "-D", data, "-o", opts, "-w", "-t", "60", "-l",
                                    os.path.join(root, "log"), "start"]), check=True,
                       capture_output=True, timeout=120)
    except (subprocess.CalledProcessError, subprocess.TimeoutExpired) as exc:
        shutil.rmtree(root, ignore_errors=True)
        pytest.skip(f"could not start a temporary PostgreSQL: {exc}")
    try:
        yield f"postgresql+psycopg://ptype@127.0.0.1:{port}/postgres"
    finally:
        subprocess.run(_as_pg_user([pg_ctl, "-D", data, "-m", "immediate", "stop"]),
                       capture_output=True, timeout=60, check=False)
        shutil.rmtree(root, ignore_errors=True)


def test_migrate_on_postgresql_concurrent_starters(pg_url):
    errors = []

    def start():
        try:
            Store(pg_url).dispose()
        except Exception as exc:  # noqa: BLE001 - reported below
            errors.append(exc)
    threads = [threading.Thread(target=start) for _ in range(3)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert not errors
    store = Store(pg_url)
    assert store.dialect == "postgresql"
    assert store.schema_version() == migrations.LATEST_VERSION
    with store.engine.connect() as c:
        n = c.execute(sa.text("SELECT count(*) FROM schema_version")).scalar()
    assert n == len(migrations.MIGRATIONS)
    with store.write() as s:
        key, _ = keys.create_key(s, "pg", NOW)
    with store.read() as s:
        assert keys.verify_key(s, key)[0] == "ok"
    store.dispose()


def test_api_flow_on_postgresql(pg_url):
    app = create_app({"PTYPE_DATABASE_URL": pg_url, "TESTING": True,
                      "PTYPE_NOW": "2026-01-27T00:00:00Z", "PTYPE_ALERT_MEMBERS": 5})
    client = app.test_client()
    with store_for(app).write() as s:
        key, _ = keys.create_key(s, "pg-api", NOW)
    h = {"Authorization": f"Bearer {key}"}
    site = client.post("/v1/sites", json={"name": "PG Hill", "latitude": 47.0, "longitude": -33.0,
                                          "thresholds": {"accretion_mm": 1.0}}, headers=h)
    assert site.status_code == 201
    sid = site.json["id"]
    body = {"profiles": storm_docs(), "source": "model", "issued_time": "2026-01-27T00:00:00Z"}
    assert client.post(f"/v1/sites/{sid}/profiles", json=body, headers=h).status_code == 201
    again = client.post(f"/v1/sites/{sid}/profiles", json=body, headers=h)  # ON CONFLICT
    assert again.json["replaced"] == 4
    ob = {"time": "2026-01-26T23:30:00Z", "air_temperature_c": -2.0}
    for _ in range(2):
        assert client.post(f"/v1/sites/{sid}/observations", json=ob, headers=h).status_code == 201
    info = client.get(f"/v1/sites/{sid}").json
    assert info["latest_issue"]["profiles"] == 4 and info["thresholds"] == {"accretion_mm": 1.0}
    alerts = client.get("/v1/alerts").json["alerts"]
    assert any(a["event"] == "freezing_precipitation" for a in alerts)
    cap = client.get(f"/v1/alerts/{alerts[0]['id']}.cap")
    assert cap.status_code == 200 and b"<msgType>Alert</msgType>" in cap.data
    store_for(app).dispose()
