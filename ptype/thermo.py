"""Vectorised moist thermodynamics for soundings.

Every function takes plain numpy arrays (or scalars) in the units its argument
names say, broadcasts over any shape, and contains no Python loop over points.
Levels are the last axis where a function works on a column (``(..., level)``).

Formulas and their sources (keys defined in ``docs/references.md``):

* Saturation vapour pressure over water and over ice: Alduchov & Eskridge
  (1996), the "AERK" and "AERKi" Magnus forms, accurate to about 0.4 % between
  -40 and +50 degC (their Table 3).  This is the default because it is cheap
  and differentiable in closed form, which the wet-bulb solver needs.
  Murphy & Koop (2005) eqs. 7 and 10 are provided as the reference forms.
* Isobaric (thermodynamic, psychrometric) wet-bulb: the adiabatic-saturation
  enthalpy balance of ASHRAE Handbook—Fundamentals (2017) ch. 1 eq. 33 written
  for a liquid wet bulb (eq. 35), solved for Tw by a bracketed Newton iteration.
* Adiabatic wet-bulb (Normand's rule, Knox et al. 2017): lift to the LCL
  (Bolton 1980 eq. 15) and descend the pseudo-adiabat, found by inverting
  Bolton's (1980) eq. 39 equivalent potential temperature.
* Hypsometric equation with virtual temperature (e.g. Wallace & Hobbs 2006 eq. 3.29).
"""

from __future__ import annotations

import numpy as np

from .constants import T0, Cp_d, Rd, epsilon, g

__all__ = [
    "dewpoint_from_mixing_ratio_c",
    "dewpoint_from_relative_humidity_c",
    "dewpoint_from_vapor_pressure_c",
    "equivalent_potential_temperature_k",
    "hypsometric_heights_m",
    "lcl_temperature_c",
    "mixing_ratio_g_kg",
    "potential_temperature_k",
    "psychrometer_dewpoint_c",
    "psychrometer_relative_humidity_pct",
    "relative_humidity_pct",
    "saturation_vapor_pressure_hpa",
    "saturation_vapor_pressure_murphy_koop_hpa",
    "thickness_m",
    "vapor_pressure_from_dewpoint_hpa",
    "vapor_pressure_from_mixing_ratio_hpa",
    "virtual_temperature_c",
    "wet_bulb_temperature",
]

# Alduchov & Eskridge (1996) Magnus constants (their AERK / AERKi), e in hPa, T in degC.
_AE_WATER = (6.1094, 17.625, 243.04)
_AE_ICE = (6.1121, 22.587, 273.86)


def _as_float(x):
    return np.asarray(x, dtype=np.float64)


def saturation_vapor_pressure_hpa(temperature_c, phase: str = "water"):
    """Saturation vapour pressure, hPa.

    Parameters
    ----------
    temperature_c : array_like
        Temperature, degC.
    phase : {"water", "ice"}
        Over a plane surface of liquid water (supercooled below 0 degC) or of ice.

    Notes
    -----
    Alduchov & Eskridge (1996), AERK (water) ``6.1094 exp(17.625 T / (T + 243.04))`` and
    AERKi (ice) ``6.1121 exp(22.587 T / (T + 273.86))``; relative error below
    about 0.4 % from -40 to +50 degC (water) and -80 to 0 degC (ice) against the
    Wexler/Hyland-Wexler reference values (their Table 3, from memory of the
    table's magnitude; the test suite checks the agreement against the
    Murphy & Koop 2005 reference forms directly).
    """
    a, b, c = _phase_constants(phase)
    t = _as_float(temperature_c)
    return a * np.exp(b * t / (t + c))


def _phase_constants(phase: str):
    if phase == "water":
        return _AE_WATER
    if phase == "ice":
        return _AE_ICE
    raise ValueError(f"phase must be 'water' or 'ice', got {phase!r}")


def saturation_vapor_pressure_murphy_koop_hpa(temperature_c, phase: str = "water"):
    """Saturation vapour pressure from Murphy & Koop (2005), hPa.

    Eq. 10 (liquid water, valid 123-332 K) and eq. 7 (hexagonal ice, T > 110 K)
    of Murphy, D. M. and T. Koop, 2005: Review of the vapour pressures of ice
    and supercooled water for atmospheric applications. QJRMS 131, 1539-1565.
    Slower than :func:`saturation_vapor_pressure_hpa`; used as the reference.
    """
    t = _as_float(temperature_c) + T0
    if phase == "water":
        ln_e = (54.842763 - 6763.22 / t - 4.210 * np.log(t) + 0.000367 * t
                + np.tanh(0.0415 * (t - 218.8))
                * (53.878 - 1331.22 / t - 9.44523 * np.log(t) + 0.014025 * t))
    elif phase == "ice":
        ln_e = 9.550426 - 5723.265 / t + 3.53068 * np.log(t) - 0.00728332 * t
    else:
        raise ValueError(f"phase must be 'water' or 'ice', got {phase!r}")
    return np.exp(ln_e) / 100.0


