"""Tests of ptype.store: engine settings, migrations, keys, clock."""

import hashlib
import threading
from datetime import UTC, datetime

import pytest
import sqlalchemy as sa

from ptype.clock import iso, parse_time, utcnow
from ptype.errors import OptionError
from ptype.store import Store, database_url, keys, migrations, open_store

NOW = datetime(2026, 1, 27, 0, 0, tzinfo=UTC)


@pytest.fixture
def store(tmp_path):
    s = open_store({"PTYPE_DATA_DIR": str(tmp_path)})
    yield s
    s.dispose()


def test_database_url_default_is_sqlite_file_in_data_dir(tmp_path):
    expected = f"sqlite:///{tmp_path / 'ptype.sqlite3'}"
    assert database_url({"PTYPE_DATA_DIR": str(tmp_path)}) == expected
    assert database_url({"PTYPE_DATABASE_URL": "postgresql+psycopg://u@h/db"}).startswith("postgresql")


def test_open_store_sqlite_pragmas(store):
    # SQLite documentation (sqlite.org/pragma.html): journal_mode, synchronous (2 = FULL),
    # foreign_keys and busy_timeout read back what the connection set.
    with store.engine.connect() as c:
        assert c.exec_driver_sql("PRAGMA journal_mode").scalar() == "wal"
        assert c.exec_driver_sql("PRAGMA synchronous").scalar() == 2
        assert c.exec_driver_sql("PRAGMA foreign_keys").scalar() == 1
        assert c.exec_driver_sql("PRAGMA busy_timeout").scalar() == 30000
    assert store.integrity_check() == "ok"


def test_migrate_records_versions_and_is_idempotent(tmp_path):
    url = f"sqlite:///{tmp_path / 'm.sqlite3'}"
    s1 = Store(url)
    assert s1.schema_version() == migrations.LATEST_VERSION
    assert migrations.migrate(s1.engine) == []  # nothing left to apply
    with s1.engine.connect() as c:
        rows = c.exec_driver_sql("SELECT version, name FROM schema_version").all()
        tables = set(sa.inspect(c).get_table_names())
    assert [r[0] for r in rows] == [v for v, _, _ in migrations.MIGRATIONS]
    assert {"sites", "profiles", "observations", "alerts", "alert_messages", "api_keys"} <= tables


def test_migrate_concurrent_starters_apply_once(tmp_path):
    # Several workers starting together must not apply a migration twice.
    url = f"sqlite:///{tmp_path / 'c.sqlite3'}"
    errors = []

    def start():
        try:
            Store(url).dispose()
        except Exception as exc:  # noqa: BLE001  # pragma: no cover - the failure is reported below
            errors.append(exc)
    threads = [threading.Thread(target=start) for _ in range(4)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert not errors
    with Store(url, migrate=False).engine.connect() as c:
        assert c.exec_driver_sql("SELECT count(*) FROM schema_version").scalar() == len(
            migrations.MIGRATIONS)


def test_foreign_keys_enforced(store):
    with pytest.raises(sa.exc.IntegrityError), store.write() as s:
        s.execute(sa.text("INSERT INTO observations (site_id, time, received_at) "
                          "VALUES (999, '2026-01-01 00:00:00', '2026-01-01 00:00:00')"))


def test_create_key_stores_only_salted_scrypt_hash(store):
    with store.write() as s:
        key, info = keys.create_key(s, "ops", NOW)
        keys.create_key(s, "ops2", NOW)
    secret = key.split("_", 2)[2]
    with store.read() as s:
        rows = s.execute(sa.text("SELECT key_id, salt_hex, hash_hex, kdf FROM api_keys")).all()
    dump = repr(rows)
    assert secret not in dump and key not in dump
    row = next(r for r in rows if r[0] == info.key_id)
    # RFC 7914 scrypt via hashlib, recomputed independently from the stored salt.
    expected = hashlib.scrypt(secret.encode(), salt=bytes.fromhex(row[1]), n=2 ** 14, r=8, p=1,
                              maxmem=256 * 1024 * 1024, dklen=32)
    assert row[2] == expected.hex() and row[3].startswith("scrypt:")
    assert rows[0][1] != rows[1][1]  # per-key salt


def test_verify_key_ok_unknown_revoked(store):
    with store.write() as s:
        key, info = keys.create_key(s, "ops", NOW)
    with store.read() as s:
        assert keys.verify_key(s, key)[0] == "ok"
        assert keys.verify_key(s, key[:-1] + ("A" if key[-1] != "A" else "B"))[0] == "unknown"
        assert keys.verify_key(s, "garbage")[0] == "unknown"
        assert keys.verify_key(s, "ptk_000000000000_x")[0] == "unknown"
    with store.write() as s:
        assert keys.revoke_key(s, info.key_id, NOW).revoked_at == NOW
        assert keys.revoke_key(s, "nosuchkey", NOW) is None
    with store.read() as s:
        assert keys.verify_key(s, key)[0] == "revoked"
        assert [k.key_id for k in keys.list_keys(s)] == [info.key_id]


def test_create_key_empty_name_refused(store):
    with store.write() as s, pytest.raises(ValueError, match="name"):
        keys.create_key(s, "  ", NOW)


def test_utcnow_fixed_by_config_and_env(monkeypatch):
    assert utcnow({"PTYPE_NOW": "2026-01-27T06:00:00Z"}) == datetime(2026, 1, 27, 6,
                                                                      tzinfo=UTC)
    monkeypatch.setenv("PTYPE_NOW", "2026-01-27T07:30:00+01:00")
    assert iso(utcnow()) == "2026-01-27T06:30:00Z"
    with pytest.raises(OptionError, match="PTYPE_NOW"):
        utcnow({"PTYPE_NOW": "yesterday"})


def test_parse_time_naive_is_utc():
    assert parse_time("2026-01-27T06:00:00") == datetime(2026, 1, 27, 6, tzinfo=UTC)


def test_load_demo_is_idempotent(tmp_path, store):
    # A tiny demo directory of our own (invented site and series), loaded twice.
    import json

    from series_helpers import storm_docs

    from ptype.store import ProfileRecord, Site
    from ptype.store.demo import demo_issued_time, load_demo
    demo = tmp_path / "demo"
    (demo / "series" / "hill").mkdir(parents=True)
    (demo / "sites.json").write_text(json.dumps({"sites": [
        {"id": "hill", "name": "Test Hill", "latitude": 47.0, "longitude": -33.0,
         "elevation_m": 100.0}]}))
    files = []
    for i, doc in enumerate(storm_docs()):
        (demo / "series" / "hill" / f"{i}.json").write_text(json.dumps(doc))
        files.append(f"hill/{i}.json")
    (demo / "series" / "manifest.json").write_text(json.dumps({
        "issued_time": "2026-01-27T00:00:00Z", "source": "demo",
        "sites": {"hill": {"files": files}}}))
    assert demo_issued_time(demo) == NOW
    first = load_demo(store, demo, now=NOW)
    second = load_demo(store, demo, now=NOW)
    assert first["profiles"] == 4 and len(first["sites"]) == 1
    assert second == {"sites": [], "profiles": 0}
    with store.read() as s:
        assert s.scalar(sa.select(sa.func.count()).select_from(Site)) == 1
        assert s.scalar(sa.select(sa.func.count()).select_from(ProfileRecord)) == 4
