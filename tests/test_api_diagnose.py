"""HTTP tests of ``POST /v1/diagnose`` and ``POST /v1/diagnose/batch`` (api/diagnose.py),
including hostile input: every bad request is a 4xx JSON error naming the problem, never a
500 or a traceback, and the service stays healthy afterwards."""

from __future__ import annotations

import json

import pytest
from api_support import document_to_csv, freezing_rain_document, snow_document
from ptype.api import create_app
from ptype.api.models import BatchResponse, Diagnosis, ErrorResponse

import ptype
from ptype.readers.temp_format import write_temp


def _assert_error(response, status, code=None, field=None):
    """A JSON error body of the one documented shape, without traceback text."""
    assert response.status_code == status, response.get_data(as_text=True)
    assert response.mimetype == "application/json"
    body = response.get_json()
    ErrorResponse.model_validate(body)
    text = json.dumps(body)
    assert "Traceback" not in text and 'File "' not in text
    if code is not None:
        assert body["error"]["code"] == code
    if field is not None:
        assert body["error"].get("field") == field
    return body["error"]


# -- success ---------------------------------------------------------------------------
def test_diagnose_json_freezing_rain(client):
    # FZRA: warm nose ~128 J/kg over a ~54 J/kg surface cold layer, surface -4 degC;
    # Bourgouin (2000): NA < 46 + 0.66 PA keeps drops liquid, they freeze on the cold ground.
    response = client.post("/v1/diagnose?seed=3", json=freezing_rain_document())
    assert response.status_code == 200
    body = response.get_json()
    Diagnosis.model_validate(body)
    assert body["ptype"] == "FZRA"
    assert body["grib2_code"] == 3  # WMO GRIB2 code table 4.201: 3 = freezing rain
    assert body["caution"] == ptype.CAUTION
    assert abs(sum(body["probabilities"].values()) - 1.0) < 1e-6
    assert [layer["kind"] for layer in body["layers"]][:2] == ["cold", "warm"]


def test_diagnose_matches_library_call(client):
    # The view only parses and serialises: same seed, same answer as the library.
    document = freezing_rain_document()
    response = client.post("/v1/diagnose?seed=11&members=20", json=document)
    expected = ptype.diagnose(document, seed=11, members=20).to_dict()
    assert response.get_json() == json.loads(json.dumps(expected))


def test_diagnose_snow(client):
    # SN: no layer above 0 degC anywhere (common practice; Bourgouin 2000 case without PA).
    body = client.post("/v1/diagnose", json=snow_document()).get_json()
    assert body["ptype"] == "SN"
    assert body["layers"] == [layer for layer in body["layers"] if layer["kind"] == "cold"]


def test_diagnose_csv_and_temp_bodies_agree_with_json(client):
    document = freezing_rain_document(n_levels=40)
    as_json = client.post("/v1/diagnose?seed=5", json=document).get_json()
    as_csv = client.post("/v1/diagnose?seed=5", data=document_to_csv(document),
                         content_type="text/csv")
    assert as_csv.status_code == 200, as_csv.get_data(as_text=True)
    assert as_csv.get_json()["ptype"] == as_json["ptype"]
    assert as_csv.get_json()["site"]["name"] == document["site"]["name"]
    temp = write_temp(document)
    as_temp = client.post("/v1/diagnose?seed=5", data=temp, content_type="text/plain")
    assert as_temp.status_code == 200, as_temp.get_data(as_text=True)
    assert as_temp.get_json()["ptype"] == "FZRA"
    # CSV sent as text/plain is detected from its header.
    detected = client.post("/v1/diagnose", data=document_to_csv(document),
                           content_type="text/plain; charset=utf-8")
    assert detected.status_code == 200


def test_diagnose_options_methods_members_wetbulb(client):
    response = client.post("/v1/diagnose?methods=bourgouin,%20ramer&members=0&wetbulb=adiabatic",
                           json=freezing_rain_document())
    assert response.status_code == 200, response.get_data(as_text=True)
    assert set(response.get_json()["methods"]) == {"bourgouin", "ramer"}


