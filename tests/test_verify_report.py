"""End-to-end verification (ptype/verify/report.py) on 30 invented demo cases.

Every score in the report is recomputed from the report's own per-case lists with
independent implementations: scikit-learn (``confusion_matrix``, ``accuracy_score``,
``cohen_kappa_score`` = Heidke, ``brier_score_loss``) and the ranked probability score
written out from its definition (Epstein 1969: squared differences of cumulative
probabilities).  The batch diagnosis is checked against one-profile ``ptype.diagnose``.
The demo cases are invented (soundings_demo/verification/README.md).
"""

from __future__ import annotations

import base64
import csv
import json
from html.parser import HTMLParser
from importlib import resources
from pathlib import Path

import numpy as np
import pytest
from sklearn.metrics import accuracy_score, brier_score_loss, cohen_kappa_score, confusion_matrix

import ptype
from ptype.codes import Code
from ptype.verify.manifest import read_manifest
from ptype.verify.report import ORDER, make_figures, render_html, render_table, run_verification

DEMO = Path(__file__).resolve().parents[1] / "soundings_demo" / "verification"
N_CASES = 30
MEMBERS = 8
METHODS = ("bourgouin", "ramer", "cloud_top", "thickness")


@pytest.fixture(scope="module")
def manifest(tmp_path_factory):
    """The first 30 demo cases plus two unverifiable reports, with absolute profile paths."""
    lines = (DEMO / "cases.csv").read_text().splitlines()
    rows = list(csv.DictReader(line for line in lines if not line.startswith("#")))[:N_CASES]
    rows[3]["observed"] = "FZUP"
    rows[5]["observed"] = "QQ"
    rows[17]["observed"] = "UP"    # the demo generator makes this one unidentified anyway
    folder = tmp_path_factory.mktemp("verify")
    path = folder / "cases.json"
    path.write_text(json.dumps([{"profile": str(DEMO / r["profile"]), "observed": r["observed"],
                                 "site": r["site"]} for r in rows]))
    return path


@pytest.fixture(scope="module")
def report(manifest):
    return run_verification(read_manifest(manifest), members=MEMBERS, seed=3, methods=METHODS)


def _observed_predicted(report, key="predicted"):
    obs = [c["observed"] for c in report["cases"]]
    pred = [c[key] if key == "predicted" else c["methods"][key] for c in report["cases"]]
    return obs, pred


def test_run_verification_counts_and_exclusions(report):
    assert report["n_cases"] == N_CASES
    assert report["excluded"]["count"] == 3
    assert report["n"] == N_CASES - 3 == len(report["cases"])
    assert report["excluded"]["reasons"] == {"unidentified precipitation (UP/FZUP)": 2,
                                             "unparseable group": 1}
    assert {c["observed_raw"] for c in report["excluded"]["cases"]} == {"FZUP", "QQ", "UP"}
    assert report["caution"] == ptype.CAUTION


def test_run_verification_cases_match_single_profile_diagnosis(report, manifest):
    cases = read_manifest(manifest)
    kept = [c for c in cases if c.observed not in ("FZUP", "QQ", "UP")]
    for case, entry in list(zip(kept, report["cases"]))[:10]:
        d = ptype.diagnose(case.profile, members=0, methods=METHODS).to_dict()
        # Without members the reported type is the profile's own consensus (the control).
        assert entry["control"] == d["ptype"]
        for name in METHODS:
            assert entry["methods"][name] == d["methods"][name]["ptype"]


def test_run_verification_table_matches_sklearn_confusion_matrix(report):
    obs, pred = _observed_predicted(report)
    cats = report["consensus"]["table"]["categories"]
    assert cats == [c.name for c in ORDER if c.name in cats]      # documented order
    cm = confusion_matrix(obs, pred, labels=cats)                  # rows observed
    np.testing.assert_array_equal(np.array(report["consensus"]["table"]["counts"]), cm.T)


def test_run_verification_scores_match_sklearn(report):
    obs, pred = _observed_predicted(report)
    cons = report["consensus"]
    assert cons["accuracy"] == pytest.approx(accuracy_score(obs, pred), abs=1e-4)
    assert cons["heidke"] == pytest.approx(cohen_kappa_score(obs, pred), abs=1e-4)
    for name in METHODS:
        pairs = [(o, p) for o, p in zip(*_observed_predicted(report, name)) if p is not None]
        block = report["methods"][name]
        assert block["n"] == len(pairs)
        assert block["abstained"] == len(report["cases"]) - len(pairs)
        if pairs:
            o, p = zip(*pairs)
            assert block["accuracy"] == pytest.approx(accuracy_score(o, p), abs=1e-4)
        assert "brier" not in block and "rps" not in block   # methods have no probabilities


