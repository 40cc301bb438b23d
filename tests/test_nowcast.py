"""Tests of ptype.roads.nowcast: interpolation, the three nowcast adjustments, and the timeline."""

import itertools
import json
import math
from datetime import timedelta

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from series_helpers import PRESSURES, T0, profile_doc, storm_docs

import ptype
from ptype import Profile, thermo
from ptype.codes import Code
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


# --- (c) melting-layer cooling ---------------------------------------------------------------

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


# --- the timeline's stages, one at a time ------------------------------------------------------

def _clock(*minutes, now=T0, step=timedelta(minutes=30)):
    return nowcast.StepClock(tuple(now + timedelta(minutes=m) for m in minutes), now, step)


def test_validate_series_sorts_and_names_bad_fields():
    docs = storm_docs()
    profiles, step, adjustments = nowcast.validate_series(_profiles(docs[::-1]), 6, "1h", None)
    assert [p.valid_time for p in profiles] == sorted(p.valid_time for p in profiles)
    assert step == timedelta(hours=1) and adjustments == ()
    twice = _profiles([docs[0], docs[0]])
    with pytest.raises(ProfileError, match="two profiles are valid at 2026-01-27T00:00:00Z") as e:
        nowcast.validate_series(twice, 6, "1h", ())
    assert e.value.field == "profiles"
    with pytest.raises(ProfileError, match="none given"):
        nowcast.validate_series([], 6, "1h", ())
    for hours in (0, -1, 241):
        with pytest.raises(OptionError, match="hours") as e:
            nowcast.validate_series(_profiles(docs), hours, "1h", ())
        assert e.value.field == "hours"
    with pytest.raises(OptionError, match="'melt'") as e:
        nowcast.validate_series(_profiles(docs), 6, "1h", ("onset", "melt"))
    assert e.value.field == "adjustments"


def test_step_times_start_on_the_step_grid_inside_the_profiles_span():
    first, last = T0, T0 + timedelta(hours=2)
    step = timedelta(minutes=15)
    # "now" 25 min before the first profile: the first step is now + 2 steps (30 min).
    got = nowcast.step_times(first, last, T0 - timedelta(minutes=25), 12, step)
    assert got[0] == T0 + timedelta(minutes=5) and got[-1] == T0 + timedelta(minutes=110)
    assert all(b - a == step for a, b in itertools.pairwise(got))
    # The length limits the end before the last profile does.
    assert nowcast.step_times(first, last, T0, 1, step)[-1] == T0 + timedelta(hours=1)
    assert nowcast.step_times(first, last, last + step, 1, step) == []
    with pytest.raises(OptionError, match="2000 steps"):
        nowcast.step_times(first, T0 + timedelta(days=3), T0, 72, timedelta(minutes=1))


def test_step_clock_leads_and_step_hours():
    clock = _clock(0, 30, 90)
    assert clock.n == 3 and clock.hours_step == 0.5
    np.testing.assert_allclose(clock.lead_h, [0.0, 0.5, 1.5])
    np.testing.assert_allclose(clock.seconds - clock.seconds[0], [0, 1800, 5400])


def test_interpolate_to_steps_is_numpy_interp_level_by_level():
    profiles = _profiles(storm_docs())
    clock = _clock(*range(0, 361, 20))
    cols = nowcast.interpolate_to_steps(profiles, clock)
    # Independent reference: numpy.interp in time at every level (the profiles share levels).
    t_prof = np.array([p.valid_time.timestamp() for p in profiles])
    for level in range(profiles[0].temperature_c.size):
        # The shared grid keeps s = ln(p/p_sfc) to six decimals, which moves a level by up to
        # 5e-7 in s: 0.004 m at an 8 km scale height, 2e-4 K at the warm nose's steepest
        # gradient (about 400 K per unit of s).
        for name, atol in (("temperature_c", 5e-4), ("dewpoint_c", 5e-4), ("height_m", 0.01)):
            ref = np.interp(clock.seconds, t_prof, [getattr(p, name)[level] for p in profiles])
            np.testing.assert_allclose(getattr(cols, name)[:, level], ref, atol=atol)
    np.testing.assert_allclose(cols.pressure_hpa[:, ::-1][:, -1], 1000.0)
    # No screen temperature in these profiles: the lowest level stands in for it.
    np.testing.assert_allclose(cols.temperature_2m_c, cols.temperature_c[:, 0])