def test_diagnose_seed_is_reproducible(client):
    doc = freezing_rain_document()
    a = client.post("/v1/diagnose?seed=42&members=30", json=doc).get_json()
    b = client.post("/v1/diagnose?seed=42&members=30", json=doc).get_json()
    assert a["probabilities"] == b["probabilities"]


def test_diagnose_accepts_json_with_charset_and_vendor_suffix(client):
    body = json.dumps(snow_document())
    assert client.post("/v1/diagnose", data=body,
                       content_type="application/json; charset=utf-8").status_code == 200
    assert client.post("/v1/diagnose", data=body,
                       content_type="application/profile+json").status_code == 200


# -- hostile input ---------------------------------------------------------------------
def _doc_with(level_changes: dict[int, dict] | None = None, levels=None) -> dict:
    doc = snow_document(n_levels=10)
    if levels is not None:
        doc["levels"] = levels
    for i, change in (level_changes or {}).items():
        doc["levels"][i].update(change)
    return doc


HOSTILE_JSON = [
    # (id, raw body, status, code, field)
    ("garbage", "{this is not json", 400, "invalid_json", None),
    ("empty", "", 400, "invalid_json", None),
    ("nan", '{"levels": [{"pressure_hpa": NaN, "temperature_c": 1}]}', 400, "invalid_json", None),
    ("infinity", '{"levels": [{"pressure_hpa": Infinity}]}', 400, "invalid_json", None),
    ("array", "[1, 2, 3]", 422, "invalid_profile", None),
    ("string", '"levels"', 422, "invalid_profile", None),
    ("deep", "[" * 100000 + "]" * 100000, 400, "invalid_json", None),
    ("huge_number", ('{"levels": [{"pressure_hpa": 1e999, "temperature_c": 1, "dewpoint_c": 0},'
                    '{"pressure_hpa": 900, "temperature_c": 1, "dewpoint_c": 0},'
                    '{"pressure_hpa": 800, "temperature_c": 1, "dewpoint_c": 0}]}'),
     422, "invalid_profile", "levels[0].pressure_hpa"),
]


@pytest.mark.parametrize("body,status,code,field", [case[1:] for case in HOSTILE_JSON],
                         ids=[case[0] for case in HOSTILE_JSON])
def test_diagnose_hostile_json(client, body, status, code, field):
    response = client.post("/v1/diagnose", data=body, content_type="application/json")
    _assert_error(response, status, code, field)


HOSTILE_PROFILES = [
    ("strings_for_numbers", _doc_with({2: {"temperature_c": "-3.5"}}), "levels[2].temperature_c"),
    ("no_levels", _doc_with(levels=[]), "levels"),
    ("one_level", _doc_with(levels=[{"pressure_hpa": 1000, "temperature_c": 1, "dewpoint_c": 0}]),
     "levels"),
    ("dewpoint_far_above", _doc_with({3: {"dewpoint_c": 15.0}}), "levels[3].dewpoint_c"),
    ("negative_pressure", _doc_with({4: {"pressure_hpa": -850}}), "levels[4].pressure_hpa"),
    ("duplicate_pressure", _doc_with({5: {"pressure_hpa": 1000.0}}), "levels[5].pressure_hpa"),
    ("heights_contradict", _doc_with({0: {"height_m": 1500}, 1: {"height_m": 300}}),
     "levels[1].height_m"),
    ("unknown_field", _doc_with({1: {"temprature_c": 2}}), "levels[1].temprature_c"),
    ("boolean_number", _doc_with({1: {"pressure_hpa": True}}), "levels[1].pressure_hpa"),
    ("missing_temperature", _doc_with(levels=[{"pressure_hpa": p, "dewpoint_c": -5}
                                              for p in (1000, 900, 800)]),
     "levels[0].temperature_c"),
    ("levels_not_list", {"levels": {"a": 1}}, "levels"),
    ("bad_time", {**snow_document(5), "valid_time": "yesterday"}, "valid_time"),
]


@pytest.mark.parametrize("document,field", [c[1:] for c in HOSTILE_PROFILES],
                         ids=[c[0] for c in HOSTILE_PROFILES])
def test_diagnose_invalid_profile_names_field(client, document, field):
    error = _assert_error(client.post("/v1/diagnose", json=document), 422, "invalid_profile")
    assert error["field"] == field
    assert field.split(".")[-1].split("[")[0] in error["message"]


