"""Tests of the store's command line: ``ptype keys`` and ``ptype alerts`` (subprocesses)."""

import json
import os
import subprocess
import sys

import pytest

from ptype.store import database_url, keys, open_store


def _ptype(args, data_dir, **env):
    e = {**os.environ, "PTYPE_DATA_DIR": str(data_dir), **env}
    e.pop("PTYPE_DATABASE_URL", None)
    return subprocess.run([sys.executable, "-m", "ptype", *args], check=False, capture_output=True,
                          text=True,
                          env=e, timeout=120)


def test_keys_create_prints_key_last_line_and_verifies(tmp_path):
    r = _ptype(["keys", "create", "--name", "depot"], tmp_path)
    assert r.returncode == 0, r.stderr
    key = r.stdout.strip().splitlines()[-1]
    assert key.startswith("ptk_")
    store = open_store({"PTYPE_DATA_DIR": str(tmp_path)})
    with store.read() as s:
        assert keys.verify_key(s, key)[0] == "ok"
    listing = _ptype(["keys", "list", "--format", "json"], tmp_path)
    rows = json.loads(listing.stdout)["keys"]
    assert rows[0]["name"] == "depot" and key not in listing.stdout
    key_id = rows[0]["key_id"]
    assert _ptype(["keys", "revoke", key_id], tmp_path).returncode == 0
    with store.read() as s:
        assert keys.verify_key(s, key)[0] == "revoked"
    store.dispose()
    assert database_url({"PTYPE_DATA_DIR": str(tmp_path)}).endswith("ptype.sqlite3")


def test_keys_errors_one_line(tmp_path):
    r = _ptype(["keys", "revoke", "nope"], tmp_path)
    assert r.returncode == 2 and "no such key" in r.stderr and "Traceback" not in r.stderr
    r = _ptype(["keys", "create"], tmp_path)
    assert r.returncode == 2 and "--name" in r.stderr


@pytest.mark.parametrize("fmt", ["table", "json"])
def test_alerts_lists_empty_store(tmp_path, fmt):
    r = _ptype(["alerts", "--format", fmt], tmp_path, PTYPE_NOW="2026-01-27T00:00:00Z")
    assert r.returncode == 0, r.stderr
    if fmt == "json":
        assert json.loads(r.stdout)["alerts"] == []
    else:
        assert "Active alerts at 2026-01-27T00:00:00Z (fixed by PTYPE_NOW)" in r.stdout
        assert "No active alerts." in r.stdout and "Guidance only" in r.stdout
    assert not list(tmp_path.iterdir())  # a listing creates no store
