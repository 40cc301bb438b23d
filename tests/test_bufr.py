"""WMO BUFR radiosonde reports (ptype.readers.bufr_format): messages built by ecCodes from
its shipped BUFR4 sample with invented values; the same sounding as BUFR, WMO TEMP and JSON
gives the same diagnosis; several subsets and messages give several profiles; damaged
messages are clear errors naming the message and descriptor."""

from __future__ import annotations

import json
from datetime import datetime
from pathlib import Path

import pytest

pytest.importorskip("eccodes")
from bufr_support import encode_temp_bufr

import ptype
from ptype.cli import main
from ptype.errors import ReaderError
from ptype.readers import bufr_format, read_profiles, temp_format

ROOT = Path(__file__).resolve().parents[1]
TEMP = ROOT / "soundings_demo" / "temp" / "drovan-junction_20260127T1300.txt"


@pytest.fixture(scope="module")
def temp_document():
    """The invented demo ascent decoded from its WMO TEMP text (January 2026)."""
    return temp_format.read_temp_document(TEMP.read_text(), str(TEMP), year=2026, month=1)


def _report(doc, station=None, **levels_change):
    return {"station": station or doc["site"]["id"],
            "launch": datetime.fromisoformat(doc["valid_time"]),
            "latitude": 47.296, "longitude": -33.402, "elevation_m": 720.0,
            "levels": doc["levels"]}


def test_bufr_report_fields(temp_document):
    raw = encode_temp_bufr([_report(temp_document)])
    (doc,) = bufr_format.read_bufr_documents(raw)
    assert doc["site"] == {"id": "99912", "latitude": 47.296, "longitude": -33.402,
                           "elevation_m": 720.0}
    # BUFR carries year and month, which TEMP lacks (WMO-No. 306, 004001/004002).
    assert doc["valid_time"] == "2026-01-27T13:00:00+00:00"
    assert len(doc["levels"]) == len(temp_document["levels"])
    assert doc["levels"][0] == temp_document["levels"][0]
    assert "309052" in doc["source"]


def test_bufr_temp_and_json_of_one_sounding_give_one_diagnosis(temp_document, tmp_path):
    """Same sounding three ways.  TEMP codes temperature to 0.1 degC and BUFR 0 12 101 to
    0.01 K (WMO-No. 306 Table B), so the values are equal to TEMP's precision and the
    diagnosis is the same; energies within 0.5 J/kg."""
    bufr = tmp_path / "ascent.bufr"
    bufr.write_bytes(encode_temp_bufr([_report(temp_document)]))
    js = tmp_path / "ascent.json"
    js.write_text(json.dumps(temp_document))
    results = [ptype.diagnose(src, members=0).to_dict()
               for src in (ptype.read_profile(bufr), temp_document, str(js))]
    assert {r["ptype"] for r in results} == {results[0]["ptype"]}
    for key in ("warm_area_j_kg", "cold_area_j_kg"):
        assert max(r[key] for r in results) - min(r[key] for r in results) <= 0.5
    for name in results[0]["methods"]:
        assert {r["methods"][name]["ptype"] for r in results} == \
            {results[0]["methods"][name]["ptype"]}


@pytest.mark.parametrize("compressed", [False, True])
def test_bufr_several_subsets_and_messages(temp_document, tmp_path, compressed):
    warm = [dict(lv, temperature_c=lv["temperature_c"] + 3.0) for lv in temp_document["levels"]]
    reports = [_report(temp_document), _report(dict(temp_document, levels=warm), "99913")]
    path = tmp_path / "two.bufr"
    path.write_bytes(encode_temp_bufr(reports, compressed=compressed)
                     + encode_temp_bufr(reports[:1]))
    profiles = read_profiles(path)
    assert [p.site.id for p in profiles] == ["99912", "99913", "99912"]
    t0 = profiles[0].temperature_c
    assert profiles[1].temperature_c[0] == pytest.approx(t0[0] + 3.0, abs=0.01)
    with pytest.raises(ReaderError, match="holds 3 profiles"):
        ptype.read_profile(path)


