"""Falling-particle model: size-resolved snow followed from the cloud to the ground.

Unlike the threshold methods, this one computes what happens to the precipitation (the physics
lives in :mod:`ptype.engine.particles`; equations, constants and checks in
``docs/particles.md``):

1. **Generating level** (:mod:`~ptype.engine.particles.generating`): snow leaves the top of the
   highest ice-making cloud layer (coldest temperature at or below -10 degC) of the cloud chain
   that reaches the lowest cloud; a chain that makes no ice yields supercooled drizzle drops.
2. **Sizes** (:mod:`~ptype.engine.particles.distribution`): the Gunn & Marshall (1958) exponential
   distribution of melted diameters at the surface precipitation rate of the profile, or
   :data:`~ptype.engine.particles.distribution.DEFAULT_RATE_MM_H`, cut into equal-mass bins.
3. **March** (:mod:`~ptype.engine.particles.march`): each bin falls level by level; melting and
   refreezing by the heat balance of a particle at 0 degC (Mason 1971; Pruppacher & Klett 1997),
   immersion freezing of all-liquid drops by Bigg's (1953) rate.  The profile is not changed.
4. **Ground** (:mod:`~ptype.engine.particles.ground`): the mass is sorted into snow, melting
   snow, liquid and refrozen ice, and :data:`TYPE_TABLE` turns the four fractions into a type.

Type table (ours; first matching row wins; "freezing" is surface air at or below 0 degC, where
liquid reaching the ground freezes on contact):

=====================================================  ==========================================
condition (L liquid, F refrozen, N snow + melting)     type
=====================================================  ==========================================
drizzle from a cloud without ice: F >= 1/2             PL
drizzle: freezing / not                                FZDZ / DZ
L >= DOMINANT (0.9): freezing / not                    FZRA / RA
F >= DOMINANT                                          PL
L >= MIX (0.1) and F >= MIX: freezing / not            FZRAPL / RAPL
L >= MIX: freezing / not                               FZRA / RASN
F >= MIX: F >= N / not                                 PL / SN
half the mass melted and not freezing                  RASN (wet snow and drops of melt water)
otherwise                                              SN
=====================================================  ==========================================

No cloud (no generating level) or fewer than two levels: no result.
"""

from __future__ import annotations

import numpy as np

from ptype.codes import NO_RESULT, Code
from ptype.engine import wording as w
from ptype.engine.methods.base import Context, MethodResult, Step, select_first
from ptype.engine.particles import distribution, ground
from ptype.engine.particles.generating import generating_level
from ptype.engine.particles.march import COMPLETE_MELTED, HALF_MELTED, march

NAME = "particles"
TITLE = "Falling-particle model (melting and refreezing by heat balance)"
REFERENCE = "PruppacherKlett1997"
WETBULB = "isobaric"  # the temperature of drops with no ice; melting uses T and Td directly

#: A class holding at least this fraction of the mass dominates alone (ours).
DOMINANT = 0.9
#: A class with at least this fraction of the mass is reported in a mix (ours).
MIX = 0.1
#: Drizzle drops: most of the mass refrozen makes pellets (ours).
DRIZZLE_REFROZEN = 0.5
#: Snow with at least this mean melted fraction at the ground, over unfrozen ground, is reported
#: as rain and snow (ours: half of the mass is melt water).
WET_SNOW_MELTED = 0.5
#: Precipitation freezes on contact where the surface air is at or below this, degC.
FREEZING_SURFACE_C = 0.0
#: Melted diameter of drizzle drops, mm: the upper limit of drizzle (WMO-No. 306/8 definition of
#: drizzle: drops under 0.5 mm; common practice), the drops likeliest to freeze.
DRIZZLE_DIAMETER_MM = 0.5

RULES = (
    "insufficient_levels",        # 0  -> no result
    "no_cloud",                   # 1  -> no result
    "drizzle_refrozen",           # 2  -> PL
    "drizzle_freezing",           # 3  -> FZDZ
    "drizzle",                    # 4  -> DZ
    "liquid_freezing",            # 5  -> FZRA
    "liquid_rain",                # 6  -> RA
    "refrozen_pellets",           # 7  -> PL
    "liquid_pellets_freezing",    # 8  -> FZRAPL
    "liquid_pellets",             # 9  -> RAPL
    "liquid_snow_freezing",       # 10 -> FZRA
    "liquid_snow",                # 11 -> RASN
    "pellets_with_snow",          # 12 -> PL
    "snow_with_pellets",          # 13 -> SN
    "wet_snow",                   # 14 -> RASN
    "snow",                       # 15 -> SN
)
_RULE = {name: k for k, name in enumerate(RULES)}
_CODE_OF_RULE = np.array([NO_RESULT, NO_RESULT, Code.PL, Code.FZDZ, Code.DZ, Code.FZRA, Code.RA,
                          Code.PL, Code.FZRAPL, Code.RAPL, Code.FZRA, Code.RASN, Code.PL, Code.SN,
                          Code.RASN, Code.SN], dtype=np.int64)
