"""Heat balance of a falling particle, and immersion freezing of drops.

A particle that holds both ice and liquid water has its surface at 0 degC.  The air brings it
heat by conduction and by condensation (or takes heat away by evaporation), both enhanced by
ventilation (Mason 1971; Pruppacher & Klett 1997, ch. 13 and 16)::

    H = 4 pi C [ k_a (T - T0) f_h + L_v D_v (rho_v - rho_vs(T0)) f_v ]      (W)

``H > 0`` melts ice at the rate ``H / L_f`` (kg/s); ``H < 0`` freezes liquid at ``-H / L_f``.
``C`` is the capacitance, ``f_h`` and ``f_v`` the ventilation factors for heat and vapour,
``rho_v`` the vapour density of the air and ``rho_vs(T0)`` that of saturation over water at
0 degC.  The bracket vanishes when the air's wet-bulb (computed with the diffusivities instead
of the psychrometric constant) is 0 degC: snow melts only where that wet-bulb is above 0 degC,
and dry air above 0 degC can even refreeze a wet particle.  The tests compare the sign of ``H``
with the isobaric wet-bulb of :mod:`ptype.thermo`.

A drop with no ice freezes only once an ice embryo forms in it.  Immersion freezing follows
Bigg's (1953) stochastic rate per unit volume ``J = B [exp(A (T0 - T)) - 1]``; the drop is at
the air's wet-bulb temperature (a ventilated drop is a wet bulb).  On nucleation the fraction
``c_w (T0 - T) / L_f`` of the drop freezes at once (the supercooling pays for it), the rest by
the heat balance above.
"""

from __future__ import annotations

import math

import numpy as np

from ptype.thermo import saturation_vapor_pressure_hpa
from ptype.thermo.constants import T0, Lf, Lv, Rd, Rv

#: Thermal conductivity of air ``k_a = (5.69 + 0.017 T) 1e-5`` cal cm-1 s-1 K-1 with T in degC
#: (Pruppacher & Klett 1997, eq. 13-18; from memory): 0.0238 W m-1 K-1 at 0 degC, the value the
#: melting literature uses (0.024, confident in our notes).
CONDUCTIVITY_0C_W_M_K = 5.69e-5 * 418.4
CONDUCTIVITY_SLOPE_W_M_K2 = 0.017e-5 * 418.4
#: Diffusivity of water vapour in air at 0 degC and 1013.25 hPa, m2 s-1, with
#: ``D_v = D_0 (T / T0)^1.94 (1013.25 / p)`` (Pruppacher & Klett 1997, eq. 13-3; from memory).
DIFFUSIVITY_0C_M2_S = 2.11e-5
DIFFUSIVITY_EXPONENT = 1.94
#: Prandtl number of air and Schmidt number of water vapour in air (Pruppacher & Klett 1997;
#: from memory; 0.71 for air is a handbook value).
PRANDTL = 0.71
SCHMIDT = 0.60
#: Ventilation ``f = 1 + 0.108 X^2`` for ``X < 1.4`` else ``0.78 + 0.308 X``,
#: ``X = N^(1/3) Re^(1/2)`` (Pruppacher & Klett 1997, eqs. 13-60/61 after Beard & Pruppacher
#: 1971; from memory).  The two branches meet at X = 1.4 (1.2117 and 1.2112).
VENTILATION_SWITCH = 1.4
#: Sutherland's law for the viscosity of air (U.S. Standard Atmosphere 1976).
SUTHERLAND_BETA = 1.458e-6
SUTHERLAND_S_K = 110.4
#: Bigg (1953) immersion freezing ``J = B [exp(A (T0 - T)) - 1]``: ``A = 0.66`` K-1 (Bigg 1953,
#: as quoted by bulk microphysics schemes; from memory).
BIGG_A_PER_K = 0.66
#: Forecasting guide to drop freezing (NWS training, quoted in our notes and confirmed there):
#: 1.0 mm drops freeze near -12 degC, 0.2 mm drops near -20 degC.
GUIDE_MEDIAN_FREEZING_1MM_C = -12.0
#: Cooling rate of laboratory drop-freezing experiments, K s-1: about 1 K per minute (from
#: memory), the rate at which the guide's median freezing temperatures are read.
LABORATORY_COOLING_K_S = 1.0 / 60.0


