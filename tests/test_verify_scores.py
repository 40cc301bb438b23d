"""Verification scores (ptype/verify/scores.py) against textbook examples and scikit-learn.

Sources
-------
* Finley (1884) tornado forecasts, the classic published 2x2 table: hits a = 28, false
  alarms b = 72, misses c = 23, correct negatives d = 2680 (n = 2803).  Reproduced as
  Table 8.1a in Wilks, *Statistical Methods in the Atmospheric Sciences*, 3rd ed. (2011),
  chapter 8; the scores Wilks derives from it in the text (PC = 0.966, TS = 0.228,
  B = 1.96, FAR = 0.720, H = 0.549, F = 0.026, HSS = 0.355, PSS = 0.523) are quoted
  from memory, and each is also recomputed here from the textbook 2x2 formula.
* scikit-learn as an independent implementation: ``cohen_kappa_score`` (= Heidke),
  ``accuracy_score``, ``balanced_accuracy_score(adjusted=True)`` (= Peirce for two
  classes), ``matthews_corrcoef`` (MCC^2 = Peirce x Clayton for 2x2, Powers 2011),
  ``brier_score_loss``, ``calibration.calibration_curve``.
* Gerrity (1992, Mon. Wea. Rev. 120, 2709-2712): weights from the formulas (from memory),
  checked through the score's defining properties (equitable: constant and random
  forecasts score 0; perfect forecasts 1; K = 2 reduces to the Peirce score, Gerrity
  1992, from memory) and the equiprobable 3-category matrix computed by hand.
"""

from __future__ import annotations

import numpy as np
import pytest
from sklearn.calibration import calibration_curve
from sklearn.metrics import (
    accuracy_score,
    balanced_accuracy_score,
    brier_score_loss,
    cohen_kappa_score,
    matthews_corrcoef,
)

from ptype.verify import scores as sc

FINLEY = np.array([[28, 72], [23, 2680]])  # rows forecast (yes, no), columns observed (yes, no)


def _pairs_from_table(table):
    f, o = [], []
    for i in range(table.shape[0]):
        for j in range(table.shape[1]):
            f += [i] * int(table[i, j])
            o += [j] * int(table[i, j])
    return np.array(f), np.array(o)


# --------------------------------------------------------------------------- 2x2: Finley

def test_accuracy_finley_table():
    a, d = 28, 2680
    # PC = (a + d) / n (Wilks 2011, ch. 8); Wilks quotes 0.966 (from memory).
    assert sc.accuracy(FINLEY) == pytest.approx((a + d) / 2803, rel=1e-12)
    assert sc.accuracy(FINLEY) == pytest.approx(0.966, abs=5e-4)


def test_heidke_skill_score_finley_table():
    a, b, c, d = 28, 72, 23, 2680
    # 2x2 form HSS = 2(ad - bc) / [(a+c)(c+d) + (a+b)(b+d)] (Wilks 2011, ch. 8).
    expected = 2 * (a * d - b * c) / ((a + c) * (c + d) + (a + b) * (b + d))
    assert sc.heidke_skill_score(FINLEY) == pytest.approx(expected, rel=1e-12)
    assert sc.heidke_skill_score(FINLEY) == pytest.approx(0.355, abs=5e-4)  # from memory


def test_peirce_skill_score_finley_table():
    a, b, c, d = 28, 72, 23, 2680
    # PSS = H - F = a/(a+c) - b/(b+d) = (ad - bc) / [(a+c)(b+d)] (Hanssen & Kuipers 1965).
    assert sc.peirce_skill_score(FINLEY) == pytest.approx(a / (a + c) - b / (b + d), rel=1e-12)
    assert sc.peirce_skill_score(FINLEY) == pytest.approx((a * d - b * c) / ((a + c) * (b + d)))
    assert sc.peirce_skill_score(FINLEY) == pytest.approx(0.523, abs=5e-4)  # from memory


def test_class_scores_finley_table():
    cs = sc.class_scores(FINLEY)
    # Class 0 ("tornado") against the rest: the 2x2 attributes of Wilks (2011, ch. 8).
    assert cs["hits"][0] == 28 and cs["false_alarms"][0] == 72 and cs["misses"][0] == 23
    assert cs["pod"][0] == pytest.approx(28 / 51)            # H = 0.549 (from memory)
    assert cs["far"][0] == pytest.approx(72 / 100)           # FAR = 0.720
    assert cs["csi"][0] == pytest.approx(28 / 123)           # TS = 0.228
    assert cs["bias"][0] == pytest.approx(100 / 51)          # B = 1.96
    assert round(cs["pod"][0], 3) == 0.549 and round(cs["csi"][0], 3) == 0.228
    assert round(cs["bias"][0], 2) == 1.96