def test_interpolate_to_steps_surface_pressure_is_log_linear_in_time():
    low = profile_doc(T0)
    low["levels"] = [dict(lv, pressure_hpa=lv["pressure_hpa"] * 0.97) for lv in low["levels"]]
    cols = nowcast.interpolate_to_steps(
        _profiles([profile_doc(T0 + timedelta(hours=2)), low]), _clock(0, 60, 120))
    # ln p_sfc linear in time: the midpoint is the geometric mean of 970 and 1000 hPa.
    np.testing.assert_allclose(cols.pressure_hpa[:, 0], [970.0, math.sqrt(970e3), 1000.0])


def test_interpolate_to_steps_surface_gap_takes_nearest_known_value():
    docs = [profile_doc(T0, rate=1.0), profile_doc(T0 + timedelta(hours=2), rate=None),
            profile_doc(T0 + timedelta(hours=4), rate=3.0)]
    cols = nowcast.interpolate_to_steps(_profiles(docs), _clock(0, 30, 90, 150, 210, 240))
    # Nearest in time to a profile that has a rate, never a blend with the missing one.
    np.testing.assert_array_equal(cols.precipitation_rate_mm_h, [1, 1, 1, 3, 3, 3])


def _flat_series(**kw):
    return _profiles([profile_doc(T0, **kw), profile_doc(T0 + timedelta(hours=6), **kw)])


def test_adjust_for_observation_increment_fades_with_height_and_lead():
    profiles = _flat_series(sfc_c=-3.0, rate=1.0, road=-2.0, wind=6.0)
    clock = _clock(0, 90, 180, 360)
    cols = nowcast.interpolate_to_steps(profiles, clock)
    obs = nowcast.SurfaceObservation(time=T0, air_temperature_c=-1.0, dewpoint_c=-3.0,
                                     road_surface_temperature_c=-4.0,
                                     precipitation_rate_mm_h=3.0, wind_speed_m_s=2.0)
    out = nowcast.adjust_for_observation(cols, obs, profiles, clock)
    lead = clock.lead_h
    # Weight exp(-h/500 m) exp(-lead/3 h) (docs/nowcast.md, ours); increment +2 K in T.
    hagl = cols.height_m - cols.height_m[:, :1]
    expected = 2.0 * np.exp(-hagl / 500.0) * np.exp(-lead[:, None] / 3.0)
    np.testing.assert_allclose(out.temperature_c - cols.temperature_c, expected, atol=1e-12)
    w = np.exp(-lead / 3.0)
    np.testing.assert_allclose(out.temperature_2m_c, -3.0 + 2.0 * w)
    np.testing.assert_allclose(out.road_surface_temperature_c, -2.0 - 2.0 * w)
    np.testing.assert_allclose(out.precipitation_rate_mm_h, 3.0 * w + 1.0 * (1 - w))
    np.testing.assert_allclose(out.wind_speed_m_s, 2.0 * w + 6.0 * (1 - w))
    assert np.all(out.dewpoint_c <= out.temperature_c)
    assert np.all(out.dewpoint_2m_c <= out.temperature_2m_c)


def test_adjust_for_observation_without_forecast_values_persists_the_observation():
    profiles = _flat_series(rate=None, road=None)
    clock = _clock(0, 120, 240)
    cols = nowcast.interpolate_to_steps(profiles, clock)
    obs = nowcast.SurfaceObservation(time=T0, road_surface_temperature_c=-6.0,
                                     precipitation_rate_mm_h=0.5)
    out = nowcast.adjust_for_observation(cols, obs, profiles, clock)
    # Road: the observed value, following the forecast screen trend (flat here).
    np.testing.assert_allclose(out.road_surface_temperature_c, -6.0)
    # Rate: the observation persists for one e-folding lead (3 h), then is unknown again.
    np.testing.assert_array_equal(np.isnan(out.precipitation_rate_mm_h), [False, False, True])
    np.testing.assert_array_equal(out.temperature_c, cols.temperature_c)


