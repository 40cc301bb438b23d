"""The phase path: what the falling particles can physically be when they reach the ground.

Whatever the methods vote, precipitation follows one path down the column: snow, then partly
melted snow, then drops; drops stay liquid (rain, freezing rain, drizzle) or refreeze (ice
pellets and the pellet mixes) but **never become snow again**; and what reaches a warm enough
surface layer melts.  This module measures, per column, how far along that path the
particles get, and which type codes are therefore possible (:func:`phase_path`).  The
consensus (:mod:`ptype.engine.consensus`) only reports a possible code.

Melting energy
--------------
Melting is governed by the wet-bulb: a particle whose surface is at 0 degC gains heat by
conduction from the air and loses it by evaporation into sub-saturated air, and the balance is
close to the wet-bulb's (Mason 1971; Pruppacher & Klett 1997).  The melting energy of a warm
layer is therefore its area above 0 degC on the **wet-bulb** profile,
``R_d * integral (Tw - T0) d ln p`` (J/kg), as Birk et al. (2021) integrate it, computed by
:mod:`ptype.engine.layers`.  Bourgouin's (2000) surface-layer limits give its scale: below
:data:`PARTIAL_MELT_J_KG` (5.6 J/kg) snow survives, above :data:`COMPLETE_MELT_J_KG`
(13.2 J/kg) it has melted.  Applying those limits, fitted on surface layers with the air
temperature, to the wet-bulb area of every warm layer is ours: in saturated layers the two
areas agree; in dry layers the wet-bulb area is smaller, so fewer layers count as melting.

Only warm layers below the precipitation's source count: a warm layer above the top of the
highest cloud melts nothing, since nothing falls through it (the part of a layer above the
source is cut off, pro rata by height).  Without a cloud in the profile the source is taken
as the top of the profile, as every melting-layer method assumes.

The rules (each reported by the consensus when it changes the vote)
--------------------------------------------------------------------
1. **Melted aloft** — melting energy aloft of at least :data:`COMPLETE_MELT_J_KG`: the snow
   has melted completely; the drops may stay liquid or refreeze, so SN and RASN are impossible.
2. **Melted at the surface** — a surface-based warm layer with more melting energy than
   :data:`COMPLETE_MELT_J_KG` melts whatever reaches it: snow, partly melted snow and ice
   pellets alike (Bourgouin 2000: above 13.2 J/kg a surface warm layer gives rain; his case B
   turns pellets into rain above the same limit).  Only rain or drizzle is possible.
3. **No ice in the cloud** — the precipitating cloud makes no ice and no higher cloud seeds
   it (:func:`ptype.engine.methods.cloud_top.ice_analysis`): there is no snow to begin with,
   so SN and RASN are impossible; and the supercooled drops such a cloud rains are taken to
   land liquid (freezing them into pellets needs ice nucleation in a colder layer below,
   which small drops resist down to about -20 degC, Bigg 1953), so the pellet types are
   impossible too.  Only drizzle or rain remain.
4. **Nothing melts** — ice in the cloud, less than :data:`MIN_MELT_ALOFT_J_KG` of melting
   energy aloft (Bourgouin ignores such layers) and less than :data:`PARTIAL_MELT_J_KG` at the
   surface: nothing can be liquid or refrozen, so only snow is possible.
5. **Surface humidity** may turn a rain vote into snow (Jennings et al. 2018) only where the
   melting is surface-based and incomplete: ice in the cloud, less than
   :data:`PARTIAL_MELT_J_KG` of melting energy aloft (snow reaches the surface layer
   unmelted), and a surface layer that does not melt it.

Rules 1-5 are ours, from the phase path; the energy limits are Bourgouin's (2000).  Each
rule only removes possibilities as the profile warms (more melting energy, less ice), which
is what keeps the consensus from moving toward ice when every level is warmed.
"""

from __future__ import annotations

import numpy as np

from ptype.codes import Code
from ptype.engine.methods.base import Context

#: Melting energy below which snow survives, J/kg (Bourgouin 2000, surface layer).
PARTIAL_MELT_J_KG = 5.6
#: Melting energy above which snow has melted completely, J/kg (Bourgouin 2000, surface layer).
COMPLETE_MELT_J_KG = 13.2
#: Melting energy aloft below which a warm layer is ignored, J/kg (Bourgouin 2000).
MIN_MELT_ALOFT_J_KG = 2.0

