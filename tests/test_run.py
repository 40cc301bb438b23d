"""The engine's entry point (ptype/engine/run.py): method selection, the control pass, the
energies, member probabilities in batches, and the consensus-only shortcut."""

from __future__ import annotations

import gzip
import json
import math

import numpy as np
import pytest

import ptype
from ptype.codes import Code
from ptype.engine.columns import Columns
from ptype.engine.consensus import VOTERS
from ptype.engine.methods import METHOD_NAMES
from ptype.engine.methods.base import Context
from ptype.engine.probability import perturb
from ptype.engine.run import (
    EngineRun,
    consensus_methods,
    diagnose_columns,
    member_probabilities,
    method_names,
    run_columns,
    warm_cold_energies,
)
from ptype.errors import OptionError
from ptype.profile import Profile


def document(p, t, td):
    return {"levels": [{"pressure_hpa": a, "temperature_c": b, "dewpoint_c": c}
                       for a, b, c in zip(p, t, td)]}


# A classic freezing-rain sounding (constructed here, not measured): ice-producing cloud, warm
# nose ~ +4.6 degC, shallow cold surface layer.
FZRA_P = [990, 950, 900, 870, 820, 780, 750, 700, 600, 500, 400, 300]
FZRA_T = [-2.5, -3.5, -1.0, 2.0, 4.6, 1.0, -1.5, -5.0, -12.0, -22.0, -33.0, -45.0]
FZRA_TD = [-3.0, -4.0, -1.5, 1.5, 4.0, 0.5, -2.0, -5.5, -13.0, -23.5, -40.0, -55.0]


def _fzra_columns(n=1):
    prof = Profile.from_document(document(FZRA_P, FZRA_T, FZRA_TD))
    return Columns.from_profiles([prof] * n)


# -- method selection ------------------------------------------------------------------------------

def test_method_names_default_and_order():
    assert method_names(None) == METHOD_NAMES
    # A string or any order: returned in METHOD_NAMES order.
    assert method_names(" jennings, ramer ") == ("ramer", "jennings")
    assert method_names(["czys", "bourgouin"]) == ("bourgouin", "czys")


@pytest.mark.parametrize("methods, text", [("ramer,magic", "unknown method 'magic'"),
                                           ([], "expected at least one method name"),
                                           (",", "expected at least one method name")])
def test_method_names_refuses(methods, text):
    with pytest.raises(OptionError, match=text) as info:
        method_names(methods)
    assert info.value.field == "methods"


def test_consensus_methods_are_the_voters():
    assert consensus_methods(None) == VOTERS
    assert consensus_methods("ramer,thickness,jennings") == ("ramer",)
    # No voter among them: the consensus falls back to the surface, the list is kept.
    assert consensus_methods("thickness,jennings") == ("thickness", "jennings")


# -- energies --------------------------------------------------------------------------------------

def test_warm_cold_energies_by_hand():
    # Levels where T crosses 0 degC exactly, T linear in ln p between levels, so the
    # Bourgouin (2000) areas R_d * integral T d ln p are trapezoids, worked by hand:
    #   warm 900-700 hPa: R_d (1.5 ln(900/850) + 3 ln(850/800) + 1.5 ln(800/700));
    #   cold below it, 1000-900 hPa (T from -2 to 0): R_d * 1 * ln(1000/900).
    rd = 287.04
    p = np.array([[1000.0, 900.0, 850.0, 800.0, 700.0, 500.0]])
    t = np.array([[-2.0, 0.0, 3.0, 3.0, 0.0, -20.0]])
    ctx = Context(Columns.from_arrays(p, t, t - 1.0))
    warm, cold = warm_cold_energies(ctx)
    expected_warm = rd * (1.5 * math.log(900 / 850) + 3.0 * math.log(850 / 800)
                          + 1.5 * math.log(800 / 700))
    assert warm[0] == pytest.approx(expected_warm, abs=0.01)
    assert cold[0] == pytest.approx(rd * math.log(1000 / 900), abs=0.01)


# -- the control -----------------------------------------------------------------------------------

def test_diagnose_columns_fields():
    out = diagnose_columns(_fzra_columns(2))
    per_column = {"ptype", *METHOD_NAMES, "warm_area_j_kg", "cold_area_j_kg",
                  "wetbulb_zero_height_m", "freezing_level_m", "melt_aloft_j_kg",
                  "melt_surface_j_kg", "surface_temperature_c", "surface_wetbulb_c",
                  "fraction_snow", "fraction_melting", "fraction_liquid", "fraction_refrozen"}
    per_code = {"possible", "vote_share"}
    assert set(out) == per_column | per_code
    assert all(np.shape(out[k]) == (2,) for k in per_column)
    assert all(np.shape(out[k]) == (2, len(Code)) for k in per_code)
    assert Code(int(out["ptype"][0])) is Code.FZRA


