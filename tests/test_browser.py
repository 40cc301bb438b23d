"""The forecaster page in a real browser: Debian's headless Chromium driven by Playwright.

Loads a demo sounding with the keyboard only and checks that the type, the probability bars,
the per-method table and the diagram image appear."""

from __future__ import annotations

import json
import os
import shutil

import pytest
from api_support import document_to_csv, freezing_rain_document, snow_document
from test_server import start_server, stop_server

from ptype.engine.methods import METHOD_NAMES

CHROMIUM = "/usr/bin/chromium"
CHROMIUM_ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
                 "--disable-component-update", "--disable-sync", "--no-first-run"]

pytestmark = [
    pytest.mark.browser,
    pytest.mark.skipif(not os.path.exists(CHROMIUM) and not os.environ.get("CI"),
                       reason="Debian chromium is not installed (make system-deps)"),
]


@pytest.fixture(scope="module")
def server(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("browser")
    demo = tmp / "demo"
    (demo / "json").mkdir(parents=True)
    (demo / "json" / "gullmere_0600.json").write_text(json.dumps(freezing_rain_document()))
    os.environ["PTYPE_DEMO_DIR"] = str(demo)
    try:
        proc, url = start_server(tmp, "--workers", "2")
    finally:
        del os.environ["PTYPE_DEMO_DIR"]
    yield url
    stop_server(proc)


@pytest.fixture(scope="module")
def browser():
    assert shutil.which(CHROMIUM) or os.path.exists(CHROMIUM), "chromium missing"
    from playwright.sync_api import sync_playwright
    with sync_playwright() as pw:
        browser = pw.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_ARGS, headless=True)
        yield browser
        browser.close()


@pytest.fixture
def new_page(browser):
    """``new_page(**options)``: a page in its own context, closed after the test (so the
    server has no open connection left when it stops)."""
    contexts = []

    def make(**options):
        contexts.append(browser.new_context(**options))
        return contexts[-1].new_page()
    yield make
    for context in contexts:
        context.close()


def test_page_loads_demo_and_shows_type_and_diagram(server, new_page, tmp_path):
    page = new_page(viewport={"width": 1280, "height": 1800})
    console_errors = []
    page.on("console", lambda msg: console_errors.append(msg.text) if msg.type == "error" else None)
    external = []
    page.on("request", lambda req: external.append(req.url)
            if not req.url.startswith((server, "blob:", "data:")) else None)
    page.goto(server + "/")
    page.wait_for_selector("#demo-select option[value='gullmere_0600.json']", state="attached")

    # Keyboard only: Tab from the top reaches the skip link, the navigation, then the picker.
    page.keyboard.press("Tab")
    assert page.evaluate("document.activeElement.className") == "skip"
    for _ in range(20):
        page.keyboard.press("Tab")
        if page.evaluate("document.activeElement.id") == "demo-select":
            break
    assert page.evaluate("document.activeElement.id") == "demo-select"
    page.select_option("#demo-select", "gullmere_0600.json")
    page.keyboard.press("Tab")
    assert page.evaluate("document.activeElement.id") == "demo-load"
    page.keyboard.press("Enter")

    # The user's run ends with the focus on the result heading (the page's own opening run
    # never moves the focus).
    page.wait_for_function("() => document.activeElement.id === 'result-heading' &&"
                           " document.getElementById('verdict-code').textContent.length > 0",
                           timeout=30000)
    # Freezing rain: Bourgouin (2000) warm nose over a shallow refreezing layer, cold ground.
    assert page.inner_text("#verdict-code") == "FZRA"
    assert "Freezing rain" in page.inner_text("#verdict-label")
    assert "freezes on contact" in page.inner_text("#verdict-meaning")
    assert page.locator("#bars li").count() >= 1
    # The particle model's mass at the ground: four parts in words (the second cue), adding to
    # 100 % within rounding; a freezing-rain profile brings liquid down (Bourgouin 2000: the
    # warm nose melts the snow completely, the shallow cold layer refreezes almost none).
    parts = page.locator("#fractions-legend li").all_inner_texts()
    assert [t.split(":")[0] for t in parts] == ["snow", "melting snow", "liquid", "refrozen ice"]
    shares = {t.split(":")[0]: int(t.split(":")[1].strip(" %")) for t in parts}
    assert abs(sum(shares.values()) - 100) <= 2 and shares["liquid"] >= 90
    assert "liquid" in page.get_attribute("#fractions", "aria-label")
    assert page.locator("#methods-body tr").count() == len(METHOD_NAMES)
    assert "Guidance only" in page.inner_text("#caution")

    page.wait_for_function("() => { const i = document.getElementById('diagram');"
                           " return !i.hidden && i.complete && i.naturalWidth > 300; }",
                           timeout=30000)
    assert "freezing rain" in page.get_attribute("#diagram", "alt")
    # The focus moved to the result heading so keyboard and screen-reader users land on it.
    assert page.evaluate("document.activeElement.id") == "result-heading"
    page.screenshot(path=str(tmp_path / "page.png"), full_page=True)
    # On a phone-sized screen nothing spills sideways (WCAG 2.1 SC 1.4.10 Reflow).
    page.set_viewport_size({"width": 400, "height": 900})
    assert page.evaluate("() => document.documentElement.scrollWidth") <= 401
    assert external == []  # no asset from anywhere but the service itself
    assert console_errors == []  # nothing broke, and nothing was blocked by the page's CSP


def test_page_shows_error_for_bad_paste(server, new_page):
    page = new_page()
    page.goto(server + "/")
    page.fill("#profile-text", '{"levels": [{"pressure_hpa": 1000, "temperature_c": "cold"}]}')
    page.click("#diagnose-button")
    page.wait_for_selector("#error:not([hidden])", timeout=15000)
    assert "temperature_c" in page.inner_text("#error")


def test_page_upload_csv_file(server, new_page, tmp_path):
    path = tmp_path / "hobbs.csv"
    path.write_text(document_to_csv(snow_document()))
    page = new_page()
    page.goto(server + "/")
    page.set_input_files("#profile-file", str(path))
    page.wait_for_function("() => document.getElementById('profile-text').value.includes("
                           "'pressure_hpa')")
    page.click("#diagnose-button")
    page.wait_for_function("() => document.getElementById('verdict-code').textContent.length > 0",
                           timeout=30000)
    # Snow: no layer above 0 degC anywhere (common practice; Bourgouin 2000).
    assert page.inner_text("#verdict-code") == "SN"


def test_page_upload_bufr_file(server, browser, tmp_path):
    from datetime import datetime

    pytest.importorskip("eccodes")
    from bufr_support import encode_temp_bufr
    doc = snow_document()
    path = tmp_path / "ascent.bufr"
    path.write_bytes(encode_temp_bufr([{
        "station": "99914", "launch": datetime(2031, 1, 14, 6), "latitude": 47.3,
        "longitude": -33.4, "elevation_m": 100.0, "levels": doc["levels"]}]))
    page = browser.new_page()
    page.goto(server + "/")
    page.set_input_files("#profile-file", str(path))
    page.wait_for_function("() => document.getElementById('profile-text').value.includes("
                           "'WMO BUFR')")
    page.click("#diagnose-button")
    page.wait_for_function("() => document.getElementById('verdict-code').textContent.length > 0",
                           timeout=30000)
    # Snow: no layer above 0 degC anywhere (common practice; Bourgouin 2000).
    assert page.inner_text("#verdict-code") == "SN"
