"""Tests of the sites, profiles, observations, timeline and alerts endpoints."""

import os

import pytest
from ptype.api.plumbing import store_for
from series_helpers import storm_docs

from ptype.clock import parse_time
from ptype.store import keys

NOW = "2026-01-27T00:00:00Z"


@pytest.fixture
def app(make_app):
    return make_app(PTYPE_NOW=NOW, PTYPE_ALERT_MEMBERS=5)


def _key(app, name="ops"):
    with store_for(app).write() as s:
        return keys.create_key(s, name, parse_time(NOW))


@pytest.fixture
def auth(app):
    key, _ = _key(app)
    return {"Authorization": f"Bearer {key}"}


SITE = {"name": "Test Hill", "latitude": 47.1, "longitude": -33.2, "elevation_m": 100.0}


def _site(client, auth, **extra):
    r = client.post("/v1/sites", json={**SITE, **extra}, headers=auth)
    assert r.status_code == 201, r.json
    return r.json["id"]


def test_post_site_without_key_401(client):
    r = client.post("/v1/sites", json=SITE)
    assert r.status_code == 401 and r.json["error"]["field"] == "Authorization"


def test_post_site_wrong_or_revoked_key(app, client):
    key, info = _key(app)
    assert client.post("/v1/sites", json=SITE,
                       headers={"Authorization": "Bearer ptk_abc_def"}).status_code == 401
    assert client.post("/v1/sites", json=SITE,
                       headers={"Authorization": f"Token {key}"}).status_code == 401
    assert client.post("/v1/sites", json=SITE,
                       headers={"Authorization": f"Bearer {key}"}).status_code == 201
    with store_for(app).write() as s:
        keys.revoke_key(s, info.key_id, parse_time(NOW))
    # Revocation applies at once, even to a key this process has already verified.
    assert client.post("/v1/sites", json=SITE,
                       headers={"Authorization": f"Bearer {key}"}).status_code == 403


def test_read_endpoints_open(client, auth):
    site = _site(client, auth)
    assert client.get("/v1/sites").status_code == 200
    assert client.get(f"/v1/sites/{site}").status_code == 200
    assert client.get("/v1/alerts").status_code == 200
    assert client.get("/healthz").status_code == 200


def test_post_site_returns_id_and_lists(client, auth):
    site = _site(client, auth, thresholds={"freezing_probability": 0.5}, code="th-1")
    r = client.get(f"/v1/sites/{site}")
    assert r.json["name"] == "Test Hill" and r.json["thresholds"] == {"freezing_probability": 0.5}
    assert [s["id"] for s in client.get("/v1/sites").json["sites"]] == [site]
    assert client.post("/v1/sites", json={**SITE, "code": "th-1"}, headers=auth).status_code == 409


@pytest.mark.parametrize("body,field", [
    ({"latitude": 1, "longitude": 1}, "name"),
    ({**SITE, "latitude": 95}, "latitude"),
    ({**SITE, "colour": "red"}, "colour"),
    ({**SITE, "thresholds": {"freezing_probability": 2}}, "thresholds.freezing_probability"),
])
def test_post_site_invalid_names_field(client, auth, body, field):
    r = client.post("/v1/sites", json=body, headers=auth)
    assert r.status_code == 422 and r.json["error"]["field"] == field


def test_get_site_404(client):
    r = client.get("/v1/sites/999")
    assert r.status_code == 404 and "999" in r.json["error"]["message"]


def test_post_profiles_all_or_nothing(client, auth):
    site = _site(client, auth)
    docs = storm_docs()
    bad = dict(docs[1])
    bad["levels"] = [dict(lv) for lv in docs[1]["levels"]]
    bad["levels"][2]["temperature_c"] = 99.0
    r = client.post(f"/v1/sites/{site}/profiles",
                    json={"profiles": [docs[0], bad], "source": "model"}, headers=auth)
    assert r.status_code == 422
    assert r.json["error"]["field"] == "profiles[1].levels[2].temperature_c"
    assert "profiles[1]" in r.json["error"]["message"]
    assert client.get(f"/v1/sites/{site}").json["latest_issue"] is None  # nothing stored


def test_post_profiles_requires_valid_time(client, auth):
    site = _site(client, auth)
    doc = dict(storm_docs()[0])
    del doc["valid_time"]
    r = client.post(f"/v1/sites/{site}/profiles", json={"profiles": [doc]}, headers=auth)
    assert r.status_code == 422 and r.json["error"]["field"] == "profiles[0].valid_time"


def test_post_profiles_repost_replaces(client, auth):
    site = _site(client, auth)
    body = {"profiles": storm_docs(), "source": "model", "issued_time": NOW}
    r = client.post(f"/v1/sites/{site}/profiles", json=body, headers=auth)
    assert r.status_code == 201 and r.json["stored"] == 4 and r.json["replaced"] == 0
    r = client.post(f"/v1/sites/{site}/profiles", json=body, headers=auth)
    assert r.json["replaced"] == 4
    info = client.get(f"/v1/sites/{site}").json["latest_issue"]
    assert info["profiles"] == 4 and info["source"] == "model"


