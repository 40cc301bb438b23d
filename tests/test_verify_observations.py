"""Present-weather parsing (ptype/verify/observations.py).

Group grammar and the combinations used below come from WMO-No. 306 code table 4678
(present weather w'w' in METAR/SPECI) as summarised in our standards brief, section 3:
intensity/proximity, descriptor (MI BC PR DR BL SH TS FZ), precipitation (DZ RA SN SG IC
PL GR GS UP), obscuration, other; FZ combines only with DZ, RA, UP and FG.  The mapping
of each report to a ptype class is our documented table (docs/verification.md).
"""

from __future__ import annotations

import pytest

from ptype.codes import Code
from ptype.verify import observations as ob
from ptype.verify.observations import parse_observation


@pytest.mark.parametrize("text, code", [
    # Intensity signs and obscurations do not change the class (table 4678: "-", "+", BR, FG).
    ("-FZRA BR", Code.FZRA),
    ("+SN BLSN", Code.SN),
    ("FZRA", Code.FZRA),
    ("+FZDZ FG", Code.FZDZ),
    ("-DZ", Code.DZ),
    ("RA HZ", Code.RA),
    ("PL", Code.PL),
    ("-SN", Code.SN),
    # Descriptors SH and TS qualify the precipitation they carry.
    ("SHRA", Code.RA),
    ("+TSRA", Code.RA),
    ("-SHSN", Code.SN),
    ("SHRASN", Code.RASN),
    # Mixtures, dominant type first (table 4678 lists every ordering).
    ("RASN", Code.RASN),
    ("SNRA", Code.RASN),
    ("-RAPL", Code.RAPL),
    ("PLRA", Code.RAPL),
    ("DZSN", Code.RASN),
    # Freezing rain with ice pellets: two groups (WMO) or one group (national practice).
    ("FZRA PL", Code.FZRAPL),
    ("-FZRA -PL", Code.FZRAPL),
    ("PL FZRA", Code.FZRAPL),
    ("FZRAPL", Code.FZRAPL),
    ("FZDZ PL", Code.FZRAPL),
    # Drizzle with rain counts as rain.
    ("RADZ", Code.RA),
    ("DZRA", Code.RA),
    ("FZRADZ", Code.FZRA),
    ("FZDZRA", Code.FZRA),
    # Snow grains are unmelted ice: snow.
    ("SG", Code.SN),
    ("-RASG", Code.RASN),
    # The older abbreviation IP for ice pellets.
    ("IP", Code.PL),
    # Mixtures with no class of their own: first-reported type.
    ("SNPL", Code.SN),
    ("PLSN", Code.PL),
    ("-FZRA SN", Code.FZRA),
    ("-SN FZDZ", Code.SN),
    ("FZRA SN PL", Code.FZRAPL),
    ("RASNPL", Code.RASN),
    ("RAPLSN", Code.RAPL),
    # Hail/graupel dropped from a mixture.
    ("SHRAGS", Code.RA),
    ("TSRAGR", Code.RA),
    # No precipitation at the station.
    ("NSW", Code.NONE),
    ("BR", Code.NONE),
    ("VCSH", Code.NONE),
    ("BLSN", Code.NONE),
    ("FZFG", Code.NONE),
    ("TS", Code.NONE),
    ("VCSH BR", Code.NONE),
    ("none", Code.NONE),
    # Recent weather is not present weather.
    ("-SN RESN", Code.SN),
    # Lower case is accepted.
    ("-fzra br", Code.FZRA),
])
def test_parse_observation_maps_to_code(text, code):
    obs = parse_observation(text)
    assert obs.code is code, (text, obs)
    assert obs.reason is None


@pytest.mark.parametrize("text, reason", [
    ("UP", ob.REASON_UNIDENTIFIED),
    ("-FZUP", ob.REASON_UNIDENTIFIED),
    ("-SN UP", ob.REASON_UNIDENTIFIED),
    ("GR", ob.REASON_HAIL),
    ("SHGS", ob.REASON_HAIL),
    ("IC", ob.REASON_CRYSTALS),
    ("", ob.REASON_EMPTY),
    ("   ", ob.REASON_EMPTY),
    (None, ob.REASON_EMPTY),
    ("//", ob.REASON_MISSING),
    ("XX", ob.REASON_UNPARSEABLE),
    ("RAIN", ob.REASON_UNPARSEABLE),
    ("FZSN", ob.REASON_UNPARSEABLE),      # FZ only with DZ, RA, UP, FG (table 4678)
    ("FZPL", ob.REASON_UNPARSEABLE),
    ("-VCSH", ob.REASON_UNPARSEABLE),     # VC takes no intensity sign
    ("-", ob.REASON_UNPARSEABLE),
    ("RA3", ob.REASON_UNPARSEABLE),
    ("RERA", ob.REASON_RECENT),
])
def test_parse_observation_excludes_with_reason(text, reason):
    obs = parse_observation(text)
    assert obs.code is None and obs.excluded
    assert obs.reason == reason


def test_parse_observation_records_intensity_of_first_precipitation_group():
    assert parse_observation("+SN BLSN").intensity == "heavy"
    assert parse_observation("BR -FZRA").intensity == "light"
    assert parse_observation("RA").intensity == "moderate"
    assert parse_observation("BR").intensity is None


def test_parse_observation_unparseable_names_the_group():
    obs = parse_observation("-SN QQ")
    assert obs.reason == ob.REASON_UNPARSEABLE
    assert "QQ" in obs.detail


def test_parse_observation_to_dict_round_trips_fields():
    d = parse_observation("FZRA PL").to_dict()
    assert d == {"raw": "FZRA PL", "code": "FZRAPL", "intensity": "moderate"}
    d = parse_observation("UP").to_dict()
    assert d["code"] is None and d["reason"] == ob.REASON_UNIDENTIFIED