def test_precipitation_spells_count_from_onsets_inside_the_timeline():
    rate = np.array([0.0, 0.05, 0.2, 1.0, np.nan, 2.0, 2.0])
    s = nowcast.precipitation_spells(rate, 0.5)
    np.testing.assert_array_equal(s.known, [1, 1, 1, 1, 0, 1, 1])
    np.testing.assert_array_equal(s.precipitating, [0, 0, 1, 1, 0, 1, 1])  # 0.1 mm/h threshold
    np.testing.assert_allclose(s.since_h, [0, 0, 0, 0.5, 0, 0, 0.5])
    np.testing.assert_array_equal(s.onset_inside, [0, 0, 1, 1, 0, 1, 1])
    ongoing = nowcast.precipitation_spells(np.array([1.0, 1.0, 0.0, 1.0]), 1.0)
    np.testing.assert_array_equal(ongoing.onset_inside, [0, 0, 0, 1])


def test_lead_fade_efolds_in_three_hours():
    np.testing.assert_allclose(nowcast.lead_fade(_clock(0, 180, 360)),
                               [1.0, math.exp(-1), math.exp(-2)])


def _step_columns(temperature_c, dewpoint_c, pressure_hpa, **surface):
    """One step's column as the stages see it, heights hypsometric from the profile model."""
    doc = {"levels": [{"pressure_hpa": p, "temperature_c": t, "dewpoint_c": d}
                      for p, t, d in zip(pressure_hpa, temperature_c, dewpoint_c)]}
    pr = Profile.from_document(doc)
    row = np.array
    return nowcast.StepColumns(
        pressure_hpa=row([pr.pressure_hpa]), temperature_c=row([pr.temperature_c]),
        dewpoint_c=row([pr.dewpoint_c]), height_m=row([pr.height_m]),
        temperature_2m_c=row([temperature_c[0]], float),
        dewpoint_2m_c=row([dewpoint_c[0]], float),
        road_surface_temperature_c=row([surface.get("road", -1.0)], float),
        precipitation_rate_mm_h=row([surface.get("rate", 1.0)], float),
        wind_speed_m_s=row([surface.get("wind", 5.0)], float))


def _spells(precipitating, since_h, onset_inside):
    p = np.array(precipitating, bool)
    return nowcast.Spells(np.ones(p.shape, bool), p, np.array(since_h, float),
                          np.array(onset_inside, bool))


def test_adjust_for_onset_moves_subcloud_air_toward_psychrolib_wetbulb():
    import psychrolib
    psychrolib.SetUnitSystem(psychrolib.SI)
    p = [1000.0, 950.0, 900.0, 850.0]
    t = [6.0, 4.0, 2.0, 0.5]
    td = [-1.0, -2.0, 1.9, -6.0]     # saturated (cloud base) at 900 hPa, dry above it
    cols = _step_columns(t, td, p)
    out, changed = nowcast.adjust_for_onset(cols, _spells([1], [0.5], [1]), np.array([0.5]),
                                            0.5)
    frac = 0.5 * (1.0 - math.exp(-1.0))  # (since + step) / 1 h e-folding, times fade (ours)
    for k in (0, 1):                 # below the cloud base: toward the wet-bulb
        # ASHRAE2017 ch. 1 thermodynamic wet-bulb via psychrolib, from the humidity ratio
        # (psychrolib reads a sub-zero dew point as a frost point).
        w = thermo.mixing_ratio_g_kg(p[k], td[k]) / 1000.0
        tw = psychrolib.GetTWetBulbFromHumRatio(t[k], w, p[k] * 100.0)
        assert out.temperature_c[0, k] == pytest.approx(t[k] - frac * (t[k] - tw), abs=0.05)
        assert out.dewpoint_c[0, k] == pytest.approx(td[k] + frac * (tw - td[k]), abs=0.05)
    # At and above the cloud base nothing changes.
    np.testing.assert_array_equal(out.temperature_c[0, 2:], cols.temperature_c[0, 2:])
    assert out.temperature_2m_c[0] < cols.temperature_2m_c[0] and changed.tolist() == [True]
    same, none = nowcast.adjust_for_onset(cols, _spells([1], [0.5], [0]), np.array([1.0]), 0.5)
    assert same is cols and none.tolist() == [False]