def _bigg_b_from_median(median_c: float, diameter_m: float, cooling_k_s: float) -> float:
    """``B`` (m-3 s-1) that puts the median freezing temperature of drops of ``diameter_m``,
    cooled from 0 degC at ``cooling_k_s``, at ``median_c``.

    The expected number of ice embryos after cooling by ``dT`` is
    ``(B V / gamma) [(exp(A dT) - 1) / A - dT]``; the median is where it equals ln 2.
    """
    volume = math.pi / 6.0 * diameter_m ** 3
    cold = -median_c
    integral = (math.exp(BIGG_A_PER_K * cold) - 1.0) / BIGG_A_PER_K - cold
    return cooling_k_s * math.log(2.0) / (volume * integral)


#: Bigg's ``B``, m-3 s-1, derived (not typed): the value that puts the median freezing
#: temperature of 1 mm drops at the guide's -12 degC at 1 K/min, about 5.3e3.  The value 100 often
#: quoted for bulk schemes (from memory) would put it at -18 degC.  The tests check ``A`` with the
#: other guide value: 0.2 mm drops then freeze near -19.3 degC (guide: -20 degC).
BIGG_B_PER_M3_S = _bigg_b_from_median(GUIDE_MEDIAN_FREEZING_1MM_C, 1.0e-3, LABORATORY_COOLING_K_S)
#: Specific heat of (supercooled) liquid water near 0 degC, J kg-1 K-1 (handbook value, from
#: memory).
WATER_HEAT_CAPACITY_J_KG_K = 4218.0
#: Saturation vapour density over water at 0 degC, kg m-3 (Alduchov & Eskridge 1996 e_s).
SATURATION_DENSITY_0C_KG_M3 = float(saturation_vapor_pressure_hpa(0.0)) * 100.0 / (Rv * T0)
_FOUR_PI = 4.0 * math.pi


def air_density_kg_m3(pressure_hpa, temperature_c):
    """Density of (dry) air ``p / (R_d T)``, kg m-3 (vapour neglected: under 0.5 % at 0 degC)."""
    return np.asarray(pressure_hpa, dtype=np.float64) * 100.0 / (
        Rd * (np.asarray(temperature_c, dtype=np.float64) + T0))


def air_viscosity_pa_s(temperature_c):
    """Dynamic viscosity of air, Pa s: ``beta T^1.5 / (T + S)`` (Sutherland; USSA 1976)."""
    t = np.asarray(temperature_c, dtype=np.float64) + T0
    return SUTHERLAND_BETA * t * np.sqrt(t) / (t + SUTHERLAND_S_K)


def air_conductivity_w_m_k(temperature_c):
    """Thermal conductivity of air, W m-1 K-1 (Pruppacher & Klett 1997, eq. 13-18; valid
    -40 to +40 degC)."""
    return CONDUCTIVITY_0C_W_M_K + CONDUCTIVITY_SLOPE_W_M_K2 * np.asarray(temperature_c,
                                                                            dtype=np.float64)


def vapour_diffusivity_m2_s(pressure_hpa, temperature_c):
    """Diffusivity of water vapour in air, m2 s-1 (Pruppacher & Klett 1997, eq. 13-3; valid
    -40 to +40 degC)."""
    t = np.asarray(temperature_c, dtype=np.float64) + T0
    return DIFFUSIVITY_0C_M2_S * (t / T0) ** DIFFUSIVITY_EXPONENT * (
        1013.25 / np.asarray(pressure_hpa, dtype=np.float64))


def vapour_density_excess_kg_m3(temperature_c, dewpoint_c):
    """Vapour density of the air minus saturation over water at 0 degC, kg m-3.

    ``rho_v = e(Td) / (R_v T)`` with e from :func:`ptype.thermo.saturation_vapor_pressure_hpa`.
    Positive: vapour condenses on a 0 degC wet surface and heats it.
    """
    e_pa = saturation_vapor_pressure_hpa(dewpoint_c) * 100.0
    return e_pa / (Rv * (np.asarray(temperature_c, dtype=np.float64) + T0)) \
        - SATURATION_DENSITY_0C_KG_M3


