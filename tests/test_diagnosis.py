"""ptype.diagnose: the contract, the consensus flow, invariances and physical monotonicity."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import ptype
from ptype import thermo
from ptype.codes import Code
from ptype.engine.columns import Columns
from ptype.engine.methods import METHOD_NAMES
from ptype.engine.run import diagnose_columns


def document(p, t, td, **extra):
    doc = {"levels": [{"pressure_hpa": a, "temperature_c": b, "dewpoint_c": c}
                      for a, b, c in zip(p, t, td)]}
    doc.update(extra)
    return doc


# A classic freezing-rain sounding: ice-producing cloud, warm nose ~ +4.6 degC (about 100 J/kg),
# shallow cold surface layer.  Constructed here, not measured.
FZRA_P = [990, 950, 900, 870, 820, 780, 750, 700, 600, 500, 400, 300]
FZRA_T = [-2.5, -3.5, -1.0, 2.0, 4.6, 1.0, -1.5, -5.0, -12.0, -22.0, -33.0, -45.0]
FZRA_TD = [-3.0, -4.0, -1.5, 1.5, 4.0, 0.5, -2.0, -5.5, -13.0, -23.5, -40.0, -55.0]


def test_contract_keys_and_caution():
    d = ptype.diagnose(document(FZRA_P, FZRA_T, FZRA_TD), seed=1, members=20)
    out = d.to_dict()
    for key in ("ptype", "probabilities", "methods", "layers", "wetbulb_layers", "profile",
                "explanation", "caution", "confidence", "consensus"):
        assert key in out
    assert set(out["methods"]) == set(METHOD_NAMES)
    assert out["ptype"] == "FZRA"
    assert sum(out["probabilities"].values()) == pytest.approx(1.0, abs=1e-3)
    assert "official warnings" in out["caution"].lower()
    lay = out["layers"][0]
    for key in ("kind", "bottom_hpa", "top_hpa", "bottom_m", "top_m", "area_j_kg", "extreme_c"):
        assert key in lay
    assert all(a["area_j_kg"] >= 0 for a in out["layers"])
    for m in out["methods"].values():
        for step in m["steps"]:
            assert {"rule", "text", "values", "thresholds", "source"} <= set(step)
    import json
    json.dumps(out)  # JSON-ready


def test_explanation_sentences_carry_numbers():
    out = ptype.diagnose(document(FZRA_P, FZRA_T, FZRA_TD), seed=1, members=10).to_dict()
    warm = next(x for x in out["layers"] if x["kind"] == "warm")
    text = " ".join(out["explanation"])
    # Energies with at most one decimal, temperatures signed with one (ptype.engine.wording).
    assert f"{warm['area_j_kg']:.1f}".rstrip("0").rstrip(".") + " J/kg" in text
    assert f"{warm['extreme_c']:+.1f} °C".replace("-", "\u2212") in text


def test_level_order_invariance():
    doc = document(FZRA_P, FZRA_T, FZRA_TD)
    shuffled = dict(doc)
    rng = np.random.default_rng(5)
    shuffled["levels"] = [doc["levels"][i] for i in rng.permutation(len(doc["levels"]))]
    a = ptype.diagnose(doc, seed=9, members=30).to_dict()
    b = ptype.diagnose(shuffled, seed=9, members=30).to_dict()
    assert a["ptype"] == b["ptype"] and a["probabilities"] == b["probabilities"]
    assert a["layers"] == b["layers"]


def test_relative_humidity_instead_of_dewpoint():
    rh = thermo.relative_humidity_pct(np.array(FZRA_T), np.array(FZRA_TD))
    doc_rh = {"levels": [{"pressure_hpa": p, "temperature_c": t, "relative_humidity_pct": float(r)}
                         for p, t, r in zip(FZRA_P, FZRA_T, rh)]}
    a = ptype.diagnose(document(FZRA_P, FZRA_T, FZRA_TD), seed=2, members=30).to_dict()
    b = ptype.diagnose(doc_rh, seed=2, members=30).to_dict()
    assert a["ptype"] == b["ptype"]
    assert a["probabilities"] == b["probabilities"]
    for x, y in zip(a["layers"], b["layers"]):
        assert x["area_j_kg"] == pytest.approx(y["area_j_kg"], abs=0.2)


def test_no_ice_cloud_gives_freezing_drizzle_whatever_the_melting_methods_say():
    # Shallow saturated stratus, top -6 degC, very dry above, surface -3 degC (Huffman & Norman
    # 1988 freezing-drizzle pattern).  Melting methods see an all-cold column and say snow.
    p = [1000, 970, 940, 900, 870, 850, 800, 700, 600, 500]
    t = [-3.0, -4.0, -5.0, -6.0, -3.0, -2.0, -4.0, -10.0, -18.0, -28.0]
    td = [-3.2, -4.2, -5.2, -6.2, -20.0, -25.0, -30.0, -35.0, -40.0, -45.0]
    out = ptype.diagnose(document(p, t, td), seed=1, members=10).to_dict()
    assert out["methods"]["bourgouin"]["ptype"] == "SN"
    assert out["ptype"] == "FZDZ"
    assert out["consensus"]["rule"] == "no_ice_drizzle"


def test_surface_humidity_turns_marginal_rain_into_snow():
    # Surface +1.5 degC but very dry (wet-bulb below 0): Jennings p_snow high -> SN.
    p = [1000, 975, 950, 900, 850, 700, 500]
    t = [1.5, 0.8, 0.2, -2.0, -5.0, -12.0, -28.0]
    td = [-8.0, -6.0, -2.0, -2.3, -5.3, -12.3, -28.5]
    d = ptype.diagnose(document(p, t, td), seed=1, members=10)
    out = d.to_dict()
    assert d.columns.surface_wetbulb_c[0] < 0
    assert out["methods"]["bourgouin"]["ptype"] in ("RA", "RASN")  # the surface layer melts
    assert out["ptype"] in ("SN", "RASN")


def test_probabilities_seeded_and_members_zero():
    doc = document(FZRA_P, FZRA_T, FZRA_TD)
    a = ptype.diagnose(doc, seed=123, members=25).probabilities
    b = ptype.diagnose(doc, seed=123, members=25).probabilities
    assert a == b
    none = ptype.diagnose(doc, members=0).to_dict()
    assert none["probabilities"] == {} and none["confidence"] == "not assessed"


def test_diagnose_many_matches_diagnose_per_profile(monkeypatch):
    # Consistency: the deterministic result of each profile is that of ptype.diagnose; the
    # members of several profiles (here in batches of 2) give probabilities that sum to 1,
    # put most weight on the control's type for these clear-cut profiles, and are
    # reproducible with a seed.
    from ptype.engine import diagnosis
    monkeypatch.setattr(diagnosis, "MANY_MEMBER_BATCH", 2)
    warm = [t + 8.0 for t in FZRA_T]
    docs = [document(FZRA_P, FZRA_T, FZRA_TD), document(FZRA_P, warm, FZRA_TD),
            document(FZRA_P, [t - 8.0 for t in FZRA_T], [t - 8.5 for t in FZRA_T])]
    many = ptype.diagnose_many(docs, members=30, seed=4)
    again = ptype.diagnose_many(docs, members=30, seed=4)
    assert [d.ptype for d in many] == [ptype.diagnose(x, members=0).ptype for x in docs]
    assert [d.ptype for d in many] == ["FZRA", "RA", "SN"]
    for d, e in zip(many, again):
        out = d.to_dict()
        assert sum(out["probabilities"].values()) == pytest.approx(1.0, abs=1e-3)
        assert out["probabilities"][out["ptype"]] >= 0.5
        assert out == e.to_dict()
    plain = ptype.diagnose_many(docs[:2], members=0)
    assert [d.to_dict() for d in plain] == [ptype.diagnose(x, members=0).to_dict()
                                            for x in docs[:2]]
    with pytest.raises(ptype.OptionError, match="members"):
        ptype.diagnose_many(docs, members=-3)

@pytest.mark.parametrize("kwargs,field", [({"members": -1}, "members"),
                                          ({"methods": "bourgouin,magic"}, "methods"),
                                          ({"wetbulb": "frozen"}, "wetbulb"),
                                          ({"seed": -4}, "seed")])
def test_bad_options_name_the_field(kwargs, field):
    with pytest.raises(ptype.OptionError) as err:
        ptype.diagnose(document(FZRA_P, FZRA_T, FZRA_TD), **kwargs)
    assert err.value.field == field


_P = [1000, 950, 900, 850, 800, 750, 700, 600, 500]


@settings(max_examples=40, deadline=None)
@given(sfc=st.floats(-8.0, 6.0), nose=st.floats(-4.0, 8.0), dep=st.floats(0.1, 4.0),
       warming=st.floats(0.2, 4.0))
def test_warming_never_turns_rain_into_snow(sfc, nose, dep, warming):
    # Physical monotonicity (common practice): warming every level (same dew-point depression)
    # cannot turn rain into snow at the ground.
    t = np.array([sfc, sfc - 0.5, (sfc + nose) / 2, nose, nose - 0.5, -3.0, -6.0, -14.0, -26.0])
    td = t - dep
    base = Columns.from_arrays(np.array([_P], float), t[None], td[None])
    warm = Columns.from_arrays(np.array([_P], float), (t + warming)[None], (td + warming)[None])
    before = Code(int(diagnose_columns(base)["ptype"][0]))
    after = Code(int(diagnose_columns(warm)["ptype"][0]))
    if before is Code.RA:
        assert after is not Code.SN


@settings(max_examples=60, deadline=None)
@given(st.lists(st.tuples(st.floats(1.0, 1100.0), st.floats(-100.0, 60.0), st.floats(0.0, 80.0)),
                min_size=3, max_size=12, unique_by=lambda x: round(x[0], 6)))
def test_any_accepted_profile_diagnoses_without_warnings(levels):
    # Every profile the validator accepts must diagnose (warnings are errors in this suite);
    # air too warm for its pressure (near boiling) is refused with a ProfileError instead.
    doc = document([lv[0] for lv in levels], [lv[1] for lv in levels],
                   [lv[1] - lv[2] for lv in levels])
    try:
        out = ptype.diagnose(doc, members=4, seed=0).to_dict()
    except ptype.ProfileError as err:
        assert err.field is not None
        return
    assert out["ptype"] in {c.name for c in Code}
    assert sum(out["probabilities"].values()) == pytest.approx(1.0)


def test_boiling_level_refused_with_field():
    with pytest.raises(ptype.ProfileError) as err:
        ptype.diagnose(document([1000, 500, 150], [10.0, -20.0, 60.0], [5.0, -25.0, -10.0]))
    assert err.value.field == "levels[2].temperature_c"
    assert "too warm for this pressure" in str(err.value)
