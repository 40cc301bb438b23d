"""``ptype.client`` against the real server: ``ptype serve`` (gunicorn) started by the tests.

Outside references: the library itself (the client's diagnosis must equal
``ptype.diagnose(...).to_dict()`` with the same seed and members, for every demo sounding,
and its verification report ``ptype.verify.run_verification``), the service's own answers
fetched with plain ``requests``, and the XML standards' root elements (CAP 1.2, Atom).
"""

from __future__ import annotations

import csv
import json
import os
import subprocess
import threading
import time
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest
import requests
from api_support import free_port
from test_server import PTYPE, start_server, stop_server

import ptype
from ptype.client import ApiError, Client

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "soundings_demo"
DEMO_JSON = sorted((DEMO / "json").glob("*.json"))
#: The service clock: the start of the invented demo storm, so its profiles lie ahead.
NOW = "2026-01-27T00:00:00Z"


def _create_key(data_dir: Path) -> str:
    env = {"PTYPE_DATA_DIR": str(data_dir)}
    out = subprocess.run([str(PTYPE), "keys", "create", "--name", "client tests"],
                         capture_output=True, text=True, check=True, timeout=120,
                         env={**os.environ, **env})
    return out.stdout.strip().splitlines()[-1]


@pytest.fixture(scope="module")
def service(tmp_path_factory):
    """A live server with an API key in its store and its clock at the demo storm."""
    tmp = tmp_path_factory.mktemp("client")
    key = _create_key(tmp / "data")  # the same store ptype serve opens
    with pytest.MonkeyPatch.context() as mp:
        mp.setenv("PTYPE_NOW", NOW)
        proc, url = start_server(tmp, "--workers", "2")
    yield url, key
    stop_server(proc)


@pytest.fixture(scope="module")
def api(service):
    url, key = service
    with Client(url, key=key, timeout=120) as client:
        yield client


@pytest.fixture(scope="module")
def site(api):
    """A road site (invented) with the demo storm's forecast profiles for Mistleby Bridge."""
    created = api.create_site("Tollmere Gap", 47.21, -33.08, elevation_m=310, code="TMG",
                              thresholds={"freezing_probability": 0.3})
    files = sorted((DEMO / "series" / "mistleby-bridge").glob("*.json"))
    stored = api.upload_profiles(created["id"], files, issued_time=NOW, source="client tests")
    return created, stored, len(files)


def _json(value):
    """``value`` as it comes back through JSON (tuples become lists)."""
    return json.loads(json.dumps(value))


@pytest.mark.parametrize("path", DEMO_JSON, ids=lambda p: p.stem)
def test_diagnose_equals_library(api, path):
    answer = api.diagnose(path, members=20, seed=3)
    assert answer == _json(ptype.diagnose(str(path), members=20, seed=3).to_dict())
    assert answer["caution"] == ptype.CAUTION


def test_diagnose_takes_profiles_documents_and_text_files(api):
    path = DEMO / "json" / "korrim-pass_20260127T1000.json"
    expected = _json(ptype.diagnose(str(path), members=10, seed=1,
                                    methods=["bourgouin", "ramer"]).to_dict())
    options = {"members": 10, "seed": 1, "methods": ["bourgouin", "ramer"]}
    assert api.diagnose(ptype.read_profile(path), **options) == expected
    assert api.diagnose(json.loads(path.read_text()), **options) == expected
    for text_file in (DEMO / "csv" / "korrim-pass_20260127T1000.csv",
                      DEMO / "temp" / "korrim-pass_20260127T1000.txt"):
        expected = _json(ptype.diagnose(str(text_file), members=10, seed=1).to_dict())
        assert api.diagnose(text_file, members=10, seed=1) == expected


def test_diagnose_batch_keeps_order_and_bad_entries(api, service):
    url, _ = service
    paths = [DEMO / "json" / "drovan-junction_20260127T1800.json",
             DEMO / "csv" / "mistleby-bridge_20260127T1600.csv"]
    results = api.diagnose_batch([*paths, {"levels": []}], members=5, seed=2)
    docs = [json.loads(paths[0].read_text()), ptype.read_profile(paths[1]).to_document(),
            {"levels": []}]
    raw = requests.post(f"{url}/v1/diagnose/batch?members=5&seed=2", json={"profiles": docs},
                        timeout=120).json()["results"]
    assert results == raw
    assert [r.get("ptype") for r in results[:2]] == ["FZRA", "FZRA"]
    assert results[2]["error"]["field"] == "profiles[2].levels"


def test_diagram_bytes(api):
    path = DEMO / "json" / "mistleby-bridge_20260127T1600.json"
    png = api.diagram(path, seed=1, members=0)
    assert png.startswith(b"\x89PNG\r\n\x1a\n")  # PNG signature (ISO/IEC 15948)
    svg = api.diagram(DEMO / "temp" / "mistleby-bridge_20260127T1600.txt", format="svg")
    assert ET.fromstring(svg).tag == "{http://www.w3.org/2000/svg}svg"


def test_verify_equals_library(api):
    from ptype.verify.manifest import cases_from_entries
    from ptype.verify.report import run_verification
    with open(DEMO / "verification" / "cases.csv", newline="") as f:
        rows = [r for r in csv.DictReader(line for line in f if not line.startswith("#"))][:12]
    entries = [{"profile": json.loads((DEMO / "verification" / r["profile"]).read_text()),
                "observed": r["observed"], "valid_time": r["valid_time"], "site": r["site"]}
               for r in rows]
    report = api.verify(entries, members=5, seed=4)
    expected = run_verification(cases_from_entries(_json(entries), allow_paths=False),
                                members=5, seed=4, source="request")
    assert report == _json(expected)
    assert report["n_cases"] == 12 and report["caution"] == ptype.CAUTION


