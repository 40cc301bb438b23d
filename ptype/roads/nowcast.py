"""Timelines: a series of forecast profiles turned into step-by-step types, hazards and totals.

Pipeline (all steps in one vectorised pass; see ``docs/nowcast.md`` for the equations), one
function per stage, composed by :func:`build_timeline`::

    validate_series        profiles of one issue, sorted by valid time; options checked
    step_times             the time grid now + k step inside the profiles' span
    interpolate_to_steps   common terrain-following grid s = ln(p / p_sfc), linear in time
                           level by level
    adjust_for_observation (a) surface observation blended in, decaying with height and lead
    adjust_for_onset       (b) onset cooling of dry sub-cloud air toward its wet-bulb
    adjust_for_melting     (c) melting-layer cooling by heavy precipitation (Kain et al. 2000)
    diagnose_steps         Columns -> ptype.engine.run.run_columns (control and members)
    hazards_at_steps       ptype.roads.hazards.step_hazards
    step_records           one JSON-ready record per step
    transitions, timeline_totals

The adjustment constants are our own choices (labelled so), not published values.
"""

from __future__ import annotations

import itertools
import math
import re
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, replace
from datetime import UTC, datetime, timedelta
from typing import Any

import numpy as np
from numpy.typing import ArrayLike

from ptype import thermo
from ptype.codes import GRIB2_4201, LABELS, Code
from ptype.constants import CAUTION
from ptype.engine.columns import Columns
from ptype.errors import OptionError, ProfileError
from ptype.profile import Profile
from ptype.roads import hazards
from ptype.thermo.constants import T0, Cp_d, Lf, Rd, rho_w

#: (a) e-folding height of the observation increment above ground, m (our choice).
OBS_EFOLD_HEIGHT_M = 500.0
#: (a) e-folding lead time of the observation increment, h (our choice).
OBS_EFOLD_LEAD_H = 3.0
#: (a) An observation older than this (before "now") is not used, h (our choice).
OBS_MAX_AGE_H = 3.0
#: Precipitation at or above this rate counts as "precipitating", mm/h (our choice; about the
#: smallest rate a tipping-bucket gauge resolves in an hour).
PRECIP_THRESHOLD_MM_H = 0.1
#: (b) e-folding time of evaporative cooling after onset, h (our choice).
ONSET_EFOLD_H = 1.0
#: (b) Levels below the lowest level with RH at or above this are "sub-cloud", % (our choice).
CLOUD_BASE_RH_PCT = 90.0
#: (c) Longest time the same air keeps being cooled by melting before advection renews it,
#: h (our choice).
MELTING_MAX_HOURS = 3.0
#: Largest number of levels in the common grid (finer inputs are resampled evenly in s).
MAX_GRID_LEVELS = 200
#: Member columns x levels diagnosed together in one engine pass: bounds a timeline's memory
#: (tens of MB per pass) whatever its steps and members (our choice).
MAX_MEMBER_LEVELS_PER_PASS = 250_000

ADJUSTMENTS = ("observation", "onset", "melting")


@dataclass(frozen=True)
class SurfaceObservation:
    """A surface observation (any field may be None)."""

    time: datetime
    air_temperature_c: float | None = None
    dewpoint_c: float | None = None
    road_surface_temperature_c: float | None = None
    precipitation_rate_mm_h: float | None = None
    wind_speed_m_s: float | None = None
    present_weather: str | None = None

    @classmethod
    def from_mapping(cls, m: Mapping[str, Any]) -> SurfaceObservation:
        """From a mapping with the field names; missing keys are None, others ignored."""
        return cls(**{k: m.get(k) for k in cls.__dataclass_fields__})


def parse_step(text: str | timedelta | float) -> timedelta:
    """A step such as ``15min``, ``30m``, ``1h``, ``90s`` or a plain number of minutes."""
    if isinstance(text, timedelta):
        step = text
    elif isinstance(text, (int, float)) and not isinstance(text, bool):
        step = timedelta(minutes=float(text))
    else:
        m = re.fullmatch(r"\s*([0-9]*\.?[0-9]+)\s*(min|m|h|s)?\s*", str(text).lower())
        if m is None:
            raise OptionError(f"step = {text!r}: expected a duration such as 15min, 1h or 30",
                              field="step")
        seconds = {"min": 60, "m": 60, None: 60, "h": 3600, "s": 1}[m.group(2)]
        step = timedelta(seconds=float(m.group(1)) * seconds)
    if not timedelta(minutes=1) <= step <= timedelta(hours=6):
        raise OptionError(f"step = {text!r}: expected between 1 minute and 6 hours", field="step")
    return step


# ----------------------------------------------------------------------------------------
# Interpolation
# ----------------------------------------------------------------------------------------

def _seconds(times: Sequence[datetime]) -> np.ndarray:
    return np.array([t.timestamp() for t in times], dtype=np.float64)


def _on_common_levels(profiles: Sequence[Profile]) -> bool:
    """True when the profiles share their levels above the lowest one (model output on
    pressure levels, whose lowest level is the surface, moving with the surface pressure)."""
    aloft = [pr.pressure_hpa[1:] for pr in profiles]
    longest = max(a.size for a in aloft)
    return np.unique(np.round(np.concatenate(aloft), 3)).size <= longest


