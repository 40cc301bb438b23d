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
from collections.abc import Iterable, Mapping
from datetime import UTC, datetime
from typing import Any

import numpy as np

from ptype import thermo
from ptype.profile.document import ProfileDocument, Site, Surface, parse_document
from ptype.profile.levels import (
    HUMIDITY_FIELDS,
    LEVEL_FIELDS,
    MIN_LEVELS,
    check_distinct,
    check_levels,
    check_not_boiling,
    complete_heights,
    dewpoints,
    level_columns,
    surface_to_top,
)

__all__ = ["HUMIDITY_FIELDS", "LEVEL_FIELDS", "MIN_LEVELS", "Profile"]


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
        """Number of levels."""
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
        """Elevation of the station, m: the surface readings' own, else the site's."""
        return _elevation(self.surface, self.site)

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
    def from_levels(cls, levels: Iterable[Mapping[str, Any]], *,
                    surface: Surface | Mapping | None = None, site: Site | Mapping | None = None,
                    valid_time: datetime | None = None, source: str | None = None,
                    where: str = "") -> Profile:
        """Validate a list of level mappings (fields as in :data:`LEVEL_FIELDS`).

        The stages of :mod:`ptype.profile.levels` run in order: columns, checks, dew points,
        surface -> top order, heights.  ``where`` prefixes messages (e.g. a file name) so
        readers can say which input failed.

        Raises
        ------
        ProfileError
            Naming the level, the field, the value and what was expected.
        """
        levels = list(levels)
        prefix = f"{where}: " if where else ""
        surface, site = _surface_and_site(surface, site)
        warnings: list[str] = []
        cols = level_columns(levels, prefix)
        check_levels(cols, prefix)
        check_distinct(cols["pressure_hpa"], prefix)
        check_not_boiling(cols["pressure_hpa"], cols["temperature_c"], prefix)
        td = dewpoints(cols, warnings, prefix)
        order, p, t, td, z = surface_to_top(cols, td, warnings, prefix)
        z, computed = complete_heights(p, t, td, z, _elevation(surface, site), warnings, prefix,
                                       order)
        return cls(pressure_hpa=p, height_m=z, temperature_c=t, dewpoint_c=td, surface=surface,
                   site=site, valid_time=valid_time, source=source, warnings=tuple(warnings),
                   heights_computed=computed)


def _surface_and_site(surface: Surface | Mapping | None,
                      site: Site | Mapping | None) -> tuple[Surface | None, Site | None]:
    """Surface readings and site as their document models (mappings are validated)."""
    if isinstance(surface, Mapping):
        surface = Surface.model_validate(dict(surface))
    if isinstance(site, Mapping):
        site = Site.model_validate(dict(site))
    return surface, site


def _elevation(surface: Surface | None, site: Site | None) -> float | None:
    """The station elevation: the surface readings' own, else the site's, else None."""
    if surface is not None and surface.elevation_m is not None:
        return surface.elevation_m
    if site is not None and site.elevation_m is not None:
        return site.elevation_m
    return None