def test_run_verification_per_class_counts(report):
    obs, pred = _observed_predicted(report)
    for code, s in report["consensus"]["classes"].items():
        hits = sum(1 for o, p in zip(obs, pred) if o == p == code)
        assert s["hits"] == hits
        assert s["n_observed"] == obs.count(code) and s["n_forecast"] == pred.count(code)
        if s["n_observed"]:
            assert s["pod"] == pytest.approx(hits / obs.count(code), abs=1e-4)


def test_run_verification_probabilistic_scores_match_definitions(report):
    cons = report["consensus"]
    obs = [c["observed"] for c in report["cases"]]
    prob = np.array([[c["probabilities"].get(code.name, 0.0) for code in ORDER]
                     for c in report["cases"]])
    np.testing.assert_allclose(prob.sum(axis=1), 1.0, atol=1e-3)
    for code, s in cons["brier"].items():
        k = [c.name for c in ORDER].index(code)
        y = np.array([o == code for o in obs], dtype=int)
        assert s["brier"] == pytest.approx(brier_score_loss(y, prob[:, k]), abs=2e-4)
    # RPS: mean over cases of sum_m (cumulative forecast - cumulative observed)^2.
    rps = np.mean([np.sum((np.cumsum(p) - np.cumsum([c.name == o for c in ORDER])) ** 2)
                   for p, o in zip(prob, obs)])
    assert cons["rps"] == pytest.approx(rps, abs=1e-3)
    assert cons["rps_order"] == [c.name for c in ORDER]
    pooled = cons["reliability"]["all"]
    assert sum(b["count"] for b in pooled["bins"]) == len(obs) * len(ORDER)


def test_run_verification_is_reproducible_for_a_seed(manifest, report):
    again = run_verification(read_manifest(manifest), members=MEMBERS, seed=3, methods=METHODS)
    assert again["consensus"] == report["consensus"]


def test_run_verification_without_members_has_no_probabilistic_scores(manifest):
    r = run_verification(read_manifest(manifest)[:6], members=0, methods=("bourgouin",))
    assert "brier" not in r["consensus"] and "rps" not in r["consensus"]
    assert "probabilities" not in r["cases"][0]


def test_run_verification_everything_excluded(tmp_path):
    doc = json.loads((DEMO / "profiles" / "case_001.json").read_text())
    (tmp_path / "m.json").write_text(json.dumps([{"profile": doc, "observed": "UP"}]))
    r = run_verification(read_manifest(tmp_path / "m.json"), members=0)
    assert r["n"] == 0 and r["consensus"] is None and r["excluded"]["count"] == 1
    assert "nothing to verify" in render_table(r)
    assert ptype.CAUTION in render_html(r)


def test_render_table_and_html_carry_scores_and_caution(report):
    text = render_table(report)
    assert ptype.CAUTION in text and "HSS" in text and "consensus" in text
    figures = make_figures(report)
    assert set(figures) == {"reliability", "skill"}
    assert all(png.startswith(b"\x89PNG") for png in figures.values())
    page = render_html(report, figures)
    assert page.startswith("<!DOCTYPE html>") and ptype.CAUTION in page
    assert page.count("data:image/png;base64,") == 2
    assert "<script" not in page
    assert json.loads(json.dumps(report)) == report     # JSON-ready, no NaN
    assert Code.SN.name in page


def test_run_verification_default_runs_every_method(manifest):
    from ptype.engine.methods import METHOD_NAMES
    r = run_verification(read_manifest(manifest)[:8], members=2)
    assert tuple(r["methods"]) == METHOD_NAMES
    assert set(r["cases"][0]["methods"]) == set(METHOD_NAMES)


# --- the HTML page (templates/report.html, autoescaped) ----------------------------------------

class _Page(HTMLParser):
    """The page as a browser's tokenizer reads it (Python's ``html.parser``, which follows the
    HTML standard's character references): text per table row, image sources, open tags."""

    def __init__(self, page: str):
        super().__init__(convert_charrefs=True)
        self.rows: list[list[str]] = []
        self.hits: list[tuple[int, int]] = []
        self.images: list[dict[str, str]] = []
        self.tags: list[str] = []
        self.paragraphs: list[str] = []
        self._cell: list[str] | None = None
        self._para: list[str] | None = None
        self.feed(page)
        self.close()

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        if tag == "tr":
            self.rows.append([])
        elif tag in ("td", "th"):
            self._cell = []
            if dict(attrs).get("class") == "hit":
                self.hits.append((len(self.rows) - 1, len(self.rows[-1])))
        elif tag == "img":
            self.images.append(dict(attrs))
        elif tag == "p":
            self._para = []

    def handle_endtag(self, tag):
        if tag in ("td", "th") and self._cell is not None:
            self.rows[-1].append(" ".join("".join(self._cell).split()))
            self._cell = None
        elif tag == "p" and self._para is not None:
            self.paragraphs.append(" ".join("".join(self._para).split()))
            self._para = None

    def handle_data(self, data):
        for buffer in (self._cell, self._para):
            if buffer is not None:
                buffer.append(data)