def test_vectorised_matches_single_profile():
    rng = np.random.default_rng(4)
    docs = []
    for _ in range(12):
        nose = rng.uniform(-2.0, 6.0)
        sfc = rng.uniform(-6.0, 4.0)
        t = [sfc, sfc - 1.0, (sfc + nose) / 2, nose, nose - 1.0, -4.0, -12.0, -24.0]
        p = [1000, 950, 900, 850, 800, 700, 600, 500]
        docs.append(document(p, t, [x - rng.uniform(0.1, 3.0) for x in t]))
    profiles = [Profile.from_document(d) for d in docs]
    batch = diagnose_columns(Columns.from_profiles(profiles))
    for i, d in enumerate(docs):
        assert int(batch["ptype"][i]) == int(ptype.diagnose(d, members=0).code)


@pytest.mark.parametrize("methods", [None, "ramer,baldwin,thickness", "jennings,thickness",
                                     "bourgouin,czys,jennings"])
def test_diagnose_columns_consensus_only_same_codes(methods):
    # Consistency check against the full pipeline: the consensus reads only its voters
    # (ptype.engine.consensus.VOTERS) and computes Jennings et al. (2018) itself, so skipping
    # the non-voting methods must leave every code unchanged, controls and perturbed members
    # alike (the regression corpus of tests/test_engine_regression.py).
    from test_engine_regression import EXPECTED, _load, corpus_paths

    cols = Columns.from_profiles([Profile.from_document(_load(p)) for p in corpus_paths()])
    batch = Columns.concat([cols, perturb(cols, 20, seed=7)])
    full = diagnose_columns(batch, methods=methods)
    fast = diagnose_columns(batch, methods=methods, consensus_only=True)
    assert set(fast) == {"ptype"}
    np.testing.assert_array_equal(fast["ptype"], full["ptype"])
    if methods is None:  # and the stored corpus agrees (its last row block is one extra profile)
        with gzip.open(EXPECTED, "rt") as fh:
            stored = json.load(fh)["columns"]["ptype"]
        n = cols.n_columns
        assert fast["ptype"][:n].tolist() == stored[:n]
        assert len(np.unique(full["ptype"])) >= 4  # the corpus exercises several types


# -- members ---------------------------------------------------------------------------------------

def test_member_probabilities_rows_sum_to_one():
    probs = member_probabilities(_fzra_columns(2), 40, seed=3)
    assert probs.shape == (2, len(Code))
    assert np.allclose(probs.sum(axis=1), 1.0)
    assert np.isnan(member_probabilities(_fzra_columns(2), 0)).all()


def test_run_columns_without_members_or_trace():
    run = run_columns(_fzra_columns(3))
    assert isinstance(run, EngineRun) and run.probabilities is None
    assert run.context is None and run.results is None and run.consensus is None
    np.testing.assert_array_equal(run.codes, run.fields["ptype"])


def test_run_columns_trace_keeps_the_control_rows():
    cols = _fzra_columns(2)
    run = run_columns(cols, members=10, seed=1, trace=True)
    assert run.fields["ptype"].shape == (2,)
    # One pass for the control and its members: the control's rows come first in the trace.
    np.testing.assert_array_equal(run.consensus.code[:2], run.codes)
    assert set(run.results) == set(METHOD_NAMES)
    np.testing.assert_allclose(run.probabilities.sum(axis=1), 1.0)


def test_run_columns_batches_are_seeded_per_batch():
    cols = _fzra_columns(5)
    seeds = []

    def batch_seed(k, start):
        seeds.append((k, start))
        return 100 + k

    one = run_columns(cols, members=6, seed=2, batch_columns=2, batch_seed=batch_seed)
    assert seeds == [(0, 0), (1, 2), (2, 4)]
    again = run_columns(cols, members=6, seed=2, batch_columns=2,
                        batch_seed=lambda k, start: 100 + k)
    np.testing.assert_array_equal(one.probabilities, again.probabilities)
    np.testing.assert_allclose(one.probabilities.sum(axis=1), 1.0)
    # Batch 0 is the first two columns with their own seed.
    first = member_probabilities(cols.take(slice(0, 2)), 6, seed=100)
    np.testing.assert_array_equal(one.probabilities[:2], first)
