"""Fitting a calibration on paired cases, and measuring it on cases it never saw.

:func:`fit_calibration` fits the multinomial logistic model of :mod:`ptype.engine.calibration`
(scikit-learn ``LogisticRegression``, L2 penalty, features standardised) to the engine's
features of verifiable cases and their observed types.  :func:`cross_validated` fits on all
folds but one and predicts the one left out, in turn, so that the report can show the ranked
probability score and the reliability before and after calibration on held-out cases (Wilks,
forecast verification chapter: scores of a fitted post-processing must come from cases
outside its training sample).
"""

from __future__ import annotations

from datetime import UTC, datetime

import numpy as np

from ptype.codes import Code
from ptype.engine.calibration import FEATURES, Calibration
from ptype.errors import OptionError

#: Inverse strength of the L2 penalty (scikit-learn's C); ours, chosen by cross-validation on
#: the demo set among 0.1, 0.3, 1 and 3 (the held-out score changed little across them).
PENALTY_C = 0.3
#: Fewest verifiable cases a calibration is fitted on, and the number of cross-validation folds.
MIN_CASES = 30
FOLDS = 5


def fit_calibration(x: np.ndarray, observed: np.ndarray, *, source: str = "",
                    penalty_c: float = PENALTY_C, extra: dict | None = None) -> Calibration:
    """Fit the calibration to features ``x`` ``(n, len(FEATURES))`` and observed codes."""
    from sklearn.linear_model import LogisticRegression
    observed = np.asarray(observed, dtype=np.int64)
    if len(observed) < MIN_CASES:
        raise OptionError(f"a calibration needs at least {MIN_CASES} verifiable cases, got "
                          f"{len(observed)}", field="manifest")
    classes = np.unique(observed)
    if classes.size < 2:
        raise OptionError("a calibration needs at least two observed types",
                          field="manifest")
    mean = x.mean(axis=0)
    scale = x.std(axis=0)
    scale = np.where(scale > 1e-9, scale, 1.0)
    model = LogisticRegression(C=penalty_c, max_iter=2000)
    model.fit((x - mean) / scale, observed)
    return Calibration(classes=tuple(Code(int(c)).name for c in model.classes_),
                       coef=np.asarray(model.coef_, dtype=np.float64),
                       intercept=np.asarray(model.intercept_, dtype=np.float64),
                       mean=mean, scale=scale, n_cases=len(observed),
                       fitted=datetime.now(UTC).isoformat(timespec="seconds").replace(
                           "+00:00", "Z"),
                       source=source, extra=dict(extra or {}))


def cross_validated(x: np.ndarray, observed: np.ndarray, possible: np.ndarray, *,
                    folds: int = FOLDS, seed: int = 0) -> np.ndarray:
    """Held-out calibrated probabilities ``(n, len(Code))``: each case predicted by a
    calibration fitted on the other folds (cases shuffled with ``seed``)."""
    n = len(observed)
    order = np.random.default_rng(seed).permutation(n)
    out = np.zeros((n, len(Code)))
    for k in range(folds):
        test = order[k::folds]
        train = np.setdiff1d(order, test)
        cal = fit_calibration(x[train], observed[train])
        out[test] = cal.apply(x[test], possible[test])
    return out


def feature_names() -> list[str]:
    """The features a calibration reads, in order (for documentation and reports)."""
    return list(FEATURES)