def test_gerrity_score_two_categories_equals_peirce():
    # Gerrity (1992): for K = 2 the score reduces to the Peirce (Hanssen-Kuipers) score.
    assert sc.gerrity_score(FINLEY) == pytest.approx(sc.peirce_skill_score(FINLEY), rel=1e-12)


# --------------------------------------------------------------------------- scikit-learn

@pytest.fixture
def random_pairs():
    rng = np.random.default_rng(20240101)
    o = rng.integers(0, 5, size=400)
    f = np.where(rng.random(400) < 0.6, o, rng.integers(0, 5, size=400))
    return f, o


def test_contingency_table_counts_pairs(random_pairs):
    f, o = random_pairs
    t = sc.contingency_table(f, o, 5)
    assert t.sum() == f.size
    for i in range(5):
        for j in range(5):
            assert t[i, j] == np.sum((f == i) & (o == j))


def test_contingency_table_rejects_bad_index():
    with pytest.raises(ValueError, match="category index"):
        sc.contingency_table([0, 5], [0, 1], 5)
    with pytest.raises(ValueError, match="length"):
        sc.contingency_table([0, 1], [0], 5)


def test_accuracy_matches_sklearn(random_pairs):
    f, o = random_pairs
    assert sc.accuracy(sc.contingency_table(f, o, 5)) == pytest.approx(accuracy_score(o, f))


def test_heidke_skill_score_matches_cohen_kappa(random_pairs):
    # The multi-category HSS is Cohen's (1960) kappa of the forecast/observation pairs.
    f, o = random_pairs
    t = sc.contingency_table(f, o, 5)
    assert sc.heidke_skill_score(t) == pytest.approx(cohen_kappa_score(o, f), rel=1e-12)


def test_heidke_skill_score_finley_matches_cohen_kappa():
    f, o = _pairs_from_table(FINLEY)
    assert sc.heidke_skill_score(FINLEY) == pytest.approx(cohen_kappa_score(o, f), rel=1e-12)


def test_peirce_skill_score_two_classes_matches_adjusted_balanced_accuracy():
    # For two classes, adjusted balanced accuracy = (TPR + TNR) - 1 = H - F = PSS.
    f, o = _pairs_from_table(FINLEY)
    assert sc.peirce_skill_score(FINLEY) == pytest.approx(
        balanced_accuracy_score(o, f, adjusted=True), rel=1e-12)


def test_peirce_skill_score_two_classes_mcc_identity():
    # MCC^2 = informedness x markedness (Powers 2011): informedness = PSS,
    # markedness (Clayton skill score) = a/(a+b) - c/(c+d).
    a, b, c, d = 28, 72, 23, 2680
    f, o = _pairs_from_table(FINLEY)
    clayton = a / (a + b) - c / (c + d)
    assert matthews_corrcoef(o, f) ** 2 == pytest.approx(
        sc.peirce_skill_score(FINLEY) * clayton, rel=1e-10)


def test_peirce_skill_score_equals_heidke_when_unbiased():
    # Derivation: PSS and HSS share the numerator PC - sum p_i. p_.i; their denominators
    # 1 - sum p_.i^2 and 1 - sum p_i. p_.i agree when the forecast marginals equal the
    # observed ones.  A shuffled copy of the observations has exactly those marginals.
    rng = np.random.default_rng(7)
    o = rng.integers(0, 4, size=300)
    f = o.copy()
    swap = rng.random(300) < 0.5
    f[swap] = rng.permutation(f[swap])
    t = sc.contingency_table(f, o, 4)
    np.testing.assert_array_equal(t.sum(axis=0), t.sum(axis=1))
    assert sc.peirce_skill_score(t) == pytest.approx(cohen_kappa_score(o, f), rel=1e-12)


def test_peirce_skill_score_is_independent_of_constant_forecast():
    t = np.array([[10, 20, 30], [0, 0, 0], [0, 0, 0]])  # always forecast category 0
    assert sc.peirce_skill_score(t) == pytest.approx(0.0, abs=1e-15)
    assert sc.heidke_skill_score(t) == pytest.approx(0.0, abs=1e-15)


def test_skill_scores_perfect_forecast_is_one(random_pairs):
    _, o = random_pairs
    t = sc.contingency_table(o, o, 5)
    assert sc.accuracy(t) == 1.0
    assert sc.heidke_skill_score(t) == pytest.approx(1.0)
    assert sc.peirce_skill_score(t) == pytest.approx(1.0)
    assert sc.gerrity_score(t) == pytest.approx(1.0)


