"""From a list of level mappings to the checked arrays of a :class:`~ptype.profile.Profile`.

:meth:`ptype.profile.Profile.from_levels` runs these stages in order; each raises
:class:`ptype.errors.ProfileError` naming the level (its index in the input and its
pressure), the field, the value and what was expected, and adds to ``warnings`` what it
accepted but adjusted:

1. :func:`level_columns` - the level fields as float arrays, each value checked (known
   field, a number, finite);
2. :func:`check_levels` - pressure and temperature present and in range, at most one form
   of humidity per level;
3. :func:`check_distinct` - each pressure once, at least :data:`MIN_LEVELS` levels;
4. :func:`check_not_boiling` - every temperature possible at its pressure;
5. :func:`dewpoints` - every form of humidity converted to a dew point (clamped where it is
   slightly above the temperature);
6. :func:`surface_to_top` - levels ordered by decreasing pressure, humidity filled where a
   level has none;
7. :func:`complete_heights` - given heights checked against the pressure order, missing ones
   computed hypsometrically.

The stages keep a fast path for clean input (plain numbers, dew points below the
temperature) and fall back to a loop over levels only to find and name a problem.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

import numpy as np

from ptype import thermo
from ptype.errors import ProfileError

#: Accepted physical ranges (common practice for tropospheric soundings).
PRESSURE_RANGE_HPA = (0.0, 1100.0)          # exclusive lower bound
TEMPERATURE_RANGE_C = (-100.0, 60.0)
#: Dew point may exceed temperature by this much (sensor noise); it is then clamped to T.
DEWPOINT_EXCESS_TOLERANCE_C = 0.5
#: Relative humidity above 100 % up to this value is clamped with a warning (sensor noise).
RELATIVE_HUMIDITY_CLAMP_PCT = 105.0
MIN_LEVELS = 3
#: A level's saturation vapour pressure must be below this fraction of its pressure (ours:
#: observed soundings stay under about 0.1; beyond 0.5 the air is close to boiling).
BOILING_FRACTION = 0.5
#: Lowest accepted dew point: this far below the lowest accepted temperature, degC (ours).
DEWPOINT_BELOW_RANGE_C = 50.0

HUMIDITY_FIELDS = ("dewpoint_c", "relative_humidity_pct", "mixing_ratio_g_kg", "wetbulb_c")
LEVEL_FIELDS = ("pressure_hpa", "height_m", "temperature_c") + HUMIDITY_FIELDS

_LEVEL_FIELD_SET = frozenset(LEVEL_FIELDS)
_PLAIN_NUMBER_TYPES = frozenset((float, int, np.float64, type(None)))


class Where:
    """``levels[i] (p hPa)`` for messages, formatted only when an error is raised."""

    __slots__ = ("i", "p", "prefix")

    def __init__(self, prefix: str, i: int, p: float):
        self.prefix, self.i, self.p = prefix, i, p

    def __format__(self, spec: str) -> str:
        return f"{self.prefix}levels[{self.i}] ({fmt(self.p)} hPa)"

    __str__ = __repr__ = lambda self: format(self, "")


def fmt(value: float) -> str:
    """A number as a message quotes it (``850``, ``-2.5``), or its repr when not finite."""
    return f"{value:g}" if isinstance(value, (int, float)) and math.isfinite(value) else repr(value)


# -- 1. columns ----------------------------------------------------------------------------------

def level_columns(levels: list[Mapping[str, Any]], prefix: str = "") -> dict[str, np.ndarray]:
    """The fields of ``levels`` as float arrays, NaN where a level does not give one.

    Parameters
    ----------
    levels : list of mapping
        One mapping per level, keys from :data:`LEVEL_FIELDS`.
    prefix : str
        Put before every message (``"file.csv: "``).

    Returns
    -------
    dict of str to numpy.ndarray
        One ``(n,)`` array per name of :data:`LEVEL_FIELDS`.

    Raises
    ------
    ProfileError
        For no levels, an unknown field, a value that is not a number, or a non-finite one.
    """
    if not levels:
        raise ProfileError(f"{prefix}levels: no levels given; expected at least {MIN_LEVELS}",
                           field="levels")
    cols = _fast_columns(levels)
    if cols is None:
        # Something is off: the per-level loop finds the first bad value and names it.
        cols = _checked_columns(levels, prefix)
    return cols


def _fast_columns(levels: list) -> dict[str, np.ndarray] | None:
    """The level fields as float arrays (NaN where absent) when every level is clean: only
    known fields, plain ``int``/``float``/``None`` values, all finite.  ``None`` otherwise, and
    :func:`_checked_columns` then finds and names the first problem."""
    if not all(_LEVEL_FIELD_SET.issuperset(lvl) for lvl in levels):
        return None
    flat = [v for lvl in levels for v in map(lvl.get, LEVEL_FIELDS)]
    if not _PLAIN_NUMBER_TYPES.issuperset(map(type, flat)):
        return None
    try:
        a = np.array([np.nan if v is None else v for v in flat], dtype=np.float64)
    except (OverflowError, TypeError, ValueError):
        return None
    # Every NaN must be an absent value (None), and nothing may be infinite.
    if np.isinf(a).any() or int(np.isnan(a).sum()) != flat.count(None):
        return None
    a = a.reshape(len(levels), len(LEVEL_FIELDS))
    return {name: a[:, j].copy() for j, name in enumerate(LEVEL_FIELDS)}


def _checked_columns(levels: list, prefix: str) -> dict[str, np.ndarray]:
    """Level fields as float arrays, checked level by level; raises on the first bad value."""
    n = len(levels)
    cols = {name: np.full(n, np.nan) for name in LEVEL_FIELDS}
    for i, lvl in enumerate(levels):
        unknown = sorted(set(lvl) - set(LEVEL_FIELDS))
        if unknown:
            raise ProfileError(
                f"{prefix}levels[{i}]: unknown field(s) {', '.join(unknown)}; "
                f"accepted: {', '.join(LEVEL_FIELDS)}", field=f"levels[{i}].{unknown[0]}")
        for name in LEVEL_FIELDS:
            value = lvl.get(name)
            if value is not None:
                cols[name][i] = _checked_number(value, f"levels[{i}].{name}", prefix)
    return cols


def _checked_number(value: Any, field: str, prefix: str) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float, np.floating, np.integer)):
        raise ProfileError(f"{prefix}{field} = {value!r}: expected a number", field=field)
    if not math.isfinite(float(value)):
        raise ProfileError(f"{prefix}{field} = {value}: expected a finite number", field=field)
    return float(value)


# -- 2-4. checks ---------------------------------------------------------------------------------

def check_levels(cols: dict[str, np.ndarray], prefix: str = "") -> None:
    """Raise for the first level with a missing or out-of-range pressure or temperature, or
    with two forms of humidity (ranges :data:`PRESSURE_RANGE_HPA`,
    :data:`TEMPERATURE_RANGE_C`)."""
    if _levels_plausible(cols):
        return
    p = cols["pressure_hpa"]
    t = cols["temperature_c"]
    for i in range(p.size):
        _check_pressure(p[i], i, prefix)
        _check_temperature(p[i], t[i], i, prefix)
        given = [h for h in HUMIDITY_FIELDS if not math.isnan(cols[h][i])]
        if len(given) > 1:
            raise ProfileError(
                f"{prefix}levels[{i}] ({fmt(p[i])} hPa): humidity given as both {given[0]} and "
                f"{given[1]}; expected exactly one form", field=f"levels[{i}].{given[1]}")


def _levels_plausible(cols: dict[str, np.ndarray]) -> bool:
    """True when every level passes :func:`check_levels` (for all levels at once)."""
    p = cols["pressure_hpa"]
    t = cols["temperature_c"]
    forms = sum((~np.isnan(cols[h])).astype(np.int8) for h in HUMIDITY_FIELDS)
    # NaN compares False, so a missing pressure or temperature fails the range tests too.
    return bool(np.all((PRESSURE_RANGE_HPA[0] < p) & (p <= PRESSURE_RANGE_HPA[1])
                       & (TEMPERATURE_RANGE_C[0] <= t) & (t <= TEMPERATURE_RANGE_C[1])
                       & (forms <= 1)))


def _check_pressure(p: float, i: int, prefix: str) -> None:
    where_i = f"{prefix}levels[{i}]"  # cheap: no number formatting on the happy path
    if math.isnan(p):
        raise ProfileError(f"{where_i}.pressure_hpa: required field is missing",
                           field=f"levels[{i}].pressure_hpa")
    if not (PRESSURE_RANGE_HPA[0] < p <= PRESSURE_RANGE_HPA[1]):
        raise ProfileError(
            f"{where_i}.pressure_hpa = {fmt(p)}: expected 0 < pressure <= 1100 hPa",
            field=f"levels[{i}].pressure_hpa")


def _check_temperature(p: float, t: float, i: int, prefix: str) -> None:
    where_i = f"{prefix}levels[{i}] ({fmt(p)} hPa)"
    if math.isnan(t):
        raise ProfileError(f"{where_i}.temperature_c: required field is missing",
                           field=f"levels[{i}].temperature_c")
    if not (TEMPERATURE_RANGE_C[0] <= t <= TEMPERATURE_RANGE_C[1]):
        raise ProfileError(f"{where_i}.temperature_c = {fmt(t)}: expected -100 to +60 degC",
                           field=f"levels[{i}].temperature_c")


def check_distinct(p: np.ndarray, prefix: str = "") -> None:
    """Raise when a pressure is given twice or fewer than :data:`MIN_LEVELS` levels remain."""
    unique, counts = np.unique(p, return_counts=True)
    if np.any(counts > 1):
        dup = unique[counts > 1][0]
        idx = [i for i in range(p.size) if p[i] == dup]
        raise ProfileError(
            f"{prefix}levels[{idx[0]}] and levels[{idx[1]}]: duplicate pressure_hpa = "
            f"{fmt(dup)}; expected each pressure once", field=f"levels[{idx[1]}].pressure_hpa")
    if p.size < MIN_LEVELS:
        raise ProfileError(
            f"{prefix}levels: {p.size} distinct level(s); expected at least {MIN_LEVELS}",
            field="levels")


def check_not_boiling(p: np.ndarray, t: np.ndarray, prefix: str = "") -> None:
    """Raise for the first level whose air would boil.

    The saturation vapour pressure must stay well below the pressure (below
    :data:`BOILING_FRACTION` of it; real soundings stay under a tenth), or no moist
    thermodynamics holds.
    """
    boiling = thermo.saturation_vapor_pressure_hpa(t) >= BOILING_FRACTION * p
    if boiling.any():
        i = int(np.argmax(boiling))
        raise ProfileError(
            f"{prefix}levels[{i}] ({fmt(p[i])} hPa).temperature_c = {fmt(t[i])}: too warm for "
            f"this pressure (saturation vapour pressure "
            f"{float(thermo.saturation_vapor_pressure_hpa(t[i])):.0f} hPa); expected a "
            f"temperature whose saturation vapour pressure is below {BOILING_FRACTION:g} of the "
            "pressure", field=f"levels[{i}].temperature_c")


# -- 5. humidity ---------------------------------------------------------------------------------

def dewpoints(cols: dict[str, np.ndarray], warnings: list[str], prefix: str = "") -> np.ndarray:
    """The dew point of every level from whichever form of humidity it gives, degC.

    Relative humidity (Alduchov1996 inverted), mixing ratio and psychrometric wet-bulb
    (ASHRAE2017 eq. 35) are converted through :mod:`ptype.thermo`.  NaN where a level gives
    no humidity.  A relative humidity up to :data:`RELATIVE_HUMIDITY_CLAMP_PCT` and a dew
    point up to :data:`DEWPOINT_EXCESS_TOLERANCE_C` above the temperature are clamped, with a
    line in ``warnings``.
    """
    t = cols["temperature_c"]
    td = cols["dewpoint_c"]
    # Fast path: a dew point on every level, none implausibly low and none above the
    # temperature (nothing to convert, clamp or report).
    if (not np.isnan(td).any() and (td >= TEMPERATURE_RANGE_C[0] - DEWPOINT_BELOW_RANGE_C).all()
            and (td <= t).all()):
        return td.copy()
    p = cols["pressure_hpa"]
    out = np.full(t.size, np.nan)
    for i in range(t.size):
        where_i = Where(prefix, i, p[i])
        out[i] = _level_dewpoint(cols, i, where_i, warnings)
        if not math.isnan(out[i]) and out[i] > t[i]:
            out[i] = _clamped_dewpoint(out[i], t[i], i, p[i], where_i, warnings)
    return out


def _level_dewpoint(cols: dict[str, np.ndarray], i: int, where_i: Where,
                    warnings: list[str]) -> float:
    """Level ``i``'s dew point from the form of humidity it gives (NaN when none)."""
    t, p = cols["temperature_c"][i], cols["pressure_hpa"][i]
    if not math.isnan(cols["dewpoint_c"][i]):
        td = cols["dewpoint_c"][i]
        if td < TEMPERATURE_RANGE_C[0] - DEWPOINT_BELOW_RANGE_C:
            raise ProfileError(f"{where_i}.dewpoint_c = {fmt(td)}: expected above -150 degC",
                               field=f"levels[{i}].dewpoint_c")
        return td
    if not math.isnan(cols["relative_humidity_pct"][i]):
        return _dewpoint_from_rh(cols["relative_humidity_pct"][i], t, i, p, where_i, warnings)
    if not math.isnan(cols["mixing_ratio_g_kg"][i]):
        w = cols["mixing_ratio_g_kg"][i]
        if not (0.0 < w < 100.0):
            raise ProfileError(f"{where_i}.mixing_ratio_g_kg = {fmt(w)}: expected 0 < w < "
                               "100 g/kg", field=f"levels[{i}].mixing_ratio_g_kg")
        return float(thermo.dewpoint_from_mixing_ratio_c(p, w))
    if not math.isnan(cols["wetbulb_c"][i]):
        return _dewpoint_from_wetbulb(cols["wetbulb_c"][i], t, i, p, where_i)
    return math.nan


