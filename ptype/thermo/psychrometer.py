"""Dew point and relative humidity from psychrometer (dry- and wet-bulb) readings."""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

from ptype.thermo.constants import epsilon
from ptype.thermo.saturation import (
    _as_float,
    dewpoint_from_vapor_pressure_c,
    relative_humidity_pct,
    saturation_vapor_pressure_hpa,
)


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


def psychrometer_dewpoint_c(temperature_c: ArrayLike, wetbulb_c: ArrayLike,
                            pressure_hpa: ArrayLike = 1013.25,
                            iced_bulb: bool = False) -> np.ndarray:
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


def psychrometer_relative_humidity_pct(temperature_c: ArrayLike, wetbulb_c: ArrayLike,
                                       pressure_hpa: ArrayLike = 1013.25,
                                       iced_bulb: bool = False) -> np.ndarray:
    """Relative humidity over water, %, from psychrometer dry- and wet-bulb readings."""
    td = psychrometer_dewpoint_c(temperature_c, wetbulb_c, pressure_hpa, iced_bulb)
    return relative_humidity_pct(temperature_c, td)