def test_skill_scores_empty_or_degenerate_are_nan():
    assert np.isnan(sc.accuracy(np.zeros((3, 3))))
    assert np.isnan(sc.heidke_skill_score(np.zeros((3, 3))))
    only_one = np.array([[5, 0], [0, 0]])  # one category holds every observation and forecast
    assert np.isnan(sc.peirce_skill_score(only_one))
    assert np.isnan(sc.heidke_skill_score(only_one))


# --------------------------------------------------------------------------- Gerrity

def _gerrity_weights_loop(p):
    """Straight transcription of Gerrity (1992) with 1-based indices (second implementation)."""
    k = len(p)
    d = np.cumsum(p)
    a = {r: (1 - d[r - 1]) / d[r - 1] for r in range(1, k)}
    s = np.zeros((k, k))
    for i in range(1, k + 1):
        for j in range(i, k + 1):
            left = sum(1 / a[r] for r in range(1, i))
            right = sum(a[r] for r in range(j, k))
            s[i - 1, j - 1] = (left - (j - i) + right) / (k - 1)
            s[j - 1, i - 1] = s[i - 1, j - 1]
    return s


def test_gerrity_weights_equiprobable_three_categories():
    # Hand computation for p = (1/3, 1/3, 1/3): a_1 = 2, a_2 = 1/2, so
    # s11 = (2 + 1/2)/2, s22 = (1/2 + 1/2)/2, s33 = (1/2 + 2)/2, s12 = (0 - 1 + 1/2)/2,
    # s13 = (0 - 2 + 0)/2, s23 = (1/2 - 1 + 0)/2.
    w = sc.gerrity_weights([1 / 3, 1 / 3, 1 / 3])
    expected = np.array([[1.25, -0.25, -1.0], [-0.25, 0.5, -0.25], [-1.0, -0.25, 1.25]])
    np.testing.assert_allclose(w, expected, atol=1e-12)


@pytest.mark.parametrize("k", [2, 3, 5, 9])
def test_gerrity_weights_match_transcription_and_are_equitable(k):
    rng = np.random.default_rng(k)
    p = rng.dirichlet(np.ones(k))
    w = sc.gerrity_weights(p)
    np.testing.assert_allclose(w, _gerrity_weights_loop(p), rtol=1e-12, atol=1e-12)
    np.testing.assert_allclose(w, w.T)
    # Equitability: every constant forecast has expected score 0 (sum_j p_j s_ij = 0) ...
    np.testing.assert_allclose(w @ p, 0.0, atol=1e-12)
    # ... and a perfect forecast scores 1 (sum_i p_i s_ii = 1).
    assert float(np.sum(p * np.diag(w))) == pytest.approx(1.0, rel=1e-12)


def test_gerrity_score_random_forecasts_near_zero():
    rng = np.random.default_rng(11)
    o = rng.choice(4, size=200_000, p=[0.4, 0.3, 0.2, 0.1])
    f = rng.choice(4, size=200_000, p=[0.1, 0.2, 0.3, 0.4])
    assert abs(sc.gerrity_score(sc.contingency_table(f, o, 4))) < 0.01


def test_gerrity_score_penalises_distant_errors_more():
    obs = np.array([0] * 10 + [1] * 10 + [2] * 10)
    near = obs.copy()
    near[:3] = 1
    far = obs.copy()
    far[:3] = 2
    assert sc.gerrity_score(sc.contingency_table(near, obs, 3)) > \
        sc.gerrity_score(sc.contingency_table(far, obs, 3))


def test_gerrity_score_unobserved_category_is_nan_and_collapse_merges():
    t = np.array([[5, 0, 1], [1, 0, 0], [0, 0, 4]])  # middle category never observed
    assert np.isnan(sc.gerrity_score(t))
    collapsed, kept = sc.collapse_unobserved(t)
    np.testing.assert_array_equal(kept, [0, 2])
    # Forecasts of category 1 go to the nearest observed category, the earlier one on a tie.
    np.testing.assert_array_equal(collapsed, [[6, 1], [0, 4]])
    assert np.isfinite(sc.gerrity_score(collapsed))


def test_gerrity_weights_reject_unobserved():
    with pytest.raises(ValueError, match="observed"):
        sc.gerrity_weights([0.5, 0.0, 0.5])


# --------------------------------------------------------------------------- probabilities