def test_post_observations_single_and_batch(client, auth):
    site = _site(client, auth)
    ob = {"time": "2026-01-26T23:50:00Z", "air_temperature_c": -2.5, "dewpoint_c": -3.0,
          "road_surface_temperature_c": -1.0, "precipitation_rate_mm_h": 0.0,
          "wind_speed_m_s": 4.0, "present_weather": "-SN"}
    assert client.post(f"/v1/sites/{site}/observations", json=ob, headers=auth).status_code == 201
    r = client.post(f"/v1/sites/{site}/observations",
                    json={"observations": [ob, {**ob, "time": "2026-01-26T23:55:00Z"}]},
                    headers=auth)
    assert r.status_code == 201 and r.json["stored"] == 2
    latest = client.get(f"/v1/sites/{site}").json["latest_observation"]
    assert latest["time"] == "2026-01-26T23:55:00Z"
    r = client.post(f"/v1/sites/{site}/observations",
                    json={**ob, "precipitation_rate_mm_h": -1}, headers=auth)
    assert r.status_code == 422 and r.json["error"]["field"] == "precipitation_rate_mm_h"


def test_timeline_endpoint_shape(client, auth):
    site = _site(client, auth)
    client.post(f"/v1/sites/{site}/profiles", json={"profiles": storm_docs(), "issued_time": NOW},
                headers=auth)
    r = client.get(f"/v1/sites/{site}/timeline?hours=6&step=30min&members=5")
    assert r.status_code == 200
    body = r.json
    assert len(body["steps"]) == 13 and body["caution"]
    step = body["steps"][0]
    assert {"valid_time", "ptype", "probabilities", "hazards"} <= set(step)
    assert body["transitions"] and {"time", "from", "to"} == set(body["transitions"][0])
    assert "ice_accretion_mm" in body["totals"]
    bad = client.get(f"/v1/sites/{site}/timeline?step=banana")
    assert bad.status_code == 400 and bad.json["error"]["field"] == "step"


def test_ingest_raises_alerts_with_cap_and_atom(client, auth):
    site = _site(client, auth)
    client.post(f"/v1/sites/{site}/profiles", json={"profiles": storm_docs(), "issued_time": NOW},
                headers=auth)
    alerts = client.get("/v1/alerts").json["alerts"]
    events = {a["event"] for a in alerts}
    assert "freezing_precipitation" in events
    a = next(a for a in alerts if a["event"] == "freezing_precipitation")
    assert a["status"] == "active" and a["msg_type"] == "Alert" and a["references"] == []
    assert a["site"]["id"] == site
    cap = client.get(f"/v1/alerts/{a['id']}.cap")
    assert cap.status_code == 200 and cap.mimetype == "application/cap+xml"
    assert b"urn:oasis:names:tc:emergency:cap:1.2" in cap.data
    feed = client.get("/v1/alerts.atom")
    assert feed.mimetype == "application/atom+xml" and a["id"].encode() in feed.data
    assert client.get("/v1/alerts/nope.cap").status_code == 404


def test_sites_page_lists_sites_and_links_home(client, auth):
    _site(client, auth)
    r = client.get("/sites")
    assert r.status_code == 200
    html = r.get_data(as_text=True)
    assert "Test Hill" in html and 'href="/"' in html and "Guidance only" in html


def test_sites_page_escapes_what_clients_wrote(client, auth):
    # OWASP Cross Site Scripting Prevention Cheat Sheet, output encoding for HTML contexts:
    # & < > " ' of untrusted data are written as character references.
    name = "<script>alert(1)</script> & 'Ridge' \"Road\""
    _site(client, auth, name=name)
    html = client.get("/sites").get_data(as_text=True)
    assert "<script>" not in html
    assert "&lt;script&gt;alert(1)&lt;/script&gt; &amp; &#39;Ridge&#39; &#34;Road&#34;" in html


def test_sites_page_colours_come_from_the_one_palette(client, auth):
    # The page links the stylesheet generated from ptype/style/palette.py; every type the
    # legend names has its class there (contrast and colour-vision checks: test_style.py).
    from ptype.style import TYPE_STYLES
    _site(client, auth)
    html = client.get("/sites").get_data(as_text=True)
    assert 'href="/style/palette.css"' in html
    css = client.get("/style/palette.css").get_data(as_text=True)
    for s in TYPE_STYLES.values():
        assert f".ty-{s.code} {{" in css and s.colour in css
        assert f'class="sw ty-{s.code}">{s.code}</span> {s.label}' in html


def test_sites_page_strict_csp_no_inline_styles(client, auth):
    _site(client, auth)
    r = client.get("/sites")
    assert "default-src 'self'" in r.headers["Content-Security-Policy"]
    assert r.headers["X-Content-Type-Options"] == "nosniff"
    html = r.get_data(as_text=True)
    assert "style=" not in html and "<script" not in html


