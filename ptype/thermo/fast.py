"""Compiled (numba) wet-bulb kernels for large arrays.

The numpy solvers in :mod:`ptype.thermo` iterate every point until the slowest
one has converged and allocate a temporary array per operation; here each point
is solved on its own in a compiled loop, so a gridded run of tens of millions of
level-points costs a few seconds.  Same equations, same bracket as :mod:`ptype.thermo`:

* isobaric wet-bulb: ASHRAE Handbook--Fundamentals (2017) ch. 1 eq. 35 with the
  Alduchov & Eskridge (1996) AERK saturation vapour pressure on [Td, T], solved
  by Halley's method from a psychrometric first guess;
* adiabatic (pseudo) wet-bulb: Normand's rule with Bolton (1980) eqs. 15 and 39
  on [Td - 1, T], solved by Newton's method with the closed-form slope.

Each point stops on its own step (:data:`ISOBARIC_STEP_K`, :data:`ADIABATIC_STEP_K`);
the compiled and numpy paths agree to 1e-6 K or better (``tests/test_thermo_fast.py``).
Both solvers run on blocks of points with a fixed two Halley (isobaric) or Newton
(adiabatic) steps so that LLVM vectorises them (about 3.5 x and 2.3 x the per-point loops);
points they cannot finish that way go to the per-point solvers (see "Vectorised solvers" below).

Two builds of each kernel exist: a ``parallel=True`` one (numba's own threads)
for calls from the main thread, and a serial ``nogil`` one for calls from worker
threads (a dask chunk), because numba's default thread pool must not be entered
from several threads at once and dask already keeps every core busy.

Fork safety: numba's default threading layer on Linux is GNU OpenMP, whose thread pool does
not survive ``fork()`` (a forked child that enters a parallel kernel is terminated, see the
GNU libgomp manual, "OpenMP and fork").  Unless ``NUMBA_THREADING_LAYER`` says otherwise, this
module asks numba for a fork-safe layer (``forksafe``: TBB when installed, else numba's own
work queue), so a process that forks after computing (gunicorn's master, multiprocessing)
leaves working kernels to its children.  :func:`set_parallel` turns the parallel builds off
for the whole process (the HTTP server does: its workers compute requests side by side).

Use :func:`wet_bulb_c`; :func:`ptype.thermo.wetbulb.wet_bulb_temperature` calls it for
arrays of ``ptype.thermo.wetbulb._FAST_MIN_SIZE`` valid points or more when numba is importable.
"""

from __future__ import annotations

import math
import os
import threading

import numpy as np
from numpy.typing import ArrayLike

from ptype.thermo.constants import epsilon
from ptype.thermo.kinds import check_wet_bulb_kind

try:  # numba is a declared dependency, but the numpy path must keep working without it
    import numba
    from numba import njit, prange
    AVAILABLE = True
except ImportError:  # pragma: no cover - exercised only on installs without numba
    AVAILABLE = False

#: Isobaric wet-bulb: per-point Halley step below which the iteration stops, K.  With cubic
#: convergence the error left is below 1e-9 K (measured against a 1e-12 K solution on 4
#: million points, -40..35 degC, 300..1050 hPa, RH 10..100 %; see tests/test_thermo_fast.py).
ISOBARIC_STEP_K = 1e-2
#: Adiabatic wet-bulb: per-point Newton step below which the iteration stops, K (as the
#: numpy path's tolerance; the error left after a quadratic step of 1e-3 K is ~1e-7 K).
ADIABATIC_STEP_K = 1e-3
MAX_ITER = 60

# Alduchov & Eskridge (1996) AERK constants, e in hPa, T in degC (as
# ptype.thermo.saturation._AE_WATER).
_A, _B, _C = 6.1094, 17.625, 243.04
_BC = _B * _C
_T0 = 273.15


if AVAILABLE:
    # error_model="numpy": a division by zero gives inf/NaN instead of a Python exception, which
    # removes a branch per division and lets LLVM vectorise the blocked isobaric loop (the
    # solvers never divide by zero on finite input; non-finite points are NaN either way).
    _jit = njit(cache=True, fastmath=False, nogil=True, error_model="numpy")
else:  # pragma: no cover
    def _jit(func):
        return func

    def prange(*args):
        return range(*args)

if AVAILABLE and "NUMBA_THREADING_LAYER" not in os.environ:
    # Before any parallel kernel runs (the layer is fixed at the first launch of threads).
    numba.config.THREADING_LAYER = "forksafe"

