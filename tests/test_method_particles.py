"""The particle method (ptype.engine.methods.particles): interface, type table, explanations.

The physics is tested in tests/test_particles_physics.py and tests/test_particles_march.py; here
the soundings are invented (tests/particles_support.py) and the expected types follow from the
published reasoning named beside each case.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from particles_support import HEIGHTS_M, columns, surface_warm_layer, warm_nose

from ptype.codes import NO_RESULT, Code
from ptype.engine.columns import Columns
from ptype.engine.methods import METHOD_NAMES, get_method, particles
from ptype.engine.methods.base import Context
from ptype.engine.particles import distribution


def run(t, **kw):
    options = {k: kw.pop(k) for k in ("nucleation_temperature_c", "rate_mm_h") if k in kw}
    return particles.run(Context(columns(t, **kw)), **options)


def particles_step():
    from ptype.engine.particles.march import STEP_M
    return STEP_M


def rule(result, i=0):
    return particles.RULES[int(result.rule[i])]


def test_module_interface():
    m = get_method("particles")
    assert m is particles and "particles" in METHOD_NAMES
    assert m.NAME == "particles" and m.TITLE and m.REFERENCE and m.WETBULB == "isobaric"
    assert len(particles.RULES) == len(set(particles.RULES)) == len(particles._CODE_OF_RULE)
    assert [name for name, _ in particles.TYPE_TABLE] == list(particles.RULES[2:])


# -- the type table: just inside and just outside every threshold (ours) --------------------------

def table(snowlike, liquid, refrozen, *, freezing=False, drizzle=False, melted=0.0):
    n = np.size(liquid)
    return particles._rules(np.ones(n, bool), np.ones(n, bool), np.full(n, drizzle),
                            np.full(n, freezing), (np.asarray(snowlike), np.asarray(liquid),
                                                   np.asarray(refrozen)), np.full(n, melted))


@pytest.mark.parametrize("freezing,expected", [(True, Code.FZRA), (False, Code.RA)])
def test_table_dominant_liquid(freezing, expected):
    # Ours: liquid >= 0.9 alone; liquid reaching freezing ground is freezing rain.
    r = table([0.099, 0.0], [0.9, 0.899], [0.001, 0.101], freezing=freezing)
    assert particles._CODE_OF_RULE[r[0]] == expected
    assert particles._CODE_OF_RULE[r[1]] == (Code.FZRAPL if freezing else Code.RAPL)


def test_table_dominant_pellets_and_mixes():
    r = table([0.1, 0.0, 0.2, 0.75, 0.85, 0.95], [0.0, 0.1, 0.0, 0.1, 0.1, 0.0],
              [0.9, 0.9, 0.8, 0.15, 0.05, 0.05], melted=0.2)
    codes = particles._CODE_OF_RULE[r]
    assert codes.tolist() == [Code.PL, Code.PL, Code.PL, Code.RAPL, Code.RASN, Code.SN]
    assert [particles.RULES[k] for k in r] == ["refrozen_pellets", "refrozen_pellets",
                                               "pellets_with_snow", "liquid_pellets",
                                               "liquid_snow", "snow"]


def test_table_snow_with_pellets_and_wet_snow():
    r = table([0.85, 0.85, 1.0, 1.0, 1.0], [0.0, 0.0, 0.0, 0.0, 0.0], [0.15, 0.15, 0.0, 0.0, 0.0])
    assert particles.RULES[r[0]] == "snow_with_pellets"
    wet = table([1.0, 1.0], [0.0, 0.0], [0.0, 0.0], melted=0.5)
    dry = table([1.0], [0.0], [0.0], melted=0.499)
    frozen_ground = table([1.0], [0.0], [0.0], melted=0.9, freezing=True)
    assert [particles.RULES[k] for k in (*wet, *dry, *frozen_ground)] == [
        "wet_snow", "wet_snow", "snow", "snow"]


def test_table_drizzle():
    r = [table([0.0], [0.5], [0.5], drizzle=True)[0], table([0.0], [0.51], [0.49], drizzle=True,
                                                           freezing=True)[0],
         table([0.0], [1.0], [0.0], drizzle=True)[0]]
    assert [particles._CODE_OF_RULE[k] for k in r] == [Code.PL, Code.FZDZ, Code.DZ]


# -- invented soundings ----------------------------------------------------------------------------

def test_cold_saturated_column_is_snow():
    # No air above 0 degC: snow (every method; common practice).
    r = run(-3.0 - 6.5e-3 * HEIGHTS_M)
    assert r.code[0] == Code.SN and rule(r) == "snow"
    assert r.value("snow", 0) == 1.0


def test_deep_surface_warm_layer_is_rain():
    # A 1200 m saturated surface warm layer (+7.8 degC at the ground, area about 170 J/kg, far
    # above Bourgouin's 13.2 J/kg): rain.
    r = run(surface_warm_layer(1200.0), saturated_above_m=0.0)
    assert r.code[0] == Code.RA and r.value("liquid", 0) == 1.0


def test_strong_nose_over_shallow_cold_layer_is_freezing_rain():
    # Warm nose +4 degC over 1 km melts everything; a 300 m cold layer at -3 degC at the ground
    # cannot nucleate the drops (Bigg 1953; WPC guidance: refreezing needs about -8 degC):
    # freezing rain.
    r = run(warm_nose(300.0, -3.0, 4.0, 1000.0), saturated_above_m=0.0)
    assert r.code[0] == Code.FZRA and rule(r) == "liquid_freezing"
    assert np.isfinite(r.value("melting_complete_m", 0))


def test_weak_nose_over_deep_cold_layer_is_ice_pellets():
    # Weak nose (+0.4 degC over 500 m) leaves ice cores in all but the smallest flakes; a 1 km cold
    # layer at -8 degC refreezes them: ice pellets (partly melted flakes refreeze readily: WPC
    # guidance; Stewart & King 1987: a warm layer below 1 degC melts only partly).
    r = run(warm_nose(1000.0, -8.0, 0.4, 500.0), saturated_above_m=0.0)
    assert r.code[0] == Code.PL
    assert r.value("refrozen", 0) >= particles.DOMINANT
    assert np.isnan(r.value("melting_complete_m", 0))
    assert r.value("refreezing_start_m", 0) == pytest.approx(1000.0, abs=particles_step())


def test_warm_topped_cloud_gives_freezing_drizzle():
    # A saturated layer from the ground to 1500 m whose coldest temperature is -6 degC, dry above:
    # no ice nucleation (NWS guidance, ice at -10 degC or colder), drizzle; the ground is
    # below 0 degC: freezing drizzle (Huffman & Norman 1988).
    t = -2.0 - 2.7e-3 * HEIGHTS_M
    r = run(t, relative_humidity_pct=np.where(HEIGHTS_M <= 1500.0, 100.0, 30.0))
    assert r.value("starts_liquid", 0) == 1.0
    assert r.code[0] == Code.FZDZ and rule(r) == "drizzle_freezing"
    assert r.value("generating_height_m", 0) == pytest.approx(1500.0)


def test_no_cloud_gives_no_result():
    r = run(-3.0 - 6.5e-3 * HEIGHTS_M, relative_humidity_pct=50.0)
    assert r.code[0] == NO_RESULT and rule(r) == "no_cloud"
    assert len(r.steps(0)) == 1


def test_single_level_gives_no_result():
    cols = Columns.from_arrays([[1000.0]], [[-5.0]], [[-5.0]])
    r = particles.run(Context(cols))
    assert r.code[0] == NO_RESULT and rule(r) == "insufficient_levels"


def test_rate_from_profile_else_default():
    t = np.array([surface_warm_layer(200.0)] * 2)
    cols = columns(t, saturated_above_m=0.0, precipitation_rate_mm_h=np.array([2.0, np.nan]))
    r = particles.run(Context(cols))
    assert r.values["precipitation_rate_mm_h"].tolist() == [2.0, distribution.DEFAULT_RATE_MM_H]
    assert r.values["rate_from_profile"].tolist() == [1.0, 0.0]
    # Bigger flakes at the higher rate melt less in the same layer (docs/particles.md).
    assert r.value("ground_melted_fraction", 0) < r.value("ground_melted_fraction", 1)


def test_nucleation_temperature_option_freezes_melted_drops():
    # Completely melted drops in a 1 km layer reaching -10 degC: Bigg's rate leaves most liquid;
    # the -8 degC rule of forecasting practice (WPC) freezes them once the wet-bulb passes -8.
    t = warm_nose(1000.0, -10.0, 3.0, 1000.0)
    bigg = run(t, saturated_above_m=0.0)
    rule_8 = run(t, saturated_above_m=0.0, nucleation_temperature_c=-8.0)
    assert bigg.value("liquid", 0) > 0.5
    assert rule_8.value("refrozen", 0) > 0.5 > rule_8.value("liquid", 0)


def test_vectorised_equals_column_by_column():
    rng = np.random.default_rng(3)
    t = np.array([warm_nose(*p) for p in rng.uniform([100, -14, 0.2, 200], [1500, -1, 5, 1400],
                                                     (8, 4))])
    together = run(t, saturated_above_m=0.0)
    for i in range(len(t)):
        alone = run(t[i], saturated_above_m=0.0)
        assert alone.code[0] == together.code[i]
        for k in ("snow", "melting", "liquid", "refrozen", "melting_half_m"):
            np.testing.assert_allclose(alone.values[k][0], together.values[k][i], rtol=1e-12)


def test_values_shapes_for_integration():
    t = np.array([surface_warm_layer(300.0), warm_nose(600.0, -6.0, 2.0, 800.0)])
    r = run(t, saturated_above_m=0.0)
    n, L = t.shape
    for k, a in r.values.items():
        assert a.shape == ((n, L) if k.endswith("_levels") else (n,)), k
    fr = np.array([r.values[k] for k in ("snow", "melting", "liquid", "refrozen")])
    np.testing.assert_allclose(fr.sum(axis=0), 1.0, atol=1e-12)
    levels = r.values["melted_fraction_levels"]
    gen = r.values["generating_height_m"]
    assert np.all(np.isnan(levels[HEIGHTS_M[None, :] > gen[:, None]]))
    # The ground value of the per-level arrays is the ground state.
    np.testing.assert_allclose(levels[:, 0], r.values["ground_melted_fraction"])


def test_explanation_is_built_from_the_values():
    r = run(warm_nose(1000.0, -8.0, 0.4, 500.0), saturated_above_m=0.0,
            precipitation_rate_mm_h=1.5)
    steps = r.steps(0)
    assert [s.rule for s in steps] == ["generating_level", "size_distribution", "melting",
                                       "refreezing", rule(r)]
    assert all(s.source for s in steps)
    v = {k: a[0] for k, a in r.values.items() if a.ndim == 1}
    assert f"{v['precipitation_rate_mm_h']:.2f} mm/h" in steps[1].text
    assert f"{v['melting_start_m'] - v['surface_height_m']:.0f} m above the ground" in \
        steps[2].text
    assert "not complete" in steps[2].text
    assert f"{100 * v['ground_refrozen_ice']:.0f} %" in steps[3].text
    assert "ice pellets (PL)" in steps[-1].text
    assert steps[-1].values["refrozen"] == pytest.approx(v["refrozen"])
    assert all(isinstance(s.to_dict(), dict) for s in steps)


def test_explanation_of_drizzle_and_no_melting():
    t = -2.0 - 2.7e-3 * HEIGHTS_M
    drizzle = run(t, relative_humidity_pct=np.where(HEIGHTS_M <= 1500.0, 100.0, 30.0))
    texts = [s.text for s in drizzle.steps(0)]
    assert "makes no ice" in texts[0] and "freezing drizzle" in texts[-1]
    snow = run(-3.0 - 6.5e-3 * HEIGHTS_M)
    assert [s.rule for s in snow.steps(0)][2] == "no_melting"


#: An invented demo sounding of freezing rain (a strong warm nose over a cold surface layer).
DEMO_FZRA = (Path(__file__).resolve().parents[1] / "soundings_demo" / "json"
             / "mistleby-bridge_20260127T1600.json")


def test_diagnosis_json_carries_the_particle_fractions_and_levels():
    # What the page and API clients read: fractions at the ground that sum to 1, the melting
    # heights, and per-level fractions on the profile's own levels.
    import ptype
    d = ptype.diagnose(str(DEMO_FZRA), members=0).to_dict()
    block = d["methods"]["particles"]
    fractions = block["mass_fractions"]
    assert set(fractions) == {"snow", "melting", "liquid", "refrozen"}
    assert abs(sum(fractions.values()) - 1.0) < 1e-3 and min(fractions.values()) >= 0.0
    assert block["melting_start_m"] >= block["melting_half_m"] >= block["melting_complete_m"]
    n = len(d["profile"]["pressure_hpa"])
    assert len(d["profile"]["melted_fraction"]) == len(d["profile"]["refrozen_fraction"]) == n
    assert any("particle model" in s for s in d["explanation"])
