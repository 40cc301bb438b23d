"""``POST /v1/verify`` (api/verify.py): report, limits and 4xx errors.

Profiles are invented demo documents (soundings_demo/verification).
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest
import schemathesis
from hypothesis import HealthCheck, Phase, settings
from ptype.api import create_app
from schemathesis.checks import not_a_server_error
from schemathesis.specs.openapi.checks import (
    content_type_conformance,
    response_schema_conformance,
    status_code_conformance,
)

import ptype

DEMO = Path(__file__).resolve().parents[1] / "soundings_demo" / "verification" / "profiles"
METHODS = ["bourgouin", "cloud_top"]


def _doc(i: int) -> dict:
    return json.loads((DEMO / f"case_{i:03d}.json").read_text())


@pytest.fixture
def client(make_app):
    return make_app(PTYPE_MAX_VERIFY_CASES=5, PTYPE_MAX_VERIFY_MEMBER_COLUMNS=40).test_client()


def _cases(n=3):
    observed = ["-SN", "FZRA PL", "RA BR", "UP", "SN"]
    return [{"profile": _doc(i + 1), "observed": observed[i]} for i in range(n)]


def test_verify_returns_report(client):
    r = client.post("/v1/verify", json={"cases": _cases(4), "members": 5, "seed": 1,
                                        "methods": METHODS})
    assert r.status_code == 200, r.json
    body = r.json
    assert body["n"] == 3 and body["excluded"]["count"] == 1
    assert body["consensus"]["table"]["rows"] == "predicted"
    assert set(body["methods"]) == set(METHODS)
    assert "rps" in body["consensus"] and body["caution"] == ptype.CAUTION
    again = client.post("/v1/verify", json={"cases": _cases(4), "members": 5, "seed": 1,
                                            "methods": METHODS}).json
    assert again["consensus"] == body["consensus"]


@pytest.mark.parametrize("payload, status, code, field", [
    ({"cases": []}, 400, "invalid_field", "cases"),
    ({}, 400, "invalid_field", "cases"),
    ({"cases": "x"}, 400, "invalid_field", "cases"),
    ({"cases": [{"observed": "SN"}] * 6}, 400, "too_many_cases", "cases"),
    ({"cases": [{"profile": {}, "observed": "SN"}] * 3, "members": 20}, 422, "too_much_work",
     "members"),
    ({"cases": [], "colour": 1}, 400, "unknown_field", "colour"),
    ({"cases": [{"profile": {}, "observed": "SN"}], "members": "many"}, 400, "invalid_field",
     "members"),
    ({"cases": [{"profile": {}, "observed": "SN"}], "seed": -1, "members": 0}, 400,
     "invalid_field", "seed"),
    ({"cases": [{"profile": {}, "observed": "SN"}], "methods": [1], "members": 0}, 400,
     "invalid_field", "methods"),
])
def test_verify_rejects_bad_requests(client, payload, status, code, field):
    r = client.post("/v1/verify", json=payload)
    assert r.status_code == status
    assert r.json["error"]["code"] == code
    assert r.json["error"]["field"] == field


def test_verify_bad_case_names_entry_and_field(client):
    cases = _cases(2)
    cases[1]["observed"] = 7
    r = client.post("/v1/verify", json={"cases": cases, "members": 0})
    assert r.status_code == 422
    assert r.json["error"]["field"] == "cases[1].observed"
    assert "cases[1]" in r.json["error"]["message"]


def test_verify_bad_profile_names_entry_and_level(client):
    cases = _cases(2)
    cases[0]["profile"]["levels"][2]["temperature_c"] = "warm"
    r = client.post("/v1/verify", json={"cases": cases, "members": 0, "methods": METHODS})
    assert r.status_code == 422
    assert r.json["error"]["field"].startswith("cases[0].profile.levels[2]")


def test_verify_refuses_file_paths(client):
    r = client.post("/v1/verify", json={"cases": [{"profile": "/etc/hosts", "observed": "SN"}],
                                        "members": 0})
    assert r.status_code == 422
    assert r.json["error"]["field"] == "cases[0].profile"
    assert "file paths are not accepted" in r.json["error"]["message"]


def test_verify_unknown_method_is_400(client):
    r = client.post("/v1/verify", json={"cases": _cases(1), "members": 0, "methods": ["nope"]})
    assert r.status_code == 400
    assert r.json["error"]["code"] == "invalid_option"


def test_verify_not_json(client):
    # A body that is not JSON by its Content-Type is refused as such (415, docs/api.md).
    r = client.post("/v1/verify", data="cases", content_type="text/plain")
    assert r.status_code == 415 and r.json["error"]["code"] == "unsupported_media_type"
    r = client.post("/v1/verify", data="cases", content_type="application/json")
    assert r.status_code == 400 and r.json["error"]["code"] == "invalid_json"
    r = client.post("/v1/verify", json=[1, 2])
    assert r.status_code == 400 and r.json["error"]["code"] == "invalid_body"


# -- property-based run against the endpoint's own OpenAPI description -------------------
# schemathesis drives the WSGI app with generated bodies, valid and invalid: none may give a
# server error, an undocumented status, a wrong content type or a body outside its schema.
# Small limits keep every generated verification cheap.

_FUZZ_APP = create_app({"TESTING": True, "PTYPE_MAX_VERIFY_CASES": 3,
                        "PTYPE_MAX_VERIFY_MEMBER_COLUMNS": 150})
_schema = schemathesis.openapi.from_wsgi("/openapi.json", _FUZZ_APP).include(
    path_regex=r"^/v1/verify$")


@_schema.parametrize()
@settings(max_examples=25, deadline=None, derandomize=True, database=None,
          phases=[Phase.explicit, Phase.generate], suppress_health_check=list(HealthCheck))
def test_verify_conforms_to_openapi(case):
    case.call_and_validate(checks=[not_a_server_error, status_code_conformance,
                                   content_type_conformance, response_schema_conformance])
