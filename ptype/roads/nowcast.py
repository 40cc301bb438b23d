"""Timelines: a series of forecast profiles turned into a step-by-step type, hazard and alert basis.

Pipeline (all steps in one vectorised pass; see ``docs/nowcast.md`` for the equations)::

    profiles of one issue (sorted by valid time)
      -> common terrain-following grid s = ln(p / p_sfc), linear in time level by level
      -> nowcast adjustments  (a) surface observation blended in, decaying with height and lead
                              (b) onset cooling of dry sub-cloud air toward its wet-bulb
                              (c) melting-layer cooling by heavy precipitation (Kain et al. 2000)
      -> Columns -> ptype.engine.run.run_columns (control and members)
      -> ptype.roads.hazards.step_hazards -> steps, transitions, totals

The adjustment constants are our own choices (labelled so), not published values.
"""

from __future__ import annotations

import itertools
import math
import re
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass
from datetime import UTC, datetime, timedelta
from typing import Any

import numpy as np

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


def _common_grid(profiles: Sequence[Profile]) -> np.ndarray:
    """Terrain-following levels s = ln(p/p_sfc) (0 at the ground, negative upward) shared by all."""
    s_each = [np.log(pr.pressure_hpa / pr.pressure_hpa[0]) for pr in profiles]
    s_top = max(float(s.min()) for s in s_each)  # the lowest of the tops: all cover it
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

def observation_weight(height_agl_m, lead_h, efold_height_m=OBS_EFOLD_HEIGHT_M,
                       efold_lead_h=OBS_EFOLD_LEAD_H):
    """Weight of the observation increment: ``exp(-h / H) exp(-lead / tau)`` (our choice)."""
    h = np.maximum(np.asarray(height_agl_m, dtype=np.float64), 0.0)
    lead = np.maximum(np.asarray(lead_h, dtype=np.float64), 0.0)
    return np.exp(-h / efold_height_m) * np.exp(-lead / efold_lead_h)


def onset_cooling(temperature_c, dewpoint_c, wetbulb_c, fraction):
    """Move T and Td toward the wet-bulb by ``fraction`` (0..1): evaporation conserves Tw.

    At fraction 1 the layer is saturated at its wet-bulb temperature, the limit of
    evaporative cooling at constant pressure (e.g. Wallace & Hobbs 2006, sec. 3.5.6).
    """
    f = np.clip(np.asarray(fraction, dtype=np.float64), 0.0, 1.0)
    t = temperature_c - f * (temperature_c - wetbulb_c)
    td = dewpoint_c + f * (wetbulb_c - dewpoint_c)
    return t, np.minimum(td, t)


def melting_cooling_k(precipitation_rate_mm_h, hours, layer_mass_kg_m2):
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
        return Lf * rho_w * p_m_s * seconds / (Cp_d * np.asarray(layer_mass_kg_m2, dtype=np.float64))


def _run_ids(mask: np.ndarray) -> np.ndarray:
    """Label contiguous True runs along axis 1 (1, 2, ...; 0 outside runs)."""
    start = mask & ~np.concatenate([np.zeros((mask.shape[0], 1), bool), mask[:, :-1]], axis=1)
    return np.where(mask, np.cumsum(start, axis=1), 0)


def apply_melting_cooling(pressure_hpa, height_m, temperature_c, rate_mm_h, hours):
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
# Timeline
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


def step_times(first: datetime, last: datetime, now: datetime, hours: float,
               step: timedelta) -> list[datetime]:
    """Steps ``now + k step`` within ``[now, now + hours]`` and the profiles' span."""
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


