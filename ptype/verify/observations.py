"""Present weather as reported (METAR/SPECI w'w', SYNOP-style text) -> ptype codes.

Observations are written the way surface reports write present weather (WMO-No. 306
code table 4678; WMO-No. 49 Vol. II / ICAO Annex 3): blank-separated groups, each built
from an optional intensity or proximity sign (``-``, ``+``, ``VC``), optional
descriptors (``MI BC PR DR BL SH TS FZ``) and one or more two-letter phenomena
(precipitation ``DZ RA SN SG IC PL GR GS UP``, obscuration ``BR FG FU VA DU SA HZ PY``,
other ``PO SQ FC SS DS``).  Examples: ``-FZRA BR``, ``+SN BLSN``, ``FZRA PL``, ``SHRA``.

:func:`parse_observation` returns an :class:`Observation` holding either a
:class:`ptype.codes.Code` or the reason the report cannot be verified.  The full
mapping table is in ``docs/verification.md``; in short:

* Intensity (``-``/``+``) is recorded, not used for the class.  ``VC`` groups describe
  weather *near* the station, not at it, and are ignored.
* ``BL``/``DR`` (blowing/drifting) groups are lifted snow, not falling precipitation, and
  are ignored; ``SH`` and ``TS`` only qualify the precipitation they carry (``SHRA`` -> RA,
  ``TSRASN`` -> RASN).  ``TS`` alone is "other" weather.
* Obscurations and "other" phenomena are ignored.  A report with no precipitation left
  (``BR``, ``NSW``, ``VCSH``, ``BLSN``) is NONE.
* ``SG`` (snow grains: ice that never melted, the solid counterpart of drizzle) counts as
  snow.  ``PL`` and the older ``IP`` are ice pellets.
* Drizzle with rain counts as rain (``RADZ``, ``DZRA`` -> RA; ``FZRADZ`` -> FZRA): the drops
  that matter for accretion and for the diagnosis are the rain drops.  Drizzle alone stays
  DZ / FZDZ.
* Freezing liquid with ice pellets is FZRAPL, whether written as one group (``FZRAPL``,
  national practice) or two (``FZRA PL``, WMO practice); ``FZDZ PL`` likewise.
  Non-freezing liquid with pellets is RAPL (``RAPL``, ``PLRA``, ``DZPL``); with snow RASN
  (``RASN``, ``SNRA``, ``DZSN``).
* Mixtures with no class of their own take the type reported first (WMO practice reports
  the dominant type first): ``SNPL`` -> SN, ``PLSN`` -> PL, ``FZRA SN`` -> FZRA,
  ``SN FZRA`` -> SN; a freezing liquid with both snow and pellets -> FZRAPL; a non-freezing
  liquid with both -> the mix with whichever ice type is reported first.
* Hail and graupel (``GR``, ``GS``) and ice crystals (``IC``) are dropped from a mixture;
  alone they cannot be verified (convective ice and clear-sky crystals are outside the
  diagnosed classes) and the case is excluded.
* ``UP``/``FZUP`` (unidentified precipitation, automatic stations) anywhere in the report
  excludes the case: the type is unknown.
* Unknown groups, missing-data slashes and empty fields exclude the case, with the reason.
"""

from __future__ import annotations

import dataclasses
import re
from collections.abc import Iterable

from ptype.codes import Code

INTENSITY = {"-": "light", "+": "heavy", "": "moderate"}
DESCRIPTORS = ("MI", "BC", "PR", "DR", "BL", "SH", "TS", "FZ")
PRECIPITATION = ("DZ", "RA", "SN", "SG", "IC", "PL", "GR", "GS", "UP")
OBSCURATION = ("BR", "FG", "FU", "VA", "DU", "SA", "HZ", "PY")
OTHER = ("PO", "SQ", "FC", "SS", "DS")
#: Older (pre-1998 North American) abbreviation for ice pellets, accepted as PL.
ALIASES = {"IP": "PL"}
#: Whole-report forms meaning "no precipitation": METAR "no significant weather" and our code.
NO_WEATHER = ("NSW", "NONE")

