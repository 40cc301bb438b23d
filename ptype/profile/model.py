"""The validated vertical profile: :class:`Profile`.

A profile is a set of levels (pressure, optional height, temperature and one
form of humidity) plus optional surface readings, site and valid time.  After
construction the arrays are ordered surface -> top (decreasing pressure), every
level has a finite dew point and height, and every accepted oddity is listed in
``Profile.warnings``.

Validation raises :class:`ptype.errors.ProfileError` whose message names the
level (index in the input and its pressure), the field, the value and what was
expected.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Iterable, Mapping
from datetime import UTC, datetime
from typing import Any

import numpy as np

from ptype import thermo
from ptype.errors import ProfileError
from ptype.profile.document import ProfileDocument, Site, Surface, parse_document

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

HUMIDITY_FIELDS = ("dewpoint_c", "relative_humidity_pct", "mixing_ratio_g_kg", "wetbulb_c")
LEVEL_FIELDS = ("pressure_hpa", "height_m", "temperature_c") + HUMIDITY_FIELDS


class _Where:
    """``levels[i] (p hPa)`` for messages, formatted only when an error is raised."""

    __slots__ = ("i", "p", "prefix")

    def __init__(self, prefix: str, i: int, p: float):
        self.prefix, self.i, self.p = prefix, i, p

    def __format__(self, spec: str) -> str:
        return f"{self.prefix}levels[{self.i}] ({_fmt(self.p)} hPa)"

    __str__ = __repr__ = lambda self: format(self, "")


def _fmt(value: float) -> str:
    return f"{value:g}" if isinstance(value, (int, float)) and math.isfinite(value) else repr(value)


_LEVEL_FIELD_SET = frozenset(LEVEL_FIELDS)
_PLAIN_NUMBER_TYPES = frozenset((float, int, np.float64, type(None)))


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
            if value is None:
                continue
            if isinstance(value, bool) or not isinstance(value, (int, float, np.floating, np.integer)):
                raise ProfileError(
                    f"{prefix}levels[{i}].{name} = {value!r}: expected a number",
                    field=f"levels[{i}].{name}")
            if not math.isfinite(float(value)):
                raise ProfileError(
                    f"{prefix}levels[{i}].{name} = {value}: expected a finite number",
                    field=f"levels[{i}].{name}")
            cols[name][i] = float(value)
    return cols


def _levels_plausible(cols: dict[str, np.ndarray]) -> bool:
    """True when every level has a pressure and a temperature in range and at most one form
    of humidity (the checks of :func:`_check_levels`, for all levels at once)."""
    p = cols["pressure_hpa"]
    t = cols["temperature_c"]
    forms = sum((~np.isnan(cols[h])).astype(np.int8) for h in HUMIDITY_FIELDS)
    # NaN compares False, so a missing pressure or temperature fails the range tests too.
    return bool(np.all((PRESSURE_RANGE_HPA[0] < p) & (p <= PRESSURE_RANGE_HPA[1])
                       & (TEMPERATURE_RANGE_C[0] <= t) & (t <= TEMPERATURE_RANGE_C[1])
                       & (forms <= 1)))


def _check_levels(cols: dict[str, np.ndarray], prefix: str) -> None:
    """Raise for the first level with a missing or out-of-range pressure or temperature, or
    with two forms of humidity."""
    p = cols["pressure_hpa"]
    t = cols["temperature_c"]
    for i in range(p.size):
        where_i = f"{prefix}levels[{i}]"  # cheap: no number formatting on the happy path
        if math.isnan(p[i]):
            raise ProfileError(f"{where_i}.pressure_hpa: required field is missing",
                               field=f"levels[{i}].pressure_hpa")
        if not (PRESSURE_RANGE_HPA[0] < p[i] <= PRESSURE_RANGE_HPA[1]):
            raise ProfileError(
                f"{where_i}.pressure_hpa = {_fmt(p[i])}: expected 0 < pressure <= 1100 hPa",
                field=f"levels[{i}].pressure_hpa")
        if math.isnan(t[i]):
            raise ProfileError(f"{where_i} ({_fmt(p[i])} hPa).temperature_c: required field is missing",
                               field=f"levels[{i}].temperature_c")
        if not (TEMPERATURE_RANGE_C[0] <= t[i] <= TEMPERATURE_RANGE_C[1]):
            raise ProfileError(
                f"{where_i} ({_fmt(p[i])} hPa).temperature_c = {_fmt(t[i])}: "
                f"expected -100 to +60 degC", field=f"levels[{i}].temperature_c")
        given = [h for h in HUMIDITY_FIELDS if not math.isnan(cols[h][i])]
        if len(given) > 1:
            raise ProfileError(
                f"{where_i} ({_fmt(p[i])} hPa): humidity given as both {given[0]} and {given[1]}; "
                "expected exactly one form", field=f"levels[{i}].{given[1]}")


@dataclasses.dataclass(frozen=True, eq=False)
class Profile:
    """A validated sounding, levels ordered surface -> top.

    Build one with :meth:`from_levels`, :meth:`from_document` or
    :func:`ptype.read_profile`; the constructor itself does no checking.

    Attributes
    ----------
    pressure_hpa, height_m, temperature_c, dewpoint_c : numpy.ndarray
        Per-level arrays, surface -> top.  Heights are geopotential metres
        above mean sea level; computed hypsometrically where not given.
    surface : Surface or None
        Screen-level and road readings.
    site : Site or None
    valid_time : datetime or None (timezone-aware, UTC when no offset was given)
    source : str or None
    warnings : tuple of str
        Everything that was accepted but adjusted (clamped dew points, heights
        computed, humidity filled...).
    """

    pressure_hpa: np.ndarray
    height_m: np.ndarray
    temperature_c: np.ndarray
    dewpoint_c: np.ndarray
    surface: Surface | None = None
    site: Site | None = None
    valid_time: datetime | None = None
    source: str | None = None
    warnings: tuple[str, ...] = ()
    heights_computed: bool = False

    # -- derived quantities ------------------------------------------------------------
    @property
    def n_levels(self) -> int:
        return int(self.pressure_hpa.size)

    @property
    def relative_humidity_pct(self) -> np.ndarray:
        """Relative humidity over water, %."""
        return thermo.relative_humidity_pct(self.temperature_c, self.dewpoint_c)

    def wetbulb_c(self, kind: str = "isobaric") -> np.ndarray:
        """Wet-bulb temperature per level, degC (see :func:`ptype.thermo.wet_bulb_temperature`)."""
        return thermo.wet_bulb_temperature(self.pressure_hpa, self.temperature_c,
                                           self.dewpoint_c, kind=kind)

    @property
    def station_elevation_m(self) -> float | None:
        if self.surface is not None and self.surface.elevation_m is not None:
            return self.surface.elevation_m
        if self.site is not None and self.site.elevation_m is not None:
            return self.site.elevation_m
        return None

    def to_document(self) -> dict:
        """The profile as a JSON-ready profile document (dew point form, heights included)."""
        doc: dict[str, Any] = {}
        if self.site is not None:
            doc["site"] = self.site.model_dump(exclude_none=True)
        if self.valid_time is not None:
            doc["valid_time"] = self.valid_time.isoformat().replace("+00:00", "Z")
        if self.source is not None:
            doc["source"] = self.source
        doc["levels"] = [
            {"pressure_hpa": round(float(p), 2), "height_m": round(float(z), 1),
             "temperature_c": round(float(t), 2), "dewpoint_c": round(float(td), 2)}
            for p, z, t, td in zip(self.pressure_hpa, self.height_m, self.temperature_c,
                                   self.dewpoint_c)
        ]
        if self.surface is not None:
            doc["surface"] = self.surface.model_dump(exclude_none=True)
        return doc

    # -- construction ------------------------------------------------------------------
    @classmethod
    def from_document(cls, document: Mapping[str, Any] | ProfileDocument) -> Profile:
        """Build and validate a profile from a profile document (dict or model)."""
        doc = document if isinstance(document, ProfileDocument) else parse_document(document)
        # A Level's __dict__ is its model_dump() (plain float fields, extra fields forbidden),
        # read here without a serializer call per level.
        levels = [lvl.__dict__ for lvl in doc.levels]
        valid_time = doc.valid_time
        if valid_time is not None and valid_time.tzinfo is None:
            valid_time = valid_time.replace(tzinfo=UTC)
        return cls.from_levels(levels, surface=doc.surface, site=doc.site,
                               valid_time=valid_time, source=doc.source)

    @classmethod
    def from_levels(cls, levels: Iterable[Mapping[str, Any]], *, surface: Surface | Mapping | None = None,
                    site: Site | Mapping | None = None, valid_time: datetime | None = None,
                    source: str | None = None, where: str = "") -> Profile:
        """Validate a list of level mappings (fields as in :data:`LEVEL_FIELDS`).

        ``where`` prefixes messages (e.g. a file name) so readers can say which input failed.
        """
        levels = list(levels)
        prefix = f"{where}: " if where else ""
        if isinstance(surface, Mapping):
            surface = Surface.model_validate(dict(surface))
        if isinstance(site, Mapping):
            site = Site.model_validate(dict(site))
        warnings: list[str] = []
        if not levels:
            raise ProfileError(f"{prefix}levels: no levels given; expected at least {MIN_LEVELS}",
                               field="levels")
        n = len(levels)
        cols = _fast_columns(levels)
        if cols is None:
            # Something is off: the per-level loop finds the first bad value and names it.
            cols = _checked_columns(levels, prefix)

        p = cols["pressure_hpa"]
        t = cols["temperature_c"]
        if not _levels_plausible(cols):
            _check_levels(cols, prefix)

        # Duplicates and ordering.
        unique, counts = np.unique(p, return_counts=True)
        if np.any(counts > 1):
            dup = unique[counts > 1][0]
            idx = [i for i in range(n) if p[i] == dup]
            raise ProfileError(
                f"{prefix}levels[{idx[0]}] and levels[{idx[1]}]: duplicate pressure_hpa = {_fmt(dup)}; "
                "expected each pressure once", field=f"levels[{idx[1]}].pressure_hpa")
        if n < MIN_LEVELS:
            raise ProfileError(
                f"{prefix}levels: {n} distinct level(s); expected at least {MIN_LEVELS}",
                field="levels")
        # Air that would boil: the saturation vapour pressure must stay well below the pressure
        # (below half of it; real soundings stay under a tenth), or no moist thermodynamics holds.
        boiling = thermo.saturation_vapor_pressure_hpa(t) >= BOILING_FRACTION * p
        if boiling.any():
            i = int(np.argmax(boiling))
            raise ProfileError(
                f"{prefix}levels[{i}] ({_fmt(p[i])} hPa).temperature_c = {_fmt(t[i])}: too warm for "
                f"this pressure (saturation vapour pressure "
                f"{float(thermo.saturation_vapor_pressure_hpa(t[i])):.0f} hPa); expected a "
                f"temperature whose saturation vapour pressure is below {BOILING_FRACTION:g} of the "
                "pressure", field=f"levels[{i}].temperature_c")
        order = np.argsort(-p, kind="stable")

        # Humidity: convert each form to a dew point.  Fast path: a dew point on every level,
        # none implausibly low and none above the temperature (nothing to convert, clamp or
        # report); otherwise the level loop below handles and words each case.
        dewpoint = cols["dewpoint_c"]
        plain = bool(not np.isnan(dewpoint).any()
                     and (dewpoint >= TEMPERATURE_RANGE_C[0] - 50).all() and (dewpoint <= t).all())
        td = dewpoint.copy() if plain else np.full(n, np.nan)
        for i in range(0 if plain else n):
            where_i = _Where(prefix, i, p[i])
            if not math.isnan(cols["dewpoint_c"][i]):
                td[i] = cols["dewpoint_c"][i]
                if td[i] < TEMPERATURE_RANGE_C[0] - 50:
                    raise ProfileError(f"{where_i}.dewpoint_c = {_fmt(td[i])}: expected above -150 degC",
                                       field=f"levels[{i}].dewpoint_c")
            elif not math.isnan(cols["relative_humidity_pct"][i]):
                rh = cols["relative_humidity_pct"][i]
                if not (0.0 < rh <= RELATIVE_HUMIDITY_CLAMP_PCT):
                    raise ProfileError(
                        f"{where_i}.relative_humidity_pct = {_fmt(rh)}: expected 0 < RH <= 100 %",
                        field=f"levels[{i}].relative_humidity_pct")
                if rh > 100.0:
                    warnings.append(f"levels[{i}] ({_fmt(p[i])} hPa): relative humidity {_fmt(rh)} % clamped to 100 %")
                    rh = 100.0
                td[i] = float(thermo.dewpoint_from_relative_humidity_c(t[i], rh))
            elif not math.isnan(cols["mixing_ratio_g_kg"][i]):
                w = cols["mixing_ratio_g_kg"][i]
                if not (0.0 < w < 100.0):
                    raise ProfileError(
                        f"{where_i}.mixing_ratio_g_kg = {_fmt(w)}: expected 0 < w < 100 g/kg",
                        field=f"levels[{i}].mixing_ratio_g_kg")
                td[i] = float(thermo.dewpoint_from_mixing_ratio_c(p[i], w))
            elif not math.isnan(cols["wetbulb_c"][i]):
                tw = cols["wetbulb_c"][i]
                if tw > t[i] + DEWPOINT_EXCESS_TOLERANCE_C:
                    raise ProfileError(
                        f"{where_i}.wetbulb_c = {_fmt(tw)}: expected at most the temperature {_fmt(t[i])} degC",
                        field=f"levels[{i}].wetbulb_c")
                tw = min(tw, t[i])
                td[i] = float(thermo.psychrometer_dewpoint_c(t[i], tw, p[i]))
                if not math.isfinite(td[i]):
                    raise ProfileError(
                        f"{where_i}.wetbulb_c = {_fmt(tw)}: too far below the temperature "
                        f"{_fmt(t[i])} degC for any humidity at {_fmt(p[i])} hPa",
                        field=f"levels[{i}].wetbulb_c")
            if not math.isnan(td[i]) and td[i] > t[i]:
                excess = td[i] - t[i]
                if excess > DEWPOINT_EXCESS_TOLERANCE_C + 1e-9:
                    raise ProfileError(
                        f"{where_i}.dewpoint_c = {_fmt(round(td[i], 2))}: above the temperature "
                        f"{_fmt(t[i])} degC by {excess:.2f}; expected at most "
                        f"{DEWPOINT_EXCESS_TOLERANCE_C} degC above (clamped) or below",
                        field=f"levels[{i}].dewpoint_c")
                warnings.append(f"levels[{i}] ({_fmt(p[i])} hPa): dew point {_fmt(round(td[i], 2))} degC "
                                f"above temperature by {excess:.2f} degC, clamped to the temperature")
                td[i] = t[i]

        known = ~np.isnan(td)
        if not known.any():
            raise ProfileError(
                f"{prefix}levels: humidity missing at every level; expected one of "
                f"{', '.join(HUMIDITY_FIELDS)} on at least one level", field="levels")

        p, t, td, z = p[order], t[order], td[order], cols["height_m"][order]
        known = known[order]
        if not known.all():
            # Interpolate the dew-point depression in ln p; hold it constant beyond the known range.
            ln_p = np.log(p)
            dep = np.interp(-ln_p, -ln_p[known], (t - td)[known])
            td = np.where(known, td, t - dep)
            warnings.append(f"humidity missing at {int((~known).sum())} level(s); filled by "
                            "interpolating the dew-point depression in ln p")

        # Heights.
        z, computed = _complete_heights(p, t, td, z, cls._elevation(surface, site), warnings,
                                        prefix, order)
        return cls(pressure_hpa=p, height_m=z, temperature_c=t, dewpoint_c=td, surface=surface,
                   site=site, valid_time=valid_time, source=source, warnings=tuple(warnings),
                   heights_computed=computed)

    @staticmethod
    def _elevation(surface: Surface | None, site: Site | None) -> float | None:
        if surface is not None and surface.elevation_m is not None:
            return surface.elevation_m
        if site is not None and site.elevation_m is not None:
            return site.elevation_m
        return None


def _complete_heights(p, t, td, z, elevation_m, warnings, prefix, order):
    """Check given heights against the pressure order and fill missing ones hypsometrically."""
    given = ~np.isnan(z)
    if given.sum() >= 2:
        zg = z[given]
        bad = np.nonzero(np.diff(zg) <= 0)[0]
        if bad.size:
            k = bad[0]
            idx_sorted = np.nonzero(given)[0]
            lo_i, hi_i = order[idx_sorted[k]], order[idx_sorted[k + 1]]
            raise ProfileError(
                f"{prefix}levels[{hi_i}] ({_fmt(p[idx_sorted[k + 1]])} hPa).height_m = "
                f"{_fmt(zg[k + 1])}: expected above levels[{lo_i}] ({_fmt(p[idx_sorted[k]])} hPa) "
                f"at {_fmt(zg[k])} m, since pressure decreases with height",
                field=f"levels[{hi_i}].height_m")
    if given.all():
        return z, False
    # Hypsometric heights relative to the lowest level, then anchored.
    rel = thermo.hypsometric_heights_m(p, t, td, 0.0)
    if given.any():
        # Anchor on the given heights: piecewise offsets so each given height is honoured.
        idx = np.nonzero(given)[0]
        offsets = z[idx] - rel[idx]
        offset = np.interp(np.arange(p.size), idx, offsets)
        z = np.where(given, z, rel + offset)
        warnings.append(f"heights computed hypsometrically at {int((~given).sum())} level(s) "
                        "from the given ones")
    else:
        base = elevation_m
        if base is None:
            base = 0.0
            warnings.append("no heights and no station elevation given: heights computed "
                            "hypsometrically assuming the lowest level is at 0 m")
        else:
            warnings.append(f"heights computed hypsometrically from the station elevation {base:g} m")
        z = rel + base
    return z, True
