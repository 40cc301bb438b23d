"""Tests of ptype.roads.nowcast: interpolation, the three nowcast adjustments, and the timeline."""

import itertools
import math
from datetime import timedelta

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from series_helpers import T0, profile_doc, storm_docs

from ptype import Profile
from ptype.errors import OptionError, ProfileError
from ptype.roads import nowcast
from ptype.thermo.constants import Cp_d, Lf, rho_w


def _profiles(docs):
    return [Profile.from_document(d) for d in docs]


def test_parse_step_forms():
    assert nowcast.parse_step("15min") == timedelta(minutes=15)
    assert nowcast.parse_step("1h") == timedelta(hours=1)
    assert nowcast.parse_step(30) == timedelta(minutes=30)
    for bad in ("banana", "0min", "12h"):
        with pytest.raises(OptionError, match="step"):
            nowcast.parse_step(bad)


def test_build_timeline_midpoint_is_linear_in_time():
    a = profile_doc(T0, sfc_c=-4.0, rate=None)
    b = profile_doc(T0 + timedelta(hours=2), sfc_c=0.0, rate=None)
    out = nowcast.build_timeline(_profiles([a, b]), hours=2, step="1h", members=0,
                                 adjustments=())
    # Same pressure levels and surface pressure: level by level, the midpoint is the mean.
    assert [s["surface"]["temperature_2m_c"] for s in out["steps"]] == pytest.approx([-4, -2, 0])
    assert [s["valid_time"] for s in out["steps"]] == [
        "2026-01-27T00:00:00Z", "2026-01-27T01:00:00Z", "2026-01-27T02:00:00Z"]


def test_build_timeline_transitions_and_totals():
    out = nowcast.build_timeline(_profiles(storm_docs()), hours=6, step="30min", members=10,
                                 seed=3)
    types = [s["ptype"] for s in out["steps"]]
    assert types[0] == "SN" and types[-1] == "RA" and "FZRA" in types
    for t in out["transitions"]:
        assert t["from"] != t["to"]
    assert len(out["transitions"]) == sum(a != b for a, b in itertools.pairwise(types))
    fz = [s for s in out["steps"] if s["ptype"] == "FZRA"]
    assert all(s["hazards"]["freezing_on_road"] for s in fz)
    assert out["totals"]["ice_accretion_mm"] == pytest.approx(
        sum(s["hazards"]["ice_accretion_mm"] for s in out["steps"]), abs=0.02)
    for s in out["steps"]:
        assert sum(s["probabilities"].values()) == pytest.approx(1.0, abs=1e-6)
    assert out["caution"].startswith("Guidance only")


def test_build_timeline_dry_steps_are_none():
    docs = [profile_doc(T0, rate=0.0), profile_doc(T0 + timedelta(hours=1), rate=0.0)]
    out = nowcast.build_timeline(_profiles(docs), hours=1, members=0)
    assert {s["ptype"] for s in out["steps"]} == {"NONE"}
    assert all(s["ptype_if_precipitating"] == "SN" for s in out["steps"])


def test_build_timeline_errors():
    doc = profile_doc(T0)
    del doc["valid_time"]
    with pytest.raises(ProfileError, match=r"profiles\[0\].valid_time"):
        nowcast.build_timeline(_profiles([doc]))
    with pytest.raises(OptionError, match="hours"):
        nowcast.build_timeline(_profiles(storm_docs()), hours=0)
    with pytest.raises(OptionError, match="adjustments"):
        nowcast.build_timeline(_profiles(storm_docs()), adjustments=["magic"])


def test_build_timeline_outside_span_is_empty_with_message():
    out = nowcast.build_timeline(_profiles(storm_docs()), now=T0 + timedelta(days=2), members=0)
    assert out["steps"] == [] and "no profile covers" in out["message"]


# --- (a) observation blending ----------------------------------------------------------------

def test_observation_weight_efolds():
    assert float(nowcast.observation_weight(0, 0)) == 1.0
    assert float(nowcast.observation_weight(500, 0)) == pytest.approx(math.exp(-1))
    assert float(nowcast.observation_weight(0, 3)) == pytest.approx(math.exp(-1))


def test_build_timeline_observation_increment_decays():
    docs = [profile_doc(T0, sfc_c=-3.0, rate=None), profile_doc(T0 + timedelta(hours=6),
                                                                 sfc_c=-3.0, rate=None)]
    obs = [{"time": T0, "air_temperature_c": -1.0}]
    out = nowcast.build_timeline(_profiles(docs), hours=6, step="3h", members=0,
                                 observations=obs)
    t2m = [s["surface"]["temperature_2m_c"] for s in out["steps"]]
    # Increment +2 K at lead 0, 2 e^-1 at 3 h, 2 e^-2 at 6 h (e-folding 3 h, our choice).
    assert t2m == pytest.approx([-1.0, -3 + 2 * math.exp(-1), -3 + 2 * math.exp(-2)], abs=0.01)
    assert out["observation"]["air_temperature_c"] == -1.0
    # Observations after "now" or older than the maximum age are not used.
    assert nowcast.build_timeline(_profiles(docs), hours=1, members=0, observations=[
        {"time": T0 + timedelta(hours=1), "air_temperature_c": 5.0}])["observation"] is None


# --- (b) onset cooling ---------------------------------------------------------------------------

def test_onset_cooling_limits_and_wetbulb():
    from ptype.thermo import wet_bulb_temperature
    t, td = np.array([5.0]), np.array([-5.0])
    tw = wet_bulb_temperature(np.array([950.0]), t, td)
    t1, td1 = nowcast.onset_cooling(t, td, tw, 1.0)
    assert t1 == pytest.approx(tw) and td1 == pytest.approx(tw)  # saturated at its wet-bulb
    t0, td0 = nowcast.onset_cooling(t, td, tw, 0.0)
    assert t0 == pytest.approx(t) and td0 == pytest.approx(td)


