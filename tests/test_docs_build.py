"""The reference manual builds with Sphinx, warnings as errors, and says what the code does.

Outside references: Sphinx itself (``-W``: any warning of autodoc, numpydoc, MyST or a
broken cross-reference fails the build), the HTML it writes (read back with the standard
library's parser), and the service's OpenAPI document, which the HTTP reference must cover
operation by operation.  One build per run (marker ``package``; about 20 s).
"""

from __future__ import annotations

import html.parser
import json
import subprocess
import sys
from pathlib import Path

import pytest

import ptype

pytestmark = [pytest.mark.package, pytest.mark.timeout(600)]

ROOT = Path(__file__).resolve().parents[1]
DOCS = ROOT / "docs"
#: The packages whose public docstrings the API reference must hold.
DOCUMENTED = ("ptype.thermo", "ptype.engine", "ptype.grid", "ptype.roads", "ptype.verify",
              "ptype.client")


class _Text(html.parser.HTMLParser):
    """The visible text of a page (scripts and styles left out)."""

    def __init__(self) -> None:
        super().__init__()
        self.parts: list[str] = []
        self._skip = 0

    def handle_starttag(self, tag, attrs):
        self._skip += tag in ("script", "style")

    def handle_endtag(self, tag):
        self._skip -= tag in ("script", "style")

    def handle_data(self, data):
        if not self._skip:
            self.parts.append(data)


def page_text(path: Path) -> str:
    parser = _Text()
    parser.feed(path.read_text(encoding="utf-8"))
    text = "".join(parser.parts).replace("\u2019", "'").replace("\u2018", "'")
    return " ".join(text.split())  # Sphinx writes typographic apostrophes in prose


@pytest.fixture(scope="module")
def built(tmp_path_factory) -> Path:
    out = tmp_path_factory.mktemp("manual")
    run = subprocess.run([sys.executable, "-m", "sphinx", "-W", "--keep-going", "-E", "-q",
                          "-b", "html", "-d", str(out / "doctrees"), str(DOCS),
                          str(out / "html")], capture_output=True, text=True, timeout=500,
                         check=False)
    assert run.returncode == 0, f"sphinx failed:\n{run.stdout[-4000:]}\n{run.stderr[-4000:]}"
    assert "WARNING" not in run.stderr and "ERROR" not in run.stderr, run.stderr[-4000:]
    return out / "html"


def test_every_page_carries_the_caution(built):
    pages = [p for p in built.rglob("*.html") if p.name not in ("genindex.html", "search.html")]
    assert len(pages) > 20
    missing = [str(p.relative_to(built)) for p in pages if ptype.CAUTION not in page_text(p)]
    assert not missing, f"pages without the caution: {missing}"


def test_api_reference_documents_the_public_packages(built):
    generated = built / "reference" / "generated"
    for name in DOCUMENTED:
        page = generated / f"{name}.html"
        assert page.is_file(), f"no reference page for {name}"
    client = page_text(generated / "ptype.client.html")
    for member in ("Client", "ApiError", "diagnose_batch", "upload_profiles", "timeline"):
        assert member in client
    # numpydoc turned the sections into tables of parameters, not raw "-----" text.
    assert "Parameters" in client and "-----" not in client
    top = page_text(built / "reference" / "ptype.html")
    for name in ptype.__all__:
        assert f"ptype.{name}" in top or name in ("Diagnosis",), name
    assert "ptype.engine.diagnosis.Diagnosis" in top


def test_http_reference_covers_every_operation(built):
    from ptype.api import create_app
    from ptype.api.openapi import build_openapi, documented_routes
    from ptype.api.plumbing import EXTENSION
    app = create_app({"TESTING": True, "PTYPE_DATA_DIR": str(built.parent / "data")})
    try:
        document = build_openapi(documented_routes(app), app.config.get("MAX_CONTENT_LENGTH"))
    finally:
        if app.extensions.get(EXTENSION) is not None:
            app.extensions[EXTENSION].dispose()
    text = page_text(built / "http-reference.html")
    for path, item in document["paths"].items():
        for method in ("get", "post", "put", "patch", "delete"):
            if method in item:
                assert f"{method.upper()} {path}" in text, (method, path)
                assert " ".join(item[method]["summary"].split()) in text
    for name in document["components"]["schemas"]:
        assert name in text, name
    shipped = next(built.rglob("openapi.json"))
    assert json.loads(shipped.read_text()) == json.loads(json.dumps(document))


def test_guides_tutorial_and_changelog_are_pages(built):
    tutorial = page_text(built / "tutorial.html")
    assert "make run" in tutorial and "ptype.diagnose(profile" in tutorial
    for guide in ("formats", "methods", "consensus", "references", "install", "api",
                  "changelog"):
        assert (built / f"{guide}.html").is_file(), guide
    # Every Markdown guide of docs/ is a page reachable from the index, named there or not.
    index = (built / "index.html").read_text(encoding="utf-8")
    for page in DOCS.glob("*.md"):
        assert f'href="{page.stem}.html"' in index, page.name
    assert ptype.__version__.rsplit(".", 1)[0] in page_text(built / "index.html")