def build_timeline(profiles: Sequence[Profile], *, now: datetime | None = None,
                   hours: float = 12.0, step: str | timedelta = "15min",
                   observations: Iterable[Mapping[str, Any] | SurfaceObservation] | None = None,
                   adjustments: Iterable[str] | None = ADJUSTMENTS, members: int = 30,
                   seed: int | None = 0, methods=None) -> dict[str, Any]:
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

    Returns a JSON-ready dict: ``steps``, ``transitions``, ``totals``, ``caution`` and the
    inputs used (``issued_profiles``, ``observation``, ``adjustments``).
    """
    from ptype.engine.run import run_columns

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
        raise ProfileError(f"profiles: two profiles are valid at {_iso(dup)}; expected one per time",
                           field="profiles")
    if not (0 < hours <= 240):
        raise OptionError(f"hours = {hours}: expected more than 0 and at most 240", field="hours")
    step_td = parse_step(step)
    adjustments = tuple(adjustments or ())
    unknown = [a for a in adjustments if a not in ADJUSTMENTS]
    if unknown:
        raise OptionError(f"adjustments: unknown {unknown[0]!r}; expected some of "
                          f"{', '.join(ADJUSTMENTS)}", field="adjustments")
    now = now or times[0]
    when = step_times(times[0], times[-1], now, hours, step_td)
    base = {"now": _iso(now), "step_minutes": step_td.total_seconds() / 60, "hours": hours,
            "issued_profiles": [_iso(t) for t in times], "adjustments": list(adjustments),
            "caution": CAUTION}
    obs = _select_observation(observations, now) if "observation" in adjustments else None
    base["observation"] = None if obs is None else {
        k: (_iso(v) if isinstance(v, datetime) else v) for k, v in obs.__dict__.items()}
    if not when:
        base.update(steps=[], transitions=[], totals=_totals([], step_td),
                    message=f"no profile covers {_iso(now)} to "
                            f"{_iso(now + timedelta(hours=hours))}")
        return base

    n = len(when)
    h_step = step_td.total_seconds() / 3600.0
    t_steps = _seconds(when)
    t_prof = _seconds(times)
    k, w = _bracket(t_steps, t_prof)
    grid = _common_grid(profiles)
    on = _on_grid(profiles, grid)
    T = _lerp(on["t"], k, w)
    Td = _lerp(on["td"], k, w)
    Z = _lerp(on["z"], k, w)
    P = np.exp(_lerp(on["ln_psfc"], k, w)[:, None] + grid[None, :])
    sfc = _surface_series(profiles)
    t2m = _lerp_partial(sfc["t2m"], k, w)
    td2m = _lerp_partial(sfc["td2m"], k, w)
    road = _lerp_partial(sfc["road"], k, w)
    rate = _lerp_partial(sfc["rate"], k, w)
    wind = _lerp_partial(sfc["wind"], k, w)
    notes: list[list[str]] = [[] for _ in range(n)]
    hagl = Z - Z[:, :1]

    # (a) observation increments.
    if obs is not None:
        ko, wo = _bracket(np.array([obs.time.timestamp()]), t_prof)
        lead_h = (t_steps - obs.time.timestamp()) / 3600.0
        w_lead = observation_weight(0.0, lead_h)
        w_lvl = observation_weight(hagl, lead_h[:, None])
        model_t2m = _lerp_partial(sfc["t2m"], ko, wo)[0]
        model_td2m = _lerp_partial(sfc["td2m"], ko, wo)[0]
        if obs.air_temperature_c is not None:
            d = obs.air_temperature_c - model_t2m
            T = T + w_lvl * d
            t2m = t2m + w_lead * d
        if obs.dewpoint_c is not None:
            d = obs.dewpoint_c - model_td2m
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
        for attr, series in (("precipitation_rate_mm_h", "rate"), ("wind_speed_m_s", "wind")):
            value = getattr(obs, attr)
            if value is None:
                continue
            cur = rate if series == "rate" else wind
            blended = np.where(np.isfinite(cur), w_lead * value + (1 - w_lead) * cur,
                               np.where(lead_h <= OBS_EFOLD_LEAD_H, value, np.nan))
            if series == "rate":
                rate = np.maximum(blended, 0.0)
            else:
                wind = np.maximum(blended, 0.0)
        for i in range(n):
            notes[i].append("observation")

    known = np.isfinite(rate)
    precipitating = known & (rate >= PRECIP_THRESHOLD_MM_H)
    # A spell already under way at the first step is in the forecast (and the observation)
    # already: only onsets inside the timeline are adjusted.
    ongoing = bool(precipitating[0])
    since_h, onset_inside = _spells(precipitating, h_step, ongoing)
    # (b) and (c) correct what a forecast profile tends to miss near the start; at longer
    # leads the forecast's own evolution (which carries some of this cooling) stands, so both
    # fade with lead time like the observation increment (same e-folding, our choice).
    lead_weight = observation_weight(0.0, (t_steps - now.timestamp()) / 3600.0)

    # (b) onset cooling of the dry sub-cloud layer.
    if "onset" in adjustments and onset_inside.any():
        rh = thermo.relative_humidity_pct(T, Td)
        cloudy = rh >= CLOUD_BASE_RH_PCT
        first_cloud = np.where(cloudy.any(axis=1), np.argmax(cloudy, axis=1), T.shape[1])
        sub_cloud = np.arange(T.shape[1])[None, :] < first_cloud[:, None]
        frac = np.where(onset_inside, 1.0 - np.exp(-(since_h + h_step) / ONSET_EFOLD_H), 0.0)
        frac = frac * lead_weight
        tw = thermo.wet_bulb_temperature(P, T, Td)
        f = np.where(sub_cloud, frac[:, None], 0.0)
        T_new, Td_new = onset_cooling(T, Td, tw, f)
        changed = np.nanmax(np.abs(T_new - T), axis=1, initial=0.0) > 0.05
        T, Td = T_new, Td_new
        t2m_new, td2m_new = onset_cooling(t2m, td2m, thermo.wet_bulb_temperature(
            P[:, 0], t2m, td2m), np.where(sub_cloud[:, 0], frac, 0.0))
        t2m, td2m = t2m_new, td2m_new
        for i in np.nonzero(changed)[0]:
            notes[i].append("onset")

    # (c) melting-layer cooling.
    if "melting" in adjustments and precipitating.any():
        # Time the column has been precipitating since the spell began or since now,
        # whichever is later (since_h counts from the first precipitating step of the spell
        # inside the timeline), capped, then faded with lead time.
        dt_h = np.where(precipitating, np.minimum(since_h, MELTING_MAX_HOURS), 0.0) * lead_weight
        T_new, cooled = apply_melting_cooling(P, Z, T, np.where(precipitating, rate, 0.0), dt_h)
        T = T_new
        Td = np.minimum(Td, T)
        for i in np.nonzero(cooled > 0.05)[0]:
            notes[i].append("melting")

    columns = Columns.from_arrays(P, T, Td, Z, surface_height_m=Z[:, 0],
                                  surface_temperature_c=t2m, surface_dewpoint_c=td2m,
                                  road_surface_temperature_c=road, precipitation_rate_mm_h=rate,
                                  wind_speed_m_s=wind)
    run = run_columns(columns, members, seed, methods)
    codes_wet = np.asarray(run.codes, dtype=int)
    probs = run.probabilities if members else np.eye(len(Code))[codes_wet]
    dry = known & ~precipitating
    codes = np.where(dry, int(Code.NONE), codes_wet)
    probs_eff = np.where(dry[:, None], 0.0, probs)
    probs_eff[:, int(Code.NONE)] = np.where(dry, 1.0, probs_eff[:, int(Code.NONE)])
    hz = hazards.step_hazards(codes, probs_eff, road, columns.surface_dewpoint_c,
                              rate, wind, h_step)
    # Hoar frost is a dry-weather deposit; while precipitation falls its hazard is the
    # precipitation's own (freezing on the road, snow).
    hz["frost"] = hz["frost"] & ~precipitating
    steps = []
    for i in range(n):
        code = Code(int(codes[i]))
        steps.append({
            "valid_time": _iso(when[i]),
            "lead_hours": round((t_steps[i] - now.timestamp()) / 3600.0, 3),
            "ptype": code.name, "ptype_label": LABELS[code], "grib2_code": GRIB2_4201[code],
            "ptype_if_precipitating": Code(int(codes_wet[i])).name,
            "precipitating": None if not known[i] else bool(precipitating[i]),
            "probabilities": {c.name: round(float(probs[i, c]), 3) for c in Code
                              if np.isfinite(probs[i, c]) and probs[i, c] > 0},
            "hazards": {
                "freezing_on_road": bool(hz["freezing_on_road"][i]),
                "freezing_probability": _r(hz["freezing_probability"][i], 3),
                "frost": bool(hz["frost"][i]),
                "snow": bool(hz["snow"][i]),
                "snow_probability": _r(hz["snow_probability"][i], 3),
                "snow_cm": _r(hz["snow_cm"][i], 3),
                "ice_accretion_mm": _r(hz["ice_accretion_mm"][i], 3),
                "flat_glaze_mm": _r(hz["flat_glaze_mm"][i], 3),
            },
            "surface": {
                "temperature_2m_c": _r(t2m[i]), "dewpoint_2m_c": _r(columns.surface_dewpoint_c[i]),
                "frost_point_c": _r(hazards.frost_point_c(columns.surface_dewpoint_c[i])),
                "road_surface_temperature_c": _r(road[i]),
                "precipitation_rate_mm_h": _r(rate[i]), "wind_speed_m_s": _r(wind[i]),
            },
            "warm_area_j_kg": _r(run.fields["warm_area_j_kg"][i], 1),
            "cold_area_j_kg": _r(run.fields["cold_area_j_kg"][i], 1),
            "wetbulb_zero_height_m": _r(run.fields["wetbulb_zero_height_m"][i], 0),
            "adjustments": notes[i],
        })
    base.update(steps=steps, transitions=transitions(steps), totals=_totals(steps, step_td))
    return base


def transitions(steps: Sequence[Mapping[str, Any]]) -> list[dict[str, str]]:
    """Changes of type between consecutive steps: ``{"time", "from", "to"}``."""
    out = []
    for prev, cur in itertools.pairwise(steps):
        if prev["ptype"] != cur["ptype"]:
            out.append({"time": cur["valid_time"], "from": prev["ptype"], "to": cur["ptype"]})
    return out


def _totals(steps: Sequence[Mapping[str, Any]], step: timedelta) -> dict[str, Any]:
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
    return {
        "ice_accretion_mm": acc["value"], "flat_glaze_mm": glaze["value"], "snow_cm": snow["value"],
        "amounts_complete": acc["complete"] and glaze["complete"] and snow["complete"],
        "freezing_on_road_hours": round(h * sum(s["hazards"]["freezing_on_road"] for s in steps), 3),
        "frost_hours": round(h * sum(s["hazards"]["frost"] for s in steps), 3),
        "snow_hours": round(h * sum(s["hazards"]["snow"] for s in steps), 3),
        "max_freezing_probability": max((s["hazards"]["freezing_probability"] or 0.0
                                         for s in steps), default=0.0),
        "hours_by_type": hours_by_type,
    }