@pytest.mark.parametrize("content_type,body", [
    ("application/xml", "<profile><level p='1000'/></profile>"),
    ("text/xml", "<profile/>"),
    ("application/x-www-form-urlencoded", "levels=1"),
    ("multipart/form-data; boundary=x", "--x\r\n\r\n--x--"),
    ("application/octet-stream", "\x00\x01"),
    ("", "{}"),
])
def test_diagnose_wrong_content_type_415(client, content_type, body):
    response = client.post("/v1/diagnose", data=body, content_type=content_type or None)
    _assert_error(response, 415, "unsupported_media_type")


def test_diagnose_body_over_limit_413(client):
    body = b'{"levels": [' + b" " * (10 * 1024 * 1024) + b"]}"
    response = client.post("/v1/diagnose", data=body, content_type="application/json")
    error = _assert_error(response, 413)
    assert "1048576" in error["message"]


def test_diagnose_too_many_levels_413():
    app = create_app({"TESTING": True, "PTYPE_MAX_LEVELS": 20})
    response = app.test_client().post("/v1/diagnose", json=freezing_rain_document(n_levels=25))
    _assert_error(response, 413, "too_many_levels", "levels")


def test_diagnose_too_much_work_422():
    app = create_app({"TESTING": True, "PTYPE_MAX_MEMBER_LEVELS": 1000})
    client = app.test_client()
    doc = freezing_rain_document(n_levels=30)
    answer = client.post("/v1/diagnose?members=40", json=doc)
    _assert_error(answer, 422, "too_much_work", "members")
    assert answer.get_json()["error"] | {"message": ""} == {
        "code": "too_much_work", "message": "", "field": "members", "limit": 1000,
        "asked": 1200, "unit": "member-levels"}
    assert client.post("/v1/diagnose?members=30", json=doc).status_code == 200
    _assert_error(client.post("/v1/diagnose/batch?members=20", json={"profiles": [doc, doc]}),
                  422, "too_much_work")
    _assert_error(client.post("/v1/diagram?members=40", json=doc), 422, "too_much_work")


@pytest.mark.parametrize("body,content_type", [
    ("pressure_hpa,temperature_c,dewpoint_c\n1000,warm,-1\n900,-2,-3\n800,-4,-5\n", "text/csv"),
    ("pressure_hpa;temperature_c\n1000;1\n", "text/csv"),
    ("\n\n", "text/csv"),
    ("pressure_hpa,temperature_c,dewpoint_c\n1000,1\n", "text/csv"),
    ("TTAA 1512/ 99901 99978 0230=", "text/plain"),
    ("TTAA 95127 07999 99990=", "text/plain"),
    ("TTBB 1512/ 99901 00978 XXXXX 11950=", "text/plain"),
    ("just some words", "text/plain"),
    ("/etc/passwd", "text/plain"),
    ("CDF\x01 not really netcdf", "text/plain"),
])
def test_diagnose_broken_csv_and_temp(client, body, content_type):
    response = client.post("/v1/diagnose", data=body, content_type=content_type)
    assert 400 <= response.status_code < 500
    error = _assert_error(response, response.status_code)
    assert "root:" not in error["message"]  # a path in the body is never read from disk


def test_diagnose_undetectable_text_says_how_to_name_format(client):
    response = client.post("/v1/diagnose", data="just some words", content_type="text/plain")
    assert "?input=" in _assert_error(response, 422, "invalid_profile")["message"]


def test_diagnose_text_body_not_utf8(client):
    response = client.post("/v1/diagnose", data=b"\xff\xfe\x00p", content_type="text/csv")
    _assert_error(response, 400)


@pytest.mark.parametrize("query,field", [
    ("members=abc", "members"),
    ("members=-1", "members"),
    ("members=1000000", "members"),
    ("seed=-5", "seed"),
    ("wetbulb=psychic", "wetbulb"),
    ("methods=bourgouin,astrology", "methods"),
    ("methods=,", "methods"),
    ("member=5", "member"),
    ("members=5&members=6", "members"),
    ("input=xml", "input"),
])
def test_diagnose_bad_query_option_400(client, query, field):
    response = client.post(f"/v1/diagnose?{query}", json=snow_document())
    error = _assert_error(response, 400, "invalid_option")
    assert error.get("field") == field or field in error["message"]


