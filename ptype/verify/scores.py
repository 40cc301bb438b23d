"""Verification scores for categorical and probabilistic precipitation-type forecasts.

Pure numpy; no I/O.  Conventions follow Wilks, *Statistical Methods in the
Atmospheric Sciences* (3rd ed., 2011, chapter 8 "Forecast Verification"):

* A contingency table ``table[i, j]`` counts cases **forecast** in category ``i`` and
  **observed** in category ``j`` (rows forecast, columns observed).  In the 2x2 case
  ``a = table[0, 0]`` (hits), ``b = table[0, 1]`` (false alarms), ``c = table[1, 0]``
  (misses), ``d = table[1, 1]`` (correct negatives).
* With ``p_ij = table / n``, forecast marginals ``p_i. = sum_j p_ij`` and observed marginals
  ``p_.j = sum_i p_ij``:

  - accuracy (proportion correct) ``PC = sum_i p_ii``;
  - Heidke skill score (Heidke 1926) ``HSS = (PC - sum_i p_i. p_.i) / (1 - sum_i p_i. p_.i)``,
    the same quantity as Cohen's (1960) kappa;
  - Peirce (1884) skill score, also Hanssen & Kuipers (1965) discriminant or true skill
    statistic, ``PSS = (PC - sum_i p_i. p_.i) / (1 - sum_i p_.i^2)``; in the 2x2 case
    ``PSS = a/(a+c) - b/(b+d)`` = hit rate minus false-alarm rate;
  - Gerrity (1992) score for *ordered* categories, an equitable score built from the
    observed marginals (see :func:`gerrity_weights`).

* Per class (one category against the rest): probability of detection
  ``POD = a/(a+c)``, false-alarm ratio ``FAR = b/(a+b)``, critical success index (threat
  score, Gilbert 1884) ``CSI = a/(a+b+c)``, frequency bias ``B = (a+b)/(a+c)``.
* Probabilities: Brier (1950) score ``BS = mean (p - o)^2`` per class, one against the
  rest; ranked probability score (Epstein 1969; Murphy 1971) over an ordered list of
  categories, ``RPS = sum_m (P_m - O_m)^2`` with cumulative forecast and observed
  probabilities, averaged over cases (not divided by ``K - 1``); the reliability
  diagram (binned forecast probability against observed relative frequency, with counts)
  and the binned Murphy (1973) decomposition ``BS ~ REL - RES + UNC``.

Scores that are undefined for the data (a zero denominator) are ``nan``; the report
layer turns them into JSON ``null``.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

# --------------------------------------------------------------------------- tables


def contingency_table(forecast_idx: ArrayLike, observed_idx: ArrayLike,
                      n_categories: int) -> np.ndarray:
    """Multi-category contingency table, rows forecast, columns observed.

    Parameters
    ----------
    forecast_idx, observed_idx : array_like of int, shape (n,)
        Category indices in ``0 .. n_categories - 1``.
    n_categories : int

    Returns
    -------
    numpy.ndarray of int64, shape (K, K)
    """
    f = np.asarray(forecast_idx, dtype=np.int64).ravel()
    o = np.asarray(observed_idx, dtype=np.int64).ravel()
    if f.shape != o.shape:
        raise ValueError(f"forecast and observed differ in length ({f.size} vs {o.size})")
    k = int(n_categories)
    if f.size and (f.min() < 0 or o.min() < 0 or f.max() >= k or o.max() >= k):
        raise ValueError(f"category index outside 0..{k - 1}")
    return np.bincount(f * k + o, minlength=k * k).reshape(k, k)


def _joint(table) -> tuple[np.ndarray, np.ndarray, np.ndarray, float]:
    t = np.asarray(table, dtype=np.float64)
    n = float(t.sum())
    if n <= 0:
        nan = np.full(t.shape[0], np.nan)
        return np.full_like(t, np.nan), nan, nan, n
    p = t / n
    return p, p.sum(axis=1), p.sum(axis=0), n


def _ratio(num: float, den: float) -> float:
    return float(num / den) if den != 0 and np.isfinite(den) else float("nan")


def accuracy(table: ArrayLike) -> float:
    """Proportion correct ``PC = sum_i p_ii`` (Wilks 2011, ch. 8)."""
    p, _, _, n = _joint(table)
    return float(np.trace(p)) if n > 0 else float("nan")


def heidke_skill_score(table: ArrayLike) -> float:
    """Heidke (1926) skill score for a K-category table (Wilks 2011, ch. 8, multicategory HSS).

    ``HSS = (PC - E) / (1 - E)`` with ``E = sum_i p_i. p_.i`` the proportion correct
    expected from random forecasts with the same marginals; equal to Cohen's (1960) kappa.
    1 for perfect forecasts, 0 for random ones; nan when ``E == 1``.
    """
    p, pf, po, n = _joint(table)
    if n <= 0:
        return float("nan")
    e = float(np.sum(pf * po))
    return _ratio(float(np.trace(p)) - e, 1.0 - e)


def peirce_skill_score(table: ArrayLike) -> float:
    """Peirce (1884) / Hanssen-Kuipers (1965) skill score for a K-category table.

    ``PSS = (PC - sum_i p_i. p_.i) / (1 - sum_i p_.i^2)`` (Wilks 2011, ch. 8): the reference
    in the denominator is a perfect forecast that is also unbiased, so PSS does not
    depend on the observed climatology of random or constant forecasts.  For 2x2
    tables it is the hit rate minus the false-alarm rate.  nan when one category holds
    every observation.
    """
    p, pf, po, n = _joint(table)
    if n <= 0:
        return float("nan")
    return _ratio(float(np.trace(p)) - float(np.sum(pf * po)), 1.0 - float(np.sum(po * po)))


def gerrity_weights(observed_probabilities: ArrayLike) -> np.ndarray:
    """Gerrity (1992) scoring matrix for K ordered categories.

    With the observed relative frequencies ``p_r`` and their cumulative sums ``D_r``,
    ``a_r = (1 - D_r) / D_r`` for ``r = 1 .. K-1`` and (1-based indices)

    ``s_ii = (sum_{r<i} 1/a_r + sum_{r>=i}^{K-1} a_r) / (K - 1)``,
    ``s_ij = (sum_{r<i} 1/a_r - (j - i) + sum_{r>=j}^{K-1} a_r) / (K - 1)`` for ``i < j``,
    ``s_ji = s_ij``.

    Source: Gerrity (1992, *Mon. Wea. Rev.* 120, 2709-2712), building on Gandin & Murphy
    (1992); formulas as summarised by Livezey in Jolliffe & Stephenson (2012, ch. 4)
    (from memory, checked in the tests by the score's defining properties: perfect = 1,
    constant and random forecasts = 0, the K = 2 case equal to the Peirce score).
    Every category must have a non-zero observed frequency.
    """
    p = np.asarray(observed_probabilities, dtype=np.float64)
    k = p.size
    if k < 2:
        raise ValueError("the Gerrity score needs at least two categories")
    if np.any(p <= 0):
        raise ValueError("the Gerrity score needs every category observed at least once")
    d = np.cumsum(p)[:-1]
    a = (1.0 - d) / d                      # (K-1,)
    inv_cum = np.concatenate([[0.0], np.cumsum(1.0 / a)])   # sum_{r<i} 1/a_r, i = 0..K-1
    a_tail = np.concatenate([np.cumsum(a[::-1])[::-1], [0.0]])  # sum_{r>=j} a_r, j = 0..K-1
    i = np.arange(k)[:, None]
    j = np.arange(k)[None, :]
    lo = np.minimum(i, j)
    hi = np.maximum(i, j)
    return (inv_cum[lo] - (hi - lo) + a_tail[hi]) / (k - 1)


def gerrity_score(table: ArrayLike) -> float:
    """Gerrity (1992) score ``GS = sum_ij p_ij s_ij`` of a table whose categories are ordered.

    nan if fewer than two categories are observed or a category is never observed (use
    :func:`collapse_unobserved` first).
    """
    p, _, po, n = _joint(table)
    if n <= 0 or p.shape[0] < 2 or np.any(po <= 0):
        return float("nan")
    return float(np.sum(p * gerrity_weights(po)))


def collapse_unobserved(table: ArrayLike) -> tuple[np.ndarray, np.ndarray]:
    """Merge each never-observed category into the nearest observed one in the order.

    The Gerrity weights are infinite for a category with no observations, so ptype
    scores Gerrity on the ordered categories that were observed; a forecast of an
    unobserved category counts as a forecast of the nearest observed category in the
    order (ties go to the earlier one).  Ours (documented in docs/verification.md).

    Returns
    -------
    collapsed : (M, M) table over the observed categories
    kept : (M,) indices of the original categories kept
    """
    t = np.asarray(table)
    observed = t.sum(axis=0) > 0
    kept = np.flatnonzero(observed)
    if kept.size == 0:
        return np.zeros((0, 0), dtype=t.dtype), kept
    pos = np.arange(t.shape[0])
    nearest = np.argmin(np.abs(pos[:, None] - kept[None, :]), axis=1)  # first min = earlier
    m = kept.size
    out = np.zeros((m, m), dtype=t.dtype)
    np.add.at(out, (nearest[:, None], nearest[None, :]), t)
    return out, kept


def class_scores(table: ArrayLike) -> dict[str, np.ndarray]:
    """Per-class 2x2 scores of a K-category table, each class against the rest.

    Returns arrays of shape (K,): ``hits``, ``misses``, ``false_alarms``,
    ``n_observed``, ``n_forecast``, ``pod``, ``far``, ``csi``, ``bias`` (nan where undefined).
    Definitions: Wilks (2011, ch. 8) 2x2 attributes.
    """
    t = np.asarray(table, dtype=np.float64)
    hits = np.diag(t)
    n_obs = t.sum(axis=0)
    n_fc = t.sum(axis=1)
    misses = n_obs - hits
    false_alarms = n_fc - hits
    with np.errstate(invalid="ignore", divide="ignore"):
        pod = np.where(n_obs > 0, hits / n_obs, np.nan)
        far = np.where(n_fc > 0, false_alarms / n_fc, np.nan)
        den = hits + misses + false_alarms
        csi = np.where(den > 0, hits / den, np.nan)
        bias = np.where(n_obs > 0, n_fc / n_obs, np.nan)
    return {"hits": hits.astype(np.int64), "misses": misses.astype(np.int64),
            "false_alarms": false_alarms.astype(np.int64), "n_observed": n_obs.astype(np.int64),
            "n_forecast": n_fc.astype(np.int64), "pod": pod, "far": far, "csi": csi,
            "bias": bias}


# --------------------------------------------------------------------------- probabilities


def _check_probabilities(prob, observed_idx) -> tuple[np.ndarray, np.ndarray]:
    p = np.asarray(prob, dtype=np.float64)
    o = np.asarray(observed_idx, dtype=np.int64).ravel()
    if p.ndim != 2 or p.shape[0] != o.size:
        raise ValueError(f"probabilities must be (n, K) with n = {o.size}, got {p.shape}")
    if o.size and (o.min() < 0 or o.max() >= p.shape[1]):
        raise ValueError(f"observed index outside 0..{p.shape[1] - 1}")
    return p, o


def one_hot(observed_idx: ArrayLike, n_categories: int) -> np.ndarray:
    """``(n, n_categories)`` indicator rows: 1 in each observed category, 0 elsewhere."""
    o = np.asarray(observed_idx, dtype=np.int64).ravel()
    out = np.zeros((o.size, int(n_categories)))
    out[np.arange(o.size), o] = 1.0
    return out


def brier_scores(prob: ArrayLike, observed_idx: ArrayLike) -> np.ndarray:
    """Brier (1950) score of each class, one against the rest: ``mean_i (p_ik - o_ik)^2``.

    Returns shape (K,); nan if there are no cases.  (Wilks 2011, ch. 8, Brier score.)
    """
    p, o = _check_probabilities(prob, observed_idx)
    if o.size == 0:
        return np.full(p.shape[1], np.nan)
    return np.mean((p - one_hot(o, p.shape[1])) ** 2, axis=0)


def brier_skill_scores(prob: ArrayLike, observed_idx: ArrayLike) -> np.ndarray:
    """Brier skill score per class against the sample climatology:
    ``BSS = 1 - BS / (obar (1 - obar))``; nan for a class always or never observed."""
    p, o = _check_probabilities(prob, observed_idx)
    bs = brier_scores(p, o)
    obar = one_hot(o, p.shape[1]).mean(axis=0) if o.size else np.full(p.shape[1], np.nan)
    unc = obar * (1.0 - obar)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(unc > 0, 1.0 - bs / unc, np.nan)


def ranked_probability_score(prob: ArrayLike, observed_idx: ArrayLike) -> float:
    """Mean ranked probability score over ordered categories (columns of ``prob`` in order).

    ``RPS_i = sum_{m=1}^{K} (P_im - O_im)^2`` with ``P_im``/``O_im`` the cumulative forecast
    and observed probabilities (Epstein 1969; Murphy 1971; Wilks 2011, ch. 8, multicategory
    probability forecasts; not divided by ``K - 1``).  0 is perfect; for K = 2 it equals
    the Brier score of the first category.
    """
    p, o = _check_probabilities(prob, observed_idx)
    if o.size == 0:
        return float("nan")
    cp = np.cumsum(p, axis=1)
    co = np.cumsum(one_hot(o, p.shape[1]), axis=1)
    return float(np.mean(np.sum((cp - co) ** 2, axis=1)))


def ranked_probability_skill_score(prob: ArrayLike, observed_idx: ArrayLike) -> float:
    """RPSS against the sample climatology (each case forecast with the observed frequencies)."""
    p, o = _check_probabilities(prob, observed_idx)
    if o.size == 0:
        return float("nan")
    clim = np.broadcast_to(one_hot(o, p.shape[1]).mean(axis=0), p.shape)
    ref = ranked_probability_score(clim, o)
    return _ratio(ref - ranked_probability_score(p, o), ref)


def reliability(forecast_probability: ArrayLike, outcome: ArrayLike,
                n_bins: int = 10) -> dict[str, np.ndarray | float]:
    """Reliability-diagram data for binary outcomes (Wilks 2011, ch. 8, reliability diagram).

    Bins are ``[k/n_bins, (k+1)/n_bins)`` with 1.0 in the last bin.

    Returns
    -------
    dict with ``bin_lower``, ``bin_upper``, ``count`` (cases per bin),
    ``mean_forecast`` and ``observed_frequency`` (nan in empty bins), and the binned
    Murphy (1973) decomposition terms ``reliability_term`` (REL), ``resolution_term``
    (RES), ``uncertainty`` (UNC) and ``brier`` (the exact Brier score).  REL - RES + UNC
    equals the Brier score exactly when all forecasts in a bin are equal.
    """
    f = np.asarray(forecast_probability, dtype=np.float64).ravel()
    y = np.asarray(outcome, dtype=np.float64).ravel()
    if f.shape != y.shape:
        raise ValueError("forecast probabilities and outcomes differ in length")
    edges = np.linspace(0.0, 1.0, n_bins + 1)
    idx = np.clip((f * n_bins).astype(np.int64), 0, n_bins - 1)
    count = np.bincount(idx, minlength=n_bins).astype(np.int64)
    sum_f = np.bincount(idx, weights=f, minlength=n_bins)
    sum_y = np.bincount(idx, weights=y, minlength=n_bins)
    with np.errstate(invalid="ignore", divide="ignore"):
        mean_f = np.where(count > 0, sum_f / count, np.nan)
        freq = np.where(count > 0, sum_y / count, np.nan)
    n = f.size
    if n == 0:
        rel = res = unc = brier = float("nan")
    else:
        obar = float(y.mean())
        ok = count > 0
        rel = float(np.sum(count[ok] * (mean_f[ok] - freq[ok]) ** 2) / n)
        res = float(np.sum(count[ok] * (freq[ok] - obar) ** 2) / n)
        unc = obar * (1.0 - obar)
        brier = float(np.mean((f - y) ** 2))
    return {"bin_lower": edges[:-1], "bin_upper": edges[1:], "count": count,
            "mean_forecast": mean_f, "observed_frequency": freq,
            "reliability_term": rel, "resolution_term": res, "uncertainty": unc, "brier": brier}
