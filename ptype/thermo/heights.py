"""Virtual temperature, layer thickness and the heights of sounding levels.

The hypsometric equation with virtual temperature (Wallace & Hobbs 2006 eqs. 3.29, 3.60).
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

from ptype.thermo.constants import T0, Rd, epsilon, g
from ptype.thermo.saturation import _as_float, mixing_ratio_g_kg


def virtual_temperature_c(pressure_hpa: ArrayLike, temperature_c: ArrayLike,
                          dewpoint_c: ArrayLike) -> np.ndarray:
    """Virtual temperature, degC: ``Tv = T (1 + w/epsilon) / (1 + w)`` (Wallace & Hobbs 2006
    eq. 3.60 exact form)."""
    w = mixing_ratio_g_kg(pressure_hpa, dewpoint_c) / 1000.0
    t_k = _as_float(temperature_c) + T0
    return t_k * (1.0 + w / epsilon) / (1.0 + w) - T0


def thickness_m(pressure_bottom_hpa: ArrayLike, pressure_top_hpa: ArrayLike,
                mean_virtual_temperature_c: ArrayLike) -> np.ndarray:
    """Hypsometric layer thickness, m: ``dz = (Rd/g) Tv ln(p_bottom / p_top)``."""
    return (Rd / g) * (_as_float(mean_virtual_temperature_c) + T0) * np.log(
        _as_float(pressure_bottom_hpa) / _as_float(pressure_top_hpa))


def hypsometric_heights_m(pressure_hpa: ArrayLike, temperature_c: ArrayLike, dewpoint_c: ArrayLike,
                          base_height_m: ArrayLike = 0.0) -> np.ndarray:
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
