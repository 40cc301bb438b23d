"""Vectorised moist thermodynamics for soundings.

Every function takes plain numpy arrays (or scalars) in the units its argument names say,
broadcasts over any shape, and contains no Python loop over points.  Levels are the last axis
where a function works on a column (``(..., level)``).  The namespace is flat: a user never
needs to know the module a function lives in.

=====================  =======================================================================
module                 what it holds (sources: keys of ``docs/references.md``)
=====================  =======================================================================
:mod:`.constants`      physical constants (WMO-No. 8; ASHRAE2017)
:mod:`.saturation`     saturation vapour pressure (Alduchov1996; Murphy2005) and the humidity
                       conversions built on it
:mod:`.heights`        virtual temperature, thickness, hypsometric heights (WallaceHobbs2006)
:mod:`.parcel`         potential temperature, LCL temperature, equivalent potential
                       temperature (Bolton1980)
:mod:`.wetbulb`        isobaric (ASHRAE2017 eq. 35) and pseudo-adiabatic (Knox2017,
                       Bolton1980) wet-bulb, numpy solvers
:mod:`.fast`           the same wet-bulb solvers compiled with numba, for large arrays
:mod:`.kinds`          the wet-bulb kinds (:data:`WET_BULB_KINDS`) and their check
:mod:`.psychrometer`   dew point and humidity from dry- and wet-bulb readings
=====================  =======================================================================
"""

from __future__ import annotations

from ptype.thermo.heights import hypsometric_heights_m, thickness_m, virtual_temperature_c
from ptype.thermo.kinds import WET_BULB_KINDS, check_wet_bulb_kind
from ptype.thermo.parcel import (
    equivalent_potential_temperature_k,
    lcl_temperature_c,
    potential_temperature_k,
)
from ptype.thermo.psychrometer import psychrometer_dewpoint_c, psychrometer_relative_humidity_pct
from ptype.thermo.saturation import (
    dewpoint_from_mixing_ratio_c,
    dewpoint_from_relative_humidity_c,
    dewpoint_from_vapor_pressure_c,
    mixing_ratio_g_kg,
    relative_humidity_pct,
    saturation_vapor_pressure_hpa,
    saturation_vapor_pressure_murphy_koop_hpa,
    vapor_pressure_from_dewpoint_hpa,
    vapor_pressure_from_mixing_ratio_hpa,
)
from ptype.thermo.wetbulb import wet_bulb_temperature, wet_bulb_temperatures

__all__ = [
    "WET_BULB_KINDS",
    "check_wet_bulb_kind",
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
    "wet_bulb_temperatures",
]
