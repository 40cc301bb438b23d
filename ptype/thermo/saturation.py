"""Saturation vapour pressure and the humidity conversions built on it.

Alduchov & Eskridge (1996) "AERK"/"AERKi" Magnus forms for water and ice (the default:
cheap and differentiable in closed form, which the wet-bulb solvers need); Murphy & Koop
(2005) eqs. 7 and 10 as the reference forms.  Every function takes plain arrays (or scalars)
in the units its argument names say and broadcasts over any shape.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

from ptype.errors import OptionError
from ptype.thermo.constants import T0, epsilon

# Alduchov & Eskridge (1996) Magnus constants (their AERK / AERKi), e in hPa, T in degC.
_AE_WATER = (6.1094, 17.625, 243.04)
_AE_ICE = (6.1121, 22.587, 273.86)


def _as_float(x):
    return np.asarray(x, dtype=np.float64)


def saturation_vapor_pressure_hpa(temperature_c: ArrayLike, phase: str = "water") -> np.ndarray:
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
    raise OptionError(f"phase = {phase!r}: expected 'water' or 'ice'", field="phase")


def saturation_vapor_pressure_murphy_koop_hpa(temperature_c: ArrayLike,
                                              phase: str = "water") -> np.ndarray:
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
        raise OptionError(f"phase = {phase!r}: expected 'water' or 'ice'", field="phase")
    return np.exp(ln_e) / 100.0


def vapor_pressure_from_dewpoint_hpa(dewpoint_c: ArrayLike) -> np.ndarray:
    """Vapour pressure, hPa, from the dew point (saturation over water at Td; WMO convention)."""
    return saturation_vapor_pressure_hpa(dewpoint_c, "water")


def dewpoint_from_vapor_pressure_c(vapor_pressure_hpa: ArrayLike) -> np.ndarray:
    """Dew point, degC, inverting the Alduchov & Eskridge (1996) water form exactly."""
    a, b, c = _AE_WATER
    with np.errstate(divide="ignore", invalid="ignore"):
        x = np.log(_as_float(vapor_pressure_hpa) / a)
        return c * x / (b - x)


def mixing_ratio_g_kg(pressure_hpa: ArrayLike, dewpoint_c: ArrayLike) -> np.ndarray:
    """Water-vapour mixing ratio, g/kg: ``w = epsilon e / (p - e)`` (e.g. Wallace & Hobbs 2006
    eq. 3.59)."""
    e = vapor_pressure_from_dewpoint_hpa(dewpoint_c)
    return 1000.0 * epsilon * e / (_as_float(pressure_hpa) - e)


def vapor_pressure_from_mixing_ratio_hpa(pressure_hpa: ArrayLike,
                                         mixing_ratio_g_kg_: ArrayLike) -> np.ndarray:
    """Vapour pressure, hPa, from mixing ratio: ``e = w p / (epsilon + w)``."""
    w = _as_float(mixing_ratio_g_kg_) / 1000.0
    return w * _as_float(pressure_hpa) / (epsilon + w)


def dewpoint_from_mixing_ratio_c(pressure_hpa: ArrayLike,
                                 mixing_ratio_g_kg_: ArrayLike) -> np.ndarray:
    """Dew point, degC, from pressure and mixing ratio."""
    return dewpoint_from_vapor_pressure_c(
        vapor_pressure_from_mixing_ratio_hpa(pressure_hpa, mixing_ratio_g_kg_))


def relative_humidity_pct(temperature_c: ArrayLike, dewpoint_c: ArrayLike) -> np.ndarray:
    """Relative humidity with respect to liquid water, %, ``100 e(Td) / e_s(T)`` (WMO-No. 8
    convention)."""
    return 100.0 * (vapor_pressure_from_dewpoint_hpa(dewpoint_c)
                    / saturation_vapor_pressure_hpa(temperature_c, "water"))


def dewpoint_from_relative_humidity_c(temperature_c: ArrayLike,
                                      relative_humidity_pct_: ArrayLike) -> np.ndarray:
    """Dew point, degC, from temperature and relative humidity over water (inverse of
    :func:`relative_humidity_pct`)."""
    e = saturation_vapor_pressure_hpa(temperature_c) * _as_float(relative_humidity_pct_) / 100.0
    return dewpoint_from_vapor_pressure_c(e)
