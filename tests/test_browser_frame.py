"""The pages as a person meets them, in Debian's headless Chromium driven by Playwright,
against ``ptype serve --demo`` (the invented demo with its fixed clock).

One frame on every page (pixels compared with committed references), text contrast of
what is rendered (WCAG 2.2 SC 1.4.3), 400 px layouts without sideways scrolling (SC 1.4.10),
keyboard-only flows, the forecaster page's first load and runs, /sites' cells against its
JSON link, /docs without overflow or broken names, error pages and the feed for browsers.

Set ``PTYPE_UPDATE_SCREENS=1`` to rewrite the reference screenshots after a deliberate
change of the frame (then look at them before committing)."""

from __future__ import annotations

import io
import json
import os
from pathlib import Path

import numpy as np
import pytest
import requests
from test_browser import CHROMIUM_ARGS, browser  # noqa: F401 - the shared browser fixture
from test_server import start_server, stop_server

CHROMIUM = "/usr/bin/chromium"
SCREENS = Path(__file__).parent / "data" / "screens"
pytestmark = [
    pytest.mark.browser,
    pytest.mark.skipif(not os.path.exists(CHROMIUM) and not os.environ.get("CI"),
                       reason="Debian chromium is not installed (make system-deps)"),
]

#: Largest share of pixels allowed to differ (by more than 40 of 255 in a channel) from a
#: reference screenshot: font hinting moves a few edge pixels between runs (our choice).
PIXEL_TOLERANCE = 0.01
#: WCAG 2.2 SC 1.4.3 (AA): contrast of text against its background.
MIN_TEXT_CONTRAST = 4.5

# Text contrast of every visible text element: its colour against the first ancestor
# background that is not transparent (WCAG 2.2 relative luminance and contrast ratio).
CONTRAST_JS = """() => {
  const parse = (c) => (c.match(/[\\d.]+/g) || []).map(Number);
  const lin = (v) => { v /= 255; return v <= 0.04045 ? v / 12.92 : ((v + 0.055) / 1.055) ** 2.4; };
  const lum = ([r, g, b]) => 0.2126 * lin(r) + 0.7152 * lin(g) + 0.0722 * lin(b);
  const bgOf = (el) => {
    for (let e = el; e; e = e.parentElement) {
      const c = parse(getComputedStyle(e).backgroundColor);
      if (c.length === 3 || (c.length === 4 && c[3] > 0.5)) return c.slice(0, 3);
    }
    return [255, 255, 255];
  };
  const out = [];
  for (const el of document.querySelectorAll("body *")) {
    const own = [...el.childNodes].some(n => n.nodeType === 3 && n.textContent.trim());
    if (!own) continue;
    const r = el.getBoundingClientRect();
    const style = getComputedStyle(el);
    if (r.width < 2 || r.height < 2 || style.visibility === "hidden" || el.closest(".sr")) continue;
    const fg = parse(style.color).slice(0, 3), bg = bgOf(el);
    const [hi, lo] = [lum(fg), lum(bg)].sort((a, b) => b - a);
    out.push({text: el.textContent.trim().slice(0, 40), tag: el.tagName,
              ratio: (hi + 0.05) / (lo + 0.05)});
  }
  return out;
}"""


@pytest.fixture(scope="module")
def server(tmp_path_factory):
    proc, url = start_server(tmp_path_factory.mktemp("frame"), "--workers", "2", "--demo")
    yield url
    stop_server(proc)


@pytest.fixture
def page(browser):  # noqa: F811 - the shared browser fixture
    context = browser.new_context(viewport={"width": 1366, "height": 900})
    page = context.new_page()
    page.console_errors = []
    page.on("console", lambda m: page.console_errors.append(m.text) if m.type == "error" else None)
    yield page
    context.close()


def _compare_screenshot(png: bytes, name: str, update: bool = True) -> float:
    """Share of pixels that differ from the committed reference ``name``."""
    from PIL import Image
    path = SCREENS / name
    if update and os.environ.get("PTYPE_UPDATE_SCREENS"):
        path.write_bytes(png)
    assert path.is_file(), f"no reference screenshot {path}; run with PTYPE_UPDATE_SCREENS=1"
    got = np.asarray(Image.open(io.BytesIO(png)).convert("RGB"), dtype=int)
    want = np.asarray(Image.open(path).convert("RGB"), dtype=int)
    assert got.shape == want.shape, (got.shape, want.shape)
    return float(np.mean(np.abs(got - want).max(axis=-1) > 40))


def _no_sideways_scroll(page) -> None:
    assert page.evaluate("document.documentElement.scrollWidth") <= \
        page.evaluate("window.innerWidth"), page.url


def _low_contrast(page) -> list:
    return [e for e in page.evaluate(CONTRAST_JS) if e["ratio"] < MIN_TEXT_CONTRAST]