def test_diagnose_wrong_method_405(client):
    response = client.get("/v1/diagnose")
    _assert_error(response, 405)


def test_health_still_ok_after_hostile_requests(client):
    for body in ("{", "[]", '{"levels": "x"}'):
        client.post("/v1/diagnose", data=body, content_type="application/json")
    client.post("/v1/diagnose", data="<x/>", content_type="application/xml")
    response = client.get("/healthz")
    assert response.status_code == 200 and response.get_json()["status"] == "ok"
    assert client.post("/v1/diagnose", json=snow_document()).status_code == 200


# -- batch -----------------------------------------------------------------------------
def test_batch_results_in_order_with_item_errors(client):
    profiles = [freezing_rain_document(), {"levels": []}, snow_document(), 7,
                _doc_with({2: {"temperature_c": "x"}})]
    response = client.post("/v1/diagnose/batch?seed=1", json={"profiles": profiles})
    assert response.status_code == 200
    body = response.get_json()
    BatchResponse.model_validate(body)
    results = body["results"]
    assert len(results) == 5
    assert results[0]["ptype"] == "FZRA"
    assert results[1]["error"]["field"] == "profiles[1].levels"
    assert results[2]["ptype"] == "SN"
    assert results[3]["error"]["field"] == "profiles[3]"
    assert results[4]["error"]["field"] == "profiles[4].levels[2].temperature_c"


def test_batch_matches_single_requests(client):
    docs = [freezing_rain_document(30), snow_document(20)]
    batch = client.post("/v1/diagnose/batch?members=0", json={"profiles": docs}).get_json()
    for doc, result in zip(docs, batch["results"]):
        single = client.post("/v1/diagnose?members=0", json=doc).get_json()
        assert single == result


def test_batch_probabilities_vectorised_and_reproducible(client):
    docs = [freezing_rain_document(30), snow_document(20), freezing_rain_document(45)]
    first = client.post("/v1/diagnose/batch?seed=9&members=40", json={"profiles": docs})
    again = client.post("/v1/diagnose/batch?seed=9&members=40", json={"profiles": docs})
    assert first.get_json() == again.get_json()
    for doc, result in zip(docs, first.get_json()["results"]):
        single = client.post("/v1/diagnose?seed=9&members=40", json=doc).get_json()
        # The deterministic part is identical; the members are drawn for the whole batch.
        for key in ("ptype", "methods", "layers", "wetbulb_layers", "cloud_layers", "profile"):
            assert result[key] == single[key]
        assert result["members"] == 40
        assert abs(sum(result["probabilities"].values()) - 1.0) < 1e-6
        assert all(abs(p * 40 - round(p * 40)) < 1e-6 for p in result["probabilities"].values())
    # The two sharply defined cases are near-certain either way (FZRA and SN, see api_support).
    results = first.get_json()["results"]
    assert results[0]["probabilities"].get("FZRA", 0) >= 0.6
    assert results[1]["probabilities"].get("SN", 0) >= 0.9


@pytest.mark.parametrize("body,status,field", [
    ({"profiles": "all"}, 422, "profiles"),
    ({}, 422, "profiles"),
    ({"profiles": [], "extra": 1}, 422, "extra"),
    ([], 422, None),
])
def test_batch_bad_envelope(client, body, status, field):
    error = _assert_error(client.post("/v1/diagnose/batch", json=body), status)
    assert error.get("field") == field


def test_batch_limits_and_content_type():
    app = create_app({"TESTING": True, "PTYPE_MAX_BATCH": 3})
    client = app.test_client()
    _assert_error(client.post("/v1/diagnose/batch", json={"profiles": [snow_document(5)] * 4}),
                  413, "too_many_profiles", "profiles")
    _assert_error(client.post("/v1/diagnose/batch", data="pressure_hpa\n",
                              content_type="text/csv"), 415)
    _assert_error(client.post("/v1/diagnose/batch?methods=nope", json={"profiles": [
        snow_document(5)]}), 400, "invalid_option")
    assert client.post("/v1/diagnose/batch", json={"profiles": []}).get_json() == {"results": []}