def vapor_pressure_from_dewpoint_hpa(dewpoint_c):
    """Vapour pressure, hPa, from the dew point (saturation over water at Td; WMO convention)."""
    return saturation_vapor_pressure_hpa(dewpoint_c, "water")


def dewpoint_from_vapor_pressure_c(vapor_pressure_hpa):
    """Dew point, degC, inverting the Alduchov & Eskridge (1996) water form exactly."""
    a, b, c = _AE_WATER
    with np.errstate(divide="ignore", invalid="ignore"):
        x = np.log(_as_float(vapor_pressure_hpa) / a)
        return c * x / (b - x)


def mixing_ratio_g_kg(pressure_hpa, dewpoint_c):
    """Water-vapour mixing ratio, g/kg: ``w = epsilon e / (p - e)`` (e.g. Wallace & Hobbs 2006 eq. 3.59)."""
    e = vapor_pressure_from_dewpoint_hpa(dewpoint_c)
    return 1000.0 * epsilon * e / (_as_float(pressure_hpa) - e)


def vapor_pressure_from_mixing_ratio_hpa(pressure_hpa, mixing_ratio_g_kg_):
    """Vapour pressure, hPa, from mixing ratio: ``e = w p / (epsilon + w)``."""
    w = _as_float(mixing_ratio_g_kg_) / 1000.0
    return w * _as_float(pressure_hpa) / (epsilon + w)


def dewpoint_from_mixing_ratio_c(pressure_hpa, mixing_ratio_g_kg_):
    """Dew point, degC, from pressure and mixing ratio."""
    return dewpoint_from_vapor_pressure_c(
        vapor_pressure_from_mixing_ratio_hpa(pressure_hpa, mixing_ratio_g_kg_))


def relative_humidity_pct(temperature_c, dewpoint_c):
    """Relative humidity with respect to liquid water, %, ``100 e(Td) / e_s(T)`` (WMO-No. 8 convention)."""
    return 100.0 * (vapor_pressure_from_dewpoint_hpa(dewpoint_c)
                    / saturation_vapor_pressure_hpa(temperature_c, "water"))


def dewpoint_from_relative_humidity_c(temperature_c, relative_humidity_pct_):
    """Dew point, degC, from temperature and relative humidity over water (inverse of
    :func:`relative_humidity_pct`)."""
    e = saturation_vapor_pressure_hpa(temperature_c) * _as_float(relative_humidity_pct_) / 100.0
    return dewpoint_from_vapor_pressure_c(e)


def virtual_temperature_c(pressure_hpa, temperature_c, dewpoint_c):
    """Virtual temperature, degC: ``Tv = T (1 + w/epsilon) / (1 + w)`` (Wallace & Hobbs 2006 eq. 3.60 exact form)."""
    w = mixing_ratio_g_kg(pressure_hpa, dewpoint_c) / 1000.0
    t_k = _as_float(temperature_c) + T0
    return t_k * (1.0 + w / epsilon) / (1.0 + w) - T0


def thickness_m(pressure_bottom_hpa, pressure_top_hpa, mean_virtual_temperature_c):
    """Hypsometric layer thickness, m: ``dz = (Rd/g) Tv ln(p_bottom / p_top)``."""
    return (Rd / g) * (_as_float(mean_virtual_temperature_c) + T0) * np.log(
        _as_float(pressure_bottom_hpa) / _as_float(pressure_top_hpa))


def hypsometric_heights_m(pressure_hpa, temperature_c, dewpoint_c, base_height_m=0.0):
    """Heights of every level, m, integrating the hypsometric equation upward.

    Parameters
    ----------
    pressure_hpa, temperature_c, dewpoint_c : array_like, shape (..., level)
        Levels ordered from the lowest (largest pressure) to the highest.
        NaN-padded trailing levels give NaN heights.
    base_height_m : array_like, shape (...)
        Height of the first level (the station elevation for a surface-based sounding).

    Notes
    -----
    Each layer uses the mean of the virtual temperatures at its two bounds,
    the trapezoidal rule in ln p, accurate to well under a metre per 50 hPa
    for observed lapse rates.
    """
    p = _as_float(pressure_hpa)
    tv = virtual_temperature_c(p, temperature_c, dewpoint_c)
    tv_mean = 0.5 * (tv[..., 1:] + tv[..., :-1])
    dz = thickness_m(p[..., :-1], p[..., 1:], tv_mean)
    base = np.broadcast_to(_as_float(base_height_m), p.shape[:-1])[..., None]
    return np.concatenate([base, base + np.cumsum(dz, axis=-1)], axis=-1)