@pytest.fixture
def probabilistic():
    rng = np.random.default_rng(3)
    prob = rng.dirichlet(np.ones(4) * 0.7, size=500)
    o = np.array([rng.choice(4, p=row) for row in prob])
    return prob, o


def test_brier_scores_match_sklearn(probabilistic):
    prob, o = probabilistic
    bs = sc.brier_scores(prob, o)
    for k in range(4):
        assert bs[k] == pytest.approx(brier_score_loss((o == k).astype(int), prob[:, k]),
                                      rel=1e-12)


def test_brier_skill_scores_against_climatology(probabilistic):
    prob, o = probabilistic
    obar = np.bincount(o, minlength=4) / o.size
    clim = np.broadcast_to(obar, prob.shape)
    # A climatological forecast scores BSS = 0; perfect = 1.
    np.testing.assert_allclose(sc.brier_skill_scores(clim, o), 0.0, atol=1e-12)
    np.testing.assert_allclose(sc.brier_skill_scores(sc.one_hot(o, 4), o), 1.0)


def test_ranked_probability_score_hand_example():
    # Cumulative forecast (0.2, 0.7, 1.0) vs observed category 2 -> (0, 1, 1):
    # 0.2^2 + 0.3^2 + 0 = 0.13.  Observed category 3 -> (0, 0, 1): 0.04 + 0.49 = 0.53.
    prob = np.array([[0.2, 0.5, 0.3], [0.2, 0.5, 0.3]])
    assert sc.ranked_probability_score(prob[:1], [1]) == pytest.approx(0.13)
    assert sc.ranked_probability_score(prob, [1, 2]) == pytest.approx((0.13 + 0.53) / 2)


def test_ranked_probability_score_two_categories_equals_brier():
    rng = np.random.default_rng(5)
    p0 = rng.random(300)
    o = (rng.random(300) > p0).astype(int)   # index 0 with probability p0
    prob = np.column_stack([p0, 1 - p0])
    assert sc.ranked_probability_score(prob, o) == pytest.approx(
        brier_score_loss((o == 0).astype(int), p0), rel=1e-12)


def test_ranked_probability_score_rewards_near_misses():
    near = np.array([[0.0, 1.0, 0.0]])
    far = np.array([[0.0, 0.0, 1.0]])
    assert sc.ranked_probability_score(near, [0]) < sc.ranked_probability_score(far, [0])
    assert sc.ranked_probability_score(sc.one_hot([2], 3), [2]) == 0.0


def test_ranked_probability_skill_score_climatology_is_zero(probabilistic):
    _, o = probabilistic
    clim = np.broadcast_to(np.bincount(o, minlength=4) / o.size, (o.size, 4))
    assert sc.ranked_probability_skill_score(clim, o) == pytest.approx(0.0, abs=1e-12)


def test_reliability_matches_sklearn_calibration_curve():
    rng = np.random.default_rng(9)
    f = rng.random(5000)
    y = (rng.random(5000) < f).astype(int)
    rel = sc.reliability(f, y, n_bins=10)
    prob_true, prob_pred = calibration_curve(y, f, n_bins=10, strategy="uniform")
    ok = rel["count"] > 0
    np.testing.assert_allclose(rel["observed_frequency"][ok], prob_true, rtol=1e-12)
    np.testing.assert_allclose(rel["mean_forecast"][ok], prob_pred, rtol=1e-12)
    assert rel["count"].sum() == 5000
    # Calibrated by construction: observed frequency within sampling error of the forecast.
    assert np.all(np.abs(rel["observed_frequency"] - rel["mean_forecast"]) < 0.06)


def test_reliability_decomposition_exact_for_discrete_forecasts():
    # Murphy (1973): BS = REL - RES + UNC when forecasts within a bin are identical.
    rng = np.random.default_rng(13)
    f = rng.integers(0, 11, size=2000) / 10.0   # forecasts 0.0, 0.1, ..., 1.0
    y = (rng.random(2000) < np.clip(f + 0.1, 0, 1)).astype(int)
    r = sc.reliability(f, y, n_bins=11)           # one forecast value per bin
    assert r["brier"] == pytest.approx(brier_score_loss(y, f), rel=1e-12)
    assert r["reliability_term"] - r["resolution_term"] + r["uncertainty"] == \
        pytest.approx(r["brier"], rel=1e-10)


def test_reliability_puts_one_in_last_bin_and_keeps_empty_bins_nan():
    r = sc.reliability([1.0, 0.0, 0.05], [1, 0, 0], n_bins=10)
    assert r["count"][-1] == 1 and r["count"][0] == 2
    assert np.isnan(r["observed_frequency"][5])
