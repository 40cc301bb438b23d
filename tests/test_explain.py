"""The narrative of a diagnosis (ptype/engine/explain.py): every sentence carries numbers of
the diagnosis itself, written in one format (ptype/engine/wording.py).

The scale of melting is Bourgouin's (2000): a warm area above 13.2 J/kg melts snow
completely, 5.6-13.2 J/kg partly, and an area under 2 J/kg is negligible.
"""

from __future__ import annotations

import re

import numpy as np
import pytest

import ptype
from ptype.engine.explain import _melting_verdict, narrative

MINUS = "\N{MINUS SIGN}"


def document(p, t, td, **extra):
    doc = {"levels": [{"pressure_hpa": a, "temperature_c": b, "dewpoint_c": c}
                      for a, b, c in zip(p, t, td)]}
    doc.update(extra)
    return doc


# A freezing-rain sounding constructed here (not measured): ice cloud aloft, warm nose
# ~ +4.6 degC, shallow cold surface layer.
FZRA = document([990, 950, 900, 870, 820, 780, 750, 700, 600, 500, 400, 300],
                [-2.5, -3.5, -1.0, 2.0, 4.6, 1.0, -1.5, -5.0, -12.0, -22.0, -33.0, -45.0],
                [-3.0, -4.0, -1.5, 1.5, 4.0, 0.5, -2.0, -5.5, -13.0, -23.5, -40.0, -55.0])
# A cold, saturated column (snow all the way down).
COLD = document([1000, 900, 800, 700, 500], [-8.0, -10.0, -14.0, -18.0, -30.0],
                [-8.5, -10.5, -14.5, -18.5, -30.5])


def _temperature(x):
    """The narrative's temperature format, written out independently."""
    text = f"{x:+.1f}".replace("-", MINUS)
    return "0.0" if text in ("+0.0", MINUS + "0.0") else text


@pytest.fixture(scope="module")
def fzra():
    return ptype.diagnose(FZRA, members=10, seed=1)


def test_warm_layer_sentence_carries_the_layer(fzra):
    out = narrative(fzra)
    lay = next(x for x in fzra.to_dict()["layers"] if x["kind"] == "warm")
    sentence = next(s for s in out if s.startswith("The air is above 0 \u00b0C aloft"))
    assert f"{lay['bottom_hpa']:.0f}\u2013{lay['top_hpa']:.0f} hPa" in sentence
    assert f"{lay['bottom_m']:.0f}\u2013{lay['top_m']:.0f} m" in sentence
    assert f"peaking at {_temperature(lay['extreme_c'])} \u00b0C" in sentence
    # Its area is far above 13.2 J/kg: Bourgouin (2000) complete melting.
    assert lay["area_j_kg"] > 13.2 and "enough to melt snow completely" in sentence


def test_refreezing_and_surface_sentences(fzra):
    out = narrative(fzra)
    refreeze = next(s for s in out if s.startswith("Below the warm layer"))
    assert "of refreezing energy" in refreeze and "so they stay liquid" in refreeze
    c = fzra.columns
    surface = next(s for s in out if s.startswith("At the surface"))
    t_s, tw_s = _temperature(c.surface_temperature_c[0]), _temperature(c.surface_wetbulb_c[0])
    assert surface == f"At the surface the air is {t_s} \u00b0C with a wet-bulb of {tw_s} \u00b0C."


def test_consensus_sentence_last(fzra):
    out = narrative(fzra)
    assert out[-1] == (f"Consensus: freezing rain (FZRA), probability {fzra.probability:.2f} "
                       f"over 10 perturbed profiles ({fzra.confidence} confidence).")
    assert any(s.startswith("Method votes: FZRA ") for s in out)


def test_sentences_use_one_number_format(fzra):
    for sentence in narrative(fzra):
        assert sentence.endswith(".")
        assert not re.search(r"(?<![\w.])-\d", sentence), sentence  # true minus signs only


def test_all_cold_column_and_no_members():
    d = ptype.diagnose(COLD, members=0)
    out = narrative(d)
    assert "The whole column up to 250 hPa is below 0 \u00b0C: nothing melts on the way down." \
        in out
    assert out[-1] == "Consensus: snow (SN); probabilities not computed."


def test_no_precipitation_reported_first():
    d = ptype.diagnose(dict(COLD, surface={"precipitation_rate_mm_h": 0.0}), members=0)
    assert narrative(d)[0].startswith("The surface readings report no precipitation (0 mm/h)")


def test_evaporation_note_when_the_wet_bulb_is_below_freezing():
    # Surface +1.5 degC with a dew point of -8 degC: the wet-bulb is below 0 degC.
    doc = document([1000, 950, 900, 850, 700, 500], [1.5, 0.2, -2.0, -5.0, -12.0, -28.0],
                   [-8.0, -2.0, -2.3, -5.3, -12.3, -28.5])
    out = narrative(ptype.diagnose(doc, members=0))
    assert any(s.endswith(": evaporation can cool the air below freezing.") for s in out)


@pytest.mark.parametrize("area, words", [
    (13.3, "enough to melt snow completely (more than 13.2 J/kg)"),
    (13.2, "enough to melt snow partly (5.6\u201313.2 J/kg)"),
    (5.6, "enough to melt snow partly"),
    (5.5, "too little to melt much snow (under 5.6 J/kg)"),
    (2.0, "too little to melt much snow"),
    (1.9, "negligible (under 2 J/kg)"),
])
def test_melting_verdict_follows_bourgouin_thresholds(area, words):
    # The verdict names whose scale it is (a method's own row may judge otherwise).
    assert _melting_verdict(area).startswith("on Bourgouin's scale, " + words)


def test_a_split_over_many_types_is_reported_as_uncertain():
    # Members split over seven types (a case found by bench/bench_invariants.py): no type can
    # have a quarter of them, the most probable possible type is reported and the sentence
    # says that no type has a quarter (docs/consensus.md, "The reported type").
    from types import SimpleNamespace

    from ptype.codes import Code
    from ptype.engine.explain import support_sentence
    from ptype.engine.probability import supported_codes
    probs = np.zeros((1, len(Code)))
    for code, p in {"RA": 0.16, "PL": 0.22, "FZRA": 0.12, "FZDZ": 0.16, "DZ": 0.2,
                    "RAPL": 0.12, "FZRAPL": 0.02}.items():
        probs[0, Code[code]] = p
    control = np.array([int(Code.SN)])
    codes, reason = supported_codes(control, probs)
    assert Code(int(codes[0])) is Code.PL and int(reason[0]) == 2
    fake = SimpleNamespace(run=SimpleNamespace(fields={"support_reason": reason,
                                                       "control_ptype": control}),
                           row=0, members=50, probability_vector=probs[0],
                           code=Code(int(codes[0])))
    text = support_sentence(fake)
    assert "only 0.00 of the members" in text and "PL (0.22)" in text
    assert "No type has a quarter of the members: they split over 7 types" in text