def test_one_frame_on_every_page_matches_reference(server, page):
    # The forecaster page's opening diagnosis is not needed for its header: no demo here.
    page.route("**/v1/demo", lambda route: route.fulfill(
        status=200, content_type="application/json", body='{"soundings": []}'))
    headers = {}
    for path in ("/", "/sites", "/docs", "/no-such-page"):
        page.goto(server + path)
        page.wait_for_load_state("domcontentloaded")
        # The same header, navigation, caution and clock, in the same place on every page.
        assert page.locator("header.masthead nav a").count() == 4
        assert "Guidance only" in page.inner_text(".band .caution-band")
        assert "2026-01-27 00:00" in page.inner_text(".band .clock")
        page.evaluate("document.querySelectorAll('nav a[aria-current]').forEach("
                      "a => a.removeAttribute('aria-current'))")
        headers[path] = page.screenshot(clip={"x": 0, "y": 0, "width": 1366, "height": 120})
    shares = [_compare_screenshot(png, "frame-header.png") for png in headers.values()]
    assert max(shares) <= PIXEL_TOLERANCE, shares
    # A tolerance that lets a different screen through would be no test: /sites' body differs.
    page.goto(server + "/sites")
    other = page.screenshot(clip={"x": 0, "y": 120, "width": 1366, "height": 120})
    with pytest.raises(AssertionError):
        assert _compare_screenshot(other, "frame-header.png", update=False) <= PIXEL_TOLERANCE


def test_sites_strip_matches_reference_and_its_json(server, page):
    page.goto(server + "/sites")
    first = page.locator("section.site").first
    strip = first.locator("ol.strip")
    cells = strip.locator("li")
    assert cells.count() == 24  # "Next 24 hours": exactly 24 hourly cells
    assert _compare_screenshot(strip.screenshot(), "sites-strip.png") <= PIXEL_TOLERANCE
    # The link returns what the page shows: the same steps, the same types, the same totals.
    href = first.locator("a", has_text="timeline JSON").get_attribute("href")
    body = requests.get(server + href, timeout=30).json()
    codes = [c.split()[1] for c in cells.all_inner_texts()]
    assert [s["ptype"] for s in body["steps"]] == codes
    totals = first.locator(".totals").inner_text()
    assert f"snow {body['totals']['snow_cm']:.0f} cm" in totals
    # One vocabulary: every code on a strip is a code of the legend, shown with its label.
    legend = dict(s.split(" ", 1) for s in page.locator(".legend li").all_inner_texts())
    assert set(codes) <= set(legend) and legend["NONE"] == "no precipitation"
    # Every hour with ice pellets carries the pellets badge.
    for i in range(cells.count()):
        code = codes[i]
        badges = cells.nth(i).locator(".hz-pellets").count()
        assert badges == (1 if code in ("PL", "RAPL", "FZRAPL") else 0), (i, code)


def test_sites_page_every_time_height_view_loads(server, page):
    page.goto(server + "/sites")
    images = page.locator(".timeheight img")
    assert images.count() == page.locator("section.site").count() >= 6
    for i in range(images.count()):
        images.nth(i).scroll_into_view_if_needed()
    page.wait_for_function("() => [...document.querySelectorAll('.timeheight img')]"
                           ".every(i => i.complete && i.naturalWidth > 300)", timeout=60000)
    assert page.console_errors == []


@pytest.mark.parametrize("path", ["/sites", "/docs", "/no-such-page", "/v1/alerts.atom"])
def test_text_contrast_and_400px_layout(server, page, path):
    # The forecaster page, with a result on it, is measured in the next test.
    page.goto(server + path)
    page.wait_for_load_state("networkidle")
    low = _low_contrast(page)
    assert not low, low[:5]
    page.set_viewport_size({"width": 400, "height": 800})
    _no_sideways_scroll(page)
    assert not _low_contrast(page)


def test_forecaster_opens_on_latest_demo_and_stacks_at_400px(server, browser):  # noqa: F811
    context = browser.new_context(viewport={"width": 400, "height": 900})
    page = context.new_page()
    page.goto(server + "/")
    page.wait_for_function("() => document.getElementById('verdict-code').textContent",
                           timeout=30000)
    assert page.locator("#empty-state").is_hidden()
    latest = max(requests.get(server + "/v1/demo", timeout=10).json()["soundings"],
                 key=lambda s: s.get("valid_time") or "")
    assert page.input_value("#demo-select") == latest["name"]
    page.wait_for_function("() => { const i = document.getElementById('diagram');"
                           " return !i.hidden && i.complete && i.naturalWidth > 300; }",
                           timeout=30000)
    low = _low_contrast(page)  # the verdict in its type's colours, the bars, the table
    assert not low, low[:5]
    # Stacked: the result panel sits under the input panel, both within the screen.
    inp = page.locator(".input-panel").bounding_box()
    res = page.locator(".result-panel").bounding_box()
    assert res["y"] >= inp["y"] + inp["height"] and res["x"] + res["width"] <= 400
    # The diagram keeps a readable size (its 10-point labels at about 11 px) and scrolls
    # sideways inside its card; so does the method table, instead of widening the page.
    assert page.locator("#diagram").bounding_box()["width"] >= 540
    assert page.locator(".diagram-scroll").evaluate("e => e.scrollWidth > e.clientWidth")
    wrap = page.locator(".result-panel .table-wrap")
    assert wrap.evaluate("e => e.scrollWidth > e.clientWidth")
    _no_sideways_scroll(page)
    context.close()


