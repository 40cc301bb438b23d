"""Bounded work per request: budgets refused before any work (422), slots and time limits (503).

The limits are the service's own design (docs/api.md, "Work limits"); what is checked here is
that the asked amount is computed from the request, refused before the engine runs, and that
a request cut short answers 503 with Retry-After instead of holding its worker.
"""

from __future__ import annotations

import time
from datetime import timedelta

import pytest
from ptype.api import budget
from ptype.api.plumbing import store_for
from series_helpers import PRESSURES, T0, profile_doc

from ptype import Profile
from ptype.clock import parse_time
from ptype.engine import deadline, run
from ptype.errors import DeadlineExceeded
from ptype.roads import nowcast
from ptype.store import keys

NOW = "2026-01-27T00:00:00Z"
#: A day of profiles every 3 h on 13 pressure levels (invented).
DAY = [profile_doc(T0 + timedelta(hours=h), sfc_c=-3.0 + h / 8, nose_c=h / 3)
       for h in range(0, 25, 3)]


@pytest.fixture
def engine_calls(monkeypatch):
    """Every call of the engine (the real one runs; the spy only records its arguments)."""
    calls = []
    real = run.run_columns

    def spy(columns, members=0, *args, **kwargs):
        calls.append((columns.n_columns, columns.pressure_hpa.shape[1], members, kwargs))
        return real(columns, members, *args, **kwargs)

    monkeypatch.setattr(run, "run_columns", spy)
    return calls


def _site_with_day(app) -> int:
    with store_for(app).write() as s:
        key, _ = keys.create_key(s, "ops", parse_time(NOW))
    client = app.test_client()
    auth = {"Authorization": f"Bearer {key}"}
    r = client.post("/v1/sites", json={"name": "Tessary Viaduct", "latitude": 47.0,
                                       "longitude": -33.0, "elevation_m": 100.0}, headers=auth)
    site = r.get_json()["id"]
    r = client.post(f"/v1/sites/{site}/profiles", json={"profiles": DAY}, headers=auth)
    assert r.status_code == 201, r.get_json()
    return site


def test_thousand_members_one_minute_steps_refused_before_work(make_app, engine_calls):
    app = make_app(PTYPE_NOW=NOW, PTYPE_ALERT_MEMBERS=2)
    site = _site_with_day(app)
    engine_calls.clear()
    r = app.test_client().get(f"/v1/sites/{site}/timeline?hours=240&step=1min&members=1000")
    assert r.status_code == 422
    error = r.get_json()["error"]
    # 24 h of 1-minute steps, ends included, on the 13 shared levels of the profiles.
    steps, levels = 24 * 60 + 1, len(PRESSURES)
    assert error["code"] == "too_much_work" and error["field"] == "members"
    assert error["asked"] == 1000 * steps * levels and error["unit"] == "member-levels"
    assert error["limit"] == budget.SETTINGS["PTYPE_MAX_TIMELINE_MEMBER_LEVELS"][0]
    assert engine_calls == []  # refused before the engine ran
    # ... and without waiting for a work slot: a refusal costs no computation.
    app.config["PTYPE_SLOT_WAIT_S"] = 0.05
    slots = app.extensions[budget.EXTENSION]
    held = [slots.acquire(timeout=1) for _ in range(2)]
    try:
        again = app.test_client().get(f"/v1/sites/{site}/timeline?hours=240&step=1min"
                                      "&members=1000")
        assert again.status_code == 422
        busy = app.test_client().get(f"/v1/sites/{site}/timeline?hours=6&members=10")
        assert busy.status_code == 503 and busy.get_json()["error"]["code"] == "busy"
    finally:
        for _ in held:
            slots.release()
    ok = app.test_client().get(f"/v1/sites/{site}/timeline?hours=12&step=15min&members=20")
    assert ok.status_code == 200 and len(ok.get_json()["steps"]) == 49


def test_timeline_members_go_through_the_engine_in_bounded_passes(engine_calls):
    profiles = [Profile.from_document(d) for d in DAY]
    out = nowcast.build_timeline(profiles, hours=24, step="5min", members=300, seed=1)
    assert len(out["steps"]) == 24 * 12 + 1
    (n, levels, members, kwargs), = engine_calls
    per_pass = kwargs["batch_columns"]
    assert per_pass * members * levels <= nowcast.MAX_MEMBER_LEVELS_PER_PASS < n * members * levels