#: Whether calls from the main thread may use the parallel builds (see :func:`set_parallel`).
_parallel_allowed = os.environ.get("PTYPE_COMPILED_PARALLEL", "1") not in ("0", "false", "no")


def set_parallel(allowed: bool) -> None:
    """Allow (default) or forbid the parallel builds for the whole process; forbidden, every
    call uses the serial build and no thread pool is ever started."""
    global _parallel_allowed
    _parallel_allowed = bool(allowed)


def parallel_allowed() -> bool:
    """Whether the parallel builds may be used in this process (:func:`set_parallel`)."""
    return _parallel_allowed


if AVAILABLE:
    _pjit = njit(cache=True, fastmath=False, nogil=True, parallel=True, error_model="numpy")
else:  # pragma: no cover
    _pjit = _jit


@_jit
def _first_guess_c(p, t, td, es_d, inv_cd):
    """First guess of the wet-bulb from the linearised psychrometer equation
    ``es(Tw) - es(Td) = gamma (T - Tw)`` with the slope of es taken at Td and
    ``gamma = cp p / (epsilon L)`` (e.g. Wallace & Hobbs 2006 sec. 3.5.6).

    It lies in [Td, T] and, es being convex, at or above the isobaric root.
    """
    slope_d = es_d * _BC * inv_cd * inv_cd
    gamma = 1.006 * p / (epsilon * 2501.0)
    return (slope_d * td + gamma * t) / (slope_d + gamma)


@_jit
def _isobaric_solve(p, t, td, es_d, inv_cd):
    """Thermodynamic wet-bulb at ``p`` of air ``t`` with dew point ``td <= t`` (all finite,
    ``p > 0``; ``es_d`` the saturation vapour pressure at ``td``, ``inv_cd = 1 / (td + C)``).

    The balance ``W = num(t*) / den(t*)`` of ASHRAE (2017) ch. 1 eq. 35 is solved as
    ``g(t*) = num - W den = 0`` (same root, since ``den > 0``) by Halley's method: the second
    derivative of the saturation mixing ratio follows from es without another exponential,
    and the cubic convergence needs two steps for most points instead of three or four.
    """
    w = epsilon * es_d / (p - es_d)
    lo = td
    hi = t
    x = _first_guess_c(p, t, td, es_d, inv_cd)
    a_t = 2501.0 + 1.86 * t
    for _ in range(MAX_ITER):
        inv_c = 1.0 / (x + _C)
        es = _A * math.exp(_B * x * inv_c)
        inv_d = 1.0 / (p - es)
        k = _BC * inv_c * inv_c
        des = es * k                       # d es / dT
        d2es = des * (k - 2.0 * inv_c)     # d2 es / dT2
        ws = epsilon * es * inv_d
        dws = epsilon * p * des * inv_d * inv_d
        d2ws = epsilon * p * inv_d * inv_d * (d2es + 2.0 * des * des * inv_d)
        lat = 2501.0 - 2.326 * x
        g = lat * ws - 1.006 * (t - x) - w * (a_t - 4.186 * x)
        dg = -2.326 * ws + lat * dws + 1.006 + 4.186 * w
        d2g = -4.652 * dws + lat * d2ws
        # g increases with t*: a positive residual means the root lies below x.
        if g > 0.0:
            hi = x
        else:
            lo = x
        new = x - 2.0 * g * dg / (2.0 * dg * dg - g * d2g)
        if not (new >= lo and new <= hi):
            new = 0.5 * (lo + hi)
        step = abs(new - x)
        x = new
        if step < ISOBARIC_STEP_K:
            break
    return min(max(x, td), t)


@_jit
def _isobaric_point(p, t, td_in):
    """Thermodynamic wet-bulb of one point (see
    :func:`ptype.thermo.wetbulb._isobaric_wet_bulb_c`)."""
    if not (math.isfinite(p) and math.isfinite(t) and math.isfinite(td_in) and p > 0.0):
        return math.nan
    td = min(td_in, t)
    inv_cd = 1.0 / (td + _C)
    return _isobaric_solve(p, t, td, _A * math.exp(_B * td * inv_cd), inv_cd)


