"""A physical model of falling precipitation: size-resolved particles followed from the cloud to
the ground.

The kernels take plain arrays (SI or unit-suffixed names) and know nothing of methods or
explanations; :mod:`ptype.engine.methods.particles` wraps them as a diagnosis method.

=====================  ==========================================================================
module                 what it holds (sources: keys of ``docs/references.md``)
=====================  ==========================================================================
:mod:`.distribution`   exponential size distribution of snow by melted diameter (GunnMarshall1958)
                       and its equal-mass size bins
:mod:`.fallspeed`      fall speeds of drops (Atlas1973, RogersYau1989), snow aggregates
                       (LocatelliHobbs1974), melting snow (Mitra1990) and the air-density
                       correction (FooteDuToit1969)
:mod:`.heat`           air properties, ventilation and capacitance, the heat balance of a particle
                       whose surface is at 0 degC (Mason1971, PruppacherKlett1997) and immersion
                       freezing of drops (Bigg1953)
:mod:`.generating`     where the particles leave the cloud (the top of the highest ice-making cloud
                       layer that seeds the lowest cloud)
:mod:`.march`          the column march: snow, melt water and refrozen ice of every size bin, level
                       by level to the ground (numpy path and compiled loop)
=====================  ==========================================================================
"""

from __future__ import annotations