#: Exclusion reasons (stable keys used in reports).
REASON_EMPTY = "missing observation"
REASON_UNIDENTIFIED = "unidentified precipitation (UP/FZUP)"
REASON_HAIL = "hail or graupel only (GR/GS)"
REASON_CRYSTALS = "ice crystals only (IC)"
REASON_UNPARSEABLE = "unparseable group"
REASON_MISSING = "missing-data group (slashes)"
REASON_RECENT = "recent weather only (RE..)"

_TOKEN = re.compile(r"^[A-Z]{2}")


@dataclasses.dataclass(frozen=True)
class Observation:
    """One parsed present-weather report.

    ``code`` is the verification class, or None when the report is excluded; ``reason``
    then says why (one of the ``REASON_*`` keys) and ``detail`` gives the group.
    ``intensity`` is the intensity of the first precipitation group ("light",
    "moderate", "heavy") or None.
    """

    raw: str
    code: Code | None
    reason: str | None = None
    detail: str | None = None
    intensity: str | None = None

    @property
    def excluded(self) -> bool:
        """True when the report cannot be verified (no class)."""
        return self.code is None

    def to_dict(self) -> dict:
        """JSON-ready form: raw text, class name, and intensity or reason when known."""
        out = {"raw": self.raw, "code": None if self.code is None else self.code.name}
        if self.intensity is not None:
            out["intensity"] = self.intensity
        if self.reason is not None:
            out["reason"] = self.reason
            if self.detail:
                out["detail"] = self.detail
        return out


@dataclasses.dataclass
class _Group:
    intensity: str
    vicinity: bool
    descriptors: list[str]
    phenomena: list[str]


class _Unparseable(Exception):
    def __init__(self, group: str, why: str):
        super().__init__(why)
        self.group = group
        self.why = why


def _split_group(group: str) -> _Group:
    """Split one w'w' group into sign, descriptors and two-letter phenomena."""
    rest = group
    intensity = ""
    vicinity = False
    if rest[:1] in "+-":
        intensity, rest = rest[0], rest[1:]
    if rest.startswith("VC"):
        if intensity:
            raise _Unparseable(group, "VC cannot carry an intensity sign")
        vicinity, rest = True, rest[2:]
    descriptors: list[str] = []
    while rest[:2] in DESCRIPTORS and len(rest) >= 2:
        descriptors.append(rest[:2])
        rest = rest[2:]
    phenomena: list[str] = []
    while rest:
        if not _TOKEN.match(rest):
            raise _Unparseable(group, f"unexpected characters {rest!r}")
        token = ALIASES.get(rest[:2], rest[:2])
        if token not in PRECIPITATION + OBSCURATION + OTHER:
            raise _Unparseable(group, f"unknown phenomenon {rest[:2]!r}")
        phenomena.append(token)
        rest = rest[2:]
    if not phenomena and not (descriptors and set(descriptors) <= {"TS", "SH"}):
        raise _Unparseable(group, "no phenomenon")
    # FZ combines only with DZ, RA, UP, FG (table 4678); national practice adds the pellets
    # of freezing rain with ice pellets in the same group (FZRAPL).
    if "FZ" in descriptors and phenomena and not (
            set(phenomena) <= {"RA", "DZ", "UP", "FG", "PL"} and set(phenomena) - {"PL"}):
        raise _Unparseable(group, "FZ combines only with RA, DZ, UP or FG")
    return _Group(intensity, vicinity, descriptors, phenomena)