@_jit
def _ln_theta_e_k(p, t, td, e):
    """Natural log of the Bolton (1980) eq. 39 equivalent potential temperature (K), as
    :func:`ptype.thermo.equivalent_potential_temperature_k` (T_L from his eq. 15); ``e`` is
    the vapour pressure, the saturation vapour pressure at ``td``."""
    t_k = t + _T0
    td_k = min(td + _T0, t_k)
    t_l = 1.0 / (1.0 / (td_k - 56.0) + math.log(t_k / td_k) / 800.0) + 56.0
    w = 1000.0 * epsilon * e / (p - e)
    return (math.log(t_k) + 0.2854 * math.log(1000.0 / (p - e)) + 0.28e-3 * w * math.log(t_k / t_l)
            + (3.036 / t_l - 0.00178) * w * (1.0 + 0.448e-3 * w))


@_jit
def _adiabatic_solve(p, t, td, es_d, x):
    """Pseudo-adiabatic wet-bulb (see :func:`ptype.thermo.wetbulb._adiabatic_wet_bulb_c`): the
    saturated temperature at ``p`` whose equivalent potential temperature is the parcel's,
    by Newton's method from ``x``.

    For a saturated parcel Bolton's T_L is the temperature itself, so ``ln theta_e`` and its
    derivative have closed forms and Newton's method needs no finite difference.  The
    starting point is the isobaric wet-bulb, which the adiabatic one lies just below (by
    0.009 K on average over -60..30 degC, 200..1050 hPa): most points then converge in one
    or two steps instead of two or three.
    """
    target = _ln_theta_e_k(p, t, td, es_d)
    lo = td - 1.0
    hi = t
    for _ in range(MAX_ITER):
        inv_c = 1.0 / (x + _C)
        e = _A * math.exp(_B * x * inv_c)
        de = e * _B * _C * inv_c * inv_c
        inv_d = 1.0 / (p - e)
        w = 1000.0 * epsilon * e * inv_d
        dw = w * p * inv_d * de / e
        t_k = x + _T0
        a = 3.036 / t_k - 0.00178
        f = (math.log(t_k) - 0.2854 * math.log((p - e) / 1000.0)
             + a * w * (1.0 + 0.448e-3 * w)) - target
        df = (1.0 / t_k + 0.2854 * de * inv_d - 3.036 / (t_k * t_k) * w * (1.0 + 0.448e-3 * w)
              + a * (1.0 + 0.896e-3 * w) * dw)
        if f > 0.0:
            hi = x
        else:
            lo = x
        new = x - f / df
        if not (new >= lo and new <= hi):
            new = 0.5 * (lo + hi)
        step = abs(new - x)
        x = new
        if step < ADIABATIC_STEP_K:
            break
    return min(max(x, td), t)


@_jit
def _adiabatic_from_isobaric(p, t, td_in, iso):
    """Pseudo-adiabatic wet-bulb of one point starting from its isobaric wet-bulb ``iso``."""
    if not (math.isfinite(p) and math.isfinite(t) and math.isfinite(td_in) and p > 0.0
            and math.isfinite(iso)):
        return math.nan
    td = min(td_in, t)
    es_d = _A * math.exp(_B * td / (td + _C))
    return _adiabatic_solve(p, t, td, es_d, iso)


# --- Vectorised solvers --------------------------------------------------------------------
#
# The scalar solver above stops each point on its own, which keeps LLVM from using the CPU's
# vector units.  Every point of the population below converges in two Halley steps from the
# psychrometric first guess (the second step is already below ISOBARIC_STEP_K; measured on 2
# million points, -40..35 degC, 300..1050 hPa, RH 10..100 %), so the blocked solver takes
# exactly two steps on a block of points with the same arithmetic and the same stopping rule,
# flags any point whose second step was not below the limit (or that lies outside the range
# where its exponential is accurate), and those points are solved again by the scalar solver.

#: Points per block of the vectorised solver (its work arrays stay in the L1 cache).
_BLOCK = 256
#: Range where the blocked solver runs: the polynomial exponential below keeps a relative
#: error under 1e-14 for B T / (T + C) in [-12.4, 3.5], i.e. Td >= -100 degC and T <= 60 degC.
_BLOCK_MIN_DEWPOINT_C = -100.0
_BLOCK_MAX_TEMPERATURE_C = 60.0
_BLOCK_MAX_PRESSURE_HPA = 1100.0

if AVAILABLE:
    _inline = njit(inline="always", error_model="numpy")
else:  # pragma: no cover
    _inline = _jit