def _common_grid(profiles: Sequence[Profile]) -> np.ndarray:
    """Terrain-following levels s = ln(p/p_sfc) (0 at the ground, negative upward) shared by all.

    Profiles on common pressure levels (model runs) keep their own levels: the grid is the
    s-levels of the one with the most levels.  Their union would hold a copy of every level
    per valid time (the surface pressure moves, so s moves) and be resampled to
    :data:`MAX_GRID_LEVELS`, ten times the work for no information (measured,
    bench/bench_ingest.py).  Other series use the union of their levels."""
    s_each = [np.log(pr.pressure_hpa / pr.pressure_hpa[0]) for pr in profiles]
    # The lowest of the tops (all profiles cover it), rounded as the levels are: unrounded it
    # would sit up to 5e-7 below its own rounded level and be added again beside it.
    s_top = round(max(float(s.min()) for s in s_each), 6)
    if len(profiles) > 1 and _on_common_levels(profiles):
        own = np.unique(max(s_each, key=len))
        own = own[(own >= s_top - 1e-6) & (own <= 0.0)]
        if s_top < own.min() - 1e-6 or own.size < 2:  # the common top is above its last level
            own = np.unique(np.append(own, s_top))
        return np.sort(own)[::-1]
    grid = np.unique(np.round(np.concatenate(s_each), 6))
    grid = grid[(grid >= s_top - 1e-9) & (grid <= 0.0)]
    if grid.size > MAX_GRID_LEVELS:
        grid = np.linspace(s_top, 0.0, MAX_GRID_LEVELS)
    return np.sort(grid)[::-1]  # surface first


def _on_grid(profiles: Sequence[Profile], grid: np.ndarray) -> dict[str, np.ndarray]:
    """Each profile's T, Td and z at the grid levels, ``(K, G)``; ln p_sfc ``(K,)``."""
    out = {k: np.empty((len(profiles), grid.size)) for k in ("t", "td", "z")}
    for k, pr in enumerate(profiles):
        s = np.log(pr.pressure_hpa / pr.pressure_hpa[0])
        x = -s  # increasing upward
        for key, values in (("t", pr.temperature_c), ("td", pr.dewpoint_c), ("z", pr.height_m)):
            out[key][k] = np.interp(-grid, x, values)
    out["ln_psfc"] = np.log([pr.pressure_hpa[0] for pr in profiles])
    return out


def _surface_series(profiles: Sequence[Profile]) -> dict[str, np.ndarray]:
    names = {"t2m": "temperature_2m_c", "td2m": "dewpoint_2m_c",
             "road": "road_surface_temperature_c", "rate": "precipitation_rate_mm_h",
             "wind": "wind_speed_m_s"}
    out = {}
    for key, attr in names.items():
        vals = []
        for pr in profiles:
            v = getattr(pr.surface, attr, None) if pr.surface is not None else None
            vals.append(np.nan if v is None else float(v))
        out[key] = np.array(vals)
    # A screen value falls back on the profile's lowest level.
    out["t2m"] = np.where(np.isfinite(out["t2m"]), out["t2m"],
                          [pr.temperature_c[0] for pr in profiles])
    out["td2m"] = np.where(np.isfinite(out["td2m"]), out["td2m"],
                           [pr.dewpoint_c[0] for pr in profiles])
    return out