def test_build_timeline_onset_cools_dry_subcloud_layer():
    dry = {"dry_below_hpa": 900}
    docs = [profile_doc(T0, sfc_c=3.0, rate=0.0, **dry),
            profile_doc(T0 + timedelta(hours=1), sfc_c=3.0, rate=2.0, **dry),
            profile_doc(T0 + timedelta(hours=3), sfc_c=3.0, rate=2.0, **dry)]
    with_adj = nowcast.build_timeline(_profiles(docs), hours=3, step="1h", members=0)
    without = nowcast.build_timeline(_profiles(docs), hours=3, step="1h", members=0,
                                     adjustments=())
    a = [s["surface"]["temperature_2m_c"] for s in with_adj["steps"]]
    b = [s["surface"]["temperature_2m_c"] for s in without["steps"]]
    assert a[0] == b[0]  # before onset: unchanged
    assert a[2] < b[2] - 0.5 and "onset" in with_adj["steps"][2]["adjustments"]


# --- (c) melting-layer cooling ---------------------------------------------------------------------

def test_melting_cooling_k_energy_balance():
    # dT = Lf rho_w P dt / (c_p M): 2 mm/h for 1 h over a layer of 1100 kg m-2 (about 1 km).
    p_m_s = 2.0 / 3.6e6
    expected = Lf * rho_w * p_m_s * 3600 / (Cp_d * 1100.0)
    assert float(nowcast.melting_cooling_k(2.0, 1.0, 1100.0)) == pytest.approx(expected)
    assert 0.5 < expected < 0.7  # about 0.6 K per hour: the magnitude Kain et al. (2000) discuss


@settings(max_examples=40, deadline=None)
@given(rate=st.floats(0.0, 30.0), hours=st.floats(0.0, 3.0), nose=st.floats(0.5, 6.0))
def test_apply_melting_cooling_never_below_zero_and_monotonic(rate, hours, nose):
    p = np.array([[1000, 950, 900, 850, 800, 750, 700.0]])
    z = np.array([[0, 450, 900, 1400, 1950, 2500, 3000.0]])
    t = np.array([[-2, -3, nose, nose, -1, -4, -8.0]])
    new, _ = nowcast.apply_melting_cooling(p, z, t, np.array([rate]), np.array([hours]))
    warm = t > 0
    assert np.all(new[warm] >= 0.0) and np.all(new <= t + 1e-12)
    assert np.array_equal(new[~warm], t[~warm])  # cold levels untouched
    more, _ = nowcast.apply_melting_cooling(p, z, t, np.array([rate * 2]), np.array([hours]))
    assert np.all(more <= new + 1e-12)


def test_apply_melting_cooling_needs_snow_from_above():
    # A warm layer reaching the top of the column has no sub-zero air above: not a melting layer.
    p = np.array([[1000, 900, 800.0]])
    z = np.array([[0, 900, 1900.0]])
    t = np.array([[-1, 2, 3.0]])
    new, cooled = nowcast.apply_melting_cooling(p, z, t, np.array([10.0]), np.array([3.0]))
    assert np.array_equal(new, t) and cooled[0] == 0.0


# --- command line ----------------------------------------------------------------------------

def test_cli_timeline_table_and_json(tmp_path):
    import json
    import subprocess
    import sys
    paths = []
    for i, doc in enumerate(storm_docs()):
        path = tmp_path / f"p{i}.json"
        path.write_text(json.dumps(doc))
        paths.append(str(path))
    run = [sys.executable, "-m", "ptype", "timeline", *paths, "--members", "5"]
    r = subprocess.run(run, check=False, capture_output=True, text=True, timeout=120)
    assert r.returncode == 0, r.stderr
    assert "transitions:" in r.stdout and "Guidance only" in r.stdout
    r = subprocess.run([*run, "--format", "json", "--step", "2h"], check=False,
                       capture_output=True,
                       text=True, timeout=120)
    out = json.loads(r.stdout)
    assert [s["valid_time"][11:16] for s in out["steps"]] == ["00:00", "02:00", "04:00", "06:00"]
    bad = subprocess.run([*run, "--step", "soon"], check=False, capture_output=True, text=True,
                         timeout=120)
    assert bad.returncode == 2 and "step" in bad.stderr and "Traceback" not in bad.stderr


def test_build_timeline_melting_cools_warm_nose_near_start_only():
    docs = [profile_doc(T0 + timedelta(hours=h), nose_c=16.0, rate=2.0) for h in (0, 12)]
    adj = nowcast.build_timeline(_profiles(docs), hours=12, step="1h", members=0,
                                 adjustments=["melting"])
    raw = nowcast.build_timeline(_profiles(docs), hours=12, step="1h", members=0, adjustments=())
    warm_adj = [s["warm_area_j_kg"] for s in adj["steps"]]
    warm_raw = [s["warm_area_j_kg"] for s in raw["steps"]]
    assert warm_adj[0] == pytest.approx(warm_raw[0])      # no precipitation time yet
    assert warm_adj[2] < warm_raw[2]                         # cooled near the start
    assert "melting" in adj["steps"][2]["adjustments"]
    # Fading with lead time: the reduction at 12 h is much smaller than at 2-3 h.
    assert (warm_raw[12] - warm_adj[12]) < 0.5 * max(warm_raw[i] - warm_adj[i] for i in (2, 3))