def test_budget_from_environment(make_app, monkeypatch):
    from api_support import freezing_rain_document
    monkeypatch.setenv("PTYPE_MAX_MEMBER_LEVELS", "100")
    r = make_app().test_client().post("/v1/diagnose?members=5",
                                      json=freezing_rain_document(n_levels=30))
    assert r.status_code == 422
    assert (r.get_json()["error"]["limit"], r.get_json()["error"]["asked"]) == (100, 150)


def test_time_limit_is_a_503_with_retry_after(make_app):
    app = make_app(PTYPE_NOW=NOW, PTYPE_ALERT_MEMBERS=2)
    site = _site_with_day(app)
    app.config["PTYPE_REQUEST_DEADLINE_S"] = 1e-6
    client = app.test_client()
    r = client.get(f"/v1/sites/{site}/timeline?hours=6&members=10")
    assert r.status_code == 503 and r.headers["Retry-After"] == "5"
    assert r.get_json()["error"]["code"] == "timeout"
    assert client.get("/healthz").status_code == 200
    # The slot was given back: with time to work, the same request succeeds.
    app.config["PTYPE_REQUEST_DEADLINE_S"] = 30
    assert client.get(f"/v1/sites/{site}/timeline?hours=6&members=10").status_code == 200


def test_no_free_slot_is_a_503_busy_while_healthz_answers(make_app):
    from api_support import freezing_rain_document
    app = make_app(PTYPE_WORK_SLOTS=1, PTYPE_SLOT_WAIT_S=0.05, PTYPE_RETRY_AFTER_S=7)
    client = app.test_client()
    slots = app.extensions[budget.EXTENSION]
    assert slots.acquire(timeout=1)  # another request computing
    try:
        r = client.post("/v1/diagnose?members=5", json=freezing_rain_document(n_levels=20))
        assert r.status_code == 503 and r.headers["Retry-After"] == "7"
        assert r.get_json()["error"]["code"] == "busy"
        assert client.get("/healthz").status_code == 200
        assert client.get("/v1/sites").status_code == 200
    finally:
        slots.release()
    r = client.post("/v1/diagnose?members=5", json=freezing_rain_document(n_levels=20))
    assert r.status_code == 200


def test_engine_stops_between_batches_past_its_time_limit():
    profiles = [Profile.from_document(d) for d in DAY]
    with deadline.time_limit(1e-9), pytest.raises(DeadlineExceeded):
        nowcast.build_timeline(profiles, hours=6, members=10)
    assert deadline.remaining() is None  # the limit ends with its block
    assert nowcast.build_timeline(profiles, hours=6, members=10)["steps"]


def test_openapi_states_the_limits(client):
    doc = client.get("/openapi.json").get_json()
    assert "PTYPE_MAX_TIMELINE_MEMBER_LEVELS` = 5000000" in doc["info"]["description"]
    timeline = doc["paths"]["/v1/sites/{site_id}/timeline"]["get"]["responses"]
    assert {"422", "503"} <= set(timeline)
    assert "Retry-After" in timeline["503"]["headers"]
    detail = doc["components"]["schemas"]["ErrorDetail"]["properties"]
    assert {"limit", "asked", "unit"} <= set(detail)


def test_requests_waiting_for_a_slot_hold_no_database_connection(make_app):
    import threading
    app = make_app(PTYPE_NOW=NOW, PTYPE_ALERT_MEMBERS=2, PTYPE_WORK_SLOTS=1,
                   PTYPE_SLOT_WAIT_S=5)
    site = _site_with_day(app)
    slots = app.extensions[budget.EXTENSION]
    engine = store_for(app).engine
    answers = []

    def timeline():
        r = app.test_client().get(f"/v1/sites/{site}/timeline?hours=3&members=5")
        answers.append(r.status_code)

    assert slots.acquire(timeout=1)
    waiting = [threading.Thread(target=timeline) for _ in range(20)]
    try:
        for t in waiting:
            t.start()
        deadline_s = time.monotonic() + 4
        while engine.pool.checkedout() and time.monotonic() < deadline_s:
            time.sleep(0.05)
        # 20 requests wait for the slot; none of them holds a connection, reads go on.
        assert engine.pool.checkedout() == 0 and answers == []
        assert app.test_client().get("/v1/sites").status_code == 200
    finally:
        slots.release()
    for t in waiting:
        t.join(timeout=60)
    assert answers.count(200) + answers.count(503) == 20 and 200 in answers
