"""Fall speeds of raindrops, snow aggregates and melting snow, and their air-density correction.

All speeds are terminal speeds in still air, m/s; diameters in mm.  A speed measured at the
reference density ``rho_0`` is carried to air of density ``rho`` by ``(rho_0 / rho)^0.4``.
"""

from __future__ import annotations

import math

import numpy as np

#: Atlas, Srivastava & Sekhon (1973) fit ``v = 9.65 - 10.3 exp(-0.6 D)`` (m/s, D in mm) to the
#: Gunn & Kinzer (1949) drop speeds; checked against Gunn & Kinzer's table in the tests.
ATLAS_A_M_S = 9.65
ATLAS_B_M_S = 10.3
ATLAS_C_PER_MM = 0.6
#: Rogers & Yau (1989, eq. 8.5) intermediate law for small drops ``v = k3 r`` with
#: ``k3 = 8e3`` s-1 (40 um < r < 0.6 mm); from memory, checked against Gunn & Kinzer (1949).
#: In mm and m/s: ``v = 4.0 D``.
SMALL_DROP_SLOPE_M_S_PER_MM = 8.0e3 * 1e-3 / 2.0
#: Air density at which the drop speeds were measured: 1013.25 hPa and 20 degC (Gunn & Kinzer
#: 1949 measured at laboratory conditions; from memory), kg m-3.
REFERENCE_AIR_DENSITY_KG_M3 = 1.204
#: Exponent of the density correction ``(rho_0 / rho)^0.4`` (Foote & du Toit 1969 for drops; the
#: same exponent is used for snow, common practice).
DENSITY_EXPONENT = 0.4
#: Locatelli & Hobbs (1974), aggregates of unrimed radiating assemblages of dendrites:
#: ``v = 0.8 D^0.16`` m/s and ``m = 0.073 D^1.4`` mg with D the maximum dimension in mm
#: (measured for D of about 2-10 mm).  Coefficients from memory, unverified against the paper;
#: checked for plausibility: 0.8-1.3 m/s for 1-20 mm (the observed aggregate speeds, common
#: practice), and with Gunn & Marshall (1958) the mass flux matches the rate (tests).
LH_SPEED_COEFFICIENT_M_S = 0.8
LH_SPEED_EXPONENT = 0.16
LH_MASS_COEFFICIENT_MG = 0.073
LH_MASS_EXPONENT = 1.4
#: Mass of a water sphere of diameter 1 mm, mg (pi/6 x 1 mg/mm3: density of water).
_WATER_SPHERE_MG_PER_MM3 = math.pi / 6.0


def _atlas_m_s(d_mm):
    return ATLAS_A_M_S - ATLAS_B_M_S * np.exp(-ATLAS_C_PER_MM * d_mm)


def _crossing_diameter_mm() -> float:
    """Diameter where the small-drop law meets the Atlas et al. fit (bisection on 0.3-0.7 mm,
    where the linear law is below the fit at 0.3 mm and above it at 0.7 mm)."""
    lo, hi = 0.3, 0.7
    for _ in range(100):
        mid = 0.5 * (lo + hi)
        if SMALL_DROP_SLOPE_M_S_PER_MM * mid < _atlas_m_s(mid):
            hi = mid
        else:
            lo = mid
    return 0.5 * (lo + hi)


#: Drops smaller than this (mm) follow the small-drop law, larger ones the Atlas et al. fit:
#: the diameter where the two meet (about 0.47 mm), so the speed is continuous.
SMALL_DROP_LIMIT_MM = _crossing_diameter_mm()


def density_factor(air_density_kg_m3):
    """``(rho_0 / rho)^0.4``: the factor carrying a reference speed to air of density ``rho``.

    Notes
    -----
    Foote & du Toit (1969) for raindrops; 0.4 is also used for snow (common practice).  With
    ``rho_0`` = 1.204 kg m-3 a drop at 500 hPa and -20 degC (0.69 kg m-3) falls 25 % faster.
    """
    return (REFERENCE_AIR_DENSITY_KG_M3 / np.asarray(air_density_kg_m3, dtype=np.float64)) \
        ** DENSITY_EXPONENT


def drop_fall_speed_m_s(diameter_mm, air_density_kg_m3=REFERENCE_AIR_DENSITY_KG_M3):
    """Terminal fall speed of a raindrop, m/s.

    Parameters
    ----------
    diameter_mm : array_like
        Equivalent-sphere diameter, mm (valid 0.08-6 mm).
    air_density_kg_m3 : array_like
        Air density, kg m-3.

    Notes
    -----
    Above :data:`SMALL_DROP_LIMIT_MM` the Atlas et al. (1973) fit
    ``v = 9.65 - 10.3 exp(-0.6 D)`` to Gunn & Kinzer (1949), within 3 % of their measurements
    from 0.5 to 5.8 mm; below it the intermediate law ``v = k3 r``, ``k3 = 8e3`` s-1 of Rogers
    & Yau (1989), within 12 % of Gunn & Kinzer from 0.2 to 0.5 mm (the Atlas fit turns
    negative below 0.07 mm).  Both times :func:`density_factor`.
    """
    d = np.asarray(diameter_mm, dtype=np.float64)
    v = np.where(d < SMALL_DROP_LIMIT_MM, SMALL_DROP_SLOPE_M_S_PER_MM * d, _atlas_m_s(d))
    return v * density_factor(air_density_kg_m3)


def snow_dimension_mm(melted_diameter_mm):
    """Maximum dimension of an aggregate of the given melted diameter, mm.

    Notes
    -----
    Inverts the Locatelli & Hobbs (1974) mass ``m = 0.073 D^1.4`` mg with
    ``m = (pi/6) D_melted^3`` mg: ``D = ((pi/6) D_melted^3 / 0.073)^(1/1.4)``, about
    ``4.1 D_melted^2.14``: a 1 mm drop comes from a 4 mm flake, a 2 mm drop from an 18 mm
    flake (bulk density falls from 30 to 5 kg m-3).
    """
    d = np.asarray(melted_diameter_mm, dtype=np.float64)
    return (_WATER_SPHERE_MG_PER_MM3 * d ** 3 / LH_MASS_COEFFICIENT_MG) ** (1.0 / LH_MASS_EXPONENT)


def snow_fall_speed_m_s(dimension_mm, air_density_kg_m3=REFERENCE_AIR_DENSITY_KG_M3):
    """Terminal fall speed of an unrimed aggregate, m/s.

    Notes
    -----
    ``v = 0.8 D^0.16`` (Locatelli & Hobbs 1974, aggregates of unrimed radiating assemblages of
    dendrites; D maximum dimension in mm; measured near the ground in the Cascade Mountains, so
    the reference density of the drops is assumed, from memory) times :func:`density_factor`.
    Gives 0.8 m/s at 1 mm and 1.3 m/s at 20 mm.
    """
    d = np.asarray(dimension_mm, dtype=np.float64)
    return LH_SPEED_COEFFICIENT_M_S * d ** LH_SPEED_EXPONENT * density_factor(air_density_kg_m3)


def melting_fall_speed_m_s(melted_fraction, snow_speed_m_s, drop_speed_m_s):
    """Fall speed of melting snow, m/s: linear in the melted mass fraction between the
    speed of the flake and that of the drop of the same mass.

    Notes
    -----
    Mitra et al. (1990) measured speeds rising from the flake's to the drop's as melting
    proceeds; the linear interpolation is the common simplification (from memory).
    """
    f = np.asarray(melted_fraction, dtype=np.float64)
    return (1.0 - f) * snow_speed_m_s + f * drop_speed_m_s