def ventilation_factor(reynolds_number, number=SCHMIDT):
    """Mean ventilation factor of a falling particle for vapour (``number`` = Schmidt) or heat
    (``number`` = Prandtl).

    Notes
    -----
    ``X = N^(1/3) Re^(1/2)``; ``f = 1 + 0.108 X^2`` for ``X < 1.4``, else ``0.78 + 0.308 X``
    (Pruppacher & Klett 1997, eqs. 13-60 and 13-61, measured on spheres; used for snowflakes
    too, as in most melting models).  f = 1 in still air; about 8 for a 1 cm flake falling at
    1 m/s (Re near 700).
    """
    x = number ** (1.0 / 3.0) * np.sqrt(np.asarray(reynolds_number, dtype=np.float64))
    return np.where(x < VENTILATION_SWITCH, 1.0 + 0.108 * x * x, 0.78 + 0.308 * x)


def disc_capacitance_m(diameter_m):
    """Capacitance of a thin circular disc, ``D / pi`` m (electrostatics, exact; Pruppacher & Klett
    1997, ch. 13), used for snow aggregates."""
    return np.asarray(diameter_m, dtype=np.float64) / math.pi


def sphere_capacitance_m(diameter_m):
    """Capacitance of a sphere, ``D / 2`` m."""
    return 0.5 * np.asarray(diameter_m, dtype=np.float64)


def surface_heat_w(capacitance_m, heat_ventilation, vapour_ventilation, temperature_c,
                   vapour_excess_kg_m3, pressure_hpa):
    """Heat reaching a particle whose surface is at 0 degC, W (positive: melting).

    Parameters
    ----------
    capacitance_m : array_like
        Capacitance C, m.
    heat_ventilation, vapour_ventilation : array_like
        Ventilation factors ``f_h`` and ``f_v``.
    temperature_c : array_like
        Air temperature, degC.
    vapour_excess_kg_m3 : array_like
        :func:`vapour_density_excess_kg_m3`.
    pressure_hpa : array_like
        Air pressure, hPa.

    Notes
    -----
    ``H = 4 pi C [k_a (T - T0) f_h + L_v D_v (rho_v - rho_vs(T0)) f_v]`` (Mason 1971, ch. 8;
    Pruppacher & Klett 1997, eq. 16-75 for melting; the same balance with the opposite sign
    freezes the liquid of a particle that holds ice).  Neglects the heat carried by collected
    cloud water and radiation.  Checked in the tests: in saturated air at +2 degC and 1000 hPa
    the vapour term adds about 80 % to conduction (hand calculation).  Valid for air between
    about -40 and +40 degC (the property fits) and a particle surface at 0 degC.
    """
    t = np.asarray(temperature_c, dtype=np.float64)
    conduction = air_conductivity_w_m_k(t) * t * heat_ventilation
    vapour = Lv * vapour_diffusivity_m2_s(pressure_hpa, t) * vapour_excess_kg_m3 \
        * vapour_ventilation
    return _FOUR_PI * np.asarray(capacitance_m, dtype=np.float64) * (conduction + vapour)


def bigg_rate_per_m3_s(drop_temperature_c):
    """Bigg (1953) immersion-freezing rate per unit drop volume, m-3 s-1 (0 at or above 0 degC).

    Notes
    -----
    ``J = B [exp(A (T0 - T)) - 1]`` with :data:`BIGG_A_PER_K` and :data:`BIGG_B_PER_M3_S`.  A drop
    of volume V freezes within ``dt`` with probability ``1 - exp(-J V dt)``.  Valid for drops of
    tens of um to mm, down to about -30 degC (homogeneous freezing below -38 degC is not
    represented).
    """
    cold = -np.asarray(drop_temperature_c, dtype=np.float64)
    return np.where(cold > 0.0, BIGG_B_PER_M3_S * (np.exp(BIGG_A_PER_K * cold) - 1.0), 0.0)


def nucleation_frozen_fraction(drop_temperature_c):
    """Fraction of a supercooled drop that freezes at once when it nucleates:
    ``c_w (T0 - T) / L_f``, at most 1 (0 above 0 degC).

    Notes
    -----
    The supercooling supplies the latent heat until the drop reaches 0 degC (first stage of drop
    freezing, Pruppacher & Klett 1997, ch. 16): 6 % at -5 degC, 13 % at -10 degC.
    """
    cold = -np.asarray(drop_temperature_c, dtype=np.float64)
    return np.clip(WATER_HEAT_CAPACITY_J_KG_K * cold / Lf, 0.0, 1.0)
