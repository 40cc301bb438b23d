"""Probabilities by Monte-Carlo perturbation of the profile.

Each member perturbs the temperature and the relative humidity of every level
with Gaussian errors correlated in the vertical, then the whole batch of
members goes through the same vectorised pipeline as the control.  The
probability of a code is the fraction of members that give it.

Error model (ours, engineering defaults: the perturbation sizes used by Reeves
et al. 2014 were not found, so these are starting points to tune, not
published values):

* temperature error sigma :data:`TEMPERATURE_SIGMA_K` = 0.7 K,
* relative-humidity error sigma :data:`RELATIVE_HUMIDITY_SIGMA_PCT` = 7 % (absolute),
  clipped to 1-100 %,
* vertical correlation ``exp(-dz / L)`` with :data:`CORRELATION_LENGTH_M` = 1500 m,
  generated as a first-order autoregressive sequence up each column (the
  exact exponential correlation for any level spacing).

The consensus code is always taken from the unperturbed profile; members only
give probabilities.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from ptype import thermo
from ptype.codes import Code
from ptype.engine.columns import Columns
from ptype.engine.compiled import AVAILABLE as _COMPILED
from ptype.engine.compiled import compiled
from ptype.errors import OptionError

#: A seed of the members' random draws: a whole number, a sequence of them (one stream per
#: batch, ``[seed, k]``) or None (fresh entropy); as ``numpy.random.default_rng`` takes it.
SeedLike = int | Sequence[int] | None

DEFAULT_MEMBERS = 50
TEMPERATURE_SIGMA_K = 0.7
RELATIVE_HUMIDITY_SIGMA_PCT = 7.0
CORRELATION_LENGTH_M = 1500.0
MAX_MEMBERS = 10000

#: Confidence words from the probability of the consensus code (ours).
CONFIDENCE_WORDS = ((0.8, "high"), (0.5, "moderate"), (0.0, "low"))


def confidence_word(probability: float) -> str:
    """``high`` (>= 0.8), ``moderate`` (>= 0.5) or ``low``."""
    for limit, word in CONFIDENCE_WORDS:
        if probability >= limit:
            return word
    return "low"


def correlated_noise(height_m: np.ndarray, rng: np.random.Generator,
                     length_m: float = CORRELATION_LENGTH_M) -> np.ndarray:
    """Unit-variance Gaussian noise, ``(n, L)``, with correlation ``exp(-|dz|/length_m)``.

    AR(1) along each column: ``e_k = r_k e_{k-1} + sqrt(1 - r_k^2) w_k`` with
    ``r_k = exp(-(z_k - z_{k-1}) / L)``; NaN heights (padding) give r = 0.
    """
    r, s = ar1_coefficients(height_m, length_m)
    return _ar1(r, s, rng.standard_normal(np.shape(height_m)))


def ar1_coefficients(height_m: np.ndarray,
                     length_m: float = CORRELATION_LENGTH_M) -> tuple[np.ndarray, np.ndarray]:
    """The ``r_k`` and ``sqrt(1 - r_k^2)`` of :func:`correlated_noise`, ``(n, L-1)`` each."""
    dz = np.diff(height_m, axis=1)
    r = np.exp(-np.abs(np.nan_to_num(dz, nan=np.inf)) / length_m)
    return r, np.sqrt(1.0 - r * r)


def _ar1(r, s, white):
    """The AR(1) recursion of :func:`correlated_noise` on white noise ``(n, L)``."""
    if _COMPILED and white.shape[1] > 1:
        out = np.empty_like(white)
        _ar1_compiled(np.ascontiguousarray(r), np.ascontiguousarray(s), white, out)
        return out
    return _ar1_numpy(r, s, white)


def _ar1_numpy(r, s, white):
    """The AR(1) recursion, one numpy step per level."""
    L = white.shape[1]
    out = np.empty_like(white)
    out[:, 0] = white[:, 0]
    for k in range(1, L):
        out[:, k] = r[:, k - 1] * out[:, k - 1] + s[:, k - 1] * white[:, k]
    return out


def _ar1_loop(r, s, white, out):
    """:func:`_ar1_numpy` as a plain loop (compiled with numba), same operations in the same
    order; fills ``out``."""
    n, L = white.shape
    for i in range(n):
        e = white[i, 0]
        out[i, 0] = e
        for k in range(1, L):
            e = r[i, k - 1] * e + s[i, k - 1] * white[i, k]
            out[i, k] = e


_ar1_compiled = compiled(_ar1_loop)


def perturb(columns: Columns, members: int, seed: SeedLike = None, *,
            temperature_sigma_k: float = TEMPERATURE_SIGMA_K,
            relative_humidity_sigma_pct: float = RELATIVE_HUMIDITY_SIGMA_PCT,
            correlation_length_m: float = CORRELATION_LENGTH_M) -> Columns:
    """Members of every column, stacked: row ``i * members + m`` is member ``m`` of column ``i``."""
    check_members(members)
    rng = np.random.default_rng(seed)
    rep = np.repeat(np.arange(columns.n_columns), members)
    base = columns.take(rep)
    # The members of a column share its heights, hence the AR(1) coefficients: computed once
    # per column (the same numbers as from the repeated heights), drawn twice per member.
    r, s = (np.repeat(a, members, axis=0)
            for a in ar1_coefficients(columns.height_m, correlation_length_m))
    e_t = _ar1(r, s, rng.standard_normal(base.height_m.shape))
    e_rh = _ar1(r, s, rng.standard_normal(base.height_m.shape))
    t = base.temperature_c + temperature_sigma_k * e_t
    rh = np.clip(base.relative_humidity_pct + relative_humidity_sigma_pct * e_rh, 1.0, 100.0)
    td = thermo.dewpoint_from_relative_humidity_c(t, rh)
    return base.with_profile(t, td)


def check_members(members: object) -> int:
    """``members`` as an int when it is a whole number from 0 to :data:`MAX_MEMBERS`.

    Raises
    ------
    ptype.errors.OptionError
        Naming the field ``members``, the value and the range expected.
    """
    if isinstance(members, bool) or not isinstance(members, (int, np.integer)):
        raise OptionError(f"members = {members!r}: expected a whole number", field="members")
    if not 0 <= members <= MAX_MEMBERS:
        raise OptionError(f"members = {members}: expected 0 to {MAX_MEMBERS}", field="members")
    return int(members)


def probabilities_from_codes(member_codes: np.ndarray, n: int, members: int) -> np.ndarray:
    """``(n, len(Code))`` probabilities from the stacked member codes of :func:`perturb`."""
    codes = np.asarray(member_codes).reshape(n, members)
    counts = np.zeros((n, len(Code)))
    rows = np.repeat(np.arange(n), members)
    np.add.at(counts, (rows, codes.ravel()), 1.0)
    return counts / members
