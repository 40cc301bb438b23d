"""Reading never writes: every GET endpoint of the service and every read command of the
command line leaves the store exactly as it was, and all of them use one clock.

The store is the invented demo (six sites, their storm and the alerts evaluated on load).
Each read is checked against a dump of every table (SQLite's own ``iterdump``, so the
comparison is independent of our models) taken just before and just after it.  Reads are
made at the demo's clock and a day later, when every demo alert is past its expiry: a
listing shows those alerts expired, only an evaluation records it.
"""

from __future__ import annotations

import json
import os
import sqlite3
import subprocess
import sys
from pathlib import Path

import pytest
from api_support import store_dump
from ptype.api import create_app
from ptype.api.plumbing import store_for

from ptype.store import DB_FILENAME

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "soundings_demo"
#: The issue time of the demo storm (soundings_demo/series/manifest.json): the demo's clock.
DEMO_CLOCK = "2026-01-27T00:00:00Z"
#: A day later, when every demo alert has expired (their windows are under 24 h).
DAY_LATER = "2026-01-28T06:00:00Z"


@pytest.fixture(scope="module")
def demo_store(tmp_path_factory):
    """``(app, data_dir)``: the demo loaded into a new store with the demo's clock."""
    data_dir = tmp_path_factory.mktemp("demo-store")
    with pytest.MonkeyPatch.context() as mp:
        mp.delenv("PTYPE_NOW", raising=False)
        mp.delenv("PTYPE_DATABASE_URL", raising=False)
        app = create_app({"TESTING": True, "PTYPE_DATA_DIR": str(data_dir), "PTYPE_DEMO": True,
                          "PTYPE_DEMO_DIR": str(DEMO), "PTYPE_ALERT_MEMBERS": 5})
        yield app, data_dir
        store_for(app).dispose()


def _get_urls(app, client) -> list[str]:
    """One URL per GET rule of the application, its path arguments filled from the store."""
    with app.app_context():
        alerts = client.get("/v1/alerts").get_json()["alerts"]
        sites = client.get("/v1/sites").get_json()["sites"]
        demo = client.get("/v1/demo").get_json()["soundings"]
    values = {"site_id": sites[0]["id"], "alert_id": alerts[0]["id"], "name": demo[0]["name"],
              "filename": "page.js", "fmt": "svg"}
    urls = []
    for rule in app.url_map.iter_rules():
        if "GET" not in rule.methods:
            continue
        unknown = set(rule.arguments) - set(values)
        assert not unknown, f"{rule.rule}: no value for {unknown}; add one to this test"
        with app.test_request_context():
            from flask import url_for
            urls.append(url_for(rule.endpoint, **{k: values[k] for k in rule.arguments}))
    # The variants a page or a feed reader asks for.
    urls += ["/v1/alerts?active=1", f"/v1/alerts?site={sites[0]['id']}", "/sites?hours=6",
             f"/v1/sites/{sites[0]['id']}/timeline?hours=6&step=1h&members=0"]
    return urls


@pytest.mark.parametrize("clock", [None, DAY_LATER], ids=["demo-clock", "day-later"])
def test_every_get_endpoint_leaves_the_store_unchanged(demo_store, clock, monkeypatch):
    app, data_dir = demo_store
    monkeypatch.delenv("PTYPE_NOW", raising=False)
    app.config["PTYPE_NOW"] = clock
    try:
        client = app.test_client()
        urls = _get_urls(app, client)
        assert len(urls) >= 12
        for url in urls:
            for accept in ("application/json", "text/html"):
                before = store_dump(data_dir)
                with client.get(url, headers={"Accept": accept}) as response:
                    assert response.status_code < 500, url
                assert store_dump(data_dir) == before, f"GET {url} ({accept}) changed the store"
    finally:
        app.config["PTYPE_NOW"] = None


def _ptype(args, data_dir, **env):
    e = {k: v for k, v in os.environ.items() if k not in ("PTYPE_NOW", "PTYPE_DATABASE_URL")}
    e.update(PTYPE_DATA_DIR=str(data_dir), PYTHONPATH=str(ROOT), **env)
    return subprocess.run([sys.executable, "-m", "ptype", *args], capture_output=True,
                          text=True, env=e, timeout=120, check=False)