def _dewpoint_from_rh(rh: float, t: float, i: int, p: float, where_i: Where,
                      warnings: list[str]) -> float:
    if not (0.0 < rh <= RELATIVE_HUMIDITY_CLAMP_PCT):
        raise ProfileError(f"{where_i}.relative_humidity_pct = {fmt(rh)}: expected 0 < RH <= "
                           "100 %", field=f"levels[{i}].relative_humidity_pct")
    if rh > 100.0:
        warnings.append(f"levels[{i}] ({fmt(p)} hPa): relative humidity {fmt(rh)} % clamped to "
                        "100 %")
        rh = 100.0
    return float(thermo.dewpoint_from_relative_humidity_c(t, rh))


def _dewpoint_from_wetbulb(tw: float, t: float, i: int, p: float, where_i: Where) -> float:
    if tw > t + DEWPOINT_EXCESS_TOLERANCE_C:
        raise ProfileError(f"{where_i}.wetbulb_c = {fmt(tw)}: expected at most the temperature "
                           f"{fmt(t)} degC", field=f"levels[{i}].wetbulb_c")
    tw = min(tw, t)
    td = float(thermo.psychrometer_dewpoint_c(t, tw, p))
    if not math.isfinite(td):
        raise ProfileError(f"{where_i}.wetbulb_c = {fmt(tw)}: too far below the temperature "
                           f"{fmt(t)} degC for any humidity at {fmt(p)} hPa",
                           field=f"levels[{i}].wetbulb_c")
    return td