def test_bufr_truncated_file_names_the_message(temp_document, tmp_path, capsys):
    one = encode_temp_bufr([_report(temp_document)])
    path = tmp_path / "cut.bufr"
    path.write_bytes(one + one[: len(one) // 2])
    with pytest.raises(ReaderError, match=r"cut.bufr: BUFR message 2: truncated"):
        read_profiles(path)
    assert main(["diagnose", str(path)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "message 2" in err and "Traceback" not in err


def test_bufr_without_temperature_names_the_descriptor(temp_document):
    levels = [{"pressure_hpa": lv["pressure_hpa"], "temperature_c": None}
              for lv in temp_document["levels"]]
    raw = encode_temp_bufr([_report(dict(temp_document, levels=levels))])
    with pytest.raises(ReaderError, match=r"message 1: descriptor 012101 \(air temperature\)"):
        bufr_format.read_bufr_documents(raw)


def test_bufr_damaged_end_marker(temp_document):
    raw = bytearray(encode_temp_bufr([_report(temp_document)]))
    raw[-1:] = b"X"
    with pytest.raises(ReaderError, match="no '7777' end marker"):
        bufr_format.read_bufr_documents(bytes(raw))


def test_cli_diagnose_every_report_of_a_bufr_file(temp_document, tmp_path, capsys):
    path = tmp_path / "two.bufr"
    path.write_bytes(encode_temp_bufr([_report(temp_document), _report(temp_document, "99913")]))
    assert main(["diagnose", str(path), "--format", "json", "--members", "0"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert [r["source"] for r in out] == [f"{path}#1", f"{path}#2"]
    assert out[0]["site"]["id"] == "99912" and out[1]["site"]["id"] == "99913"


# --- HTTP and the page -----------------------------------------------------------------------

def test_api_diagnose_accepts_bufr(client, temp_document):
    raw = encode_temp_bufr([_report(temp_document)])
    r = client.post("/v1/diagnose?members=0", data=raw,
                    headers={"Content-Type": "application/x-bufr"})
    assert r.status_code == 200, r.json
    expected = ptype.diagnose(temp_document, members=0)
    assert r.json["ptype"] == expected.code.name
    assert r.json["valid_time"].startswith("2026-01-27T13:00")


def test_api_diagnose_bad_bufr_is_a_4xx_naming_the_message(client, temp_document):
    raw = encode_temp_bufr([_report(temp_document)])
    r = client.post("/v1/diagnose", data=raw[:-30], headers={"Content-Type": "application/x-bufr"})
    assert r.status_code == 422
    assert "BUFR message 1" in r.json["error"]["message"]
    r = client.post("/v1/diagnose", data=b"not bufr at all",
                    headers={"Content-Type": "application/x-bufr"})
    assert r.status_code == 422 and "no BUFR message" in r.json["error"]["message"]
    two = encode_temp_bufr([_report(temp_document), _report(temp_document, "99913")])
    r = client.post("/v1/diagnose", data=two, headers={"Content-Type": "application/x-bufr"})
    assert r.status_code == 422 and "2 radiosonde reports" in r.json["error"]["message"]


@pytest.mark.parametrize("sequence", [309057, 309056])
def test_bufr_other_radiosonde_sequences(sequence, temp_document):
    """3 09 057 (TEMP converted to BUFR) and 3 09 056 (descents) carry the same level
    elements (WMO-No. 306 Table D): the same reader reads them."""
    import eccodes as ec
    import numpy as np
    levels = temp_document["levels"][:8]
    h = ec.codes_bufr_new_from_samples("BUFR4")
    try:
        for key, value in (("masterTableNumber", 0), ("dataCategory", 2),
                           ("internationalDataSubCategory", 4),
                           ("masterTablesVersionNumber", 32), ("numberOfSubsets", 1),
                           ("observedData", 1), ("compressedData", 0)):
            ec.codes_set(h, key, value)
        ec.codes_set_array(h, "inputDelayedDescriptorReplicationFactor", [len(levels), 0, 0])
        ec.codes_set_array(h, "inputExtendedDelayedDescriptorReplicationFactor", [len(levels)])
        ec.codes_set(h, "unexpandedDescriptors", sequence)
        pressure = np.full(ec.codes_get_size(h, "pressure"), -1e100)
        pressure[:len(levels)] = [lv["pressure_hpa"] * 100.0 for lv in levels]
        ec.codes_set_array(h, "pressure", pressure)
        ec.codes_set_array(h, "airTemperature",
                           [lv["temperature_c"] + 273.15 for lv in levels])
        ec.codes_set_array(h, "dewpointTemperature",
                           [lv["dewpoint_c"] + 273.15 for lv in levels])
        ec.codes_set(h, "pack", 1)
        raw = ec.codes_get_message(h)
    finally:
        ec.codes_release(h)
    (doc,) = bufr_format.read_bufr_documents(raw)
    assert [lv["pressure_hpa"] for lv in doc["levels"]] == [lv["pressure_hpa"] for lv in levels]
    assert [lv["temperature_c"] for lv in doc["levels"]] == \
        pytest.approx([lv["temperature_c"] for lv in levels], abs=0.01)
    assert str(sequence) in doc["source"]