READ_COMMANDS = [
    ["alerts"], ["alerts", "--all"], ["alerts", "--format", "json"],
    ["alerts", "--format", "cap"], ["alerts", "--format", "atom", "--all"],
    ["keys", "list"], ["keys", "list", "--format", "json"],
    ["show", str(DEMO / "json" / "korrim-pass_20260127T1000.json")],
    ["diagnose", str(DEMO / "csv" / "korrim-pass_20260127T1000.csv"), "--members", "5"],
]


@pytest.mark.parametrize("clock", [None, DAY_LATER], ids=["demo-clock", "day-later"])
def test_every_read_command_leaves_the_store_unchanged(demo_store, clock):
    _, data_dir = demo_store
    env = {"PTYPE_NOW": clock} if clock else {}
    for args in READ_COMMANDS:
        before = store_dump(data_dir)
        r = _ptype(args, data_dir, **env)
        assert r.returncode == 0, (args, r.stderr)
        assert store_dump(data_dir) == before, f"ptype {' '.join(args)} changed the store"


def test_cli_and_service_agree_on_active_alerts_at_the_demo_clock(demo_store, monkeypatch):
    app, data_dir = demo_store
    monkeypatch.delenv("PTYPE_NOW", raising=False)
    app.config["PTYPE_NOW"] = None
    served = app.test_client().get("/v1/alerts?active=1").get_json()
    assert served["clock"] == {"now": DEMO_CLOCK, "source": "demo",
                               "text": served["clock"]["text"]}
    assert served["clock"]["text"].startswith(f"{DEMO_CLOCK} (demo clock")
    listed = json.loads(_ptype(["alerts", "--format", "json"], data_dir).stdout)
    assert listed["clock"] == served["clock"]
    assert served["alerts"], "the demo storm raises alerts at its own clock"
    assert ({a["id"] for a in listed["alerts"]} == {a["id"] for a in served["alerts"]})
    table = _ptype(["alerts"], data_dir).stdout
    assert f"Active alerts at {DEMO_CLOCK} (demo clock" in table
    assert table.count("\nactive ") == len(served["alerts"])
    # The timeline JSON states the same clock, or the time a request asked for.
    site = served["alerts"][0]["site"]["id"]
    client = app.test_client()
    timeline = client.get(f"/v1/sites/{site}/timeline?hours=1&members=0").get_json()
    assert timeline["clock"] == served["clock"] and timeline["now"] == DEMO_CLOCK
    asked = client.get(f"/v1/sites/{site}/timeline?hours=1&members=0&now={DAY_LATER}")
    assert asked.get_json()["clock"]["source"] == "request"
    # The page of sites shows the same alerts.
    page = app.test_client().get("/sites").get_data(as_text=True)
    for a in served["alerts"]:
        assert f"/v1/alerts/{a['id']}.cap" in page


def test_a_day_later_alerts_are_listed_expired_and_only_evaluation_records_it(demo_store,
                                                                               tmp_path):
    import shutil
    _, data_dir = demo_store
    copy = tmp_path / "copy"
    copy.mkdir()
    # A consistent copy of the demo store (SQLite's backup API), so that the evaluation
    # below does not change the store the other tests read.
    src, dst = sqlite3.connect(data_dir / DB_FILENAME), sqlite3.connect(copy / DB_FILENAME)
    try:
        src.backup(dst)
    finally:
        src.close()
        dst.close()
    shutil.copystat(data_dir / DB_FILENAME, copy / DB_FILENAME)
    later = json.loads(_ptype(["alerts", "--all", "--format", "json"], copy,
                              PTYPE_NOW=DAY_LATER).stdout)
    assert later["clock"]["source"] == "PTYPE_NOW"
    assert later["alerts"] and {a["status"] for a in later["alerts"]} == {"expired"}
    before = store_dump(copy)
    assert "'active'" in "".join(x for x in before if x.startswith('INSERT INTO "alerts"'))
    r = _ptype(["alerts", "--evaluate"], copy, PTYPE_NOW=DAY_LATER)
    assert r.returncode == 0, r.stderr
    after = "".join(x for x in store_dump(copy) if x.startswith('INSERT INTO "alerts"'))
    assert "'active'" not in after and "'expired'" in after