#: The type table as (rule, condition in words), for documentation and explanations.
TYPE_TABLE = (
    ("drizzle_refrozen", f"drizzle with refrozen fraction >= {DRIZZLE_REFROZEN}"),
    ("drizzle_freezing", "drizzle over freezing ground"),
    ("drizzle", "drizzle"),
    ("liquid_freezing", f"liquid >= {DOMINANT} over freezing ground"),
    ("liquid_rain", f"liquid >= {DOMINANT}"),
    ("refrozen_pellets", f"refrozen >= {DOMINANT}"),
    ("liquid_pellets_freezing", f"liquid and refrozen both >= {MIX} over freezing ground"),
    ("liquid_pellets", f"liquid and refrozen both >= {MIX}"),
    ("liquid_snow_freezing", f"liquid >= {MIX} over freezing ground"),
    ("liquid_snow", f"liquid >= {MIX}"),
    ("pellets_with_snow", f"refrozen >= {MIX} and at least the snow"),
    ("snow_with_pellets", f"refrozen >= {MIX}, less than the snow"),
    ("wet_snow", f"mean melted fraction >= {WET_SNOW_MELTED} over unfrozen ground"),
    ("snow", "otherwise"),
)

SOURCE_CLOUD = ("Generating level: top of the highest ice-making cloud (ice at or below -10 °C, "
                "NWS guidance; cloud chain as in the cloud-top method)")
SOURCE_SIZES = "Gunn & Marshall (1958) snow size distribution"
SOURCE_MELT = "Heat balance of a particle at 0 °C (Mason 1971; Pruppacher & Klett 1997)"
SOURCE_FREEZE = ("Refreezing by heat balance (Pruppacher & Klett 1997); immersion freezing "
                 "(Bigg 1953)")
SOURCE_TABLE = "ptype type table of the particle model (ours)"


def run(ctx: Context, *, n_bins: int = distribution.DEFAULT_BINS, rate_mm_h=None,
        nucleation_temperature_c: float | None = None, step_m: float | None = None) -> MethodResult:
    """The particle model for every column of ``ctx``.

    ``rate_mm_h`` overrides the precipitation rate (else the profile's, else the default);
    ``nucleation_temperature_c`` replaces Bigg's rate by a freezing temperature for drops with
    no ice; ``step_m`` the deepest sub-step (:data:`ptype.engine.particles.march.STEP_M`).
    """
    c = ctx.columns
    n = c.n_columns
    given = np.broadcast_to(np.asarray(c.precipitation_rate_mm_h if rate_mm_h is None
                                       else rate_mm_h, dtype=np.float64), (n,))
    rate = distribution.rate_or_default_mm_h(given, n)
    from_profile = np.isfinite(given) & (given > 0.0)
    gen = generating_level(ctx.cloud_layers, c.height_m, ctx.dry_mask)
    enough = c.n_levels >= 2
    start = np.where(enough, gen.height_m, np.nan)
    diameters = distribution.melted_diameters_mm(rate, n_bins)
    diameters = np.where(gen.liquid[:, None], DRIZZLE_DIAMETER_MM, diameters)
    options = {} if step_m is None else {"step_m": step_m}
    res = march(c.height_m, c.temperature_c, c.dewpoint_c, c.pressure_hpa, c.wetbulb_c, start,
                gen.liquid, diameters, nucleation_temperature_c=nucleation_temperature_c,
                **options)
    snow, melting, liquid, refrozen = ground.ground_fractions(res.snow, res.liquid, res.refrozen,
                                                              res.ice_holding)
    melted_ground = res.melted_levels[:, 0]
    sfc_t = c.surface_temperature_c
    rule = _rules(enough, np.isfinite(start), gen.liquid, sfc_t <= FREEZING_SURFACE_C,
                  (snow + melting, liquid, refrozen), melted_ground)
    values = {
        "snow": snow, "melting": melting, "liquid": liquid, "refrozen": refrozen,
        "melted_fraction_levels": res.melted_levels,
        "liquid_fraction_levels": res.liquid_levels,
        "refrozen_fraction_levels": res.refrozen_levels,
        "melting_start_m": res.melting_start_m, "melting_half_m": res.melting_half_m,
        "melting_complete_m": res.melting_complete_m,
        "refreezing_start_m": res.refreezing_start_m,
        "ground_melted_fraction": melted_ground,
        "ground_refrozen_ice": res.refrozen_levels[:, 0],
        "generating_height_m": start, "generating_pressure_hpa": gen.pressure_hpa,
        "generating_cloud_min_c": gen.cloud_min_c,
        "starts_liquid": gen.liquid.astype(np.float64),
        "precipitation_rate_mm_h": rate, "rate_from_profile": from_profile.astype(np.float64),
        "surface_temperature_c": sfc_t, "surface_height_m": c.surface_height_m,
    }
    return MethodResult(name=NAME, code=_CODE_OF_RULE[rule], rule=rule, values=values,
                        explainer=explain)