# --- Wet-bulb temperature -------------------------------------------------------------------

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
        df = ((-2.326 * wsat + (2501.0 - 2.326 * x) * dwsat + 1.006) * den + 4.186 * num) / (den * den)
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


def potential_temperature_k(pressure_hpa, temperature_c):
    """Potential temperature, K (Poisson's equation with kappa = Rd/cp)."""
    return (_as_float(temperature_c) + T0) * (1000.0 / _as_float(pressure_hpa)) ** (Rd / Cp_d)


def lcl_temperature_c(temperature_c, dewpoint_c):
    """Temperature at the lifting condensation level, degC (Bolton 1980 eq. 15)."""
    t_k = _as_float(temperature_c) + T0
    td_k = np.minimum(_as_float(dewpoint_c) + T0, t_k)
    return 1.0 / (1.0 / (td_k - 56.0) + np.log(t_k / td_k) / 800.0) + 56.0 - T0


def equivalent_potential_temperature_k(pressure_hpa, temperature_c, dewpoint_c):
    """Equivalent potential temperature, K (Bolton 1980 eq. 39, with eq. 15 for T_L).

    Bolton states an accuracy of about 0.3 K against numerically integrated
    pseudo-adiabats.  Mixing ratio here uses the Alduchov & Eskridge water form.
    """
    p = _as_float(pressure_hpa)
    t_k = _as_float(temperature_c) + T0
    w = mixing_ratio_g_kg(p, dewpoint_c)  # g/kg, as Bolton writes r
    t_l = lcl_temperature_c(temperature_c, dewpoint_c) + T0
    theta_dl = t_k * (1000.0 / (p - vapor_pressure_from_dewpoint_hpa(dewpoint_c))) ** 0.2854 \
        * (t_k / t_l) ** (0.28e-3 * w)
    return theta_dl * np.exp((3.036 / t_l - 0.00178) * w * (1.0 + 0.448e-3 * w))


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


WET_BULB_KINDS = ("isobaric", "adiabatic")
#: Arrays of at least this many valid points use the compiled solver of ptype.fastthermo.
#: Since the compiled solvers are vectorised they are the cheaper path for any size (a
#: 60-level control column: ~0.3 ms in numpy, a few microseconds compiled); the numpy
#: solvers serve installs without numba and check the compiled ones in the tests.
_FAST_MIN_SIZE = 1


def _fast_available() -> bool:
    try:
        from . import fastthermo
    except ImportError:  # pragma: no cover - numba missing: the numpy path serves every size
        return False
    return fastthermo.AVAILABLE


def wet_bulb_temperature(pressure_hpa, temperature_c, dewpoint_c, kind: str = "isobaric"):
    """Wet-bulb temperature, degC, broadcasting over any shape.

    Parameters
    ----------
    pressure_hpa, temperature_c, dewpoint_c : array_like
        Pressure (hPa), air temperature (degC) and dew point (degC, over water).
    kind : {"isobaric", "adiabatic"}
        ``"isobaric"`` (default): the thermodynamic (psychrometric) wet-bulb over
        liquid water, the temperature an air parcel reaches by evaporating water
        into itself at constant pressure (ASHRAE 2017 ch. 1 eq. 35; AMS Glossary
        "wet-bulb temperature").  Ramer (1993) uses this one.
        ``"adiabatic"``: the pseudo-adiabatic wet-bulb of Normand's rule (lift to
        the LCL, descend along the pseudo-adiabat; Knox et al. 2017), which
        Baldwin et al. (1994) use.  It is typically a few tenths of a kelvin
        below the isobaric value (the brief's figure, from memory; the test
        suite measures it against MetPy).

    Returns
    -------
    numpy.ndarray
        Wet-bulb temperature, degC, with ``Td <= Tw <= T`` wherever the inputs
        are finite; NaN where any input is NaN.
    """
    p, t, td = np.broadcast_arrays(_as_float(pressure_hpa), _as_float(temperature_c),
                                   _as_float(dewpoint_c))
    valid = np.isfinite(p) & np.isfinite(t) & np.isfinite(td) & (p > 0)
    n_valid = np.count_nonzero(valid)
    if kind in WET_BULB_KINDS and n_valid >= _FAST_MIN_SIZE and _fast_available():
        # Large arrays: the compiled per-point solver (same equations; ptype.fastthermo),
        # which itself gives NaN where an input is missing, so no gather and scatter.
        from . import fastthermo
        return fastthermo.wet_bulb_c(p, t, td, kind=kind)
    out = np.full(p.shape, np.nan)
    if not n_valid:
        return out if out.ndim else out[()]
    pv, tv, tdv = p[valid], t[valid], td[valid]
    if kind == "isobaric":
        out[valid] = _isobaric_wet_bulb_c(pv, tv, tdv)
    elif kind == "adiabatic":
        out[valid] = _adiabatic_wet_bulb_c(pv, tv, tdv)
    else:
        raise ValueError(f"kind must be one of {WET_BULB_KINDS}, got {kind!r}")
    return out if out.ndim else out[()]


