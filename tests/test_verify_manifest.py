"""Manifest reading (ptype/verify/manifest.py): formats, paths and error messages.

The profiles written here are invented test soundings (no real site).
"""

from __future__ import annotations

import json
from datetime import UTC, datetime

import pytest

from ptype.errors import ProfileError, ReaderError
from ptype.verify.manifest import Case, cases_from_entries, read_manifest

DOC = {"levels": [{"pressure_hpa": 1000, "temperature_c": -2.0, "dewpoint_c": -2.5},
                  {"pressure_hpa": 850, "temperature_c": 3.0, "dewpoint_c": 2.6},
                  {"pressure_hpa": 700, "temperature_c": -8.0, "dewpoint_c": -8.5},
                  {"pressure_hpa": 500, "temperature_c": -25.0, "dewpoint_c": -26.0}]}


@pytest.fixture
def folder(tmp_path):
    (tmp_path / "p").mkdir()
    (tmp_path / "p" / "a.json").write_text(json.dumps(DOC))
    (tmp_path / "p" / "b.json").write_text(json.dumps(DOC))
    return tmp_path


def test_read_manifest_csv_resolves_relative_paths_and_optional_fields(folder):
    (folder / "m.csv").write_text(
        "# comment line\nprofile,observed,valid_time,site\n"
        "p/a.json,-FZRA BR,2025-01-14T06:00Z,Skelder Fen\n\np/b.json,FZRA PL,,\n")
    cases = read_manifest(folder / "m.csv")
    assert [c.observed for c in cases] == ["-FZRA BR", "FZRA PL"]
    assert cases[0].profile == (folder / "p" / "a.json").resolve()
    assert cases[0].valid_time == datetime(2025, 1, 14, 6, tzinfo=UTC)
    assert cases[0].site == "Skelder Fen"
    assert cases[1].valid_time is None and cases[1].site is None
    assert cases[1].where == "m.csv line 5"   # file lines, comments and blanks counted
    assert cases[0].load_profile().n_levels == 4


def test_read_manifest_csv_column_order_is_free(folder):
    (folder / "m.csv").write_text("observed,profile\nSN,p/a.json\n")
    assert read_manifest(folder / "m.csv")[0].observed == "SN"


def test_read_manifest_json_list_and_object_with_inline_document(folder):
    (folder / "m.json").write_text(json.dumps([{"profile": "p/a.json", "observed": "RA"}]))
    assert read_manifest(folder / "m.json")[0].observed == "RA"
    (folder / "n.json").write_text(json.dumps({"cases": [{"profile": DOC, "observed": "SN"}]}))
    case = read_manifest(folder / "n.json")[0]
    assert isinstance(case.profile, dict)
    assert case.load_profile().n_levels == 4


@pytest.mark.parametrize("text, match, field", [
    ("profile,site\np/a.json,x\n", "line 1: header has no 'observed' column", "observed"),
    ("profile,observed,colour\np/a.json,RA,red\n", "line 1: unknown column 'colour'", "colour"),
    ("profile,observed\np/a.json,RA\np/missing.json,SN\n",
     "m.csv line 3: field 'profile': no such file 'p/missing.json'", "profile"),
    ("profile,observed,valid_time\np/a.json,RA,yesterday\n",
     "m.csv line 2: field 'valid_time': 'yesterday' is not an ISO 8601 time", "valid_time"),
    ("profile,observed\np/a.json\n", "m.csv line 2: 1 fields, expected 2", None),
    ("profile,observed\n,RA\n", "m.csv line 2: field 'profile' is empty", "profile"),
    ("# only a comment\n", "empty manifest", None),
    ("profile,observed\n", "lists no cases", None),
])
def test_read_manifest_csv_errors_name_line_and_field(folder, text, match, field):
    (folder / "m.csv").write_text(text)
    with pytest.raises(ReaderError, match=match) as info:
        read_manifest(folder / "m.csv")
    assert info.value.field == field


@pytest.mark.parametrize("data, match, field", [
    ([{"profile": "p/a.json"}], r"m.json cases\[0\]: field 'observed' is missing",
     "cases[0].observed"),
    ([{"profile": "p/a.json", "observed": "RA"}, {"profile": "p/a.json", "observed": 3}],
     r"cases\[1\]: field 'observed': expected present-weather text", "cases[1].observed"),
    ([{"profile": 5, "observed": "RA"}], r"cases\[0\]: field 'profile': expected a path",
     "cases[0].profile"),
    ([{"profile": "p/a.json", "observed": "RA", "remark": "x"}],
     r"cases\[0\]: unknown field 'remark'", "cases[0].remark"),
    (["p/a.json"], r"cases\[0\]: expected an object", "cases[0]"),
    ({"cases": 3}, "expected a list of cases", "cases"),
    ({"items": []}, "unknown top-level field 'items'", "items"),
])
def test_read_manifest_json_errors_name_entry_and_field(folder, data, match, field):
    (folder / "m.json").write_text(json.dumps(data))
    with pytest.raises(ReaderError, match=match) as info:
        read_manifest(folder / "m.json")
    assert info.value.field == field


def test_read_manifest_invalid_json_names_line(folder):
    (folder / "m.json").write_text('[{"profile": "p/a.json",\n "observed": }]')
    with pytest.raises(ReaderError, match=r"m.json: line 2 column"):
        read_manifest(folder / "m.json")


def test_read_manifest_missing_file(tmp_path):
    with pytest.raises(ReaderError, match="no such manifest file"):
        read_manifest(tmp_path / "nope.csv")


def test_case_load_profile_error_names_entry_and_profile_field():
    bad = {"levels": [{"pressure_hpa": 1000, "temperature_c": "cold", "dewpoint_c": -3}]}
    case = cases_from_entries([{"profile": bad, "observed": "SN"}], allow_paths=False)[0]
    with pytest.raises(ProfileError, match=r"cases\[0\]: field 'profile'") as info:
        case.load_profile()
    assert info.value.field.startswith("cases[0].profile.levels[0]")


def test_cases_from_entries_refuses_paths_when_not_allowed():
    with pytest.raises(ReaderError, match="file paths are not accepted") as info:
        cases_from_entries([{"profile": "/etc/passwd", "observed": "SN"}], allow_paths=False)
    assert info.value.field == "cases[0].profile"


def test_case_is_frozen():
    case = cases_from_entries([{"profile": DOC, "observed": "SN"}], allow_paths=False)[0]
    assert isinstance(case, Case)
    with pytest.raises(AttributeError):
        case.observed = "RA"