def test_adjust_for_melting_energy_balance_against_hydrostatic_mass():
    p = [1000.0, 950.0, 900.0, 850.0, 800.0, 750.0, 700.0]
    t = [-2.0, -3.0, 3.0, 3.0, -1.0, -4.0, -8.0]
    td = [x - 1.0 for x in t]
    one = _step_columns(t, td, p, rate=1.0)
    three = nowcast.StepColumns(**{k: np.repeat(getattr(one, k), 3, axis=0)
                                   for k in one.__dataclass_fields__})
    # Spell under way since the start, 2 h steps: 0, 2 and 4 h of melting, the last capped
    # at 3 h (ours); no fading here.
    out, cooled = nowcast.adjust_for_melting(three, _spells([1, 1, 1], [0, 2, 4], [0, 0, 0]),
                                             np.ones(3))
    assert cooled.tolist() == [False, True, True]
    # Energy balance (Kain2000): L_f rho_w P dt = c_p M dT, with the layer mass M from
    # hydrostatics, dp / g between the half levels around the warm layer (950|900, 850|800).
    mass = (0.5 * (950 + 900) - 0.5 * (850 + 800)) * 100.0 / 9.80665
    for step, hours in ((1, 2.0), (2, 3.0)):
        expected = Lf * rho_w * (1.0 / 3.6e6) * hours * 3600.0 / (Cp_d * mass)
        cooling = three.temperature_c[step, 2:4] - out.temperature_c[step, 2:4]
        np.testing.assert_allclose(cooling, expected, rtol=0.03)  # half levels in z vs in p
    np.testing.assert_array_equal(out.temperature_c[:, [0, 1, 4, 5, 6]],
                                  three.temperature_c[:, [0, 1, 4, 5, 6]])
    assert np.all(out.dewpoint_c <= out.temperature_c)
    dry, none = nowcast.adjust_for_melting(three, _spells([0, 0, 0], [0, 0, 0], [0, 0, 0]),
                                           np.ones(3))
    assert dry is three and not none.any()


def test_diagnose_steps_agrees_with_single_profile_and_dries_out():
    profiles = _profiles(storm_docs())
    clock = _clock(0, 120, 240, 360)          # exactly at the four profiles
    cols = nowcast.interpolate_to_steps(profiles, clock)
    wet = nowcast.precipitation_spells(cols.precipitation_rate_mm_h, clock.hours_step)
    diag = nowcast.diagnose_steps(cols, wet, 0, 0)
    single = [ptype.diagnose(p, members=0).code for p in profiles]
    assert [Code(int(c)) for c in diag.codes] == single
    assert len(set(single)) >= 2                 # the storm changes type
    dry = nowcast.Spells(np.ones(4, bool), np.array([1, 0, 1, 0], bool), np.zeros(4),
                         np.zeros(4, bool))
    d = nowcast.diagnose_steps(cols, dry, 0, 0)
    assert [Code(int(c)) for c in d.codes[[1, 3]]] == [Code.NONE, Code.NONE]
    np.testing.assert_array_equal(d.codes_if_precipitating, diag.codes)
    np.testing.assert_allclose(d.effective_probabilities.sum(axis=1), 1.0)
    assert d.effective_probabilities[1, int(Code.NONE)] == 1.0


def test_hazards_at_steps_frost_only_in_dry_weather():
    # Road -6 degC under air with a -3.5 degC dew point: below the frost point (about -3.1).
    profiles = _flat_series(sfc_c=-3.0, rate=None, road=-6.0)
    clock = _clock(0, 30)
    cols = nowcast.interpolate_to_steps(profiles, clock)
    cols = nowcast.replace(cols, precipitation_rate_mm_h=np.array([0.0, 1.0]))
    spells = nowcast.precipitation_spells(cols.precipitation_rate_mm_h, clock.hours_step)
    diag = nowcast.diagnose_steps(cols, spells, 0, 0)
    hz = nowcast.hazards_at_steps(diag, cols, spells, clock.hours_step)
    assert hz["frost"].tolist() == [True, False]
    assert hz["snow"].tolist() == [False, True]


