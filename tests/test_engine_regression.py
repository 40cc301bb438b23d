"""Engine regression: the diagnosis of a fixed corpus must not change when the code is refactored.

The expected file ``tests/data/engine_regression.json.gz`` was written once from the engine as it
stood before the speed work (``.venv/bin/python tests/test_engine_regression.py --write``) and is
compared exactly here: codes, rules and strings equal, floats within 1e-9 (values already rounded
by ``to_dict`` compare as rounded).  The corpus is the invented demo data (``soundings_demo``):
every demo sounding, a sample of the site series and of the verification profiles, their
Monte-Carlo members (``perturb``), full ``Diagnosis.to_dict`` outputs (steps and explanation
included), and the error messages of deliberately broken level lists.  This is a consistency
check against the project's own earlier output, not a physical reference: the physics is tested
against published sources in the per-module tests.
"""

from __future__ import annotations

import gzip
import json
import math
import re
import sys
from pathlib import Path

import numpy as np
import pytest

import ptype
from ptype.engine.columns import Columns
from ptype.engine.probability import perturb
from ptype.engine.run import diagnose_columns
from ptype.errors import ProfileError
from ptype.profile import Profile

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "soundings_demo"
EXPECTED = Path(__file__).parent / "data" / "engine_regression.json.gz"
MEMBERS_PER_PROFILE = 20
TOL = 1e-9


def _sample(paths, count):
    paths = sorted(paths)
    if len(paths) <= count:
        return paths
    step = len(paths) / count
    return [paths[int(i * step)] for i in range(count)]


def corpus_paths() -> list[Path]:
    paths = sorted((DEMO / "json").glob("*.json"))
    paths += _sample((DEMO / "series").glob("*/*.json"), 40)
    paths += _sample((DEMO / "verification" / "profiles").glob("*.json"), 60)
    return paths


def _load(path: Path) -> dict:
    return json.loads(path.read_text())


def _sixty_level_document() -> dict:
    # The benchmark profile (bench/bench_diagnose.py): freezing-rain shape, 60 levels.  A
    # frozen copy on purpose: the corpus must not move if the benchmark's profile does.
    p = np.linspace(1000.0, 250.0, 60)
    z = np.linspace(0.0, 10500.0, 60)
    t = np.interp(p, [250, 500, 700, 760, 820, 880, 950, 1000],
                  [-50, -22, -6, 0.5, 4.0, 0.5, -4.0, -2.0])
    td = t - np.where(p > 450, 0.6, 8.0)
    return {"levels": [{"pressure_hpa": float(a), "height_m": float(b), "temperature_c": float(c),
                        "dewpoint_c": float(d)} for a, b, c, d in zip(p, z, t, td)]}


