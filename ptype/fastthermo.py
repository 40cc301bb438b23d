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
the compiled and numpy paths agree to 1e-6 K or better (``tests/test_grid_fastthermo.py``).

Two builds of each kernel exist: a ``parallel=True`` one (numba's own threads)
for calls from the main thread, and a serial ``nogil`` one for calls from worker
threads (a dask chunk), because numba's default thread pool must not be entered
from several threads at once and dask already keeps every core busy.

Use :func:`wet_bulb_c`; :func:`ptype.thermo.wet_bulb_temperature` calls it for
arrays of ``ptype.thermo._FAST_MIN_SIZE`` valid points or more when numba is importable.
"""

from __future__ import annotations

import math
import threading

import numpy as np

from .constants import epsilon

try:  # numba is a declared dependency, but the numpy path must keep working without it
    from numba import njit, prange
    AVAILABLE = True
except ImportError:  # pragma: no cover - exercised only on installs without numba
    AVAILABLE = False

#: Isobaric wet-bulb: per-point Halley step below which the iteration stops, K.  With cubic
#: convergence the error left is below 1e-9 K (measured against a 1e-12 K solution on 4
#: million points, -40..35 degC, 300..1050 hPa, RH 10..100 %; see tests/test_grid_fastthermo.py).
ISOBARIC_STEP_K = 1e-2
#: Adiabatic wet-bulb: per-point Newton step below which the iteration stops, K (as the
#: numpy path's tolerance; the error left after a quadratic step of 1e-3 K is ~1e-7 K).
ADIABATIC_STEP_K = 1e-3
MAX_ITER = 60

# Alduchov & Eskridge (1996) AERK constants, e in hPa, T in degC (as ptype.thermo._AE_WATER).
_A, _B, _C = 6.1094, 17.625, 243.04
_BC = _B * _C
_T0 = 273.15


if AVAILABLE:
    _jit = njit(cache=True, fastmath=False, nogil=True)
else:  # pragma: no cover
    def _jit(func):
        return func

    def prange(*args):
        return range(*args)


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
    """Thermodynamic wet-bulb of one point (see :func:`ptype.thermo._isobaric_wet_bulb_c`)."""
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
    """Pseudo-adiabatic wet-bulb (see :func:`ptype.thermo._adiabatic_wet_bulb_c`): the
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
def _both_point(p, t, td_in):
    """Isobaric and pseudo-adiabatic wet-bulb of one point, sharing es(Td) and using the
    first as the starting point of the second."""
    if not (math.isfinite(p) and math.isfinite(t) and math.isfinite(td_in) and p > 0.0):
        return math.nan, math.nan
    td = min(td_in, t)
    inv_cd = 1.0 / (td + _C)
    es_d = _A * math.exp(_B * td * inv_cd)
    iso = _isobaric_solve(p, t, td, es_d, inv_cd)
    return iso, _adiabatic_solve(p, t, td, es_d, iso)


@_jit
def _adiabatic_point(p, t, td_in):
    """Pseudo-adiabatic wet-bulb of one point (the second value of :func:`_both_point`, so
    that both entry points give the same numbers)."""
    return _both_point(p, t, td_in)[1]


@_jit
def _isobaric_serial(p, t, td, out):
    for i in range(p.size):
        out[i] = _isobaric_point(p[i], t[i], td[i])


@_jit
def _adiabatic_serial(p, t, td, out):
    for i in range(p.size):
        out[i] = _adiabatic_point(p[i], t[i], td[i])


if AVAILABLE:
    _pjit = njit(cache=True, fastmath=False, nogil=True, parallel=True)
else:  # pragma: no cover
    _pjit = _jit


@_pjit
def _isobaric_parallel(p, t, td, out):
    for i in prange(p.size):
        out[i] = _isobaric_point(p[i], t[i], td[i])


@_pjit
def _adiabatic_parallel(p, t, td, out):
    for i in prange(p.size):
        out[i] = _adiabatic_point(p[i], t[i], td[i])


@_jit
def _both_serial(p, t, td, out_iso, out_adi):
    for i in range(p.size):
        out_iso[i], out_adi[i] = _both_point(p[i], t[i], td[i])


@_pjit
def _both_parallel(p, t, td, out_iso, out_adi):
    for i in prange(p.size):
        out_iso[i], out_adi[i] = _both_point(p[i], t[i], td[i])


_KERNELS = {("isobaric", False): _isobaric_serial, ("isobaric", True): _isobaric_parallel,
            ("adiabatic", False): _adiabatic_serial, ("adiabatic", True): _adiabatic_parallel}

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
    return p, t, td, shape, bool(parallel)


def wet_bulbs_c(pressure_hpa, temperature_c, dewpoint_c,
                parallel: bool | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Isobaric and pseudo-adiabatic wet-bulb, degC, in one pass (the exponential at the dew
    point is shared and the isobaric value starts the adiabatic iteration); each equal to
    :func:`wet_bulb_c` of its kind.  NaN where an input is missing or ``p <= 0``."""
    p, t, td, shape, parallel = _flat_inputs(pressure_hpa, temperature_c, dewpoint_c, parallel)
    iso = np.empty(p.size, dtype=np.float64)
    adi = np.empty(p.size, dtype=np.float64)
    (_both_parallel if parallel else _both_serial)(p, t, td, iso, adi)
    return iso.reshape(shape), adi.reshape(shape)


def wet_bulb_c(pressure_hpa, temperature_c, dewpoint_c, kind: str = "isobaric",
               parallel: bool | None = None) -> np.ndarray:
    """Wet-bulb temperature, degC, compiled path; same contract as
    :func:`ptype.thermo.wet_bulb_temperature` (broadcasting, NaN where an input is missing).

    ``parallel`` = None picks numba's threads from the main thread and a serial loop elsewhere.
    """
    if kind not in ("isobaric", "adiabatic"):
        raise ValueError(f"kind must be one of ('isobaric', 'adiabatic'), got {kind!r}")
    p, t, td, shape, parallel = _flat_inputs(pressure_hpa, temperature_c, dewpoint_c, parallel)
    out = np.empty(p.size, dtype=np.float64)
    _KERNELS[(kind, parallel)](p, t, td, out)
    out = out.reshape(shape)
    return out if out.ndim else out[()]