@dataclasses.dataclass
class _Present:
    """What the groups of one report say is falling at the station, in report order."""

    #: (element, freezing) of the precipitation at the station.
    elements: list[tuple[str, bool]] = dataclasses.field(default_factory=list)
    intensity: str | None = None
    unidentified: bool = False
    hail: bool = False
    crystals: bool = False
    only_recent: bool = True

    def add(self, g: _Group) -> None:
        """Record the precipitation of one present-weather group."""
        if g.vicinity:
            return  # near, not at, the station
        if "BL" in g.descriptors or "DR" in g.descriptors:
            return  # snow, sand or dust lifted by the wind, not falling
        freezing = "FZ" in g.descriptors
        precip = [p for p in g.phenomena if p in PRECIPITATION]
        if precip and self.intensity is None:
            self.intensity = INTENSITY[g.intensity]
        for p in precip:
            if p == "UP":
                self.unidentified = True
            elif p in ("GR", "GS"):
                self.hail = True
            elif p == "IC":
                self.crystals = True
            else:
                self.elements.append(("SN" if p == "SG" else p, freezing and p in ("RA", "DZ")))

    def verdict(self, raw: str) -> Observation:
        """The class of the report, or why it cannot be verified."""
        if self.only_recent:
            return Observation(raw, None, REASON_RECENT)
        if self.unidentified:
            return Observation(raw, None, REASON_UNIDENTIFIED, intensity=self.intensity)
        if not self.elements:
            if self.hail:
                return Observation(raw, None, REASON_HAIL, intensity=self.intensity)
            if self.crystals:
                return Observation(raw, None, REASON_CRYSTALS, intensity=self.intensity)
            return Observation(raw, Code.NONE)
        return Observation(raw, _classify(self.elements), intensity=self.intensity)


def parse_observation(text: str | None) -> Observation:
    """Map one present-weather report to a :class:`ptype.codes.Code` (or an exclusion).

    Parameters
    ----------
    text : str
        Blank-separated w'w' groups as in METAR/SPECI (WMO code table 4678), e.g.
        ``"-FZRA BR"``, ``"+SN BLSN"``, ``"FZRA PL"``; ``"NSW"`` or ``"NONE"`` for no
        precipitation.  Case-insensitive.

    Returns
    -------
    Observation
        ``code`` set, or ``code is None`` with ``reason`` (see module docstring).
    """
    raw = "" if text is None else str(text)
    groups = raw.upper().split()
    if not groups:
        return Observation(raw, None, REASON_EMPTY)
    if len(groups) == 1 and groups[0] in NO_WEATHER:
        return Observation(raw, Code.NONE)
    present = _Present()
    for group in groups:
        if set(group) <= {"/"}:
            return Observation(raw, None, REASON_MISSING, group)
        if group.startswith("RE") and len(group) > 2:
            continue  # recent weather: not present weather
        present.only_recent = False
        try:
            present.add(_split_group(group))
        except _Unparseable as exc:
            return Observation(raw, None, REASON_UNPARSEABLE, f"{exc.group}: {exc.why}")
    return present.verdict(raw)


def _classify(elements: list[tuple[str, bool]]) -> Code:
    """Class of an ordered list of precipitation elements (see the module docstring)."""
    liquid = [e for e, _ in elements if e in ("RA", "DZ")]
    freezing = any(fz for _, fz in elements)
    ice = [e for e, _ in elements if e in ("SN", "PL")]
    first_ice = ice[0] if ice else None
    if not liquid:
        return Code[first_ice]  # SN, PL, or the first of a SN/PL mix
    rain = "RA" in liquid
    if not ice:
        if freezing:
            return Code.FZRA if rain else Code.FZDZ
        return Code.RA if rain else Code.DZ
    if freezing:
        if "PL" in ice:
            return Code.FZRAPL
        # Freezing liquid with snow: no class of its own; the first-reported type wins.
        first = elements[0][0]
        if first == "SN":
            return Code.SN
        return Code.FZRA if rain else Code.FZDZ
    return Code.RAPL if first_ice == "PL" else Code.RASN


def parse_many(texts: Iterable[str | None]) -> list[Observation]:
    """:func:`parse_observation` over an iterable."""
    return [parse_observation(t) for t in texts]
