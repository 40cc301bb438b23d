"""Probabilities from Monte-Carlo members: perturbed profiles and perturbed method weights.

Each member is a plausible version of the profile and of the judgement of the methods; the
whole batch of members goes through the same vectorised pipeline as the control, and the
probability of a code is the fraction of members that give it.  A member perturbs

* the **temperature** of every level: Gaussian errors correlated in the vertical,
  sigma :data:`TEMPERATURE_SIGMA_K`, correlation ``exp(-dz / L)`` with
  :data:`CORRELATION_LENGTH_M` (a first-order autoregressive sequence up each column, the
  exact exponential correlation for any level spacing);
* the **surface layer** on its own: an offset of sigma :data:`SURFACE_SIGMA_K` fading with
  height as ``exp(-z / SURFACE_DEPTH_M)`` (near-ground temperatures carry errors of their
  own: radiation, snow cover, boundary-layer mixing);
* the **warm nose** (the warmest elevated inversion top, when there is one): its strength by
  an added bump of sigma :data:`NOSE_SIGMA_K`, and its height by a shift of sigma
  :data:`NOSE_SHIFT_SIGMA_M`, both fading linearly to zero :data:`NOSE_HALF_WIDTH_M` away
  from its peak;
* the **humidity** as the dew-point depression on a log scale (``T - Td`` multiplied by
  ``exp(sigma e)``, sigma :data:`DEPRESSION_LOG_SIGMA`, correlated as the temperature): a
  saturated layer stays saturated (the old additive RH noise clipped at 100 % dried them:
  a 100 % level averaged 97 %), a dry one stays dry, and the dew point follows the perturbed
  temperature;
* the **weights of the voting methods** (:func:`voter_weights`): independent exponential
  draws (the two Baldwin variants share one), so that where the methods disagree the
  members disagree as well (structural uncertainty), while methods that agree keep agreeing.

The sizes are ours, engineering defaults to tune on paired cases (``ptype calibrate``): the
perturbation sizes used by Reeves et al. (2014) were not found.  The consensus is taken from
the unperturbed profile; :func:`supported_codes` makes the reported type consistent with the
members.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from ptype.codes import HAZARD_RANK, Code
from ptype.engine.columns import Columns
from ptype.engine.compiled import AVAILABLE as _COMPILED
from ptype.engine.compiled import compiled
from ptype.errors import OptionError

#: A seed of the members' random draws: a whole number, a sequence of them (one stream per
#: batch, ``[seed, k]``) or None (fresh entropy); as ``numpy.random.default_rng`` takes it.
SeedLike = int | Sequence[int] | None

DEFAULT_MEMBERS = 50
MAX_MEMBERS = 10000
#: Level temperature error, K, and its vertical correlation length, m (ours).
TEMPERATURE_SIGMA_K = 0.5
CORRELATION_LENGTH_M = 1500.0
#: Surface-layer temperature offset, K, and the depth over which it fades, m (ours).
SURFACE_SIGMA_K = 0.7
SURFACE_DEPTH_M = 300.0
#: Warm-nose strength, K, height shift, m, and the half width of the nose, m (ours).
NOSE_SIGMA_K = 0.8
NOSE_SHIFT_SIGMA_M = 150.0
NOSE_HALF_WIDTH_M = 1000.0
#: Dew-point depression error on a log scale (0.3: a factor of about 1.35 either way; ours).
DEPRESSION_LOG_SIGMA = 0.3
#: A reported type needs at least this fraction of the members (ours).
MIN_SUPPORT = 0.25

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


def nose_peaks(columns: Columns) -> tuple[np.ndarray, np.ndarray]:
    """Height, m, and level index of each column's warm nose: the warmest top of an
    elevated inversion (a level warmer than the one below and not colder than the one above,
    more than :data:`SURFACE_DEPTH_M` above the ground, at or below 500 hPa); NaN and -1 where
    there is none."""
    t, z, p = columns.temperature_c, columns.height_m, columns.pressure_hpa
    n, L = t.shape
    z0 = z[:, :1]
    peak = np.zeros((n, L), dtype=bool)
    with np.errstate(invalid="ignore"):
        peak[:, 1:-1] = ((t[:, 1:-1] > t[:, :-2]) & (t[:, 1:-1] >= t[:, 2:])
                         & (z[:, 1:-1] - z0 > SURFACE_DEPTH_M) & (p[:, 1:-1] >= 500.0))
    has = peak.any(axis=1)
    k = np.argmax(np.where(peak, t, -np.inf), axis=1)
    rows = np.arange(n)
    return np.where(has, z[rows, k], np.nan), np.where(has, k, -1)


def _nose_shift_delta(height_m: np.ndarray, temperature_c: np.ndarray, weight: np.ndarray,
                      column_of_member: np.ndarray, shift_m: np.ndarray) -> np.ndarray:
    """``T(z - shift) - T(z)`` of every member where its column's nose weight is positive,
    0 elsewhere: the column's profile moved up by the member's ``shift_m`` (linear between
    levels, held at the column's ends).

    Exact on the piecewise-linear profile, not a first-order step: at the nose's tip a
    lapse-rate step would leave the peak where it is and, on the flanks, overshoot it,
    always warming the nose; moving the profile lowers the peak and never exceeds it.
    Only the entries the weight touches are interpolated (about a fifth of the levels),
    which keeps grids of members cheap."""
    n, L = len(column_of_member), height_m.shape[1]
    delta = np.zeros((n, L))
    member, level = np.nonzero((weight[column_of_member] > 0.0) & (shift_m[:, None] != 0.0))
    if member.size == 0:
        return delta
    col = column_of_member[member]
    z = np.where(np.isfinite(height_m), height_m, np.inf)
    # One sorted key for all columns: heights offset by a column number larger than any
    # height (missing levels sort at their column's end).
    big = np.nanmax(np.abs(height_m[np.isfinite(height_m)]), initial=1.0) * 4.0 + 1e6
    offset = np.arange(height_m.shape[0])[:, None] * big
    keys = np.where(np.isfinite(z), z + offset, offset + big * 0.999).ravel()
    target = height_m[col, level] - shift_m[member]
    idx = np.searchsorted(keys, target + col * big)
    lo = np.clip(idx - 1 - col * L, 0, L - 1)
    hi = np.clip(idx - col * L, 0, L - 1)
    z_lo, z_hi = height_m[col, lo], height_m[col, hi]
    t_lo, t_hi = temperature_c[col, lo], temperature_c[col, hi]
    with np.errstate(invalid="ignore", divide="ignore"):
        w = np.clip((target - z_lo) / (z_hi - z_lo), 0.0, 1.0)
    w = np.where(np.isfinite(w), w, 0.0)
    moved = t_lo + w * (t_hi - t_lo)
    here = temperature_c[col, level]
    delta[member, level] = np.where(np.isfinite(moved), moved - here, 0.0)
    return delta


def perturb(columns: Columns, members: int, seed: SeedLike = None, *,
            temperature_sigma_k: float = TEMPERATURE_SIGMA_K,
            correlation_length_m: float = CORRELATION_LENGTH_M) -> Columns:
    """Members of every column, stacked: row ``i * members + m`` is member ``m`` of column ``i``
    (the profile perturbations of the module notes; see :func:`perturb_members` for the
    method weights as well)."""
    return perturb_members(columns, members, seed, temperature_sigma_k=temperature_sigma_k,
                           correlation_length_m=correlation_length_m)[0]


def perturb_members(columns: Columns, members: int, seed: SeedLike = None, *,
                    temperature_sigma_k: float = TEMPERATURE_SIGMA_K,
                    correlation_length_m: float = CORRELATION_LENGTH_M
                    ) -> tuple[Columns, np.ndarray]:
    """Perturbed profiles of every column (stacked as :func:`perturb`) and each member's
    voter weights (:func:`voter_weights`), from one random stream.

    What depends only on the column (the AR(1) coefficients, the surface fade, the nose's
    weight, the dew-point depression) is computed once per column and repeated; the nose's
    height shift moves the column's own profile (:func:`_nose_shift_delta`)."""
    check_members(members)
    rng = np.random.default_rng(seed)
    rep = np.repeat(np.arange(columns.n_columns), members)
    base = columns.take(rep)
    n = base.n_columns

    def per_member(a):
        return np.repeat(a, members, axis=0)

    r, s = (per_member(a) for a in ar1_coefficients(columns.height_m, correlation_length_m))
    e_t = _ar1(r, s, rng.standard_normal(base.height_m.shape))
    e_dd = _ar1(r, s, rng.standard_normal(base.height_m.shape))
    z = columns.height_m
    fade = per_member(np.nan_to_num(np.exp(-(z - z[:, :1]) / SURFACE_DEPTH_M)))
    nose_z, _ = nose_peaks(columns)
    with np.errstate(invalid="ignore"):
        weight = np.clip(1.0 - np.abs(z - nose_z[:, None]) / NOSE_HALF_WIDTH_M, 0.0, 1.0)
    weight = np.nan_to_num(weight)
    has_nose = np.repeat(np.isfinite(nose_z), members)
    surface = SURFACE_SIGMA_K * rng.standard_normal(n)
    shift = np.where(has_nose, NOSE_SHIFT_SIGMA_M * rng.standard_normal(n), 0.0)
    bump = NOSE_SIGMA_K * rng.standard_normal(n)
    moved = _nose_shift_delta(z, columns.temperature_c, weight, rep, shift)
    t = (base.temperature_c + temperature_sigma_k * e_t + surface[:, None] * fade
         + per_member(weight) * (moved + bump[:, None]))
    depression = per_member(np.maximum(columns.temperature_c - columns.dewpoint_c, 0.0))
    td = t - depression * np.exp(DEPRESSION_LOG_SIGMA * e_dd)
    return base.with_profile(t, td), voter_weights(rng, n)


def voter_weights(rng: np.random.Generator, n: int) -> np.ndarray:
    """``(n, len(VOTERS))`` random weights of the voting methods for ``n`` members:
    independent exponential draws (the weighted median is scale-free, so these act as
    Dirichlet(1, ..., 1) weights), the two Baldwin variants sharing one draw since they
    share one vote."""
    from ptype.engine.consensus import VOTERS
    draws = rng.exponential(1.0, (n, len(VOTERS)))
    if "baldwin" in VOTERS and "baldwin_revised" in VOTERS:
        draws[:, VOTERS.index("baldwin_revised")] = draws[:, VOTERS.index("baldwin")]
    return draws


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


def supported_codes(control: np.ndarray, probabilities: np.ndarray,
                    possible: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
    """The type to report for each column and why, consistent with its members.

    The profile's own consensus (``control``) stands whenever at least :data:`MIN_SUPPORT` of
    the members give it, even where another type is more probable: the explanation then gives
    both probabilities (a hazard preference when the control is the more hazardous).  Where
    fewer members give it, the most probable of the codes the profile's phase path allows
    (``possible``, ``(n, len(Code))``; all when None) is reported, ties to the more hazardous.

    Returns ``(codes, reason)``: ``reason`` 0 = the control is the most probable code, 1 = the
    control is kept over a more probable code, 2 = the most probable possible code replaces
    an under-supported control.
    """
    n = control.shape[0]
    rows = np.arange(n)
    rank = np.array([HAZARD_RANK[Code(k)] for k in range(len(Code))], dtype=np.float64)
    tie_break = 1e-9 * rank[None, :]
    allowed = np.ones_like(probabilities, dtype=bool) if possible is None else possible
    most = np.argmax(probabilities - tie_break, axis=1)
    best_allowed = np.argmax(np.where(allowed, probabilities, -1.0) - tie_break, axis=1)
    p_control = probabilities[rows, control]
    supported = p_control >= MIN_SUPPORT - 1e-12
    is_most = p_control >= probabilities[rows, most] - 1e-12
    codes = np.where(supported, control, best_allowed).astype(np.int64)
    reason = np.where(supported, np.where(is_most, 0, 1), 2)
    return codes, reason


#: Ice content of each code (for mapping a member's type onto the possible ones).
_ICE_CONTENT = np.array([{Code.SN: 1.0, Code.PL: 1.0, Code.RASN: 0.5, Code.RAPL: 0.5,
                          Code.FZRAPL: 0.5, Code.NONE: 2.0}.get(Code(k), 0.0)
                         for k in range(len(Code))])


def possible_code_map(control: np.ndarray, possible: np.ndarray) -> np.ndarray:
    """``(n, len(Code))``: for each column, the code each member's code counts as.

    A member is a perturbed copy of the column's profile; a type the column's own phase path
    rules out (:mod:`ptype.engine.phase`: snow after complete melting, pellets in a melting
    surface layer...) counts as the possible type with the nearest ice content: the column's
    own type when it is among those, else the most hazardous of them.  Possible types map to
    themselves."""
    k = possible.shape[1]
    distance = np.abs(_ICE_CONTENT[:, None] - _ICE_CONTENT[None, :])  # (from, to)
    rank = np.array([HAZARD_RANK[Code(c)] for c in range(k)], dtype=np.float64)
    # cost[i, from, to]: impossible targets excluded; nearest ice first, then the control,
    # then hazard.
    cost = np.where(possible[:, None, :], distance[None, :, :] * 1000.0, np.inf)
    is_control = np.arange(k)[None, None, :] == control[:, None, None]
    cost = cost + np.where(is_control, 0.0, 1.0 + rank[None, None, :])
    mapped = np.argmin(cost, axis=2)
    return np.where(possible, np.arange(k)[None, :], mapped)


def probabilities_from_codes(member_codes: np.ndarray, n: int, members: int) -> np.ndarray:
    """``(n, len(Code))`` probabilities from the stacked member codes of :func:`perturb`."""
    codes = np.asarray(member_codes).reshape(n, members)
    counts = np.zeros((n, len(Code)))
    rows = np.repeat(np.arange(n), members)
    np.add.at(counts, (rows, codes.ravel()), 1.0)
    return counts / members
