"""Monte-Carlo members (ptype/engine/probability.py): the error model and the probabilities.

The vertical correlation is a first-order autoregressive sequence, whose lag-k
autocorrelation is r^k (Wilks, AR(1) process); with r = exp(-dz / L) the correlation
between two levels is exp(-|z1 - z2| / L).  The error sizes are ours (engineering defaults,
docs/consensus.md), so the tests check that the members have the sizes stated, not that
the sizes are right.
"""

from __future__ import annotations

import numpy as np
import pytest

from ptype import thermo
from ptype.codes import Code
from ptype.engine.columns import Columns
from ptype.engine.probability import (
    MAX_MEMBERS,
    RELATIVE_HUMIDITY_SIGMA_PCT,
    TEMPERATURE_SIGMA_K,
    ar1_coefficients,
    check_members,
    confidence_word,
    correlated_noise,
    perturb,
    probabilities_from_codes,
)
from ptype.errors import OptionError


def _columns(n=2):
    p = np.tile([1000.0, 900.0, 800.0, 700.0, 500.0], (n, 1))
    t = np.tile([2.0, 1.0, -3.0, -8.0, -22.0], (n, 1))
    return Columns.from_arrays(p, t + np.arange(n)[:, None], t - 2.0)


def test_correlated_noise_has_the_stated_correlation():
    # AR(1) construction: corr(e_k, e_k+1) = exp(-dz / L).
    rng = np.random.default_rng(0)
    z = np.tile(np.array([0.0, 500.0, 1000.0, 3000.0]), (40000, 1))
    e = correlated_noise(z, rng, 1500.0)
    assert np.corrcoef(e[:, 0], e[:, 1])[0, 1] == pytest.approx(np.exp(-500 / 1500), abs=0.02)
    assert np.corrcoef(e[:, 2], e[:, 3])[0, 1] == pytest.approx(np.exp(-2000 / 1500), abs=0.02)
    # Two steps compose: corr(e_0, e_2) = exp(-500/L) * exp(-500/L) = exp(-1000/L).
    assert np.corrcoef(e[:, 0], e[:, 2])[0, 1] == pytest.approx(np.exp(-1000 / 1500), abs=0.02)
    assert e.std() == pytest.approx(1.0, abs=0.02)


def test_ar1_coefficients_by_hand_and_padding():
    r, s = ar1_coefficients(np.array([[0.0, 1500.0, np.nan]]), 1500.0)
    assert r[0, 0] == pytest.approx(np.exp(-1.0)) and s[0, 0] == pytest.approx(
        np.sqrt(1.0 - np.exp(-2.0)))
    assert r[0, 1] == 0.0 and s[0, 1] == 1.0  # NaN padding: an independent draw


def test_perturb_stacks_members_of_each_column():
    cols = _columns(2)
    members = perturb(cols, 3, seed=1)
    assert members.n_columns == 6
    # Row i * members + m is member m of column i: same pressures and heights.
    for i in range(2):
        for m in range(3):
            np.testing.assert_array_equal(members.pressure_hpa[3 * i + m], cols.pressure_hpa[i])
            np.testing.assert_array_equal(members.height_m[3 * i + m], cols.height_m[i])


def test_perturb_sizes_and_humidity_limits():
    cols = _columns(1)
    members = perturb(cols, 4000, seed=2)
    dt = members.temperature_c - cols.temperature_c
    assert dt.std() == pytest.approx(TEMPERATURE_SIGMA_K, rel=0.05)
    rh = members.relative_humidity_pct
    assert rh.min() >= 1.0 - 1e-9 and rh.max() <= 100.0 + 1e-9
    # Dew points follow from the perturbed T and RH (Alduchov & Eskridge 1996 inverted).
    back = thermo.relative_humidity_pct(members.temperature_c, members.dewpoint_c)
    np.testing.assert_allclose(back, rh, atol=1e-6)
    # Where RH is not clipped its spread is the stated sigma.
    drh = (rh - cols.relative_humidity_pct)[(rh > 1.0) & (rh < 100.0)]
    assert 0.6 * RELATIVE_HUMIDITY_SIGMA_PCT < drh.std() <= RELATIVE_HUMIDITY_SIGMA_PCT * 1.05


def test_perturb_is_reproducible_with_a_seed():
    cols = _columns(2)
    a, b = perturb(cols, 5, seed=9), perturb(cols, 5, seed=9)
    np.testing.assert_array_equal(a.temperature_c, b.temperature_c)
    assert not np.array_equal(a.temperature_c, perturb(cols, 5, seed=10).temperature_c)


def test_probabilities_from_codes_are_fractions_of_members():
    codes = np.array([Code.SN, Code.SN, Code.PL, Code.FZRA,   # column 0
                      Code.RA, Code.RA, Code.RA, Code.RA])    # column 1
    probs = probabilities_from_codes(codes, 2, 4)
    assert probs.shape == (2, len(Code))
    assert probs[0, Code.SN] == 0.5 and probs[0, Code.PL] == 0.25 and probs[0, Code.FZRA] == 0.25
    assert probs[1, Code.RA] == 1.0
    np.testing.assert_allclose(probs.sum(axis=1), 1.0)


@pytest.mark.parametrize("value", [-1, MAX_MEMBERS + 1, 2.5, True, "10"])
def test_check_members_refuses(value):
    with pytest.raises(OptionError) as info:
        check_members(value)
    assert info.value.field == "members" and str(info.value).startswith("members = ")


def test_check_members_accepts_whole_numbers():
    assert check_members(0) == 0 and check_members(np.int64(50)) == 50
    assert check_members(MAX_MEMBERS) == MAX_MEMBERS


@pytest.mark.parametrize("p, word", [(0.95, "high"), (0.8, "high"), (0.79, "moderate"),
                                     (0.5, "moderate"), (0.49, "low"), (0.0, "low")])
def test_confidence_word_limits(p, word):
    # Our limits (docs/consensus.md): >= 0.8 high, >= 0.5 moderate, else low.
    assert confidence_word(p) == word