CHROMIUM = "/usr/bin/chromium"


@pytest.mark.browser
@pytest.mark.skipif(not os.path.exists(CHROMIUM) and not os.environ.get("CI"),
                    reason="Debian chromium is not installed (make system-deps)")
def test_sites_page_in_browser_no_console_errors(app, client, auth):
    # Debian's headless Chromium through Playwright, against the app on 127.0.0.1.
    import threading

    from playwright.sync_api import sync_playwright
    from werkzeug.serving import make_server
    site = _site(client, auth)
    client.post(f"/v1/sites/{site}/profiles", json={"profiles": storm_docs(), "issued_time": NOW},
                headers=auth)
    server = make_server("127.0.0.1", 0, app, threaded=True)
    url = f"http://127.0.0.1:{server.server_port}"
    thread = threading.Thread(target=server.serve_forever, daemon=True)
    thread.start()
    try:
        with sync_playwright() as pw:
            browser = pw.chromium.launch(executable_path=CHROMIUM, headless=True, args=[
                "--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
                "--disable-component-update", "--disable-sync", "--no-first-run"])
            page = browser.new_page(viewport={"width": 1100, "height": 900})
            errors = []
            page.on("console", lambda m: errors.append(m.text) if m.type == "error" else None)
            page.goto(url + "/sites")
            cells = page.locator("ol.strip li")
            assert cells.count() == 7  # 6 h of profiles at 1-hour steps
            # Colour comes from the stylesheet (allowed by the CSP), text label alongside.
            bg = cells.nth(0).evaluate("e => getComputedStyle(e).backgroundColor")
            assert bg == "rgb(180, 203, 214)"  # .ty-SN of ptype/style/palette.py
            assert cells.nth(0).inner_text().split()[1] == "SN"
            assert page.locator("ul.alerts li").count() >= 1
            assert page.locator("nav a[href='/']").count() == 1
            assert not errors, errors
            browser.close()
    finally:
        server.shutdown()


def test_time_height_view_renders_for_every_demo_site(make_app):
    # The demo (invented region) loaded as `ptype serve --demo` loads it; every site's view
    # is a PNG, and an SVG keeps its caption text as text.
    app = make_app(PTYPE_DEMO=True)
    client = app.test_client()
    sites = client.get("/v1/sites").json["sites"]
    assert len(sites) >= 6
    for site in sites:
        r = client.get(f"/v1/sites/{site['id']}/timeline.png?hours=12")
        assert r.status_code == 200 and r.data.startswith(b"\x89PNG"), site["name"]
    svg = client.get(f"/v1/sites/{sites[0]['id']}/timeline.svg?hours=12")
    assert svg.mimetype == "image/svg+xml" and b"Guidance only" in svg.data
    assert client.get(f"/v1/sites/{sites[0]['id']}/timeline.gif").status_code == 400
    assert client.get("/v1/sites/9999/timeline.png").status_code == 404
    bad = client.get(f"/v1/sites/{sites[0]['id']}/timeline.png?hours=lots")
    assert bad.status_code == 400 and bad.json["error"]["field"] == "hours"


def test_sites_page_cells_match_the_linked_json(make_app):
    app = make_app(PTYPE_DEMO=True)
    client = app.test_client()
    html = client.get("/sites?hours=24").get_data(as_text=True)
    import re
    link = re.search(r'href="(/v1/sites/1/timeline\?[^"]+)"', html).group(1).replace("&amp;", "&")
    steps = client.get(link).json["steps"]
    first = html.split("<ol class=\"strip\"", 2)[1].split("</ol>")[0]
    assert first.count("<li ") == len(steps) == 24
    assert ">dry<" not in html  # one vocabulary: the code NONE, labelled in the legend


def test_errors_are_pages_for_browsers_and_json_for_clients(client):
    page = client.get("/missing", headers={"Accept": "text/html,application/xhtml+xml,*/*;q=0.8"})
    assert page.status_code == 404 and page.mimetype == "text/html"
    assert "Guidance only" in page.get_data(as_text=True)
    assert client.get("/missing").json["error"]["code"] == "not_found"
    assert client.get("/missing", headers={"Accept": "application/json"}).mimetype == \
        "application/json"
    feed = client.get("/v1/alerts.atom", headers={"Accept": "text/html"})
    assert feed.mimetype == "text/html" and "Alert feed" in feed.get_data(as_text=True)
    assert client.get("/v1/alerts.atom").mimetype == "application/atom+xml"


def test_sites_page_says_when_the_forecast_is_shorter_than_the_horizon(client, auth):
    site = _site(client, auth)
    client.post(f"/v1/sites/{site}/profiles", json={"profiles": storm_docs(), "issued_time": NOW},
                headers=auth)
    html = client.get("/sites?hours=24").get_data(as_text=True)
    # 6 h of profiles at 1-hour steps: 7 cells, and the page says so.
    assert "The stored forecast ends at 06:00 UTC: 7 of the 24 hours are shown." in html
