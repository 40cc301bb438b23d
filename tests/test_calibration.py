"""Calibrated probabilities (ptype/engine/calibration.py, ptype/verify/calibration.py,
``ptype calibrate``).

The model is a multinomial logistic regression (Wilks, forecast calibration); the reference
here is scikit-learn itself: the JSON calibration, applied with numpy, must give the
probabilities scikit-learn's fitted model gives.  The demo verification set is invented
(soundings_demo/verification/README.md): its scores only show that the machinery works.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

import ptype
from ptype.cli import main
from ptype.codes import Code
from ptype.engine.calibration import FEATURES, UNCALIBRATED, Calibration
from ptype.errors import OptionError
from ptype.verify import calibration as cv

ROOT = Path(__file__).resolve().parents[1]
MANIFEST = ROOT / "soundings_demo" / "verification" / "cases.csv"
DEMO = ROOT / "soundings_demo" / "json" / "mistleby-bridge_20260127T1600.json"


def _synthetic(n=400, seed=0):
    """Features where the observed type follows a known logistic law of two features."""
    rng = np.random.default_rng(seed)
    x = rng.normal(size=(n, len(FEATURES)))
    logits = np.column_stack([2.0 * x[:, 0], -1.5 * x[:, 1], np.zeros(n)])
    p = np.exp(logits) / np.exp(logits).sum(axis=1, keepdims=True)
    codes = np.array([Code.SN, Code.FZRA, Code.RA])
    observed = codes[[rng.choice(3, p=row) for row in p]]
    return x, observed


def test_apply_equals_scikit_learn_predict_proba():
    from sklearn.linear_model import LogisticRegression
    x, observed = _synthetic()
    cal = cv.fit_calibration(x, observed, source="synthetic")
    reference = LogisticRegression(C=cv.PENALTY_C, max_iter=2000).fit(
        (x - cal.mean) / cal.scale, observed)
    ours = cal.apply(x)
    for j, code in enumerate(reference.classes_):
        np.testing.assert_allclose(ours[:, code], reference.predict_proba(
            (x - cal.mean) / cal.scale)[:, j], atol=1e-9)
    np.testing.assert_allclose(ours.sum(axis=1), 1.0)
    assert set(cal.classes) == {"SN", "FZRA", "RA"}


def test_apply_removes_impossible_types_and_renormalises():
    x, observed = _synthetic()
    cal = cv.fit_calibration(x, observed)
    possible = np.ones((len(x), len(Code)), dtype=bool)
    possible[:, Code.SN] = False  # e.g. complete melting aloft (docs/consensus.md)
    p = cal.apply(x, possible)
    assert np.all(p[:, Code.SN] == 0.0)
    np.testing.assert_allclose(p.sum(axis=1), 1.0)


def test_calibration_document_round_trips_and_refuses_broken_ones(tmp_path):
    x, observed = _synthetic()
    cal = cv.fit_calibration(x, observed, source="synthetic")
    path = tmp_path / "cal.json"
    cal.save(path)
    back = Calibration.load(path)
    np.testing.assert_allclose(back.apply(x), cal.apply(x), rtol=0, atol=1e-12)  # JSON floats
    assert back.summary()["n_cases"] == len(observed)
    doc = json.loads(path.read_text())
    for broken, words in (({**doc, "format": "other"}, "not a ptype calibration"),
                          ({**doc, "features": ["x"]}, "refit"),
                          ({**doc, "coef": [[1.0]]}, "wrong shape"),
                          ({**doc, "classes": ["XX", "SN", "RA"]}, "broken")):
        with pytest.raises(OptionError) as info:
            Calibration.from_dict(broken)
        assert words in str(info.value) and info.value.field == "calibration"
    path.write_text("{not json")
    with pytest.raises(OptionError, match="not a JSON calibration"):
        Calibration.load(path)


def test_fit_needs_enough_cases_and_two_types():
    x, observed = _synthetic(n=20)
    with pytest.raises(OptionError, match="at least"):
        cv.fit_calibration(x, observed)
    x, _ = _synthetic(n=60)
    with pytest.raises(OptionError, match="two observed types"):
        cv.fit_calibration(x, np.full(60, int(Code.SN)))


@pytest.fixture(scope="module")
def demo_calibration(tmp_path_factory):
    path = tmp_path_factory.mktemp("cal") / "demo.json"
    assert main(["calibrate", str(MANIFEST), "-o", str(path), "--members", "10"]) == 0
    return path


def test_calibrate_command_improves_the_held_out_score(demo_calibration, capsys):
    doc = json.loads(demo_calibration.read_text())
    assert doc["format"] == "ptype-calibration" and doc["n_cases"] > 200
    assert doc["source"] == "cases.csv" and doc["members"] == 10
    # Ranked probability score (Wilks): lower is better; held out by 5-fold cross-validation.
    assert doc["cv"]["rps_calibrated"] < doc["cv"]["rps_raw"]


def test_calibrate_refuses_a_missing_output_folder(tmp_path, capsys):
    assert main(["calibrate", str(MANIFEST), "-o", str(tmp_path / "no" / "c.json")]) == 2
    assert "does not exist" in capsys.readouterr().err


def test_outputs_say_whether_they_are_calibrated(demo_calibration):
    plain = ptype.diagnose(DEMO, members=10, seed=1).to_dict()
    assert plain["calibration"] == UNCALIBRATED
    calibrated = ptype.diagnose(DEMO, members=10, seed=1,
                                calibration=demo_calibration).to_dict()
    cal = calibrated["calibration"]
    assert cal["calibrated"] and cal["source"] == "cases.csv" and cal["n_cases"] > 200
    assert abs(sum(calibrated["probabilities"].values()) - 1.0) < 1e-3
    with pytest.raises(OptionError):
        ptype.diagnose(DEMO, members=10, calibration=42)


def test_timelines_and_grids_carry_the_calibration(demo_calibration):
    from ptype import grid
    from ptype.roads.nowcast import build_timeline
    series = sorted((ROOT / "soundings_demo" / "series" / "korrim-pass").glob("*.json"))[:4]
    profiles = [ptype.read_profile(p) for p in series]
    cal = Calibration.load(demo_calibration)
    tl = build_timeline(profiles, hours=2, step="1h", members=5, calibration=cal)
    assert tl["calibration"]["calibrated"] and tl["calibration"]["n_cases"] == cal.n_cases
    assert build_timeline(profiles, hours=2, step="1h", members=5)["calibration"] == UNCALIBRATED
    ds = grid.open_grid(str(ROOT / "soundings_demo" / "grid" / "demo_grid.nc")).isel(
        x=slice(0, 4), y=slice(0, 3))
    out = grid.diagnose_dataset(ds, members=3, seed=1, calibration=cal)
    assert out.attrs["ptype_calibration"].startswith("calibrated: fitted on")