def wet_bulb_temperatures(pressure_hpa, temperature_c, dewpoint_c) -> tuple[np.ndarray, np.ndarray]:
    """Isobaric and pseudo-adiabatic wet-bulb together, degC: the same values as
    ``wet_bulb_temperature(..., kind="isobaric")`` and ``kind="adiabatic"``, in one compiled
    pass on large arrays (:func:`ptype.fastthermo.wet_bulbs_c`)."""
    p, t, td = np.broadcast_arrays(_as_float(pressure_hpa), _as_float(temperature_c),
                                   _as_float(dewpoint_c))
    valid = np.isfinite(p) & np.isfinite(t) & np.isfinite(td) & (p > 0)
    if np.count_nonzero(valid) >= _FAST_MIN_SIZE and _fast_available():
        from . import fastthermo
        return fastthermo.wet_bulbs_c(p, t, td)
    return (wet_bulb_temperature(p, t, td, kind="isobaric"),
            wet_bulb_temperature(p, t, td, kind="adiabatic"))


# --- Psychrometer readings ------------------------------------------------------------------

def _humidity_ratio_from_wet_bulb(pressure_hpa, temperature_c, wetbulb_c, iced_bulb):
    """Humidity ratio, kg/kg, from dry- and wet-bulb readings (ASHRAE 2017 ch. 1 eqs. 35 and 37).

    Eq. 35 applies to a wet (liquid) bulb; eq. 37 to an iced bulb below 0 degC, with
    saturation over ice and the enthalpy of ice (-333.4 + 2.1 t* kJ/kg).
    """
    t = _as_float(temperature_c)
    tw = _as_float(wetbulb_c)
    p = _as_float(pressure_hpa)
    es_w = saturation_vapor_pressure_hpa(tw, "water")
    es_i = saturation_vapor_pressure_hpa(tw, "ice")
    ws_w = epsilon * es_w / (p - es_w)
    ws_i = epsilon * es_i / (p - es_i)
    liquid = ((2501.0 - 2.326 * tw) * ws_w - 1.006 * (t - tw)) / (2501.0 + 1.86 * t - 4.186 * tw)
    ice = ((2830.0 - 0.24 * tw) * ws_i - 1.006 * (t - tw)) / (2830.0 + 1.86 * t - 2.1 * tw)
    return np.where(np.asarray(iced_bulb) & (tw < 0.0), ice, liquid)


def psychrometer_dewpoint_c(temperature_c, wetbulb_c, pressure_hpa=1013.25, iced_bulb=False):
    """Dew point, degC, from psychrometer dry- and wet-bulb readings (inverse of the wet-bulb).

    Parameters
    ----------
    temperature_c, wetbulb_c : array_like
        Dry-bulb and wet-bulb readings, degC.
    pressure_hpa : array_like
        Station pressure, hPa.
    iced_bulb : bool or array_like of bool
        True when the wet bulb is coated with ice (readings below 0 degC); the
        ice form of the balance is then used.  The default treats the bulb as
        supercooled water, consistent with :func:`wet_bulb_temperature`.
    """
    w = _humidity_ratio_from_wet_bulb(pressure_hpa, temperature_c, wetbulb_c, iced_bulb)
    w = np.maximum(w, 1e-12)
    e = w * _as_float(pressure_hpa) / (epsilon + w)
    return dewpoint_from_vapor_pressure_c(e)


def psychrometer_relative_humidity_pct(temperature_c, wetbulb_c, pressure_hpa=1013.25,
                                       iced_bulb=False):
    """Relative humidity over water, %, from psychrometer dry- and wet-bulb readings."""
    td = psychrometer_dewpoint_c(temperature_c, wetbulb_c, pressure_hpa, iced_bulb)
    return relative_humidity_pct(temperature_c, td)