def test_sites_round_trip(api, site):
    created, stored, n_files = site
    assert created["name"] == "Tollmere Gap" and created["code"] == "TMG"
    assert created["thresholds"] == {"freezing_probability": 0.3}
    assert stored["site_id"] == created["id"] and stored["stored"] == n_files
    assert stored["replaced"] == 0 and stored["source"] == "client tests"
    assert created["id"] in [s["id"] for s in api.sites()]
    one = api.site(created["id"])
    assert {k: one[k] for k in created} == created
    first = DEMO / "series" / "mistleby-bridge" / "20260127T0000Z.json"
    again = api.upload_profiles(created["id"], [first], source="client tests")
    assert again["stored"] == again["replaced"] == 1


def test_observations_and_timeline(api, site, service):
    url, _ = service
    site_id = site[0]["id"]
    ob = {"time": "2026-01-26T23:50:00Z", "air_temperature_c": -1.5, "dewpoint_c": -2.5,
          "road_surface_temperature_c": -2.0, "present_weather": "-SN"}
    result = api.upload_observations(site_id, ob)
    assert result["site_id"] == site_id and result["stored"] == 1
    options = {"hours": 6, "step": "1h", "members": 5, "now": NOW, "adjustments": []}
    timeline = api.timeline(site_id, **options)
    raw = requests.get(f"{url}/v1/sites/{site_id}/timeline", timeout=120, params={
        "hours": 6, "step": "1h", "members": 5, "now": NOW, "adjustments": ""}).json()
    assert timeline == raw
    assert timeline["adjustments"] == [] and len(timeline["steps"]) == 7
    assert api.site(site_id)["latest_observation"]["present_weather"] == "-SN"
    assert timeline["caution"] == ptype.CAUTION


def test_alerts_round_trip(api, site):
    site_id = site[0]["id"]
    listed = api.alerts(site=site_id)
    assert listed["caution"] == ptype.CAUTION and listed["alerts"]
    assert {a["site"]["id"] for a in listed["alerts"]} == {site_id}
    active = api.alerts(active=True)["alerts"]
    assert {a["id"] for a in active} <= {a["id"] for a in api.alerts()["alerts"]}
    assert all(a["ended"] is None for a in active)
    cap = ET.fromstring(api.alert_cap(listed["alerts"][0]["id"]))
    assert cap.tag == "{urn:oasis:names:tc:emergency:cap:1.2}alert"  # OASIS CAP 1.2
    feed = ET.fromstring(api.alerts_atom())
    assert feed.tag == "{http://www.w3.org/2005/Atom}feed"  # RFC 4287
    evaluated = api.evaluate_alerts()
    assert evaluated["evaluated_sites"] >= 1


def test_health_demo_and_openapi(api):
    assert api.health()["status"] == "ok"
    names = {s["name"] for s in api.demo()}
    assert "korrim-pass_20260127T1000.json" in names
    document = api.openapi()
    assert document["openapi"].startswith("3.1")


def test_errors_carry_status_code_message_and_field(api, service):
    url, _ = service
    with pytest.raises(ApiError) as bad:
        api.diagnose({"levels": [{"pressure_hpa": 1000, "temperature_c": "cold",
                                  "dewpoint_c": -2}]})
    raw = requests.post(f"{url}/v1/diagnose", timeout=30, json={"levels": [
        {"pressure_hpa": 1000, "temperature_c": "cold", "dewpoint_c": -2}]}).json()["error"]
    assert (bad.value.status, bad.value.code, bad.value.message, bad.value.field) == (
        422, raw["code"], raw["message"], raw.get("field"))
    with pytest.raises(ApiError) as option:
        api.diagnose(DEMO_JSON[0], member=3)
    assert (option.value.status, option.value.code, option.value.field) == (
        400, "invalid_option", "member")
    with pytest.raises(ApiError) as missing:
        api.site(987654)
    assert missing.value.status == 404 and missing.value.code == "not_found"
    with Client(url) as anonymous, pytest.raises(ApiError) as unauthorized:
        anonymous.create_site("Brackwell Ford", 47.0, -33.0)
    assert unauthorized.value.status == 401 and unauthorized.value.field == "Authorization"
    with Client(url, key="not-a-key") as wrong, pytest.raises(ApiError) as refused:
        wrong.upload_observations(1, {"time": NOW})
    assert refused.value.status == 401 and refused.value.code == "unauthorized"


def test_posts_are_sent_once_gets_retried_with_bounded_backoff():
    port = free_port()  # nothing listens there
    client = Client(f"http://127.0.0.1:{port}", retries=3, backoff=0.2, timeout=5)
    start = time.monotonic()
    with pytest.raises(ApiError) as post:
        client.diagnose(DEMO_JSON[0])
    post_s = time.monotonic() - start
    start = time.monotonic()
    with pytest.raises(ApiError) as get:
        client.sites()
    get_s = time.monotonic() - start
    assert post.value.status is None and post.value.code == "unreachable"
    assert get.value.code == "unreachable"
    assert post_s < 0.2  # one try, no pause
    assert 0.2 + 0.4 + 0.8 <= get_s < 10  # three pauses after four tries, then it gives up


def test_get_waits_for_a_server_that_is_starting(tmp_path):
    port = free_port()
    client = Client(f"http://127.0.0.1:{port}", retries=8, backoff=0.5, timeout=10)
    answers = []
    reader = threading.Thread(target=lambda: answers.append(client.health()))
    reader.start()  # the first tries find nothing listening
    proc, _ = start_server(tmp_path, "--workers", "1", port=port)
    try:
        reader.join(timeout=90)
        assert answers and answers[0]["status"] == "ok"
    finally:
        stop_server(proc)
