"""Wet-bulb temperature: isobaric (psychrometric) and pseudo-adiabatic.

* Isobaric (thermodynamic) wet-bulb: the adiabatic-saturation enthalpy balance of ASHRAE
  Handbook--Fundamentals (2017) ch. 1 eq. 33 written for a liquid wet bulb (eq. 35), solved
  for Tw by a bracketed Newton iteration.
* Adiabatic wet-bulb (Normand's rule, Knox et al. 2017): lift to the LCL (Bolton 1980 eq. 15)
  and descend the pseudo-adiabat, found by inverting Bolton's (1980) eq. 39.

The numpy solvers here serve installs without numba and check the compiled ones of
:mod:`ptype.thermo.fast`, which :func:`wet_bulb_temperature` uses when it can.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

from ptype.thermo.constants import epsilon
from ptype.thermo.kinds import check_wet_bulb_kind
from ptype.thermo.parcel import equivalent_potential_temperature_k
from ptype.thermo.saturation import _AE_WATER, _as_float


def _saturation_mixing_ratio_and_slope(pressure_hpa, temperature_c):
    """Saturation mixing ratio over water (kg/kg) and its temperature derivative (kg/kg/K)."""
    a, b, c = _AE_WATER
    es = a * np.exp(b * temperature_c / (temperature_c + c))
    des_dt = es * b * c / (temperature_c + c) ** 2
    denom = pressure_hpa - es
    ws = epsilon * es / denom
    dws_dt = epsilon * pressure_hpa * des_dt / denom ** 2
    return ws, dws_dt


def _isobaric_wet_bulb_c(pressure_hpa, temperature_c, dewpoint_c, step_tolerance_k=1e-3,
                         max_iter=40):
    """Thermodynamic wet-bulb over liquid water by bracketed Newton iteration.

    The balance (ASHRAE 2017 ch. 1 eq. 35, enthalpies in kJ/kg, t in degC)::

        W = ((2501 - 2.326 t*) Ws(t*) - 1.006 (t - t*)) / (2501 + 1.86 t - 4.186 t*)

    is solved for t* given the actual humidity ratio W.  The root lies in
    [Td, T]: at t* = T the right side is Ws(T) >= W and at t* = Td it is at
    most W.  Each Newton step is clipped into the current bracket, which is
    tightened after every evaluation, so the iteration always converges and
    stays finite.  Newton converges quadratically here, so once the largest
    step is below ``step_tolerance_k`` (1e-3 K) the error left after that step
    is of order 1e-7 K (measured in ``tests/test_thermo.py``); we stop there.
    """
    p = pressure_hpa
    t = temperature_c
    td = np.minimum(dewpoint_c, t)
    w, _ = _saturation_mixing_ratio_and_slope(p, td)
    lo = td.copy()
    hi = t.copy()
    # Start from the "one-third rule" (common practice); Newton then needs 3-5 steps.
    x = t - (t - td) / 3.0
    a_t = 2501.0 + 1.86 * t
    for _ in range(max_iter):
        wsat, dwsat = _saturation_mixing_ratio_and_slope(p, x)
        num = (2501.0 - 2.326 * x) * wsat - 1.006 * (t - x)
        den = a_t - 4.186 * x
        f = num / den - w
        df = (((-2.326 * wsat + (2501.0 - 2.326 * x) * dwsat + 1.006) * den + 4.186 * num)
              / (den * den))
        # f increases with t*: a positive residual means the root lies below x.
        positive = f > 0
        hi = np.where(positive, x, hi)
        lo = np.where(positive, lo, x)
        new = x - f / df
        new = np.where((new >= lo) & (new <= hi), new, 0.5 * (lo + hi))
        change = np.max(np.abs(new - x)) if new.size else 0.0
        x = new
        if change < step_tolerance_k:
            break
    return np.clip(x, td, t)


def _adiabatic_wet_bulb_c(pressure_hpa, temperature_c, dewpoint_c, tolerance_k=1e-3, max_iter=40):
    """Adiabatic (pseudo) wet-bulb: the saturated temperature at the same pressure whose
    equivalent potential temperature equals the parcel's (Normand's rule; Bolton 1980 eq. 39).

    Solved by secant steps clipped into the bracket [Td - 1, T] (theta_e of a
    saturated parcel rises monotonically with temperature at fixed pressure).
    """
    p = pressure_hpa
    t = temperature_c
    td = np.minimum(dewpoint_c, t)
    with np.errstate(all="ignore"):  # boiling-range inputs give NaN, not warnings
        return _adiabatic_secant(p, t, td, tolerance_k, max_iter)


def _adiabatic_secant(p, t, td, tolerance_k, max_iter):
    target = equivalent_potential_temperature_k(p, t, td)
    lo = td - 1.0
    hi = t.copy()
    x = t - (t - td) / 3.0
    for _ in range(max_iter):
        f = equivalent_potential_temperature_k(p, x, x) - target
        hi = np.where(f > 0, x, hi)
        lo = np.where(f <= 0, x, lo)
        h = 0.01
        df = (equivalent_potential_temperature_k(p, x + h, x + h) - (f + target)) / h
        new = x - f / df
        new = np.where((new >= lo) & (new <= hi), new, 0.5 * (lo + hi))
        converged = np.all(np.abs(new - x) < tolerance_k)
        x = new
        if converged:
            break
    return np.clip(x, td, t)


#: Arrays of at least this many valid points use the compiled solver of ptype.thermo.fast.
#: Since the compiled solvers are vectorised they are the cheaper path for any size (a
#: 60-level control column: ~0.3 ms in numpy, a few microseconds compiled); the numpy
#: solvers serve installs without numba and check the compiled ones in the tests.
_FAST_MIN_SIZE = 1


def _fast_available() -> bool:
    try:
        from ptype.thermo import fast
    except ImportError:  # pragma: no cover - numba missing: the numpy path serves every size
        return False
    return fast.AVAILABLE


def wet_bulb_temperature(pressure_hpa: ArrayLike, temperature_c: ArrayLike, dewpoint_c: ArrayLike,
                         kind: str = "isobaric") -> np.ndarray:
    """Wet-bulb temperature, degC, broadcasting over any shape.

    Parameters
    ----------
    pressure_hpa, temperature_c, dewpoint_c : array_like
        Pressure (hPa), air temperature (degC) and dew point (degC, over water).
    kind : {"isobaric", "adiabatic"}
        One of :data:`ptype.thermo.WET_BULB_KINDS`.  ``"isobaric"`` (default): the
        thermodynamic (psychrometric) wet-bulb over liquid water, the temperature an air
        parcel reaches by evaporating water into itself at constant pressure (ASHRAE 2017
        ch. 1 eq. 35; AMS Glossary "wet-bulb temperature").  Ramer (1993) uses this one.
        ``"adiabatic"``: the pseudo-adiabatic wet-bulb of Normand's rule (lift to
        the LCL, descend along the pseudo-adiabat; Knox et al. 2017), which
        Baldwin et al. (1994) use.  It is typically a few tenths of a kelvin
        below the isobaric value (from memory; the test suite measures it
        against MetPy).

    Returns
    -------
    numpy.ndarray
        Wet-bulb temperature, degC, with ``Td <= Tw <= T`` wherever the inputs
        are finite; NaN where any input is NaN.

    Raises
    ------
    ptype.errors.OptionError
        For a ``kind`` not in :data:`ptype.thermo.WET_BULB_KINDS`.
    """
    check_wet_bulb_kind(kind)
    p, t, td = np.broadcast_arrays(_as_float(pressure_hpa), _as_float(temperature_c),
                                   _as_float(dewpoint_c))
    valid = np.isfinite(p) & np.isfinite(t) & np.isfinite(td) & (p > 0)
    n_valid = np.count_nonzero(valid)
    if n_valid >= _FAST_MIN_SIZE and _fast_available():
        # Large arrays: the compiled per-point solver (same equations; ptype.thermo.fast),
        # which itself gives NaN where an input is missing, so no gather and scatter.
        from ptype.thermo import fast
        return fast.wet_bulb_c(p, t, td, kind=kind)
    out = np.full(p.shape, np.nan)
    if not n_valid:
        return out if out.ndim else out[()]
    pv, tv, tdv = p[valid], t[valid], td[valid]
    if kind == "isobaric":
        out[valid] = _isobaric_wet_bulb_c(pv, tv, tdv)
    else:
        out[valid] = _adiabatic_wet_bulb_c(pv, tv, tdv)
    return out if out.ndim else out[()]


def wet_bulb_temperatures(pressure_hpa: ArrayLike, temperature_c: ArrayLike,
                          dewpoint_c: ArrayLike) -> tuple[np.ndarray, np.ndarray]:
    """Isobaric and pseudo-adiabatic wet-bulb together, degC: the same values as
    ``wet_bulb_temperature(..., kind="isobaric")`` and ``kind="adiabatic"``, in one compiled
    pass on large arrays (:func:`ptype.thermo.fast.wet_bulbs_c`)."""
    p, t, td = np.broadcast_arrays(_as_float(pressure_hpa), _as_float(temperature_c),
                                   _as_float(dewpoint_c))
    valid = np.isfinite(p) & np.isfinite(t) & np.isfinite(td) & (p > 0)
    if np.count_nonzero(valid) >= _FAST_MIN_SIZE and _fast_available():
        from ptype.thermo import fast
        return fast.wet_bulbs_c(p, t, td)
    return (wet_bulb_temperature(p, t, td, kind="isobaric"),
            wet_bulb_temperature(p, t, td, kind="adiabatic"))
