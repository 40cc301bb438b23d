"""Owners of keys and sites: another owner's write is refused, an administrator's key writes
everywhere, reads are open or owner-scoped by configuration, and a store made before owners
migrates (schema version 1 -> 2) on a real SQLite file without losing anything."""

from __future__ import annotations

import json
import os
import secrets
import subprocess
import sys
from datetime import UTC, datetime

import pytest
import sqlalchemy as sa
from ptype.api.plumbing import store_for
from series_helpers import storm_docs

from ptype.store import ApiKey, Site, Store, keys, migrations

NOW = "2026-01-27T00:00:00Z"
T_NOW = datetime(2026, 1, 27, tzinfo=UTC)
SITE = {"name": "Mistleby Bridge", "latitude": 47.1, "longitude": -33.2}


def _key(app, name, **kw):
    with store_for(app).write() as s:
        key, _ = keys.create_key(s, name, T_NOW, **kw)
    return {"Authorization": f"Bearer {key}"}


@pytest.fixture
def app(make_app):
    return make_app(PTYPE_NOW=NOW, PTYPE_ALERT_MEMBERS=5)


def _site(client, auth, **extra):
    r = client.post("/v1/sites", json={**SITE, **extra}, headers=auth)
    assert r.status_code == 201, r.json
    return r.json


def _writes(client, auth, site_id):
    """The status of each kind of write to ``site_id``."""
    profiles = client.post(f"/v1/sites/{site_id}/profiles",
                           json={"profiles": storm_docs(), "issued_time": NOW}, headers=auth)
    obs = client.post(f"/v1/sites/{site_id}/observations",
                      json={"time": NOW, "air_temperature_c": -1.0}, headers=auth)
    return profiles, obs


def test_sites_belong_to_the_key_owner_and_others_cannot_write(app, client):
    alice, bob = _key(app, "alice-depot", owner="north"), _key(app, "bob", owner="south")
    site = _site(client, alice)
    assert site["owner"] == "north"
    for r in _writes(client, bob, site["id"]):
        assert r.status_code == 403, r.json
        assert r.json["error"]["code"] == "forbidden" and r.json["error"]["field"] == "site_id"
    with store_for(app).read() as s:  # nothing of bob's was stored
        assert s.scalar(sa.text("SELECT count(*) FROM profiles")) == 0
        assert s.scalar(sa.text("SELECT count(*) FROM observations")) == 0
    for r in _writes(client, alice, site["id"]):
        assert r.status_code == 201, r.json
    # Another key of the same owner writes too.
    second = _key(app, "alice-laptop", owner="north")
    assert all(r.status_code == 201 for r in _writes(client, second, site["id"]))


def test_admin_keys_write_everywhere(app, client):
    alice, admin = _key(app, "alice"), _key(app, "ops", admin=True)
    site = _site(client, alice)
    assert all(r.status_code == 201 for r in _writes(client, admin, site["id"]))
    assert _site(client, admin)["owner"] == "ops"


def test_evaluate_touches_only_the_callers_sites(app, client):
    alice, bob, admin = _key(app, "alice"), _key(app, "bob"), _key(app, "ops", admin=True)
    _site(client, alice)
    _site(client, alice, code="a2")
    _site(client, bob)
    assert client.post("/v1/alerts/evaluate", headers=bob).json["evaluated_sites"] == 1
    assert client.post("/v1/alerts/evaluate", headers=alice).json["evaluated_sites"] == 2
    assert client.post("/v1/alerts/evaluate", headers=admin).json["evaluated_sites"] == 3


def test_demo_sites_belong_to_an_administrator(make_app):
    app = make_app(PTYPE_DEMO=True, PTYPE_ALERT_MEMBERS=2)
    client = app.test_client()
    sites = client.get("/v1/sites").json["sites"]
    assert sites and {s["owner"] for s in sites} == {migrations.ADMIN_OWNER}
    plain, admin = _key(app, "depot"), _key(app, "ops", admin=True)
    first = sites[0]["id"]
    obs = {"time": "2026-01-27T00:00:00Z", "air_temperature_c": -1.0}
    assert client.post(f"/v1/sites/{first}/observations", json=obs,
                       headers=plain).status_code == 403
    assert client.post(f"/v1/sites/{first}/observations", json=obs,
                       headers=admin).status_code == 201


def test_reads_open_by_default(app, client):
    site = _site(client, _key(app, "alice"))
    assert client.get("/v1/sites").json["sites"][0]["id"] == site["id"]
    assert client.get(f"/v1/sites/{site['id']}").status_code == 200
    assert client.get(f"/v1/sites/{site['id']}/timeline?members=0").status_code == 200


