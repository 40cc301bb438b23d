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

from ptype.codes import Code
from ptype.engine.columns import Columns
from ptype.engine.probability import (
    DEPRESSION_LOG_SIGMA,
    MAX_MEMBERS,
    NOSE_HALF_WIDTH_M,
    NOSE_SIGMA_K,
    SURFACE_SIGMA_K,
    TEMPERATURE_SIGMA_K,
    ar1_coefficients,
    check_members,
    confidence_word,
    correlated_noise,
    nose_peaks,
    perturb,
    perturb_members,
    possible_code_map,
    probabilities_from_codes,
    supported_codes,
    voter_weights,
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


def test_perturb_temperature_sizes_and_depression_scale():
    # No elevated inversion: level noise and the surface-layer offset only.  At the ground
    # the two add in quadrature; far above the surface layer only the level noise is left.
    p = np.array([[1000.0, 950.0, 900.0, 800.0, 700.0, 600.0, 500.0]])
    t = np.array([[2.0, -0.5, -3.0, -8.0, -14.0, -21.0, -29.0]])
    cols = Columns.from_arrays(p, t, t - np.array([[0.0, 0.5, 2.0, 4.0, 8.0, 8.0, 8.0]]))
    members = perturb(cols, 8000, seed=2)
    dt = members.temperature_c - cols.temperature_c
    assert dt[:, 0].std() == pytest.approx(np.hypot(TEMPERATURE_SIGMA_K, SURFACE_SIGMA_K),
                                           rel=0.05)
    assert dt[:, -1].std() == pytest.approx(TEMPERATURE_SIGMA_K, rel=0.05)
    # The dew-point depression is perturbed on a log scale: a saturated level stays saturated,
    # a dry one keeps its median depression, with the stated spread of ln(depression).
    depression = members.temperature_c - members.dewpoint_c
    assert np.all(depression[:, 0] == 0.0)
    ratio = np.log(depression[:, 3] / 4.0)
    assert np.median(ratio) == pytest.approx(0.0, abs=0.02)
    assert ratio.std() == pytest.approx(DEPRESSION_LOG_SIGMA, rel=0.05)


def test_saturated_levels_stay_saturated_on_average():
    # Additive RH noise clipped at 100 % dried saturated layers (a 100 % level averaged 97 %);
    # the log-scale depression keeps them at 100 %.
    cols = _columns(1)
    sat = Columns.from_arrays(cols.pressure_hpa, cols.temperature_c, cols.temperature_c)
    rh = perturb(sat, 2000, seed=4).relative_humidity_pct
    assert np.nanmean(rh) == pytest.approx(100.0, abs=1e-6)


def test_nose_peaks_and_nose_perturbation():
    # A warm nose peaking at +4 degC near 1400 m over a cold surface layer.
    z = np.array([[0.0, 400.0, 800.0, 1100.0, 1400.0, 1700.0, 2200.0, 3000.0, 5000.0]])
    t = np.array([[-4.0, -5.0, -2.0, 1.0, 4.0, 2.0, -1.0, -6.0, -19.0]])
    p = 1000.0 * np.exp(-z / 8000.0)
    cols = Columns.from_arrays(p, t, t - 0.5, z)
    height, index = nose_peaks(cols)
    assert height[0] == 1400.0 and index[0] == 4
    members = perturb(cols, 6000, seed=5)
    dt = members.temperature_c - cols.temperature_c
    # At the peak: level noise, the nose bump (full weight) and the height shift of a peak
    # (second order): at least the quadrature sum of the first two.
    assert dt[:, 4].std() >= 0.95 * np.hypot(TEMPERATURE_SIGMA_K, NOSE_SIGMA_K)
    # Beyond the nose's half width only the level noise acts.
    far = np.abs(z[0] - 1400.0) > NOSE_HALF_WIDTH_M + 100.0
    far &= z[0] > 1500.0
    assert dt[:, far].std() == pytest.approx(TEMPERATURE_SIGMA_K, rel=0.06)


def test_voter_weights_share_one_draw_for_the_baldwin_pair():
    from ptype.engine.consensus import VOTERS
    w = voter_weights(np.random.default_rng(1), 5000)
    assert w.shape == (5000, len(VOTERS)) and np.all(w > 0)
    np.testing.assert_array_equal(w[:, VOTERS.index("baldwin")],
                                  w[:, VOTERS.index("baldwin_revised")])
    assert w.mean() == pytest.approx(1.0, rel=0.05)  # exponential with mean 1
    _, weights = perturb_members(_columns(1), 7, seed=3)
    assert weights.shape == (7, len(VOTERS))


def test_supported_codes_keep_a_supported_control_and_replace_an_unsupported_one():
    probs = np.zeros((3, len(Code)))
    probs[0, [Code.FZRA, Code.PL]] = [0.3, 0.7]   # control FZRA: 30 %, more hazardous
    probs[1, [Code.SN, Code.PL]] = [0.3, 0.7]     # control SN: 30 %, still supported
    probs[2, [Code.SN, Code.RA]] = [0.1, 0.9]     # control SN: 10 %, replaced by RA
    codes, reason = supported_codes(np.array([Code.FZRA, Code.SN, Code.SN]), probs)
    assert codes.tolist() == [Code.FZRA, Code.SN, Code.RA]
    assert reason.tolist() == [1, 1, 2]
    # The replacement is the most probable type the profile's phase path allows.
    allowed = np.ones((1, len(Code)), dtype=bool)
    allowed[0, Code.RA] = False
    codes, _ = supported_codes(np.array([Code.SN]), probs[2:], allowed)
    assert codes.tolist() == [Code.SN]


def test_possible_code_map_sends_impossible_types_to_the_nearest_ice_content():
    possible = np.ones((1, len(Code)), dtype=bool)
    possible[0, [Code.SN, Code.RASN]] = False  # melted aloft: no snow
    mapping = possible_code_map(np.array([Code.FZRA]), possible)[0]
    assert mapping[Code.SN] == Code.PL           # frozen stays frozen: refrozen drops
    assert mapping[Code.RASN] in (Code.RAPL, Code.FZRAPL)  # a mix stays a mix
    assert mapping[Code.FZRA] == Code.FZRA and mapping[Code.PL] == Code.PL


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