def _bracket(t_steps: np.ndarray, t_prof: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Indices of the earlier bracketing profile and the weight of the later one."""
    k = np.clip(np.searchsorted(t_prof, t_steps, side="right") - 1, 0, max(len(t_prof) - 2, 0))
    if len(t_prof) == 1:
        return np.zeros(t_steps.shape, dtype=int), np.zeros(t_steps.shape)
    span = t_prof[k + 1] - t_prof[k]
    w = np.clip((t_steps - t_prof[k]) / span, 0.0, 1.0)
    return k, w


def _lerp(values: np.ndarray, k: np.ndarray, w: np.ndarray) -> np.ndarray:
    """Linear in time between bracketing rows ``values[k]`` and ``values[k+1]``."""
    if values.shape[0] == 1:
        return np.repeat(values[:1], k.size, axis=0)
    wb = w.reshape((-1,) + (1,) * (values.ndim - 1))
    return (1.0 - wb) * values[k] + wb * values[k + 1]


def _lerp_partial(values: np.ndarray, k: np.ndarray, w: np.ndarray) -> np.ndarray:
    """Like :func:`_lerp` for (K,) series with gaps: nearest known value where one side is NaN."""
    if values.size == 1:
        return np.repeat(values, k.size)
    a, b = values[k], values[k + 1]
    both = (1.0 - w) * a + w * b
    nearest = np.where(w < 0.5, np.where(np.isfinite(a), a, b), np.where(np.isfinite(b), b, a))
    return np.where(np.isfinite(a) & np.isfinite(b), both, nearest)


# ----------------------------------------------------------------------------------------
# Nowcast adjustments (pure array functions, documented in docs/nowcast.md)
# ----------------------------------------------------------------------------------------

def observation_weight(height_agl_m: ArrayLike, lead_h: ArrayLike,
                       efold_height_m: float = OBS_EFOLD_HEIGHT_M,
                       efold_lead_h: float = OBS_EFOLD_LEAD_H) -> np.ndarray:
    """Weight of the observation increment: ``exp(-h / H) exp(-lead / tau)`` (our choice)."""
    h = np.maximum(np.asarray(height_agl_m, dtype=np.float64), 0.0)
    lead = np.maximum(np.asarray(lead_h, dtype=np.float64), 0.0)
    return np.exp(-h / efold_height_m) * np.exp(-lead / efold_lead_h)


def onset_cooling(temperature_c: np.ndarray, dewpoint_c: np.ndarray, wetbulb_c: np.ndarray,
                  fraction: ArrayLike) -> tuple[np.ndarray, np.ndarray]:
    """Move T and Td toward the wet-bulb by ``fraction`` (0..1): evaporation conserves Tw.

    At fraction 1 the layer is saturated at its wet-bulb temperature, the limit of
    evaporative cooling at constant pressure (e.g. Wallace & Hobbs 2006, sec. 3.5.6).
    """
    f = np.clip(np.asarray(fraction, dtype=np.float64), 0.0, 1.0)
    t = temperature_c - f * (temperature_c - wetbulb_c)
    td = dewpoint_c + f * (wetbulb_c - dewpoint_c)
    return t, np.minimum(td, t)


def melting_cooling_k(precipitation_rate_mm_h: ArrayLike, hours: ArrayLike,
                      layer_mass_kg_m2: ArrayLike) -> np.ndarray:
    """Cooling of a layer by melting the snow falling into it, K (uniform over its mass).

    Energy balance: melting the liquid-equivalent flux rho_w P for a time dt takes
    ``L_f rho_w P dt`` J m-2 from a layer of mass ``rho_air dz`` per m2::

        dT = L_f rho_w P dt / (rho_air c_p dz)

    (Kain, Goss & Baldwin 2000, Wea. Forecasting 15, 700-714, discuss this
    "melting effect"; the formula is the plain energy balance.)  P in m/s here.
    """
    p_m_s = np.maximum(np.asarray(precipitation_rate_mm_h, dtype=np.float64), 0.0) / 3.6e6
    seconds = np.asarray(hours, dtype=np.float64) * 3600.0
    with np.errstate(divide="ignore", invalid="ignore"):
        mass = np.asarray(layer_mass_kg_m2, dtype=np.float64)
        return Lf * rho_w * p_m_s * seconds / (Cp_d * mass)


def _run_ids(mask: np.ndarray) -> np.ndarray:
    """Label contiguous True runs along axis 1 (1, 2, ...; 0 outside runs)."""
    start = mask & ~np.concatenate([np.zeros((mask.shape[0], 1), bool), mask[:, :-1]], axis=1)
    return np.where(mask, np.cumsum(start, axis=1), 0)


def apply_melting_cooling(pressure_hpa: np.ndarray, height_m: np.ndarray,
                          temperature_c: np.ndarray, rate_mm_h: ArrayLike,
                          hours: ArrayLike) -> tuple[np.ndarray, np.ndarray]:
    """Cool each melting layer (T > 0 with sub-zero air above it) by :func:`melting_cooling_k`,
    never below 0 degC.  Returns the new temperatures and the per-column largest cooling, K."""
    t = temperature_c
    n, L = t.shape
    warm = np.isfinite(t) & (t > 0.0)
    runs = _run_ids(warm)
    # Half-level thickness of every level, m.
    z = height_m
    zp = np.concatenate([z[:, :1], 0.5 * (z[:, 1:] + z[:, :-1]), z[:, -1:]], axis=1)
    dz = np.nan_to_num(np.diff(zp, axis=1), nan=0.0)
    rho = np.nan_to_num(pressure_hpa * 100.0 / (Rd * (t + T0)), nan=0.0)
    mass = np.zeros((n, L + 1))
    rows = np.repeat(np.arange(n), L)
    np.add.at(mass, (rows, runs.ravel()), (rho * dz).ravel())
    # A run is a melting layer when the level just above its top is below 0 degC (snow enters).
    above = np.concatenate([t[:, 1:], np.full((n, 1), np.nan)], axis=1)
    tops = warm & ~np.concatenate([warm[:, 1:], np.zeros((n, 1), bool)], axis=1)
    melting_run = np.zeros((n, L + 1), bool)
    top_rows, top_lvls = np.nonzero(tops & np.isfinite(above) & (above < 0.0))
    melting_run[top_rows, runs[top_rows, top_lvls]] = True
    cool = melting_cooling_k(np.asarray(rate_mm_h)[:, None], np.asarray(hours)[:, None], mass)
    cool = np.where(melting_run & (mass > 0), cool, 0.0)
    cool_lvl = np.take_along_axis(cool, runs, axis=1) * warm
    new_t = np.where(warm, np.maximum(t - cool_lvl, 0.0), t)
    return new_t, np.nanmax(np.where(warm, t - new_t, 0.0), axis=1, initial=0.0)


def _spells(precipitating: np.ndarray, hours_step: float, ongoing_at_start: bool):
    """Hours since the current precipitation spell began (at each step), and whether that spell
    began inside the timeline (an onset we can adjust for)."""
    n = precipitating.size
    since = np.zeros(n)
    onset_inside = np.zeros(n, bool)
    count = 0
    inside = False
    for i in range(n):  # n is the number of time steps (tens to hundreds): a scalar loop is fine
        if precipitating[i]:
            if count == 0:
                inside = not (i == 0 and ongoing_at_start)
            count += 1
            since[i] = (count - 1) * hours_step
            onset_inside[i] = inside
        else:
            count = 0
    return since, onset_inside


# ----------------------------------------------------------------------------------------
# Timeline, stage by stage
# ----------------------------------------------------------------------------------------

def _select_observation(observations, now: datetime) -> SurfaceObservation | None:
    best = None
    for o in observations or ():
        ob = o if isinstance(o, SurfaceObservation) else SurfaceObservation.from_mapping(o)
        if ob.time > now or (now - ob.time) > timedelta(hours=OBS_MAX_AGE_H):
            continue
        if best is None or ob.time > best.time:
            best = ob
    return best


def _iso(t: datetime) -> str:
    return t.astimezone(UTC).strftime("%Y-%m-%dT%H:%M:%SZ")


def _r(x, nd=2):
    x = float(x)
    return None if not math.isfinite(x) else round(x, nd)


def timeline_size(profiles: Sequence[Profile], *, now: datetime | None = None,
                  hours: float = 12.0, step: str | timedelta = "15min") -> tuple[int, int]:
    """``(steps, levels)`` of the timeline these arguments ask for, without diagnosing
    anything: its work is ``steps x levels`` per member (a work budget reads it first).

    Raises what :func:`validate_series` and :func:`step_times` raise for bad arguments.
    """
    profiles, step_td, _ = validate_series(profiles, hours, step, ())
    times = [pr.valid_time for pr in profiles]
    n_steps = len(step_times(times[0], times[-1], now or times[0], hours, step_td))
    return n_steps, int(_common_grid(profiles).size)


def validate_series(profiles: Iterable[Profile], hours: float, step: str | timedelta | float,
                    adjustments: Iterable[str] | None
                    ) -> tuple[list[Profile], timedelta, tuple[str, ...]]:
    """Validation stage: the profiles sorted by valid time, the step and the adjustments.

    Raises :class:`~ptype.errors.ProfileError` (no profile, a missing ``valid_time``, two
    profiles at one time) or :class:`~ptype.errors.OptionError` (``hours`` outside
    (0, 240], a bad step, an unknown adjustment), each naming the field.
    """
    profiles = list(profiles)
    if not profiles:
        raise ProfileError("profiles: none given; expected at least one profile with a valid_time",
                           field="profiles")
    for i, pr in enumerate(profiles):
        if pr.valid_time is None:
            raise ProfileError(f"profiles[{i}].valid_time: required for a timeline",
                               field=f"profiles[{i}].valid_time")
    profiles.sort(key=lambda pr: pr.valid_time)
    times = [pr.valid_time for pr in profiles]
    if len(set(times)) != len(times):
        dup = next(t for t in times if times.count(t) > 1)
        raise ProfileError(f"profiles: two profiles are valid at {_iso(dup)}; "
                           "expected one per time", field="profiles")
    if not (0 < hours <= 240):
        raise OptionError(f"hours = {hours}: expected more than 0 and at most 240", field="hours")
    step_td = parse_step(step)
    chosen = tuple(adjustments or ())
    unknown = [a for a in chosen if a not in ADJUSTMENTS]
    if unknown:
        raise OptionError(f"adjustments: unknown {unknown[0]!r}; expected some of "
                          f"{', '.join(ADJUSTMENTS)}", field="adjustments")
    return profiles, step_td, chosen


def step_times(first: datetime, last: datetime, now: datetime, hours: float,
               step: timedelta) -> list[datetime]:
    """Time-grid stage: steps ``now + k step`` within ``[now, now + hours]`` and the
    profiles' span ``[first, last]``."""
    end = min(now + timedelta(hours=hours), last)
    k0 = 0 if now >= first else math.ceil((first - now) / step)
    out = []
    k = k0
    while True:
        t = now + k * step
        if t > end:
            break
        out.append(t)
        k += 1
        if len(out) > 2000:
            raise OptionError("hours/step: more than 2000 steps requested; use a longer step",
                              field="step")
    return out


@dataclass(frozen=True)
class StepClock:
    """The time grid of a timeline: the step times, ``now`` and the step length."""

    times: tuple[datetime, ...]
    now: datetime
    step: timedelta

    @property
    def n(self) -> int:
        """Number of steps."""
        return len(self.times)

    @property
    def seconds(self) -> np.ndarray:
        """Step times as POSIX seconds, ``(n,)``."""
        return _seconds(self.times)

    @property
    def hours_step(self) -> float:
        """Step length, h."""
        return self.step.total_seconds() / 3600.0

    @property
    def lead_h(self) -> np.ndarray:
        """Lead time of every step after ``now``, h, ``(n,)``."""
        return (self.seconds - self.now.timestamp()) / 3600.0


@dataclass(frozen=True)
class StepColumns:
    """Columns and surface values at every step: ``(n, G)`` profiles on the common grid
    (surface first) and ``(n,)`` surface series (NaN where unknown)."""

    pressure_hpa: np.ndarray
    temperature_c: np.ndarray
    dewpoint_c: np.ndarray
    height_m: np.ndarray
    temperature_2m_c: np.ndarray
    dewpoint_2m_c: np.ndarray
    road_surface_temperature_c: np.ndarray
    precipitation_rate_mm_h: np.ndarray
    wind_speed_m_s: np.ndarray


def interpolate_to_steps(profiles: Sequence[Profile], clock: StepClock) -> StepColumns:
    """Interpolation stage: every profile on the common terrain-following grid
    ``s = ln(p / p_sfc)``, then linear in time between the bracketing profiles, level by
    level; ln p_sfc linear in time; surface series with gaps take the nearest known value.

    ``profiles`` are sorted by valid time (:func:`validate_series`).
    """
    k, w = _bracket(clock.seconds, _seconds([pr.valid_time for pr in profiles]))
    grid = _common_grid(profiles)
    on = _on_grid(profiles, grid)
    sfc = _surface_series(profiles)
    return StepColumns(
        pressure_hpa=np.exp(_lerp(on["ln_psfc"], k, w)[:, None] + grid[None, :]),
        temperature_c=_lerp(on["t"], k, w), dewpoint_c=_lerp(on["td"], k, w),
        height_m=_lerp(on["z"], k, w),
        temperature_2m_c=_lerp_partial(sfc["t2m"], k, w),
        dewpoint_2m_c=_lerp_partial(sfc["td2m"], k, w),
        road_surface_temperature_c=_lerp_partial(sfc["road"], k, w),
        precipitation_rate_mm_h=_lerp_partial(sfc["rate"], k, w),
        wind_speed_m_s=_lerp_partial(sfc["wind"], k, w))


def _blend_series(current: np.ndarray, value: float, w_lead: np.ndarray,
                  lead_h: np.ndarray) -> np.ndarray:
    """Observed ``value`` blended into a non-negative series (rate, wind) with weight
    ``w_lead``; where the forecast has no value the observation persists for one e-folding
    lead time (our choice)."""
    blended = np.where(np.isfinite(current), w_lead * value + (1 - w_lead) * current,
                       np.where(lead_h <= OBS_EFOLD_LEAD_H, value, np.nan))
    return np.maximum(blended, 0.0)


def adjust_for_observation(cols: StepColumns, obs: SurfaceObservation,
                           profiles: Sequence[Profile], clock: StepClock) -> StepColumns:
    """Observation-blending stage (a): the observed-minus-forecast increment at the
    observation time, weighted by :func:`observation_weight` (height above ground and lead
    after the observation), added to T and Td aloft and at the screen; road temperature,
    precipitation rate and wind blended at the surface.  Td stays at or below T.
    """
    sfc = _surface_series(profiles)
    ko, wo = _bracket(np.array([obs.time.timestamp()]),
                      _seconds([pr.valid_time for pr in profiles]))
    lead_h = (clock.seconds - obs.time.timestamp()) / 3600.0
    w_lead = observation_weight(0.0, lead_h)
    w_lvl = observation_weight(cols.height_m - cols.height_m[:, :1], lead_h[:, None])
    T, Td = cols.temperature_c, cols.dewpoint_c
    t2m, td2m = cols.temperature_2m_c, cols.dewpoint_2m_c
    road, rate, wind = (cols.road_surface_temperature_c, cols.precipitation_rate_mm_h,
                        cols.wind_speed_m_s)
    if obs.air_temperature_c is not None:
        d = obs.air_temperature_c - _lerp_partial(sfc["t2m"], ko, wo)[0]
        T = T + w_lvl * d
        t2m = t2m + w_lead * d
    if obs.dewpoint_c is not None:
        d = obs.dewpoint_c - _lerp_partial(sfc["td2m"], ko, wo)[0]
        Td = Td + w_lvl * d
        td2m = td2m + w_lead * d
    Td = np.minimum(Td, T)
    td2m = np.minimum(td2m, t2m)
    if obs.road_surface_temperature_c is not None:
        model_road = _lerp_partial(sfc["road"], ko, wo)[0]
        if math.isfinite(model_road):
            road = road + w_lead * (obs.road_surface_temperature_c - model_road)
        else:
            # No forecast road temperature: persist the observed one, following the
            # forecast screen-temperature trend (our choice).
            road = obs.road_surface_temperature_c + (t2m - t2m[0])
    if obs.precipitation_rate_mm_h is not None:
        rate = _blend_series(rate, obs.precipitation_rate_mm_h, w_lead, lead_h)
    if obs.wind_speed_m_s is not None:
        wind = _blend_series(wind, obs.wind_speed_m_s, w_lead, lead_h)
    return replace(cols, temperature_c=T, dewpoint_c=Td, temperature_2m_c=t2m,
                   dewpoint_2m_c=td2m, road_surface_temperature_c=road,
                   precipitation_rate_mm_h=rate, wind_speed_m_s=wind)


@dataclass(frozen=True)
class Spells:
    """Precipitation at every step, ``(n,)``: rate known, precipitating, hours since the
    current spell began, and whether that spell began inside the timeline."""

    known: np.ndarray
    precipitating: np.ndarray
    since_h: np.ndarray
    onset_inside: np.ndarray


def precipitation_spells(rate_mm_h: np.ndarray, hours_step: float) -> Spells:
    """Spells of precipitation (rate at or above :data:`PRECIP_THRESHOLD_MM_H`).

    A spell already under way at the first step is in the forecast (and the observation)
    already: only onsets inside the timeline count for the onset adjustment.
    """
    known = np.isfinite(rate_mm_h)
    precipitating = known & (rate_mm_h >= PRECIP_THRESHOLD_MM_H)
    since_h, onset_inside = _spells(precipitating, hours_step, bool(precipitating[0]))
    return Spells(known, precipitating, since_h, onset_inside)


def lead_fade(clock: StepClock) -> np.ndarray:
    """Weight of the onset and melting adjustments at every step, ``(n,)``.

    Both correct what a forecast profile tends to miss near the start; at longer leads the
    forecast's own evolution (which carries some of this cooling) stands, so both fade with
    lead time like the observation increment (same e-folding, our choice).
    """
    return observation_weight(0.0, clock.lead_h)


def adjust_for_onset(cols: StepColumns, spells: Spells, fade: np.ndarray,
                     hours_step: float) -> tuple[StepColumns, np.ndarray]:
    """Onset-cooling stage (b): after an onset inside the timeline, the sub-cloud levels
    (below the first level with RH >= :data:`CLOUD_BASE_RH_PCT`) and the screen move toward
    their wet-bulb temperature by ``(1 - exp(-(t + step) / tau)) * fade`` (:func:`onset_cooling`).

    Returns the new columns and the steps cooled by more than 0.05 K, ``(n,)``.
    """
    if not spells.onset_inside.any():
        return cols, np.zeros(spells.onset_inside.shape, bool)
    P, T, Td = cols.pressure_hpa, cols.temperature_c, cols.dewpoint_c
    t2m, td2m = cols.temperature_2m_c, cols.dewpoint_2m_c
    rh = thermo.relative_humidity_pct(T, Td)
    cloudy = rh >= CLOUD_BASE_RH_PCT
    first_cloud = np.where(cloudy.any(axis=1), np.argmax(cloudy, axis=1), T.shape[1])
    sub_cloud = np.arange(T.shape[1])[None, :] < first_cloud[:, None]
    frac = np.where(spells.onset_inside,
                    1.0 - np.exp(-(spells.since_h + hours_step) / ONSET_EFOLD_H), 0.0)
    frac = frac * fade
    tw = thermo.wet_bulb_temperature(P, T, Td)
    T_new, Td_new = onset_cooling(T, Td, tw, np.where(sub_cloud, frac[:, None], 0.0))
    changed = np.nanmax(np.abs(T_new - T), axis=1, initial=0.0) > 0.05
    t2m_new, td2m_new = onset_cooling(t2m, td2m, thermo.wet_bulb_temperature(
        P[:, 0], t2m, td2m), np.where(sub_cloud[:, 0], frac, 0.0))
    return replace(cols, temperature_c=T_new, dewpoint_c=Td_new, temperature_2m_c=t2m_new,
                   dewpoint_2m_c=td2m_new), changed


def adjust_for_melting(cols: StepColumns, spells: Spells,
                       fade: np.ndarray) -> tuple[StepColumns, np.ndarray]:
    """Melting-cooling stage (c): every melting layer of a precipitating step is cooled by
    :func:`apply_melting_cooling` for the hours the column has been precipitating since the
    spell began or since now, whichever is later, capped at :data:`MELTING_MAX_HOURS` and
    multiplied by ``fade``.  Td stays at or below T.

    Returns the new columns and the steps cooled by more than 0.05 K, ``(n,)``.
    """
    precipitating = spells.precipitating
    if not precipitating.any():
        return cols, np.zeros(precipitating.shape, bool)
    dt_h = np.where(precipitating, np.minimum(spells.since_h, MELTING_MAX_HOURS), 0.0) * fade
    rate = np.where(precipitating, cols.precipitation_rate_mm_h, 0.0)
    T, cooled = apply_melting_cooling(cols.pressure_hpa, cols.height_m, cols.temperature_c,
                                      rate, dt_h)
    return replace(cols, temperature_c=T, dewpoint_c=np.minimum(cols.dewpoint_c, T)), \
        cooled > 0.05


@dataclass(frozen=True)
class StepDiagnosis:
    """What the engine says at every step.

    ``codes`` is the type reaching the ground (NONE where the rate is known to be below
    :data:`PRECIP_THRESHOLD_MM_H`), ``codes_if_precipitating`` the engine's type whatever
    the rate; ``probabilities`` the engine's per-code probabilities ``(n, len(Code))``
    (one-hot without members) and ``effective_probabilities`` those with dry steps set to
    NONE; ``fields`` the engine's diagnostic fields; ``columns`` what the engine ran on.
    """

    columns: Columns
    codes: np.ndarray
    codes_if_precipitating: np.ndarray
    probabilities: np.ndarray
    effective_probabilities: np.ndarray
    fields: Mapping[str, np.ndarray]


def diagnose_steps(cols: StepColumns, spells: Spells, members: int, seed: int | None,
                   methods: Iterable[str] | str | None = None,
                   calibration: Any = None) -> StepDiagnosis:
    """Engine stage: all step columns through :func:`ptype.engine.run.run_columns` in one
    vectorised pass (control and Monte-Carlo members; probabilities calibrated when a
    :class:`ptype.engine.calibration.Calibration` is given); dry steps become NONE."""
    from ptype.engine.run import run_columns

    columns = Columns.from_arrays(
        cols.pressure_hpa, cols.temperature_c, cols.dewpoint_c, cols.height_m,
        surface_height_m=cols.height_m[:, 0], surface_temperature_c=cols.temperature_2m_c,
        surface_dewpoint_c=cols.dewpoint_2m_c,
        road_surface_temperature_c=cols.road_surface_temperature_c,
        precipitation_rate_mm_h=cols.precipitation_rate_mm_h,
        wind_speed_m_s=cols.wind_speed_m_s)
    member_levels = members * columns.pressure_hpa.shape[1]
    per_pass = max(1, MAX_MEMBER_LEVELS_PER_PASS // max(member_levels, 1))
    run = run_columns(columns, members, seed, methods, calibration=calibration,
                      batch_columns=per_pass)
    codes_wet = np.asarray(run.codes, dtype=int)
    probs = run.probabilities if members else np.eye(len(Code))[codes_wet]
    dry = spells.known & ~spells.precipitating
    codes = np.where(dry, int(Code.NONE), codes_wet)
    probs_eff = np.where(dry[:, None], 0.0, probs)
    probs_eff[:, int(Code.NONE)] = np.where(dry, 1.0, probs_eff[:, int(Code.NONE)])
    return StepDiagnosis(columns, codes, codes_wet, probs, probs_eff, run.fields)


def hazards_at_steps(diagnosis: StepDiagnosis, cols: StepColumns, spells: Spells,
                     hours_step: float) -> dict[str, np.ndarray]:
    """Hazard stage: :func:`ptype.roads.hazards.step_hazards` at every step.

    Hoar frost is a dry-weather deposit; while precipitation falls its hazard is the
    precipitation's own (freezing on the road, snow), so frost is cleared there.
    """
    hz = hazards.step_hazards(diagnosis.codes, diagnosis.effective_probabilities,
                              cols.road_surface_temperature_c,
                              diagnosis.columns.surface_dewpoint_c,
                              cols.precipitation_rate_mm_h, cols.wind_speed_m_s, hours_step)
    hz["frost"] = hz["frost"] & ~spells.precipitating
    return hz


def adjustment_notes(applied: Sequence[tuple[str, np.ndarray]], n: int) -> list[list[str]]:
    """Per step, the names of the adjustments that changed it, in the order applied."""
    return [[name for name, mask in applied if mask[i]] for i in range(n)]


def _step_hazards_record(hz: Mapping[str, np.ndarray], i: int) -> dict[str, Any]:
    return {
        "freezing_on_road": bool(hz["freezing_on_road"][i]),
        "freezing_probability": _r(hz["freezing_probability"][i], 3),
        "frost": bool(hz["frost"][i]),
        "snow": bool(hz["snow"][i]),
        "snow_probability": _r(hz["snow_probability"][i], 3),
        "snow_cm": _r(hz["snow_cm"][i], 3),
        "ice_pellets": bool(hz["ice_pellets"][i]),
        "ice_pellets_probability": _r(hz["ice_pellets_probability"][i], 3),
        "ice_pellets_cm": _r(hz["ice_pellets_cm"][i], 3),
        "ice_accretion_mm": _r(hz["ice_accretion_mm"][i], 3),
        "flat_glaze_mm": _r(hz["flat_glaze_mm"][i], 3),
    }


def step_records(clock: StepClock, cols: StepColumns, spells: Spells,
                 diagnosis: StepDiagnosis, hz: Mapping[str, np.ndarray],
                 notes: Sequence[Sequence[str]]) -> list[dict[str, Any]]:
    """Step-record stage: one JSON-ready dict per step (type, label, GRIB2 code 4.201,
    probabilities, hazards, surface values, layer areas, adjustments applied)."""
    lead_h = clock.lead_h
    probs = diagnosis.probabilities
    td2m = diagnosis.columns.surface_dewpoint_c
    fields = diagnosis.fields
    steps = []
    for i in range(clock.n):
        code = Code(int(diagnosis.codes[i]))
        steps.append({
            "valid_time": _iso(clock.times[i]),
            "lead_hours": round(lead_h[i], 3),
            "ptype": code.name, "ptype_label": LABELS[code], "grib2_code": GRIB2_4201[code],
            "ptype_if_precipitating": Code(int(diagnosis.codes_if_precipitating[i])).name,
            "precipitating": None if not spells.known[i] else bool(spells.precipitating[i]),
            "probabilities": {c.name: round(float(probs[i, c]), 3) for c in Code
                              if np.isfinite(probs[i, c]) and probs[i, c] > 0},
            "hazards": _step_hazards_record(hz, i),
            "surface": {
                "temperature_2m_c": _r(cols.temperature_2m_c[i]), "dewpoint_2m_c": _r(td2m[i]),
                "frost_point_c": _r(hazards.frost_point_c(td2m[i])),
                "road_surface_temperature_c": _r(cols.road_surface_temperature_c[i]),
                "precipitation_rate_mm_h": _r(cols.precipitation_rate_mm_h[i]),
                "wind_speed_m_s": _r(cols.wind_speed_m_s[i]),
            },
            "warm_area_j_kg": _r(fields["warm_area_j_kg"][i], 1),
            "cold_area_j_kg": _r(fields["cold_area_j_kg"][i], 1),
            "wetbulb_zero_height_m": _r(fields["wetbulb_zero_height_m"][i], 0),
            "adjustments": list(notes[i]),
        })
    return steps


def _timeline_header(now: datetime, step: timedelta, hours: float, times: Sequence[datetime],
                     adjustments: Sequence[str],
                     obs: SurfaceObservation | None) -> dict[str, Any]:
    """The inputs a timeline reports with its steps, and the caution."""
    return {"now": _iso(now), "step_minutes": step.total_seconds() / 60, "hours": hours,
            "issued_profiles": [_iso(t) for t in times], "adjustments": list(adjustments),
            "caution": CAUTION,
            "observation": None if obs is None else {
                k: (_iso(v) if isinstance(v, datetime) else v) for k, v in obs.__dict__.items()}}


def _calibration_summary(calibration: Any, members: int) -> dict[str, Any]:
    from ptype.engine.calibration import UNCALIBRATED
    if calibration is None or not members:
        return dict(UNCALIBRATED)
    return calibration.summary() | {"calibrated": True}


def build_timeline(profiles: Sequence[Profile], *, now: datetime | None = None,
                   hours: float = 12.0, step: str | timedelta = "15min",
                   observations: Iterable[Mapping[str, Any] | SurfaceObservation] | None = None,
                   adjustments: Iterable[str] | None = ADJUSTMENTS, members: int = 30,
                   seed: int | None = 0, methods: Iterable[str] | str | None = None,
                   calibration: Any = None) -> dict[str, Any]:
    """Build a timeline from a series of profiles (one forecast issue) and optional observations.

    Parameters
    ----------
    profiles : validated profiles, each with a ``valid_time``; any order.
    now : start of the timeline (default: the earliest valid time).
    hours : length, h.  step : step length (``15min``, ``1h``...).
    observations : surface observations; the latest one at or before ``now`` (at most
        :data:`OBS_MAX_AGE_H` old) is blended in.
    adjustments : which of :data:`ADJUSTMENTS` to apply.
    members, seed : Monte-Carlo members for the probabilities (0 = none).
    calibration : a :class:`ptype.engine.calibration.Calibration` for the probabilities
        (the timeline's ``calibration`` says which, or "uncalibrated").

    Returns a JSON-ready dict: ``steps``, ``transitions``, ``totals``, ``caution`` and the
    inputs used (``issued_profiles``, ``observation``, ``adjustments``).

    The stages, in order: :func:`validate_series`, :func:`step_times`,
    :func:`interpolate_to_steps`, :func:`adjust_for_observation`, :func:`adjust_for_onset`,
    :func:`adjust_for_melting`, :func:`diagnose_steps`, :func:`hazards_at_steps`,
    :func:`step_records`, :func:`transitions` and :func:`timeline_totals`.
    """
    profiles, step_td, adjustments = validate_series(profiles, hours, step, adjustments)
    times = [pr.valid_time for pr in profiles]
    now = now or times[0]
    clock = StepClock(tuple(step_times(times[0], times[-1], now, hours, step_td)), now, step_td)
    obs = _select_observation(observations, now) if "observation" in adjustments else None
    base = _timeline_header(now, step_td, hours, times, adjustments, obs)
    base["calibration"] = _calibration_summary(calibration, members)
    if not clock.n:
        base.update(steps=[], transitions=[], totals=timeline_totals([], step_td),
                    message=f"no profile covers {_iso(now)} to "
                            f"{_iso(now + timedelta(hours=hours))}")
        return base

    cols = interpolate_to_steps(profiles, clock)
    applied: list[tuple[str, np.ndarray]] = []
    if obs is not None:
        cols = adjust_for_observation(cols, obs, profiles, clock)
        applied.append(("observation", np.ones(clock.n, bool)))
    spells = precipitation_spells(cols.precipitation_rate_mm_h, clock.hours_step)
    fade = lead_fade(clock)
    if "onset" in adjustments:
        cols, changed = adjust_for_onset(cols, spells, fade, clock.hours_step)
        applied.append(("onset", changed))
    if "melting" in adjustments:
        cols, changed = adjust_for_melting(cols, spells, fade)
        applied.append(("melting", changed))

    diagnosis = diagnose_steps(cols, spells, members, seed, methods, calibration)
    hz = hazards_at_steps(diagnosis, cols, spells, clock.hours_step)
    steps = step_records(clock, cols, spells, diagnosis, hz, adjustment_notes(applied, clock.n))
    base.update(steps=steps, transitions=transitions(steps),
                totals=timeline_totals(steps, step_td))
    return base


def transitions(steps: Sequence[Mapping[str, Any]]) -> list[dict[str, str]]:
    """Changes of type between consecutive steps: ``{"time", "from", "to"}``."""
    out = []
    for prev, cur in itertools.pairwise(steps):
        if prev["ptype"] != cur["ptype"]:
            out.append({"time": cur["valid_time"], "from": prev["ptype"], "to": cur["ptype"]})
    return out


def timeline_totals(steps: Sequence[Mapping[str, Any]], step: timedelta) -> dict[str, Any]:
    """Totals over the steps: amounts (ice accretion, flat glaze, snow; ``amounts_complete``
    is False when a step's amount is unknown), hours of each hazard and of each type, and
    the largest freezing probability."""
    h = step.total_seconds() / 3600.0

    def total(key):
        vals = [s["hazards"][key] for s in steps]
        known = [v for v in vals if v is not None]
        return {"value": round(sum(known), 2), "complete": len(known) == len(vals)}

    hours_by_type: dict[str, float] = {}
    for s in steps:
        hours_by_type[s["ptype"]] = round(hours_by_type.get(s["ptype"], 0.0) + h, 3)
    acc = total("ice_accretion_mm")
    glaze = total("flat_glaze_mm")
    snow = total("snow_cm")
    pellets = total("ice_pellets_cm")

    def hazard_hours(key):
        return round(h * sum(s["hazards"][key] for s in steps), 3)

    return {
        "ice_accretion_mm": acc["value"], "flat_glaze_mm": glaze["value"],
        "snow_cm": snow["value"], "ice_pellets_cm": pellets["value"],
        "amounts_complete": (acc["complete"] and glaze["complete"] and snow["complete"]
                             and pellets["complete"]),
        "freezing_on_road_hours": hazard_hours("freezing_on_road"),
        "frost_hours": hazard_hours("frost"),
        "snow_hours": hazard_hours("snow"),
        "ice_pellets_hours": hazard_hours("ice_pellets"),
        "max_freezing_probability": max((s["hazards"]["freezing_probability"] or 0.0
                                         for s in steps), default=0.0),
        "hours_by_type": hours_by_type,
    }
