"""Precipitation-type codes.

ptype speaks METAR/WMO present-weather abbreviations (WMO-No. 306 code table
4678; WMO-No. 49 / ICAO Annex 3): RA, SN, PL, FZRA, FZDZ, DZ and the mixes
RASN, RAPL, FZRAPL, dominant type first.  ``FZRAPL`` follows national practice;
under strict WMO rules it is written as two groups ``FZRA PL`` (both spellings
are accepted when parsing observations).

Gridded output uses WMO GRIB2 code table 4.201 (see :data:`GRIB2_4201`).  The
table has no separate code for rain with ice pellets or freezing rain with ice
pellets; we map them as documented in ``docs/codes.md``:

=========  =====  =================================================
ptype      4.201  4.201 meaning
=========  =====  =================================================
NONE       0      No precipitation
RA         1      Rain
FZRA       3      Freezing rain
FZRAPL     4      Mixed/ice (freezing rain with ice pellets)
RAPL       4      Mixed/ice (rain with ice pellets)
SN         5      Snow
RASN       7      Mixture of rain and snow
PL         8      Ice pellets
DZ         11     Drizzle
FZDZ       12     Freezing drizzle
=========  =====  =================================================
"""

from __future__ import annotations

from enum import IntEnum

import numpy as np


class Code(IntEnum):
    """Internal integer codes; :attr:`abbrev` is the public METAR-style string."""

    NONE = 0
    RA = 1
    SN = 2
    PL = 3
    FZRA = 4
    FZDZ = 5
    DZ = 6
    RASN = 7
    RAPL = 8
    FZRAPL = 9

    @property
    def abbrev(self) -> str:
        """The METAR-style abbreviation (``"FZRA"``)."""
        return self.name

    @property
    def label(self) -> str:
        """The type in words (``"freezing rain"``)."""
        return LABELS[self]


#: Returned by a method that reaches no decision for a column (abstains).
NO_RESULT = -1

LABELS = {
    Code.NONE: "no precipitation",
    Code.RA: "rain",
    Code.SN: "snow",
    Code.PL: "ice pellets",
    Code.FZRA: "freezing rain",
    Code.FZDZ: "freezing drizzle",
    Code.DZ: "drizzle",
    Code.RASN: "rain and snow",
    Code.RAPL: "rain and ice pellets",
    Code.FZRAPL: "freezing rain and ice pellets",
}

#: WMO GRIB2 code table 4.201 value for each code (see module docstring).
GRIB2_4201 = {
    Code.NONE: 0, Code.RA: 1, Code.FZRA: 3, Code.FZRAPL: 4, Code.RAPL: 4, Code.SN: 5,
    Code.RASN: 7, Code.PL: 8, Code.DZ: 11, Code.FZDZ: 12,
}
#: CF ``flag_meanings`` words for the 4.201 values we emit.
GRIB2_4201_MEANINGS = {
    0: "no_precipitation", 1: "rain", 3: "freezing_rain", 4: "mixed_ice", 5: "snow",
    7: "mixture_of_rain_and_snow", 8: "ice_pellets", 11: "drizzle", 12: "freezing_drizzle",
}

#: Tie-break order, most hazardous first.  Operational multi-algorithm practice breaks
#: ties as FZRA > SN > IP > RA (common practice); we slot the other codes in by the
#: hazard they pose to roads and lines: freezing types first, then frozen, then liquid.
HAZARD_ORDER = (Code.FZRA, Code.FZRAPL, Code.FZDZ, Code.SN, Code.PL, Code.RAPL, Code.RASN,
                Code.RA, Code.DZ, Code.NONE)
HAZARD_RANK = {code: rank for rank, code in enumerate(HAZARD_ORDER)}  # 0 = most hazardous

FREEZING = frozenset({Code.FZRA, Code.FZDZ, Code.FZRAPL})
FROZEN = frozenset({Code.SN, Code.PL})
LIQUID = frozenset({Code.RA, Code.DZ, Code.FZRA, Code.FZDZ})
#: Codes whose precipitation is at least partly liquid when it lands.
HAS_LIQUID = frozenset({Code.RA, Code.DZ, Code.FZRA, Code.FZDZ, Code.RASN, Code.RAPL, Code.FZRAPL})

ALL_CODES = tuple(Code)
PRECIP_CODES = tuple(c for c in Code if c is not Code.NONE)


def abbrev(code: int) -> str | None:
    """METAR-style abbreviation of an integer code, None for :data:`NO_RESULT`."""
    return None if int(code) == NO_RESULT else Code(int(code)).name


def from_abbrev(text: str) -> Code:
    """Code from its abbreviation (``"FZRA"``); accepts ``"FZRA PL"`` and ``"IP"`` for PL."""
    key = text.strip().upper().replace(" ", "").replace("IP", "PL")
    try:
        return Code[key]
    except KeyError:
        raise ValueError(f"unknown precipitation-type code {text!r}; expected one of "
                         f"{', '.join(c.name for c in Code)}") from None


def to_grib2(codes: np.ndarray) -> np.ndarray:
    """Vectorised map from ptype codes to GRIB2 4.201 values; NO_RESULT -> 255 (missing)."""
    lut = np.full(len(Code) + 1, 255, dtype=np.uint8)
    for code, value in GRIB2_4201.items():
        lut[int(code)] = value
    codes = np.asarray(codes)
    return np.where(codes >= 0, lut[np.clip(codes, 0, len(Code) - 1)], 255).astype(np.uint8)
