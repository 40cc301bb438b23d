"""Physical constants used throughout ptype (SI units unless the name says otherwise).

Short symbols with long aliases, in the habit of atmospheric-science libraries.
Values: WMO-No. 8 / the International Meteorological Tables for the gas
constants and gravity; latent heats and heat capacities as used in ASHRAE
Handbook—Fundamentals (2017) ch. 1 psychrometrics, which the wet-bulb solver
follows.
"""

from __future__ import annotations

#: Standard gravity, m s-2 (CGPM 1901; WMO-No. 8).
g = standard_gravity = 9.80665
#: Gas constant of dry air, J kg-1 K-1 (WMO-No. 8 value 287.04).
Rd = dry_air_gas_constant = 287.04
#: Gas constant of water vapour, J kg-1 K-1.
Rv = water_vapor_gas_constant = 461.5
#: Ratio of molar masses water/dry air, Mw/Md = 18.01528/28.9645 (ASHRAE 2017 ch. 1 eq. 22
#: uses 0.621945).
epsilon = molecular_weight_ratio = 0.621945
#: Specific heat of dry air at constant pressure, J kg-1 K-1.
Cp_d = dry_air_spec_heat_press = 1005.7
#: 0 degC in kelvin.
T0 = zero_degc = 273.15
#: Latent heat of fusion at 0 degC, J kg-1.
Lf = latent_heat_fusion = 3.34e5
#: Latent heat of vaporisation at 0 degC, J kg-1.
Lv = latent_heat_vaporization = 2.501e6
#: Density of liquid water, kg m-3.
rho_w = water_density = 1000.0
#: Density of solid ice, kg m-3.
rho_i = ice_density = 917.0
#: Kappa = Rd / cp for Poisson's equation (dry adiabat).
kappa = poisson_exponent = Rd / Cp_d