def test_owner_scoped_reads(make_app):
    app = make_app(PTYPE_NOW=NOW, PTYPE_ALERT_MEMBERS=5, PTYPE_OWNER_READS=True)
    client = app.test_client()
    alice, bob, admin = _key(app, "alice"), _key(app, "bob"), _key(app, "ops", admin=True)
    a_site = _site(client, alice)["id"]
    b_site = _site(client, bob, code="b", name="Sennet Causeway")["id"]
    client.post(f"/v1/sites/{a_site}/profiles",
                json={"profiles": storm_docs(), "issued_time": NOW}, headers=alice)
    for path in ["/v1/sites", f"/v1/sites/{a_site}", f"/v1/sites/{a_site}/timeline",
                 "/v1/alerts", "/v1/alerts.atom", "/sites"]:
        r = client.get(path)
        assert r.status_code == 401 and r.json["error"]["field"] == "Authorization", path
    assert [s["id"] for s in client.get("/v1/sites", headers=bob).json["sites"]] == [b_site]
    assert len(client.get("/v1/sites", headers=admin).json["sites"]) == 2
    assert client.get(f"/v1/sites/{a_site}", headers=bob).status_code == 404
    assert client.get(f"/v1/sites/{a_site}/timeline?members=0", headers=bob).status_code == 404
    alerts = client.get("/v1/alerts", headers=alice).json["alerts"]
    assert alerts and client.get("/v1/alerts", headers=bob).json["alerts"] == []
    cap = f"/v1/alerts/{alerts[0]['id']}.cap"
    assert client.get(cap, headers=bob).status_code == 404
    assert client.get(cap, headers=alice).status_code == 200
    assert alerts[0]["id"].encode() not in client.get("/v1/alerts.atom", headers=bob).data
    assert b"Mistleby" not in client.get("/sites", headers=bob).data
    assert b"Mistleby" in client.get("/sites", headers=alice).data


def _v1_store(path):
    """A SQLite file at schema version 1 with a key, a site and a profile, as stored before
    owners existed (written with that version's own SQL)."""
    engine = sa.create_engine(f"sqlite:///{path}")
    assert migrations.migrate(engine, until=1) == [1]
    secret, salt = secrets.token_urlsafe(32), secrets.token_bytes(16)
    with engine.begin() as c:
        c.execute(sa.text(
            "INSERT INTO api_keys (key_id, name, salt_hex, hash_hex, kdf, created_at) "
            "VALUES ('0123456789ab', 'old-depot', :salt, :hash, :kdf, '2025-12-01 00:00:00')"),
            {"salt": salt.hex(), "hash": keys.hash_secret(secret, salt).hex(),
             "kdf": keys.KDF_NAME})
        c.execute(sa.text(
            "INSERT INTO sites (name, latitude, longitude, thresholds, created_at) "
            "VALUES ('Korrim Pass', 46.5, 9.1, '{}', '2025-12-01 00:00:00')"))
        c.execute(sa.text(
            "INSERT INTO profiles (site_id, source, valid_time, issued_time, document, "
            "received_at) VALUES (1, 'model', '2026-01-27 00:00:00', '2026-01-26 18:00:00', "
            ":doc, '2026-01-26 18:05:00')"), {"doc": json.dumps(storm_docs()[0])})
    engine.dispose()
    return f"ptk_0123456789ab_{secret}"


def test_migration_from_version_1_on_a_real_file(tmp_path, make_app):
    db = tmp_path / "data" / "ptype.sqlite3"
    db.parent.mkdir()
    old_key = _v1_store(db)
    store = Store(f"sqlite:///{db}")
    assert store.schema_version() == migrations.LATEST_VERSION >= 3
    assert store.integrity_check() == "ok"
    with store.read() as s:
        key = s.scalars(sa.select(ApiKey)).one()
        site = s.scalars(sa.select(Site)).one()
        assert (key.owner, key.is_admin) == ("old-depot", True)
        assert (site.owner, site.name) == (migrations.ADMIN_OWNER, "Korrim Pass")
        assert s.scalar(sa.text("SELECT count(*) FROM profiles")) == 1
        assert keys.verify_key(s, old_key)[0] == "ok"
    store.dispose()
    # The service on the migrated file: the old key still writes to the old site, a new
    # owner's key does not.
    app = make_app(PTYPE_DATA_DIR=str(db.parent), PTYPE_NOW=NOW, PTYPE_ALERT_MEMBERS=2)
    client = app.test_client()
    obs = {"time": NOW, "air_temperature_c": -1.0}
    old = {"Authorization": f"Bearer {old_key}"}
    assert client.post("/v1/sites/1/observations", json=obs, headers=old).status_code == 201
    assert client.post("/v1/sites/1/observations", json=obs,
                       headers=_key(app, "newcomer")).status_code == 403


def _ptype(args, data_dir):
    env = {**os.environ, "PTYPE_DATA_DIR": str(data_dir)}
    env.pop("PTYPE_DATABASE_URL", None)
    return subprocess.run([sys.executable, "-m", "ptype", *args], check=False,
                          capture_output=True, text=True, env=env, timeout=120)


def test_keys_cli_owner_and_admin(tmp_path):
    r = _ptype(["keys", "create", "--name", "ops", "--admin"], tmp_path)
    assert r.returncode == 0, r.stderr
    assert "administrator key" in r.stdout
    r = _ptype(["keys", "create", "--name", "laptop", "--owner", "north"], tmp_path)
    assert r.returncode == 0 and "owner 'north'" in r.stdout
    rows = json.loads(_ptype(["keys", "list", "--format", "json"], tmp_path).stdout)["keys"]
    assert [(k["name"], k["owner"], k["admin"]) for k in rows] == [("ops", "ops", True),
                                                                   ("laptop", "north", False)]
    table = _ptype(["keys", "list"], tmp_path).stdout
    assert "owner" in table.splitlines()[0] and "north" in table
    bad = _ptype(["keys", "create", "--name", "x", "--owner", "a\tb"], tmp_path)
    assert bad.returncode == 2 and len(bad.stderr.strip().splitlines()) == 1
    assert "owner" in bad.stderr
