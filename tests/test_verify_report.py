"""End-to-end verification (ptype/verify/report.py) on 30 invented demo cases.

Every score in the report is recomputed from the report's own per-case lists with
independent implementations: scikit-learn (``confusion_matrix``, ``accuracy_score``,
``cohen_kappa_score`` = Heidke, ``brier_score_loss``) and the ranked probability score
written out from its definition (Epstein 1969: squared differences of cumulative
probabilities).  The batch diagnosis is checked against one-profile ``ptype.diagnose``.
The demo cases are invented (soundings_demo/verification/README.md).
"""

from __future__ import annotations

import csv
import json
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
        assert entry["predicted"] == d["ptype"]
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