@_inline
def _exp_block(a):
    """``exp(a)`` for ``-12.4 <= a <= 3.5`` without a library call, so that the loop calling it
    vectorises: the Taylor polynomial of degree 13 of ``exp(a / 32)`` (truncation below 2e-17
    for ``|a / 32| <= 0.39``), squared five times (relative error under 1e-14 overall; checked
    against ``numpy.exp`` in tests/test_thermo_fast.py)."""
    y = a * (1.0 / 32.0)
    s = 1.0 + y * (1.0 + y * (1.0 / 2.0 + y * (1.0 / 6.0 + y * (1.0 / 24.0 + y * (
        1.0 / 120.0 + y * (1.0 / 720.0 + y * (1.0 / 5040.0 + y * (1.0 / 40320.0 + y * (
            1.0 / 362880.0 + y * (1.0 / 3628800.0 + y * (1.0 / 39916800.0 + y * (
                1.0 / 479001600.0 + y * (1.0 / 6227020800.0)))))))))))))
    s = s * s
    s = s * s
    s = s * s
    s = s * s
    return s * s


@_inline
def _bracketed_step(x, lo, hi, state, k, above, new, step_k):
    """One step of point ``k`` of a block, as in the per-point solvers: shrink the bracket on
    the residual's sign (``above``: the root lies below ``x``), take ``new`` if it falls inside
    and bisect otherwise, and mark the point converged when the step is below ``step_k``.
    Points no longer iterating (``state != 0``) keep their values; branch-free selects."""
    xk = x[k]
    lok = lo[k]
    hik = hi[k]
    new_hi = xk if above else hik
    new_lo = lok if above else xk
    inside = (new >= new_lo) & (new <= new_hi)
    new = new if inside else 0.5 * (new_lo + new_hi)
    step = abs(new - xk)
    active = state[k] == 0.0
    x[k] = new if active else xk
    lo[k] = new_lo if active else lok
    hi[k] = new_hi if active else hik
    state[k] = (1.0 if step < step_k else 0.0) if active else state[k]


@_inline
def _finish_block(x, state, t, td_in, out, pending, b0, m):
    """Write a block's results clipped to [Td, T] and flag the points it did not finish."""
    for k in range(m):
        tk = t[b0 + k]
        tdr = td_in[b0 + k]
        td = tdr if tdr < tk else tk  # noqa: FURB136 - branch-free select, vectorises
        out[b0 + k] = min(max(x[k], td), tk)
        pending[b0 + k] = 0 if state[k] == 1.0 else 1


