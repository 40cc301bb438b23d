"""Precipitation-type codes (ptype/codes.py) against the open standards they borrow.

* GRIB2 code table 4.201 "Precipitation type" (WMO-No. 306 Vol. I.2; code 0 has meant "No
  precipitation" since 2021, 255 is missing);
* METAR/SPECI present-weather abbreviations (WMO-No. 306 code table 4678; ICAO Annex 3):
  RA rain, SN snow, PL ice pellets, DZ drizzle, descriptor FZ freezing;
* CF flag_meanings words (CF113, section 3.5): one word per value, phrases joined by
  underscores.
"""

from __future__ import annotations

import re

import numpy as np
import pytest

from ptype.codes import (
    FREEZING,
    FROZEN,
    GRIB2_4201,
    GRIB2_4201_MEANINGS,
    HAS_LIQUID,
    HAZARD_ORDER,
    LABELS,
    NO_RESULT,
    PRECIP_CODES,
    Code,
    abbrev,
    from_abbrev,
    to_grib2,
)

#: GRIB2 code table 4.201, the entries ptype emits (WMO-No. 306 Vol. I.2).
TABLE_4201 = {0: "No precipitation", 1: "Rain", 3: "Freezing rain", 4: "Mixed/ice", 5: "Snow",
              7: "Mixture of rain and snow", 8: "Ice pellets", 11: "Drizzle",
              12: "Freezing drizzle"}
#: Precipitation abbreviations of WMO-No. 306 code table 4678 used by ptype's codes.
METAR_PRECIPITATION = {"RA": "rain", "SN": "snow", "PL": "ice pellets", "DZ": "drizzle"}


@pytest.mark.parametrize("code, value", [(Code.NONE, 0), (Code.RA, 1), (Code.FZRA, 3),
                                         (Code.FZRAPL, 4), (Code.RAPL, 4), (Code.SN, 5),
                                         (Code.RASN, 7), (Code.PL, 8), (Code.DZ, 11),
                                         (Code.FZDZ, 12)])
def test_grib2_4201_values(code, value):
    assert GRIB2_4201[code] == value
    assert value in TABLE_4201


def test_grib2_4201_every_code_mapped():
    assert set(GRIB2_4201) == set(Code)


def test_grib2_4201_meanings_are_cf_flag_words_of_the_table():
    assert set(GRIB2_4201_MEANINGS) == set(GRIB2_4201.values())
    for value, word in GRIB2_4201_MEANINGS.items():
        assert re.fullmatch(r"[A-Za-z0-9_\-.+@]+", word)  # CF 1.13 section 3.5
        table = TABLE_4201[value].lower().replace("/", "_").replace(" ", "_")
        assert word == table


def test_to_grib2_vectorised_with_missing():
    codes = np.array([Code.RA, NO_RESULT, Code.FZDZ, Code.RAPL, Code.NONE])
    out = to_grib2(codes)
    assert out.dtype == np.uint8
    assert out.tolist() == [1, 255, 12, 4, 0]  # 255: missing in GRIB2 code tables


def test_codes_are_metar_abbreviations():
    for code in PRECIP_CODES:
        name = code.name
        freezing = name.startswith("FZ")
        parts = re.findall("RA|SN|PL|DZ", name.removeprefix("FZ"))
        # Built only from the precipitation abbreviations, after the FZ descriptor.
        assert "".join(parts) == name.removeprefix("FZ"), name
        assert (code in FREEZING) == freezing
        for part in parts:
            assert METAR_PRECIPITATION[part] in LABELS[code]
        assert code.abbrev == name


def test_labels_name_freezing_types():
    for code in FREEZING:
        assert LABELS[code].startswith("freezing")
    assert LABELS[Code.NONE] == "no precipitation"


@pytest.mark.parametrize("text, code", [("FZRA", Code.FZRA), ("fzra pl", Code.FZRAPL),
                                        ("FZRA PL", Code.FZRAPL), ("IP", Code.PL),
                                        (" sn ", Code.SN), ("RAPL", Code.RAPL)])
def test_from_abbrev_accepts_both_spellings(text, code):
    # "FZRA PL": the two-group form of strict WMO practice; IP: the former abbreviation of
    # ice pellets (common practice).
    assert from_abbrev(text) is code


def test_from_abbrev_refuses_unknown():
    with pytest.raises(ValueError, match="unknown precipitation-type code 'GR'"):
        from_abbrev("GR")


def test_abbrev_of_no_result():
    assert abbrev(NO_RESULT) is None and abbrev(int(Code.SN)) == "SN"


def test_code_groups():
    assert FROZEN == {Code.SN, Code.PL}
    assert FREEZING <= HAS_LIQUID and not (FROZEN & HAS_LIQUID)
    # The operational tie-break FZRA > SN > IP > RA (common practice) is kept in order.
    order = [c for c in HAZARD_ORDER if c in (Code.FZRA, Code.SN, Code.PL, Code.RA)]
    assert order == [Code.FZRA, Code.SN, Code.PL, Code.RA]