def _clamped_dewpoint(td: float, t: float, i: int, p: float, where_i: Where,
                      warnings: list[str]) -> float:
    """A dew point above the temperature: clamped to it within the tolerance, else refused."""
    excess = td - t
    if excess > DEWPOINT_EXCESS_TOLERANCE_C + 1e-9:
        raise ProfileError(
            f"{where_i}.dewpoint_c = {fmt(round(td, 2))}: above the temperature {fmt(t)} degC "
            f"by {excess:.2f}; expected at most {DEWPOINT_EXCESS_TOLERANCE_C} degC above "
            "(clamped) or below", field=f"levels[{i}].dewpoint_c")
    warnings.append(f"levels[{i}] ({fmt(p)} hPa): dew point {fmt(round(td, 2))} degC above "
                    f"temperature by {excess:.2f} degC, clamped to the temperature")
    return t


# -- 6. order ------------------------------------------------------------------------------------

def surface_to_top(cols: dict[str, np.ndarray], td: np.ndarray, warnings: list[str],
                   prefix: str = "") -> tuple[np.ndarray, ...]:
    """Levels ordered surface -> top (decreasing pressure), humidity filled where missing.

    Returns ``(order, p, t, td, z)``: the input index of each ordered level and the ordered
    pressure, temperature, dew point and (possibly NaN) height.  A level without humidity
    takes the dew-point depression interpolated linearly in ln p from its neighbours, held
    constant beyond the known range (ours), with a line in ``warnings``.

    Raises
    ------
    ProfileError
        When no level gives any humidity.
    """
    known = ~np.isnan(td)
    if not known.any():
        raise ProfileError(
            f"{prefix}levels: humidity missing at every level; expected one of "
            f"{', '.join(HUMIDITY_FIELDS)} on at least one level", field="levels")
    p = cols["pressure_hpa"]
    order = np.argsort(-p, kind="stable")
    p, t, td, z = p[order], cols["temperature_c"][order], td[order], cols["height_m"][order]
    known = known[order]
    if not known.all():
        ln_p = np.log(p)
        dep = np.interp(-ln_p, -ln_p[known], (t - td)[known])
        td = np.where(known, td, t - dep)
        warnings.append(f"humidity missing at {int((~known).sum())} level(s); filled by "
                        "interpolating the dew-point depression in ln p")
    return order, p, t, td, z