def _rows_after(page: _Page, header: list[str], n: int) -> list[list[str]]:
    """The ``n`` rows that follow the row ``header``."""
    start = page.rows.index(header) + 1
    return page.rows[start:start + n]


def test_render_html_contingency_table_matches_report(report):
    page = _Page(render_html(report, {}))
    cats = report["consensus"]["table"]["categories"]
    counts = np.array(report["consensus"]["table"]["counts"])
    rows = _rows_after(page, ["", *cats, "total"], len(cats) + 1)
    assert [r[0] for r in rows] == [*cats, "total"]
    body = np.array([[int(v) for v in r[1:]] for r in rows])
    np.testing.assert_array_equal(body[:-1, :-1], counts)
    # Row and column sums by numpy, not by the template.
    np.testing.assert_array_equal(body[:-1, -1], counts.sum(axis=1))
    np.testing.assert_array_equal(body[-1], [*counts.sum(axis=0), counts.sum()])
    # The diagonal (hits) is the only highlighted part of that table.
    first = page.rows.index(["", *cats, "total"]) + 1
    diagonal = [(r - first, c - 1) for r, c in page.hits if first <= r < first + len(cats)]
    assert diagonal == [(i, i) for i in range(len(cats))]


def test_render_html_score_rows_and_missing_values(report):
    page = _Page(render_html(report, {}))
    header = ["diagnosis", "n", "abstained", "accuracy", "Heidke", "Peirce", "Gerrity"]
    rows = {r[0]: r for r in page.rows[page.rows.index(header) + 1:]
            if len(r) == len(header) and r[0] in ("consensus", *METHODS)}
    cons = report["consensus"]
    assert rows["consensus"][1:] == [str(cons["n"]), "0", *(
        f"{cons[k]:.3f}" for k in ("accuracy", "heidke", "peirce", "gerrity"))]
    for name in METHODS:
        block = report["methods"][name]
        assert rows[name][2] == str(block["abstained"])
        # A missing score is an en dash (U+2013), three decimals otherwise.
        assert rows[name][6] == ("\u2013" if block["gerrity"] is None
                                 else f"{block['gerrity']:.3f}")


def test_render_html_escapes_text_from_the_manifest(report):
    hostile = "<script>alert('x')</script> & \"q\""
    changed = json.loads(json.dumps(report))
    changed["source"] = hostile
    changed["cases"][0]["observed_raw"] = hostile
    changed["excluded"]["cases"][0]["detail"] = "<b>bold</b>"
    html_text = render_html(changed, {"skill": b"\x89PNG"}, image_files={"skill": "a'b\".png"})
    page = _Page(html_text)
    # Autoescape: the text reads back unchanged and no tag was injected.
    assert "<script" not in html_text and "<b>" not in html_text
    assert "script" not in page.tags and "b" not in page.tags
    assert any(hostile in p for p in page.paragraphs)
    assert any(row[3:4] == [hostile] for row in page.rows)
    assert any(row[2:3] and row[2].endswith(": <b>bold</b>") for row in page.rows)
    assert [img["src"] for img in page.images] == ["a'b\".png"]


def test_render_html_embeds_figures_as_data_uris(report):
    page = _Page(render_html(report, {"skill": b"\x89PNG-a", "reliability": b"\x89PNG-b"}))
    # RFC 2397 data URIs holding the base64 (RFC 4648) of the bytes given.
    srcs = [img["src"] for img in page.images]
    assert srcs == ["data:image/png;base64," + base64.b64encode(b"\x89PNG-a").decode(),
                    "data:image/png;base64," + base64.b64encode(b"\x89PNG-b").decode()]
    assert all(img["alt"] for img in page.images)


def test_render_html_everything_excluded_keeps_caution_and_says_why(tmp_path):
    doc = json.loads((DEMO / "profiles" / "case_001.json").read_text())
    (tmp_path / "m.json").write_text(json.dumps([{"profile": doc, "observed": "UP"}]))
    page = _Page(render_html(run_verification(read_manifest(tmp_path / "m.json"), members=0)))
    assert "Nothing to verify: every observation was excluded." in page.paragraphs
    assert any(ptype.CAUTION in p for p in page.paragraphs) and page.rows == []


def test_report_template_ships_inside_the_package():
    template = resources.files("ptype.verify") / "templates" / "report.html"
    assert template.is_file() and template.read_text().startswith("<!DOCTYPE html>")