def test_opening_demo_never_replaces_what_the_user_typed(server, browser):  # noqa: F811
    context = browser.new_context()
    page = context.new_page()
    held = []
    page.route("**/v1/demo/*", lambda route: held.append(route))  # hold the demo download
    page.goto(server + "/")
    page.wait_for_function("() => document.querySelectorAll('#demo-select option').length > 1")
    page.wait_for_timeout(300)
    assert held, "the opening demo load did not start"
    page.fill("#profile-text", "my own sounding")
    for route in held:
        route.continue_()
    page.wait_for_timeout(1500)
    assert page.input_value("#profile-text") == "my own sounding"
    assert page.inner_text("#verdict-code") == ""
    context.close()


def test_forecaster_without_demo_shows_the_three_ways_in(server, page):
    # No demo installed (the list answers empty): the right half explains what to do.
    page.route("**/v1/demo", lambda route: route.fulfill(
        status=200, content_type="application/json", body='{"soundings": []}'))
    page.goto(server + "/")
    page.wait_for_function("() => document.getElementById('demo-select').options[0]"
                           ".textContent.includes('No demo')")
    assert page.locator("#empty-state").is_visible()
    assert page.locator("#empty-state li").count() == 3
    assert page.locator("#result").is_hidden()


def test_new_run_clears_previous_result_and_options_are_remembered(server, page):
    page.goto(server + "/")
    page.wait_for_function("() => document.getElementById('verdict-code').textContent",
                           timeout=30000)
    page.wait_for_selector("#diagnose-button:not([disabled])")  # the opening run is over
    page.click("details.options summary")
    page.fill("#opt-members", "7")
    page.fill("#profile-text", '{"levels": [{"pressure_hpa": 1000, "temperature_c": "cold"}]}')
    page.keyboard.press("Tab")
    page.focus("#diagnose-button")
    page.keyboard.press("Enter")
    page.wait_for_selector("#error:not([hidden])", timeout=15000)
    assert "temperature_c" in page.inner_text("#error")
    assert page.locator("#result").is_hidden()  # the old answer is gone, not under the error
    page.reload()
    assert page.input_value("#opt-members") == "7"


def test_sites_keyboard_only_reaches_json_link(server, page):
    page.goto(server + "/sites")
    page.keyboard.press("Tab")
    assert page.evaluate("document.activeElement.className") == "skip"
    page.keyboard.press("Enter")
    assert page.evaluate("document.activeElement.id") == "main"
    for _ in range(10):
        page.keyboard.press("Tab")
        if page.evaluate("document.activeElement.textContent") == "timeline JSON":
            break
    assert page.evaluate("document.activeElement.textContent") == "timeline JSON"
    with page.expect_navigation():
        page.keyboard.press("Enter")
    assert json.loads(page.inner_text("body"))["steps"]


@pytest.mark.parametrize("width", [1366, 400])
def test_docs_no_overflow_and_whole_names(server, browser, width):  # noqa: F811
    context = browser.new_context(viewport={"width": width, "height": 900})
    page = context.new_page()
    page.goto(server + "/docs")
    _no_sideways_scroll(page)
    # A parameter or field name is never broken inside: one line box each.
    broken = page.evaluate("() => [...document.querySelectorAll('.docs td:first-child code')]"
                           ".filter(c => c.getClientRects().length > 1).map(c => c.textContent)")
    assert broken == []
    context.close()


def test_error_page_and_feed_for_browsers(server, page):
    response = page.goto(server + "/no-such-page")
    assert response.status == 404
    assert page.locator("h1").inner_text().startswith("404")
    assert page.locator("header.masthead").count() == 1
    # API clients still get JSON.
    assert requests.get(server + "/no-such-page", timeout=10).json()["error"]["code"] == "not_found"
    page.goto(server + "/v1/alerts.atom")
    assert page.locator("h1").inner_text() == "Alert feed"
    active = requests.get(server + "/v1/alerts", timeout=10).json()["alerts"]
    assert page.locator("article.feed-entry").count() == len(active)
    raw = requests.get(server + "/v1/alerts.atom", timeout=10)
    assert raw.headers["Content-Type"].startswith("application/atom+xml")
