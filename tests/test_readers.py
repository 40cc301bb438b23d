"""Readers (ptype/readers/): one invented sounding in JSON, CSV and WMO TEMP reads the same.

tests/data/warm_nose_sounding.{json,csv} are the same invented sounding (fictional site);
warm_nose_sounding.temp was produced from the JSON by ``write_temp`` and is read back here
within the precision of the TEMP code (WMO-No. 306 FM 35: temperature to 0.1 degC with
the sign on the tenths parity, dew-point depression in tenths up to 5 degC, whole
degrees above; pressures in whole hPa; heights in metres up to 700 hPa, decametres above).
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from ptype import read_profile
from ptype.errors import ProfileError, ReaderError
from ptype.readers import detect_format, read_document
from ptype.readers.csv_format import read_csv_document
from ptype.readers.temp_format import write_temp

DATA = Path(__file__).parent / "data"
JSON_PATH = DATA / "warm_nose_sounding.json"
CSV_PATH = DATA / "warm_nose_sounding.csv"
TEMP_PATH = DATA / "warm_nose_sounding.temp"


def _at(profile, pressure):
    k = int(np.nonzero(np.isclose(profile.pressure_hpa, pressure))[0][0])
    return k


# --- the same sounding in three formats ---------------------------------------------------

def test_read_profile_json_and_csv_identical():
    a, b = read_profile(JSON_PATH), read_profile(CSV_PATH)
    for name in ("pressure_hpa", "height_m", "temperature_c", "dewpoint_c"):
        np.testing.assert_array_equal(getattr(a, name), getattr(b, name))
    assert a.site == b.site and a.valid_time == b.valid_time and a.source == b.source


def test_read_profile_temp_matches_json_within_code_precision():
    ref = read_profile(JSON_PATH)
    temp = read_profile(TEMP_PATH)
    # Every JSON level is in the TEMP (Part B significant levels) ...
    for p, z, t, td in zip(ref.pressure_hpa, ref.height_m, ref.temperature_c, ref.dewpoint_c):
        k = _at(temp, p)
        assert temp.temperature_c[k] == pytest.approx(t, abs=0.1 + 1e-9), p
        tol = 0.15 if t - td < 5.0 else 0.6
        assert temp.dewpoint_c[k] == pytest.approx(td, abs=tol + 1e-9), p
        # Heights: standard surfaces carry the code's metres/decametres, the rest is
        # hypsometric between them; the lowest level comes from the 1000/925 hPa heights.
        assert temp.height_m[k] == pytest.approx(z, abs=6.0), p
    # ... and the only extra levels are Part A's standard surfaces, on the ln p interpolation.
    extra = sorted(set(temp.pressure_hpa.tolist()) - set(ref.pressure_hpa.tolist()))
    assert extra == []  # every standard surface of this sounding is also a profile level


def test_read_profile_temp_extra_standard_levels_on_interpolation():
    # A sounding without levels at the standard surfaces: Part A adds them, interpolated in ln p.
    doc = json.loads(JSON_PATH.read_text())
    doc["levels"] = [lvl for lvl in doc["levels"] if lvl["pressure_hpa"] not in (850, 700, 500)]
    ref = read_profile(json.dumps(doc))
    temp = read_profile(write_temp(doc), format="temp")
    x = -np.log(ref.pressure_hpa)
    for ps in (850.0, 700.0, 500.0):
        k = _at(temp, ps)
        t = np.interp(-math.log(ps), x, ref.temperature_c)
        assert temp.temperature_c[k] == pytest.approx(t, abs=0.1 + 1e-9)
    assert temp.n_levels == ref.n_levels + 3


def test_read_document_sources_path_text_bytes_agree():
    for path in (JSON_PATH, CSV_PATH, TEMP_PATH):
        by_path, name = read_document(path)
        assert name == str(path)
        by_str_path, _ = read_document(str(path))
        by_text, text_name = read_document(path.read_text())
        by_bytes, _ = read_document(path.read_bytes())
        assert by_path == by_str_path == by_text == by_bytes
        assert text_name == "<text>"


@pytest.mark.parametrize("path, fmt", [(JSON_PATH, "json"), (CSV_PATH, "csv"), (TEMP_PATH, "temp")])
def test_detect_format(path, fmt):
    assert detect_format(path.read_text()) == fmt


def test_detect_format_unknown():
    with pytest.raises(ReaderError, match="could not tell the format"):
        detect_format("hello")


def test_read_profile_byte_order_mark_accepted(tmp_path):
    # Spreadsheet exports often start with a UTF-8 byte-order mark (common practice).
    for src in (JSON_PATH, CSV_PATH):
        path = tmp_path / src.name
        path.write_bytes(b"\xef\xbb\xbf" + src.read_bytes())
        assert read_profile(path).n_levels == 12
        assert read_profile(path.read_bytes()).n_levels == 12


# --- CSV metadata ---------------------------------------------------------------------------

def test_read_csv_document_metadata_comments():
    doc = read_csv_document(CSV_PATH.read_text())
    assert doc["site"] == {"id": "KESTREL", "name": "Kestrel Ridge (invented test site)",
                           "latitude": 46.5, "longitude": 7.25, "elevation_m": 310.0}
    assert doc["valid_time"] == "2026-01-15T12:00:00Z"
    assert doc["source"] == "invented test sounding"
    assert len(doc["levels"]) == 12


def test_read_csv_document_surface_metadata_and_plain_comments():
    text = ("# a plain comment without a key\n# surface.road_surface_temperature_c: -3.5\n"
            "# surface.precipitation_rate_mm_h: 1.2\n"
            "pressure_hpa,temperature_c,relative_humidity_pct\n"
            "1000,1.0,95\n900,2.0,90\n\n800,-3.0,80\n")
    doc = read_csv_document(text)
    assert doc["surface"] == {"road_surface_temperature_c": -3.5, "precipitation_rate_mm_h": 1.2}
    prof = read_profile(text)
    assert prof.surface.road_surface_temperature_c == -3.5
    assert prof.n_levels == 3


def test_read_csv_document_empty_cells_are_missing():
    text = ("pressure_hpa,height_m,temperature_c,dewpoint_c\n1000,110,1.0,0.5\n900,,2.0,\n"
            "800,,-3.0,-5\n")
    doc = read_csv_document(text)
    assert doc["levels"][1] == {"pressure_hpa": 900.0, "temperature_c": 2.0}


@pytest.mark.parametrize("text, expected", [
    ("# elevation_m: high\npressure_hpa,temperature_c,dewpoint_c\n",
     "line 1: column elevation_m: 'high' is not a number"),
    ("# station: X\npressure_hpa,temperature_c,dewpoint_c\n",
     "line 1: unknown metadata key 'station'"),
    ("# only comments\n", "no header line found"),
    ("pressure_hpa,temp,dewpoint_c\n1000,1,0\n", "line 1: unknown column 'temp'"),
    ("pressure_hpa,temperature_c,temperature_c\n", "line 1: a column name is repeated"),
    ("height_m,temperature_c,dewpoint_c\n100,1,0\n",
     "line 1: the header has no pressure_hpa column"),
    ("pressure_hpa,temperature_c,dewpoint_c\n1000,1,0\n900,x,0\n",
     "line 3: column temperature_c: 'x' is not a number"),
    ("pressure_hpa,temperature_c,dewpoint_c\n1000,1,0\n\n900,1\n",
     "line 4: 2 value(s) for 3 columns"),
])
def test_read_csv_document_broken_input_names_line(text, expected):
    with pytest.raises(ReaderError) as info:
        read_csv_document(text, "bad.csv")
    msg = str(info.value)
    assert msg.startswith("bad.csv: ") and expected in msg and "\n" not in msg


def test_read_profile_csv_file_errors_name_file_and_level(tmp_path):
    path = tmp_path / "hot.csv"
    path.write_text("pressure_hpa,temperature_c,dewpoint_c\n1000,1,0\n900,75,0\n800,-3,-5\n")
    with pytest.raises(ProfileError) as info:
        read_profile(path)
    assert str(info.value) == (f"{path}: levels[1] (900 hPa).temperature_c = 75: "
                               "expected -100 to +60 degC")


# --- other reader errors --------------------------------------------------------------------

def test_read_profile_broken_temp_names_group(tmp_path):
    path = tmp_path / "cut.txt"
    text = TEMP_PATH.read_text().replace("02607", "0260")
    path.write_text(text)
    with pytest.raises(ReaderError, match=r"cut.txt: message 1 Part A: group 12 '0260': expected"):
        read_profile(path)


def test_read_profile_json_syntax_error_names_line_and_column():
    with pytest.raises(ReaderError, match=r"<text>: line 2 column 1: invalid JSON"):
        read_profile('{"levels": [\n}')


def test_read_profile_json_not_an_object():
    with pytest.raises(ReaderError, match="expected a JSON object"):
        read_profile("[1, 2]", format="json")


def test_read_profile_missing_file():
    with pytest.raises(ReaderError, match="nowhere.json: no such file"):
        read_profile("nowhere.json")


def test_read_profile_unknown_format_option():
    with pytest.raises(ReaderError, match="format 'xml' is not supported"):
        read_profile(JSON_PATH, format="xml")


def test_read_profile_not_utf8(tmp_path):
    path = tmp_path / "latin.csv"
    path.write_bytes("# site_name: Caf\xe9\npressure_hpa,temperature_c\n".encode("latin-1"))
    with pytest.raises(ReaderError, match="latin.csv: not a UTF-8 text file"):
        read_profile(path)


def test_read_profile_netcdf_text_refused():
    with pytest.raises(ReaderError, match="NetCDF must be given as a file path or bytes"):
        read_profile("CDF whatever\nmore", format="netcdf")


# --- the examples in docs/formats.md are valid ------------------------------------------------

def test_read_profile_docs_examples():
    text = (Path(__file__).resolve().parents[1] / "docs" / "formats.md").read_text()
    blocks = text.split("```")
    json_example = next(b for b in blocks if b.startswith("json\n"))[len("json\n"):]
    csv_example = next(b for b in blocks if b.lstrip("\n").startswith("# site_name"))
    a = read_profile(json_example)
    b = read_profile(csv_example)
    assert a.n_levels == b.n_levels == 4
    assert a.site.name == b.site.name and a.valid_time == b.valid_time
    assert a.surface.road_surface_temperature_c == b.surface.road_surface_temperature_c == -3.1


# --- robustness: any text is a profile or a one-line ProfileError/ReaderError ---------------

_CSV_PIECES = st.sampled_from(["pressure_hpa", "temperature_c", "dewpoint_c", "height_m", ",", "\n",
                               "# ", "site_id: A", "elevation_m: x", "1000", "900", "-5.5", "",
                               "nan", "inf", "\"", "1e999", "surface.wind_speed_m_s: 3", "{",
                               "TTAA"])


@settings(max_examples=300, deadline=None)
@given(st.lists(st.one_of(_CSV_PIECES, st.text(max_size=4)), max_size=40))
def test_read_profile_fuzz_only_profile_errors(pieces):
    text = "".join(pieces)
    try:
        read_profile(text, format="csv")
    except ProfileError as exc:  # ReaderError is a ProfileError
        assert "\n" not in str(exc)
    try:
        read_profile(text)
    except ProfileError as exc:
        assert "\n" not in str(exc)


def test_diagnose_same_category_from_every_format():
    # TEMP's 0.1 degC precision must not change the diagnosis of a clear-cut sounding.
    import ptype
    codes = {fmt: ptype.diagnose(read_profile(DATA / f"warm_nose_sounding.{fmt}"),
                                 seed=3).to_dict()["ptype"]
             for fmt in ("json", "csv", "temp")}
    assert len(set(codes.values())) == 1, codes
