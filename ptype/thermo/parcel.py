"""Parcel quantities: potential temperature, the lifting condensation level and the
equivalent potential temperature (Bolton 1980 eqs. 15 and 39)."""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

from ptype.thermo.constants import T0, Cp_d, Rd
from ptype.thermo.saturation import _as_float, mixing_ratio_g_kg, vapor_pressure_from_dewpoint_hpa


def potential_temperature_k(pressure_hpa: ArrayLike, temperature_c: ArrayLike) -> np.ndarray:
    """Potential temperature, K (Poisson's equation with kappa = Rd/cp)."""
    return (_as_float(temperature_c) + T0) * (1000.0 / _as_float(pressure_hpa)) ** (Rd / Cp_d)


def lcl_temperature_c(temperature_c: ArrayLike, dewpoint_c: ArrayLike) -> np.ndarray:
    """Temperature at the lifting condensation level, degC (Bolton 1980 eq. 15)."""
    t_k = _as_float(temperature_c) + T0
    td_k = np.minimum(_as_float(dewpoint_c) + T0, t_k)
    return 1.0 / (1.0 / (td_k - 56.0) + np.log(t_k / td_k) / 800.0) + 56.0 - T0


def equivalent_potential_temperature_k(pressure_hpa: ArrayLike, temperature_c: ArrayLike,
                                       dewpoint_c: ArrayLike) -> np.ndarray:
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