# -- 7. heights ----------------------------------------------------------------------------------

def complete_heights(p: np.ndarray, t: np.ndarray, td: np.ndarray, z: np.ndarray,
                     elevation_m: float | None, warnings: list[str], prefix: str = "",
                     order: np.ndarray | None = None) -> tuple[np.ndarray, bool]:
    """Check given heights against the pressure order and fill missing ones hypsometrically.

    Parameters
    ----------
    p, t, td, z : numpy.ndarray
        Ordered surface -> top; ``z`` NaN where not given.
    elevation_m : float or None
        Station elevation, the height of the lowest level when no height is given.
    warnings : list of str
        Receives a line when heights are computed.
    prefix : str
        Put before every message.
    order : numpy.ndarray, optional
        The input index of each level (messages name the levels as given).

    Returns
    -------
    (numpy.ndarray, bool)
        The heights, m, and whether any was computed (hypsometric equation with the virtual
        temperature, WallaceHobbs2006; anchored on the given heights).
    """
    order = np.arange(p.size) if order is None else order
    given = ~np.isnan(z)
    if given.sum() >= 2:
        _check_heights_rise(p, z, given, prefix, order)
    if given.all():
        return z, False
    rel = thermo.hypsometric_heights_m(p, t, td, 0.0)
    if given.any():
        # Anchor on the given heights: piecewise offsets so each given height is honoured.
        idx = np.nonzero(given)[0]
        offset = np.interp(np.arange(p.size), idx, z[idx] - rel[idx])
        warnings.append(f"heights computed hypsometrically at {int((~given).sum())} level(s) "
                        "from the given ones")
        return np.where(given, z, rel + offset), True
    if elevation_m is None:
        warnings.append("no heights and no station elevation given: heights computed "
                        "hypsometrically assuming the lowest level is at 0 m")
        return rel + 0.0, True
    warnings.append(f"heights computed hypsometrically from the station elevation "
                    f"{elevation_m:g} m")
    return rel + elevation_m, True


def _check_heights_rise(p, z, given, prefix, order) -> None:
    zg = z[given]
    bad = np.nonzero(np.diff(zg) <= 0)[0]
    if bad.size:
        k = bad[0]
        idx_sorted = np.nonzero(given)[0]
        lo_i, hi_i = order[idx_sorted[k]], order[idx_sorted[k + 1]]
        raise ProfileError(
            f"{prefix}levels[{hi_i}] ({fmt(p[idx_sorted[k + 1]])} hPa).height_m = "
            f"{fmt(zg[k + 1])}: expected above levels[{lo_i}] ({fmt(p[idx_sorted[k]])} hPa) "
            f"at {fmt(zg[k])} m, since pressure decreases with height",
            field=f"levels[{hi_i}].height_m")