@_inline
def _part_bounds(size, parts, j):
    """Start and stop of part ``j`` of ``parts`` block-aligned parts of ``size`` points."""
    per = ((size + parts - 1) // parts + _BLOCK - 1) // _BLOCK * _BLOCK
    return min(j * per, size), min((j + 1) * per, size)


@_jit
def _isobaric_blocks(p, t, td_in, out, pending, start, stop):
    """Isobaric wet-bulb of points ``start:stop`` by blocks of :data:`_BLOCK`: the first guess
    and two Halley steps of :func:`_isobaric_solve` (same formulas, same bracket, same stopping
    rule; ``exp`` by :func:`_exp_block`).  Writes ``out``; sets ``pending`` to 1 where the point
    must be solved by the scalar solver instead (not converged, out of range or missing)."""
    x = np.empty(_BLOCK)
    lo = np.empty(_BLOCK)
    hi = np.empty(_BLOCK)
    w = np.empty(_BLOCK)
    state = np.empty(_BLOCK)  # 0 = iterating, 1 = converged, 2 = left to the scalar solver
    for b0 in range(start, stop, _BLOCK):
        m = min(_BLOCK, stop - b0)
        for k in range(m):
            pk = p[b0 + k]
            tk = t[b0 + k]
            tdr = td_in[b0 + k]
            td = tdr if tdr < tk else tk  # noqa: FURB136 - branch-free select, vectorises
            # Written with & so the comparisons stay branch-free; NaN fails every one of them.
            ok = ((pk > 0.0) & (pk <= _BLOCK_MAX_PRESSURE_HPA) & (tdr >= _BLOCK_MIN_DEWPOINT_C)
                  & (td >= _BLOCK_MIN_DEWPOINT_C) & (tk <= _BLOCK_MAX_TEMPERATURE_C))
            inv_cd = 1.0 / (td + _C)
            es_d = _A * _exp_block(_B * td * inv_cd)
            slope_d = es_d * _BC * inv_cd * inv_cd
            gamma = 1.006 * pk / (epsilon * 2501.0)
            x[k] = (slope_d * td + gamma * tk) / (slope_d + gamma)
            w[k] = epsilon * es_d / (pk - es_d)
            lo[k] = td
            hi[k] = tk
            state[k] = 0.0 if ok else 2.0
        for _ in range(2):
            for k in range(m):
                xk = x[k]
                pk = p[b0 + k]
                tk = t[b0 + k]
                wk = w[k]
                inv_c = 1.0 / (xk + _C)
                es = _A * _exp_block(_B * xk * inv_c)
                inv_d = 1.0 / (pk - es)
                kk = _BC * inv_c * inv_c
                des = es * kk
                d2es = des * (kk - 2.0 * inv_c)
                ws = epsilon * es * inv_d
                dws = epsilon * pk * des * inv_d * inv_d
                d2ws = epsilon * pk * inv_d * inv_d * (d2es + 2.0 * des * des * inv_d)
                lat = 2501.0 - 2.326 * xk
                g = lat * ws - 1.006 * (tk - xk) - wk * ((2501.0 + 1.86 * tk) - 4.186 * xk)
                dg = -2.326 * ws + lat * dws + 1.006 + 4.186 * wk
                d2g = -4.652 * dws + lat * d2ws
                _bracketed_step(x, lo, hi, state, k, g > 0.0,
                                xk - 2.0 * g * dg / (2.0 * dg * dg - g * d2g), ISOBARIC_STEP_K)
        _finish_block(x, state, t, td_in, out, pending, b0, m)


_LN2 = math.log(2.0)


@_inline
def _log_block(y):
    """``log(y)`` for ``1/64 <= y <= 64`` without a library call (vectorisable): exact scalings
    by powers of two bring ``y`` into [0.707, 1.414], then ``log y = 2 atanh(s)`` with
    ``s = (y - 1) / (y + 1)``, ``|s| <= 0.172``, summed to ``s**23`` (truncation below 1e-17;
    checked against ``numpy.log`` in tests/test_thermo_fast.py)."""
    k = 0.0
    big = y >= 8.0
    y = y * 0.125 if big else y
    k = k + 3.0 if big else k
    big = y >= 2.8284271247461903
    y = y * 0.25 if big else y
    k = k + 2.0 if big else k
    big = y >= 1.4142135623730951
    y = y * 0.5 if big else y
    k = k + 1.0 if big else k
    small = y < 0.125
    y = y * 8.0 if small else y
    k = k - 3.0 if small else k
    small = y < 0.35355339059327373
    y = y * 4.0 if small else y
    k = k - 2.0 if small else k
    small = y < 0.7071067811865476
    y = y * 2.0 if small else y
    k = k - 1.0 if small else k
    s = (y - 1.0) / (y + 1.0)
    q = s * s
    series = 1.0 + q * (1.0 / 3.0 + q * (1.0 / 5.0 + q * (1.0 / 7.0 + q * (1.0 / 9.0 + q * (
        1.0 / 11.0 + q * (1.0 / 13.0 + q * (1.0 / 15.0 + q * (1.0 / 17.0 + q * (
            1.0 / 19.0 + q * (1.0 / 21.0 + q * (1.0 / 23.0)))))))))))
    return k * _LN2 + 2.0 * s * series


@_inline
def _log_kelvin_block(t_k):
    """``log(t_k)`` for 64 K <= t_k <= 16384 K through :func:`_log_block` (t_k / 256 exact)."""
    return _log_block(t_k * (1.0 / 256.0)) + 8.0 * _LN2


#: Newton steps of the blocked adiabatic solver, from the isobaric wet-bulb (which the
#: adiabatic one lies just below): the second step is below ADIABATIC_STEP_K for nearly all
#: points; the rest go to the per-point solver.
_ADIABATIC_BLOCK_STEPS = 2
#: Lowest pressure of the blocked adiabatic solver: (p - e) / 1000 stays >= 1/64.
_BLOCK_MIN_PRESSURE_HPA = 20.0
_BLOCK_MAX_VAPOUR_FRACTION = 0.05


@_jit
def _adiabatic_blocks(p, t, td_in, iso, out, pending, start, stop):
    """Pseudo-adiabatic wet-bulb of points ``start:stop`` from their isobaric wet-bulb ``iso``,
    by blocks: :func:`_ln_theta_e_k` and a fixed :data:`_ADIABATIC_BLOCK_STEPS` Newton steps of
    :func:`_adiabatic_solve` (same formulas, with the three 1/T terms of the slope from one
    division; same bracket and stopping rule; ``exp`` and ``log`` by :func:`_exp_block` and
    :func:`_log_block`).  Sets ``pending`` to 1 where the per-point
    solver must take over."""
    x = np.empty(_BLOCK)
    lo = np.empty(_BLOCK)
    hi = np.empty(_BLOCK)
    target = np.empty(_BLOCK)
    state = np.empty(_BLOCK)  # 0 = iterating, 1 = converged, 2 = left to the per-point solver
    for b0 in range(start, stop, _BLOCK):
        m = min(_BLOCK, stop - b0)
        for k in range(m):
            pk = p[b0 + k]
            tk = t[b0 + k]
            tdr = td_in[b0 + k]
            xk = iso[b0 + k]
            td = tdr if tdr < tk else tk  # noqa: FURB136 - branch-free select, vectorises
            ok = ((pk >= _BLOCK_MIN_PRESSURE_HPA) & (pk <= _BLOCK_MAX_PRESSURE_HPA)
                  & (tdr >= _BLOCK_MIN_DEWPOINT_C) & (td >= _BLOCK_MIN_DEWPOINT_C)
                  & (tk <= _BLOCK_MAX_TEMPERATURE_C) & (xk >= td) & (xk <= tk))
            e = _A * _exp_block(_B * td / (td + _C))
            # Vapour pressure above 5 % of the pressure (e.g. 30 degC air at 100 hPa, which the
            # atmosphere does not hold) makes the slope ill-conditioned: left to the per-point
            # solver, so that the two agree to 1e-9 K everywhere else.
            ok = ok & (e <= _BLOCK_MAX_VAPOUR_FRACTION * pk)
            # _ln_theta_e_k, spelled out with the block logarithms.
            t_k = tk + _T0
            td_k = td + _T0
            td_k = td_k if td_k < t_k else t_k  # noqa: FURB136 - branch-free select
            t_l = 1.0 / (1.0 / (td_k - 56.0) + _log_block(t_k / td_k) / 800.0) + 56.0
            w = 1000.0 * epsilon * e / (pk - e)
            target[k] = (_log_kelvin_block(t_k) + 0.2854 * _log_block(1000.0 / (pk - e))
                         + 0.28e-3 * w * _log_block(t_k / t_l)
                         + (3.036 / t_l - 0.00178) * w * (1.0 + 0.448e-3 * w))
            x[k] = xk
            lo[k] = td - 1.0
            hi[k] = tk
            state[k] = 0.0 if ok else 2.0
        for _ in range(_ADIABATIC_BLOCK_STEPS):
            for k in range(m):
                xk = x[k]
                pk = p[b0 + k]
                inv_c = 1.0 / (xk + _C)
                e = _A * _exp_block(_B * xk * inv_c)
                dlne = _BC * inv_c * inv_c          # (d e / dT) / e, without dividing by e
                inv_d = 1.0 / (pk - e)
                w = 1000.0 * epsilon * e * inv_d
                dw = w * pk * inv_d * dlne
                t_k = xk + _T0
                inv_tk = 1.0 / t_k                  # one division for the three 1/T terms
                a = 3.036 * inv_tk - 0.00178
                f = (_log_kelvin_block(t_k) - 0.2854 * _log_block((pk - e) * 0.001)
                     + a * w * (1.0 + 0.448e-3 * w)) - target[k]
                df = (inv_tk + 0.2854 * e * dlne * inv_d
                      - 3.036 * inv_tk * inv_tk * w * (1.0 + 0.448e-3 * w)
                      + a * (1.0 + 0.896e-3 * w) * dw)
                _bracketed_step(x, lo, hi, state, k, f > 0.0, xk - f / df, ADIABATIC_STEP_K)
        _finish_block(x, state, t, td_in, out, pending, b0, m)


@_jit
def _adiabatic_blocks_serial(p, t, td, iso, out, pending):
    _adiabatic_blocks(p, t, td, iso, out, pending, 0, p.size)


@_pjit
def _adiabatic_blocks_parallel(p, t, td, iso, out, pending, parts):
    for j in prange(parts):
        start, stop = _part_bounds(p.size, parts, j)
        _adiabatic_blocks(p, t, td, iso, out, pending, start, stop)


@_jit
def _adiabatic_pending(p, t, td, iso, out, pending):
    """The per-point solver on the points the blocked one left."""
    for i in range(p.size):
        if pending[i]:
            out[i] = _adiabatic_from_isobaric(p[i], t[i], td[i], iso[i])


@_jit
def _isobaric_blocks_serial(p, t, td, out, pending):
    _isobaric_blocks(p, t, td, out, pending, 0, p.size)


@_pjit
def _isobaric_blocks_parallel(p, t, td, out, pending, parts):
    for j in prange(parts):
        start, stop = _part_bounds(p.size, parts, j)
        _isobaric_blocks(p, t, td, out, pending, start, stop)


@_jit
def _isobaric_pending(p, t, td, out, pending):
    """The scalar solver on the points the blocked one left."""
    for i in range(p.size):
        if pending[i]:
            out[i] = _isobaric_point(p[i], t[i], td[i])


#: Below this many points a call from the main thread stays serial (thread start-up dominates).
PARALLEL_MIN_SIZE = 65536


def _flat_inputs(pressure_hpa, temperature_c, dewpoint_c, parallel):
    p, t, td = np.broadcast_arrays(np.asarray(pressure_hpa, dtype=np.float64),
                                   np.asarray(temperature_c, dtype=np.float64),
                                   np.asarray(dewpoint_c, dtype=np.float64))
    shape = p.shape
    p, t, td = (np.ascontiguousarray(a).reshape(-1) for a in (p, t, td))
    if parallel is None:
        parallel = (threading.current_thread() is threading.main_thread()
                    and p.size >= PARALLEL_MIN_SIZE)
    return p, t, td, shape, bool(parallel) and _parallel_allowed


def _isobaric(p, t, td, parallel: bool) -> np.ndarray:
    out = np.empty(p.size, dtype=np.float64)
    pending = np.empty(p.size, dtype=np.uint8)
    if parallel:
        _isobaric_blocks_parallel(p, t, td, out, pending, 4 * numba.get_num_threads())
    else:
        _isobaric_blocks_serial(p, t, td, out, pending)
    _isobaric_pending(p, t, td, out, pending)
    return out


def _adiabatic(p, t, td, iso, parallel: bool) -> np.ndarray:
    out = np.empty(p.size, dtype=np.float64)
    pending = np.empty(p.size, dtype=np.uint8)
    if parallel:
        _adiabatic_blocks_parallel(p, t, td, iso, out, pending, 4 * numba.get_num_threads())
    else:
        _adiabatic_blocks_serial(p, t, td, iso, out, pending)
    _adiabatic_pending(p, t, td, iso, out, pending)
    return out


def wet_bulbs_c(pressure_hpa: ArrayLike, temperature_c: ArrayLike, dewpoint_c: ArrayLike,
                parallel: bool | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Isobaric and pseudo-adiabatic wet-bulb, degC, in one pass (the isobaric value starts the
    adiabatic iteration); each equal to :func:`wet_bulb_c` of its kind.  NaN where an input is
    missing or ``p <= 0``."""
    p, t, td, shape, parallel = _flat_inputs(pressure_hpa, temperature_c, dewpoint_c, parallel)
    iso = _isobaric(p, t, td, parallel)
    return iso.reshape(shape), _adiabatic(p, t, td, iso, parallel).reshape(shape)


def wet_bulb_c(pressure_hpa: ArrayLike, temperature_c: ArrayLike, dewpoint_c: ArrayLike,
               kind: str = "isobaric", parallel: bool | None = None) -> np.ndarray:
    """Wet-bulb temperature, degC, compiled path; same contract as
    :func:`ptype.thermo.wetbulb.wet_bulb_temperature` (broadcasting, NaN where an input is missing).

    ``parallel`` = None picks numba's threads from the main thread and a serial loop elsewhere.
    An unknown ``kind`` raises :class:`ptype.errors.OptionError`.
    """
    check_wet_bulb_kind(kind)
    p, t, td, shape, parallel = _flat_inputs(pressure_hpa, temperature_c, dewpoint_c, parallel)
    out = _isobaric(p, t, td, parallel)
    if kind == "adiabatic":
        out = _adiabatic(p, t, td, out, parallel)
    out = out.reshape(shape)
    return out if out.ndim else out[()]