N_CODES = len(Code)
#: Codes that hold snow (flakes that never melted completely).
SNOW_CODES = (Code.SN, Code.RASN)
#: Codes that hold ice that is not snow.
PELLET_CODES = (Code.PL, Code.RAPL, Code.FZRAPL)
#: Codes of liquid that freezes on the ground.
FREEZING_CODES = (Code.FZRA, Code.FZDZ, Code.FZRAPL)


def _source_height_m(ctx: Context) -> np.ndarray:
    """Top of the highest cloud layer (where precipitation starts), m; the top of the profile
    when there is no cloud."""
    cl = ctx.cloud_layers
    c = ctx.columns
    n = c.n_columns
    rows = np.arange(n)
    top = np.maximum(cl.count - 1, 0)
    last = np.maximum(c.n_levels - 1, 0)
    profile_top = c.height_m[rows, last]
    return np.where(cl.count > 0, cl.top_m[rows, top], profile_top)


def melting_energies_j_kg(ctx: Context) -> tuple[np.ndarray, np.ndarray]:
    """Wet-bulb melting energy of the elevated warm layers below the source (summed) and of
    the surface-based warm layer, J/kg, ``(n,)`` each."""
    wb = ctx.wetbulb_layers
    _, K = wb.kind.shape
    k_idx = np.arange(K)[None, :]
    warm = wb.kind > 0
    area = np.where(warm, wb.area_j_kg, 0.0)
    source = _source_height_m(ctx)[:, None]
    depth = wb.top_m - wb.bottom_m
    with np.errstate(invalid="ignore", divide="ignore"):
        below = np.clip((source - wb.bottom_m) / depth, 0.0, 1.0)
    below = np.where(np.isfinite(below), below, np.where(wb.bottom_m < source, 1.0, 0.0))
    aloft = np.where(warm & (k_idx > 0), area * below, 0.0).sum(axis=1)
    surface = np.where(warm[:, 0], area[:, 0], 0.0)
    return aloft, surface


def phase_path(ctx: Context, ice_in_cloud: np.ndarray) -> dict[str, np.ndarray]:
    """Where each column's particles get to on the phase path, and the codes possible.

    ``ice_in_cloud`` is False where the precipitating cloud makes no ice (rule 3); True where
    it does, or where the profile shows no cloud (precipitation is then assumed to start as
    snow, as every melting-layer method assumes).

    Returns ``(n,)`` arrays ``melt_aloft_j_kg``, ``melt_surface_j_kg`` and one boolean per rule
    (``melted_aloft``, ``melted_at_surface``, ``no_ice``, ``nothing_melts``,
    ``humidity_check_allowed``), and ``possible``, ``(n, len(Code))`` booleans.
    """
    aloft, surface = melting_energies_j_kg(ctx)
    ice = np.asarray(ice_in_cloud, dtype=bool)
    melted_aloft = aloft >= COMPLETE_MELT_J_KG
    melted_at_surface = surface > COMPLETE_MELT_J_KG
    no_ice = ~ice
    nothing_melts = ice & (aloft < MIN_MELT_ALOFT_J_KG) & (surface < PARTIAL_MELT_J_KG)
    n = aloft.shape[0]
    possible = np.ones((n, N_CODES), dtype=bool)
    for code in SNOW_CODES:
        possible[:, code] &= ~(melted_aloft | melted_at_surface | no_ice)
    for code in PELLET_CODES:
        possible[:, code] &= ~(melted_at_surface | no_ice)
    for code in FREEZING_CODES:
        possible[:, code] &= ~melted_at_surface
    for code in Code:
        if code not in (Code.SN, Code.NONE):
            possible[:, code] &= ~nothing_melts
    return {"melt_aloft_j_kg": aloft, "melt_surface_j_kg": surface,
            "melted_aloft": melted_aloft, "melted_at_surface": melted_at_surface,
            "no_ice": no_ice, "nothing_melts": nothing_melts,
            "humidity_check_allowed": ice & (aloft < PARTIAL_MELT_J_KG) & ~melted_at_surface,
            "possible": possible}


def fallback_code(path: dict[str, np.ndarray], surface_temperature_c: np.ndarray) -> np.ndarray:
    """The type when no method voted a possible one: snow where nothing melts, drizzle from a
    cloud that makes no ice, melted precipitation (rain) otherwise; liquid freezes on a
    surface at or below 0 degC."""
    freezing = surface_temperature_c <= 0.0
    liquid = np.where(freezing, int(Code.FZRA), int(Code.RA))
    drizzle = np.where(freezing, int(Code.FZDZ), int(Code.DZ))
    return np.where(path["nothing_melts"], int(Code.SN),
                    np.where(path["no_ice"], drizzle, liquid))