def details(result: MethodResult, i: int, n_levels: int) -> dict:
    """What the diagnosis JSON adds for column ``i``: the mass fractions at the ground (summing
    to 1), the heights where melting starts, is half done and complete, and the per-level mean
    melted, liquid and refrozen fractions (``n_levels`` levels, surface to top; None where
    the particles have not passed)."""
    v = result.values

    def height(key):
        x = float(v[key][i])
        return round(x) if np.isfinite(x) else None

    def levels(key):
        return [round(x, 4) if np.isfinite(x) else None
                for x in v[key][i, :n_levels].tolist()]

    fractions = {k: round(float(v[k][i]), 4) for k in ("snow", "melting", "liquid", "refrozen")}
    if not np.isfinite(v["generating_height_m"][i]):
        fractions = None
    return {"mass_fractions": fractions,
            "melting_start_m": height("melting_start_m"),
            "melting_half_m": height("melting_half_m"),
            "melting_complete_m": height("melting_complete_m"),
            "refreezing_start_m": height("refreezing_start_m"),
            "generating_height_m": height("generating_height_m"),
            "precipitation_rate_mm_h": round(float(v["precipitation_rate_mm_h"][i]), 2),
            "levels": {"melted_fraction": levels("melted_fraction_levels"),
                       "liquid_fraction": levels("liquid_fraction_levels"),
                       "refrozen_fraction": levels("refrozen_fraction_levels")}}


def _rules(enough, has_start, drizzle, freezing, fractions, melted_ground):
    """Index into :data:`RULES` of every column (the module's type table)."""
    snowlike, liquid, refrozen = fractions
    both = (liquid >= MIX) & (refrozen >= MIX)
    conditions = [
        ~enough, ~has_start,
        drizzle & (refrozen >= DRIZZLE_REFROZEN), drizzle & freezing, drizzle,
        (liquid >= DOMINANT) & freezing, liquid >= DOMINANT,
        refrozen >= DOMINANT,
        both & freezing, both,
        (liquid >= MIX) & freezing, liquid >= MIX,
        (refrozen >= MIX) & (refrozen >= snowlike), refrozen >= MIX,
        (melted_ground >= WET_SNOW_MELTED) & ~freezing,
    ]
    choices = [_RULE[name] for name in RULES[:15]]
    return select_first(conditions, choices, default=_RULE["snow"])


def _f(x, digits=1):
    """A number for a sentence: true minus sign, no negative zero."""
    text = f"{x + 0.0:.{digits}f}"
    if float(text) == 0.0:
        text = text.lstrip("-")
    return text.replace("-", "\u2212")


def _pct(x) -> str:
    return f"{100.0 * x:.0f} %"


def _agl(height_m, surface_m) -> str:
    return f"{height_m - surface_m:.0f} m above the ground"


def explain(result: MethodResult, i: int) -> list[Step]:
    """The particle model's account of column ``i``, from ``result.values`` only."""
    v = {k: a[i] for k, a in result.values.items() if np.ndim(a) == 1}
    rule = RULES[int(result.rule[i])]
    if rule == "insufficient_levels":
        return [Step(rule, "Fewer than two valid levels: there is no column to fall through.",
                     source=SOURCE_TABLE)]
    if rule == "no_cloud":
        return [Step(rule, "No saturated layer: the model has no cloud for precipitation to "
                     "leave, so it gives no type.", source=SOURCE_CLOUD)]
    sfc = float(v["surface_height_m"])
    steps = [_generating_step(v, sfc), _sizes_step(v)]
    if not v["starts_liquid"]:
        steps.append(_melting_step(v, sfc))
    steps.extend(_refreezing_steps(v, sfc))
    steps.append(_ground_step(v, rule))
    return steps