def test_step_records_are_json_ready_with_wmo_codes():
    profiles = _profiles(storm_docs())
    clock = _clock(*range(0, 361, 60), step=timedelta(hours=1))
    cols = nowcast.interpolate_to_steps(profiles, clock)
    spells = nowcast.precipitation_spells(cols.precipitation_rate_mm_h, clock.hours_step)
    diag = nowcast.diagnose_steps(cols, spells, 5, 1)
    hz = nowcast.hazards_at_steps(diag, cols, spells, clock.hours_step)
    notes = [["onset"] if i == 2 else [] for i in range(clock.n)]
    steps = nowcast.step_records(clock, cols, spells, diag, hz, notes)
    json.dumps(steps, allow_nan=False)
    # GRIB2 code table 4.201, precipitation type (WMO306, Vol. I.2).
    wmo = {"RA": 1, "FZRA": 3, "SN": 5, "RASN": 7, "PL": 8, "DZ": 11, "FZDZ": 12}
    for i, s in enumerate(steps):
        assert s["lead_hours"] == i and s["adjustments"] == notes[i]
        if s["ptype"] in wmo:
            assert s["grib2_code"] == wmo[s["ptype"]]
        assert s["surface"]["road_surface_temperature_c"] == round(
            float(cols.road_surface_temperature_c[i]), 2)
        assert sum(s["probabilities"].values()) == pytest.approx(1.0, abs=0.01)


def test_adjustment_notes_keep_the_order_applied():
    applied = [("observation", np.array([1, 1, 1], bool)), ("onset", np.array([0, 1, 0], bool)),
               ("melting", np.array([0, 1, 1], bool))]
    assert nowcast.adjustment_notes(applied, 3) == [
        ["observation"], ["observation", "onset", "melting"], ["observation", "melting"]]


def _hazards(fz=False, prob=None, frost=False, snow=False, cm=0.0, ice=0.0, glaze=0.0,
             pellets_cm=0.0):
    return {"freezing_on_road": fz, "freezing_probability": prob, "frost": frost, "snow": snow,
            "snow_cm": cm, "ice_accretion_mm": ice, "flat_glaze_mm": glaze,
            "ice_pellets": pellets_cm > 0, "ice_pellets_cm": pellets_cm}


def test_transitions_and_timeline_totals_by_hand():
    steps = [{"valid_time": "t0", "ptype": "SN", "hazards": _hazards(snow=True, cm=0.4)},
             {"valid_time": "t1", "ptype": "FZRA",
              "hazards": _hazards(fz=True, prob=0.7, ice=0.3, glaze=0.5)},
             {"valid_time": "t2", "ptype": "FZRA",
              "hazards": _hazards(fz=True, prob=0.9, ice=None, glaze=0.25)},
             {"valid_time": "t3", "ptype": "PL", "hazards": _hazards(pellets_cm=0.2)},
             {"valid_time": "t4", "ptype": "NONE", "hazards": _hazards(frost=True)}]
    assert nowcast.transitions(steps) == [{"time": "t1", "from": "SN", "to": "FZRA"},
                                          {"time": "t3", "from": "FZRA", "to": "PL"},
                                          {"time": "t4", "from": "PL", "to": "NONE"}]
    totals = nowcast.timeline_totals(steps, timedelta(minutes=30))
    assert totals["hours_by_type"] == {"SN": 0.5, "FZRA": 1.0, "PL": 0.5, "NONE": 0.5}
    assert totals["ice_pellets_cm"] == 0.2 and totals["ice_pellets_hours"] == 0.5
    assert totals["ice_accretion_mm"] == 0.3 and totals["flat_glaze_mm"] == 0.75
    assert totals["snow_cm"] == 0.4 and totals["amounts_complete"] is False
    assert totals["freezing_on_road_hours"] == 1.0 and totals["frost_hours"] == 0.5
    assert totals["snow_hours"] == 0.5 and totals["max_freezing_probability"] == 0.9
    empty = nowcast.timeline_totals([], timedelta(minutes=30))
    assert empty["hours_by_type"] == {} and empty["amounts_complete"] is True


def test_profiles_on_common_levels_keep_exactly_their_levels():
    # Model runs (every profile on the same pressure levels) keep their own levels: no level
    # added twice beside its rounded copy (the top, say).
    from ptype.roads.nowcast import timeline_size
    profiles = [Profile.from_document(profile_doc(T0 + timedelta(hours=h), sfc_c=-3.0 + h / 8,
                                                  nose_c=h / 3)) for h in range(0, 25, 3)]
    assert timeline_size(profiles, hours=24, step="1h") == (25, len(PRESSURES))