def _broken_level_lists(doc: dict) -> list[list[dict]]:
    """Level lists that fail validation in different places (messages must stay identical)."""
    lv = [{k: v for k, v in lvl.items()} for lvl in doc["levels"]]
    cases = []

    def variant(i, **change):
        out = [dict(x) for x in lv]
        for key, value in change.items():
            if value is ...:
                out[i].pop(key, None)
            else:
                out[i][key] = value
        cases.append(out)

    n = len(lv)
    variant(n // 2, pressure_hpa=...)
    variant(n // 3, pressure_hpa=1200.0)
    variant(n - 1, pressure_hpa=-5.0)
    variant(2, temperature_c=...)
    variant(n // 2, temperature_c=75.5)
    variant(1, temperature_c=-130.25)
    variant(3, relative_humidity_pct=80.0)
    variant(n // 2, dewpoint_c=lv[n // 2]["temperature_c"] + 0.9)
    variant(4, dewpoint_c=lv[4]["temperature_c"] + 0.3)  # clamped with a warning: not an error
    variant(2, dewpoint_c=-170.0)
    variant(n - 2, pressure_hpa=lv[n - 3]["pressure_hpa"])
    variant(1, temperature_c="cold")
    variant(3, temperature_c=float("nan"))
    variant(2, windspeed=3.0)
    variant(5, dewpoint_c=..., relative_humidity_pct=130.0)
    variant(5, dewpoint_c=..., relative_humidity_pct=103.0)
    variant(6, dewpoint_c=..., mixing_ratio_g_kg=150.0)
    variant(6, dewpoint_c=..., mixing_ratio_g_kg=2.5)
    variant(7, dewpoint_c=..., wetbulb_c=lv[7]["temperature_c"] + 2.0)
    variant(7, dewpoint_c=..., wetbulb_c=lv[7]["temperature_c"] - 0.5)
    variant(7, dewpoint_c=..., wetbulb_c=lv[7]["temperature_c"] - 40.0)
    variant(1, dewpoint_c=...)
    if "height_m" in lv[0]:
        variant(n // 2, height_m=lv[0]["height_m"])
    cases.append(list(reversed(lv)))
    cases.append([{k: v for k, v in x.items() if k != "height_m"} for x in lv])
    cases.append(lv[:2])
    cases.append([{k: v for k, v in x.items() if k != "dewpoint_c"} for x in lv])
    return cases


def _validate(levels) -> dict:
    try:
        pr = Profile.from_levels(levels, where="case")
    except ProfileError as exc:
        return {"error": str(exc), "field": exc.field}
    return {"warnings": list(pr.warnings), "pressure_hpa": pr.pressure_hpa.tolist(),
            "height_m": pr.height_m.tolist(), "temperature_c": pr.temperature_c.tolist(),
            "dewpoint_c": pr.dewpoint_c.tolist()}


def compute_corpus() -> dict:
    paths = corpus_paths()
    docs = [_load(p) for p in paths]
    names = [str(p.relative_to(DEMO)) for p in paths]
    docs.append(_sixty_level_document())
    names.append("bench:sixty_levels")
    profiles = [Profile.from_document(d) for d in docs]

    # Vectorised core: controls and members in one batch.
    cols = Columns.from_profiles(profiles)
    batch = Columns.concat([cols, perturb(cols, MEMBERS_PER_PROFILE, seed=7)])
    core = diagnose_columns(batch, return_context=True)
    columns_out = {k: np.asarray(v).tolist() for k, v in core.items() if not k.startswith("_")}
    for name, res in core["_results"].items():
        columns_out[f"rule:{name}"] = np.asarray(res.rule).tolist()
    columns_out["rule:consensus"] = np.asarray(core["_consensus"].rule).tolist()

    diagnoses = {}
    for name, doc in zip(names, docs):
        diagnoses[name] = ptype.diagnose(doc, seed=1).to_dict()
    # A few other options: adiabatic wet-bulb, no members, a subset of methods.
    for name, doc in list(zip(names, docs))[::15]:
        diagnoses[name + "|adiabatic"] = ptype.diagnose(doc, seed=2, members=30,
                                                        wetbulb="adiabatic").to_dict()
        diagnoses[name + "|no-members"] = ptype.diagnose(doc, members=0).to_dict()
        diagnoses[name + "|subset"] = ptype.diagnose(doc, seed=3, members=10,
                                                     methods="ramer,baldwin,thickness").to_dict()

    validation = {}
    for name, doc in list(zip(names, docs))[::10]:
        for j, levels in enumerate(_broken_level_lists(doc)):
            validation[f"{name}#{j}"] = _validate(levels)
    return {"names": names, "columns": columns_out, "diagnoses": diagnoses,
            "validation": validation}


def _diff(expected, actual, path="$", out=None):
    """List of paths where ``actual`` differs from ``expected`` (floats within TOL)."""
    out = [] if out is None else out
    if len(out) > 20:
        return out
    if isinstance(expected, float) or isinstance(actual, float):
        if not (isinstance(expected, (int, float)) and isinstance(actual, (int, float))
                and not isinstance(expected, bool) and not isinstance(actual, bool)):
            out.append(f"{path}: {expected!r} != {actual!r}")
        elif math.isnan(expected) or math.isnan(actual):
            if not (math.isnan(expected) and math.isnan(actual)):
                out.append(f"{path}: {expected!r} != {actual!r}")
        elif not math.isclose(expected, actual, rel_tol=TOL, abs_tol=TOL):
            out.append(f"{path}: {expected!r} != {actual!r}")
    elif isinstance(expected, dict) and isinstance(actual, dict):
        if list(expected) != list(actual):
            out.append(f"{path}: keys {list(expected)} != {list(actual)}")
        for k in expected:
            if k in actual:
                _diff(expected[k], actual[k], f"{path}.{k}", out)
    elif isinstance(expected, list) and isinstance(actual, list):
        if len(expected) != len(actual):
            out.append(f"{path}: length {len(expected)} != {len(actual)}")
        for i, (a, b) in enumerate(zip(expected, actual)):
            _diff(a, b, f"{path}[{i}]", out)
    elif expected != actual or type(expected) is not type(actual):
        out.append(f"{path}: {expected!r} != {actual!r}")
    return out


def _normalise(obj):
    # JSON round trip, so both sides have the same container and number types.
    return json.loads(json.dumps(obj, allow_nan=True))


@pytest.fixture(scope="module")
def expected():
    with gzip.open(EXPECTED, "rt") as fh:
        return json.load(fh)


@pytest.fixture(scope="module")
def actual():
    return _normalise(compute_corpus())


def test_corpus_covers_demo_data(expected):
    assert len(expected["names"]) >= 100
    assert len(expected["diagnoses"]) > len(expected["names"])
    assert any("error" in v for v in expected["validation"].values())
    assert any("warnings" in v for v in expected["validation"].values())


def test_diagnose_columns_unchanged(expected, actual):
    assert actual["names"] == expected["names"]
    assert _diff(expected["columns"], actual["columns"]) == []


def _without_wording(obj):
    """``obj`` with the sentences blanked: every step's ``text`` and every ``explanation``
    sentence become ``""`` (their number and place are kept).  The wording of explanations
    may change (it is written by ptype.engine.wording); the numbers, codes, rules, thresholds
    and sources they explain may not."""
    if isinstance(obj, dict):
        out = {}
        for key, value in obj.items():
            if key == "explanation" and isinstance(value, list):
                out[key] = ["" for _ in value]
            elif key == "text" and isinstance(value, str) and "rule" in obj:
                out[key] = ""
            else:
                out[key] = _without_wording(value)
        return out
    if isinstance(obj, list):
        return [_without_wording(v) for v in obj]
    return obj


def _sentences(obj):
    if isinstance(obj, dict):
        for key, value in obj.items():
            if key == "explanation":
                yield from value
            elif key == "text" and "rule" in obj:
                yield value
            else:
                yield from _sentences(value)
    elif isinstance(obj, list):
        for v in obj:
            yield from _sentences(v)


def test_diagnose_to_dict_unchanged(expected, actual):
    assert _diff(_without_wording(expected["diagnoses"]),
                 _without_wording(actual["diagnoses"])) == []


def test_explanation_sentences_are_written(actual):
    sentences = list(_sentences(actual["diagnoses"]))
    assert len(sentences) > 1000
    assert all(isinstance(s, str) and s.strip() for s in sentences)
    # One number format (ptype.engine.wording): a true minus sign, never "-0.0".
    bad = re.compile(r"\u22120\.0\b|(?<![\w.])-\d|\bnan\b")
    assert not [s for s in sentences if bad.search(s)]


def test_profile_validation_unchanged(expected, actual):
    assert _diff(expected["validation"], actual["validation"]) == []



# -- compiled kernels against their numpy paths ----------------------------------------------------

@pytest.fixture(scope="module")
def member_columns():
    profiles = [Profile.from_document(_load(p)) for p in corpus_paths()[::4]]
    cols = Columns.from_profiles(profiles)
    return Columns.concat([cols, perturb(cols, 10, seed=11)])


def test_ramer_generation_layer_compiled_matches_numpy(member_columns):
    from ptype.engine.methods import ramer
    if not ramer._COMPILED:
        pytest.skip("numba not installed")
    c = member_columns
    rng = np.random.default_rng(3)
    shape = c.pressure_hpa.shape
    for rh in (c.relative_humidity_pct,
               np.clip(c.relative_humidity_pct + rng.normal(0.0, 15.0, shape), 1.0, 100.0),
               np.where(rng.random(shape) < 0.5, 100.0, 50.0), np.full(shape, 80.0)):
        fast = ramer._generation_layer_fast(c.pressure_hpa, rh, c.wetbulb_c)
        slow = ramer._generation_layer_numpy(c.pressure_hpa, rh, c.wetbulb_c)
        for a, b in zip(fast, slow):
            np.testing.assert_array_equal(a, b)
        assert np.isfinite(slow[0]).any()
    assert len(ramer._generation_layer_fast(c.pressure_hpa, c.relative_humidity_pct)) == 2

def _ramer_march_inputs(c):
    from ptype.engine.methods import ramer
    top, _, top_tw = ramer.generation_layer(c.pressure_hpa, c.relative_humidity_pct, c.wetbulb_c)
    ice0 = np.where(np.isfinite(top) & (top_tw <= ramer.FREEZING_ONSET_TW_C), 1.0, 0.0)
    return c.pressure_hpa, c.wetbulb_c, c.relative_humidity_pct / 100.0, top, ice0


@pytest.mark.parametrize("room", [None, 1])
def test_ramer_march_compiled_matches_numpy(member_columns, monkeypatch, room):
    # room=1 makes the compiled march run out of stage room and march again.
    from ptype.engine.methods import ramer
    if not ramer._COMPILED:
        pytest.skip("numba not installed")
    if room is not None:
        monkeypatch.setattr(ramer, "_STAGE_ROOM", room)
    args = _ramer_march_inputs(member_columns)
    ice, was_liquid, stages, count = ramer._march_fast(*args)
    ice_np, was_liquid_np, stages_np, count_np = ramer._march_numpy(*args)
    np.testing.assert_array_equal(ice, ice_np)
    np.testing.assert_array_equal(was_liquid, was_liquid_np)
    np.testing.assert_array_equal(count, count_np)
    assert count_np.max() >= 3  # columns with several warm and cold stages are covered
    assert ((ice_np > 0) & (ice_np < 1)).any()  # partial fractions, not only 0 and 1
    assert list(stages) == list(stages_np)
    for key, value in stages_np.items():
        np.testing.assert_array_equal(stages[key], value, err_msg=key)


def test_ramer_march_compiled_matches_numpy_on_rough_profiles(member_columns):
    # Noisy wet-bulbs and RH (many crossings of 0 and -6.6 degC) and missing values.
    from ptype.engine.methods import ramer
    if not ramer._COMPILED:
        pytest.skip("numba not installed")
    rng = np.random.default_rng(17)
    p, tw, rh, top, ice0 = _ramer_march_inputs(member_columns)
    tw = tw + rng.normal(0.0, 3.0, tw.shape)
    rh = np.clip(rh + rng.normal(0.0, 0.2, rh.shape), 0.0, 1.0)
    tw = np.where(rng.random(tw.shape) < 0.02, np.nan, tw)
    rh = np.where(rng.random(rh.shape) < 0.02, np.nan, rh)
    fast = ramer._march_fast(p, tw, rh, top, ice0)
    slow = ramer._march_numpy(p, tw, rh, top, ice0)
    for a, b in zip(fast[:2] + fast[3:], slow[:2] + slow[3:]):
        np.testing.assert_array_equal(a, b)
    assert slow[3].max() >= 5
    for key, value in slow[2].items():
        np.testing.assert_array_equal(fast[2][key], value, err_msg=key)


def test_czys_lnp_integral_compiled_matches_numpy(member_columns):
    from ptype.engine.methods import czys
    if not czys._COMPILED:
        pytest.skip("numba not installed")
    c = member_columns
    rng = np.random.default_rng(23)
    n = c.n_columns
    p = c.pressure_hpa
    e = czys.saturation_vapor_pressure_hpa(c.dewpoint_c)
    # Targets between levels, exactly on levels, outside the column and missing.
    levels = p[np.arange(n), rng.integers(0, 8, n)]
    targets = (rng.uniform(300.0, 1050.0, n), np.where(rng.random(n) < 0.3, levels, 700.0),
               np.where(rng.random(n) < 0.1, np.nan, p[:, 0]))
    fast = czys._lnp_integral_fast(p, e, targets)
    slow = czys._lnp_integral_numpy(p, e, targets)
    for a, b in zip(fast, slow):
        np.testing.assert_array_equal(a, b)
    assert np.isfinite(slow[0]).any() and np.isnan(slow[0]).any()


def test_correlated_noise_compiled_matches_numpy(member_columns):
    from ptype.engine import probability
    if not probability._COMPILED:
        pytest.skip("numba not installed")
    z = member_columns.height_m
    fast = probability.correlated_noise(z, np.random.default_rng(3))
    rng = np.random.default_rng(3)
    white = rng.standard_normal(z.shape)
    dz = np.nan_to_num(np.diff(z, axis=1), nan=np.inf)
    r = np.exp(-np.abs(dz) / probability.CORRELATION_LENGTH_M)
    slow = probability._ar1_numpy(r, np.sqrt(1.0 - r * r), white)
    np.testing.assert_array_equal(fast, slow)


def test_interpolate_at_pressures_matches_one_at_a_time(member_columns):
    from ptype.engine.columns import interpolate_at_pressure, interpolate_at_pressures
    c = member_columns
    levels = np.unique(c.pressure_hpa[np.isfinite(c.pressure_hpa)])[::9]
    levels = np.concatenate([[1100.0, 1000.0, 850.0, 700.0, 500.0, 250.0, 10.0], levels])
    together = interpolate_at_pressures(c.pressure_hpa, c.height_m, levels)
    for j, target in enumerate(levels):
        np.testing.assert_array_equal(together[:, j],
                                      interpolate_at_pressure(c.pressure_hpa, c.height_m, target))
    assert np.isnan(together).any() and np.isfinite(together).any()

@pytest.mark.parametrize("field", ["temperature_c", "wetbulb_c", "rounded", "noise"])
def test_analyse_layers_compiled_matches_numpy(member_columns, field):
    from ptype.engine import layers
    if not layers._COMPILED:
        pytest.skip("numba not installed")
    c = member_columns
    values = {"temperature_c": c.temperature_c, "wetbulb_c": c.wetbulb_c,
              # levels exactly at 0 degC, and many sign changes per column
              "rounded": np.round(c.temperature_c),
              "noise": np.random.default_rng(1).normal(0.0, 3.0, c.temperature_c.shape)}[field]
    fast = layers._analyse_layers_compiled(c.pressure_hpa, c.height_m, values, layers.TOP_LIMIT_HPA)
    slow = layers._analyse_layers_numpy(c.pressure_hpa, c.height_m, values, layers.TOP_LIMIT_HPA)
    assert slow.count.max() >= 3
    for name in ("kind", "bottom_hpa", "top_hpa", "bottom_m", "top_m", "area_j_kg", "extreme_c",
                 "count"):
        a, b = getattr(fast, name), getattr(slow, name)
        assert a.dtype == b.dtype, name
        np.testing.assert_array_equal(a, b, err_msg=name)

@pytest.mark.parametrize("part", ["net", "positive", "negative"])
def test_baldwin_area_compiled_matches_numpy(member_columns, part, monkeypatch):
    from ptype.engine.methods import baldwin
    if not baldwin._COMPILED:
        pytest.skip("numba not installed")
    c = member_columns
    rng = np.random.default_rng(2)
    n = c.n_columns
    z = c.height_m
    bottoms = [c.surface_height_m, c.surface_height_m + rng.uniform(-500.0, 3000.0, n),
               np.where(rng.random(n) < 0.2, np.nan, c.surface_height_m)]
    tops = [c.surface_height_m + 3000.0, rng.uniform(0.0, 12000.0, n),
            np.where(rng.random(n) < 0.2, np.nan, 5000.0), c.surface_height_m - 100.0]
    for values in (c.wetbulb_adiabatic_c, c.wetbulb_adiabatic_c + 4.0,
                   rng.normal(0.0, 5.0, z.shape)):
        for lo in bottoms:
            for hi in tops:
                fast = baldwin.area_k_m(z, values, lo, hi, part)
                with monkeypatch.context() as m:
                    m.setattr(baldwin, "_COMPILED", False)
                    slow = baldwin.area_k_m(z, values, lo, hi, part)
                np.testing.assert_array_equal(fast, slow)

def test_cloud_top_seeding_compiled_matches_numpy(member_columns):
    from ptype.engine.layers import cumulative_dry_depth_m
    from ptype.engine.methods import cloud_top
    from ptype.engine.methods.base import Context
    if not cloud_top._COMPILED:
        pytest.skip("numba not installed")
    c = member_columns
    ctx = Context(c)
    cl = ctx.cloud_layers
    cum_dry = cumulative_dry_depth_m(c.height_m, ctx.dry_mask)
    rng = np.random.default_rng(0)
    colder = cl.min_temperature_c - rng.uniform(0.0, 15.0, cl.min_temperature_c.shape)
    for min_t in (cl.min_temperature_c, colder):
        for dry in (cum_dry, 2.5 * cum_dry):
            ice = np.empty(c.n_columns, dtype=bool)
            seeded = np.empty(c.n_columns, dtype=bool)
            cloud_top._seeding_compiled(cl.count, min_t, cl.top_index, cl.bottom_index, dry,
                                        ice, seeded)
            ice_np, seeded_np = cloud_top._seeding_numpy(cl.count, min_t, cl.top_index,
                                                         cl.bottom_index, dry)
            np.testing.assert_array_equal(ice, ice_np)
            np.testing.assert_array_equal(seeded, seeded_np)
            assert seeded_np.any() and ice_np.any() and not ice_np.all()

if __name__ == "__main__":
    if "--write" in sys.argv:
        EXPECTED.parent.mkdir(exist_ok=True)
        data = json.dumps(_normalise(compute_corpus()), separators=(",", ":"), allow_nan=True)
        with gzip.open(EXPECTED, "wt", compresslevel=9) as fh:
            fh.write(data)
        print(f"wrote {EXPECTED} ({EXPECTED.stat().st_size} bytes)")