def _generating_step(v, sfc) -> Step:
    z, p, tmin = (float(v[k]) for k in ("generating_height_m", "generating_pressure_hpa",
                                        "generating_cloud_min_c"))
    vals = {"generating_height_m": z, "generating_pressure_hpa": p, "cloud_min_c": tmin}
    th = {"ice_nucleation_c": -10.0}
    if v["starts_liquid"]:
        text = (f"The precipitating cloud is never colder than {w.temperature(tmin)}, so it "
                f"makes no ice: drizzle drops ({DRIZZLE_DIAMETER_MM} mm) leave its top at "
                f"{p:.0f} hPa ({_agl(z, sfc)}).")
    else:
        text = (f"Snow leaves the top of the ice-making cloud at {p:.0f} hPa ({_agl(z, sfc)}), "
                f"where the cloud reaches {w.temperature(tmin)}.")
    return Step("generating_level", text, vals, th, SOURCE_CLOUD)


def _sizes_step(v) -> Step:
    rate = float(v["precipitation_rate_mm_h"])
    where = "the profile's surface rate" if v["rate_from_profile"] else "the default rate"
    text = (f"Sizes follow an exponential distribution of melted diameters at {rate:.2f} mm/h "
            f"({where}); each size is followed separately down the column.")
    return Step("size_distribution", text, {"precipitation_rate_mm_h": rate},
                {"rate_range_mm_h_low": distribution.RATE_RANGE_MM_H[0],
                 "rate_range_mm_h_high": distribution.RATE_RANGE_MM_H[1]}, SOURCE_SIZES)


def _melting_step(v, sfc) -> Step:
    start, half, done = (float(v[k]) for k in ("melting_start_m", "melting_half_m",
                                               "melting_complete_m"))
    melted = float(v["ground_melted_fraction"])
    vals = {"melting_start_m": start, "melting_half_m": half, "melting_complete_m": done,
            "ground_melted_fraction": melted}
    th = {"half_melted": HALF_MELTED, "complete_melted": COMPLETE_MELTED}
    if not np.isfinite(start):
        text = ("No layer is warm and moist enough for the heat balance to melt snow (the air "
                "never brings a 0 \u00b0C surface more heat than evaporation takes away): the "
                "snow stays frozen.")
        return Step("no_melting", text, vals, th, SOURCE_MELT)
    parts = [f"Melting starts {_agl(start, sfc)}"]
    if np.isfinite(half):
        parts.append(f"half of the mass has melted by {_agl(half, sfc)}")
    if np.isfinite(done):
        parts.append(f"{_pct(COMPLETE_MELTED)} of it by {_agl(done, sfc)}")
        tail = "."
    else:
        tail = f"; melting is not complete: {_pct(melted)} of the mass has melted at the ground."
    return Step("melting", "; ".join(parts) + tail, vals, th, SOURCE_MELT)


def _refreezing_steps(v, sfc) -> list[Step]:
    start = float(v["refreezing_start_m"])
    ice = float(v["ground_refrozen_ice"])
    vals = {"refreezing_start_m": start, "ground_refrozen_ice": ice}
    if not np.isfinite(start):
        return []
    text = (f"Below {_agl(start, sfc)} liquid water freezes again: {_pct(ice)} of the mass "
            "reaches the ground as refrozen ice.")
    return [Step("refreezing", text, vals, {}, SOURCE_FREEZE)]


def _ground_step(v, rule) -> Step:
    fr = {k: float(v[k]) for k in ("snow", "melting", "liquid", "refrozen")}
    t_sfc = float(v["surface_temperature_c"])
    code = Code(int(_CODE_OF_RULE[_RULE[rule]]))
    condition = dict(TYPE_TABLE)[rule]
    surface = ("at or below" if t_sfc <= FREEZING_SURFACE_C else "above")
    # The rule as a sentence reads it: true comparison signs, not the table's ASCII.
    condition = condition.replace(">=", w.GE).replace("<=", w.LE)
    text = (f"At the ground: snow {_pct(fr['snow'])}, melting snow {_pct(fr['melting'])}, "
            f"liquid {_pct(fr['liquid'])}, refrozen {_pct(fr['refrozen'])}; surface air "
            f"{w.temperature(t_sfc)} ({surface} {w.temperature(0.0, trim=True)}). Rule "
            f"\u201c{condition}\u201d: {code.label} ({code.name}).")
    vals = dict(fr, surface_temperature_c=t_sfc, ground_melted_fraction=float(
        v["ground_melted_fraction"]))
    th = {"dominant": DOMINANT, "mix": MIX, "wet_snow_melted": WET_SNOW_MELTED,
          "freezing_surface_c": FREEZING_SURFACE_C}
    return Step(rule, text, vals, th, SOURCE_TABLE)
