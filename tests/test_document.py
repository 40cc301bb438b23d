"""The JSON profile document (ptype/profile/document.py): structure, types and its schema.

The document checks structure and types only (the physical checks are the profile's, see
tests/test_profile_levels.py); every refusal is one ProfileError naming the field.  The
published schema is a JSON Schema 2020-12 document (json-schema.org, draft 2020-12).
"""

from __future__ import annotations

import json
import math
import subprocess
import sys
from datetime import UTC, datetime, timedelta
from pathlib import Path

import pytest

from ptype.errors import ProfileError
from ptype.profile.document import (
    ProfileDocument,
    json_schema,
    parse_document,
    validation_error_to_profile_error,
)

ROOT = Path(__file__).resolve().parents[1]

#: Invented levels (not an observation).
LEVELS = [{"pressure_hpa": 1000.0, "temperature_c": -1.5, "dewpoint_c": -2.3},
          {"pressure_hpa": 900.0, "temperature_c": 1.6, "relative_humidity_pct": 95.0},
          {"pressure_hpa": 800.0, "temperature_c": 0.4, "mixing_ratio_g_kg": 3.8}]


def _error(**doc) -> ProfileError:
    with pytest.raises(ProfileError) as info:
        parse_document({"levels": [dict(lvl) for lvl in LEVELS], **doc})
    assert "\n" not in str(info.value)
    return info.value


# -- accepted documents ----------------------------------------------------------------------------

def test_parse_document_reads_every_section():
    doc = parse_document({"levels": LEVELS, "site": {"id": "ALPHA", "elevation_m": 412.0},
                          "valid_time": "2026-01-14T06:00:00+01:00", "source": "invented",
                          "surface": {"temperature_2m_c": -0.5, "precipitation_rate_mm_h": 0.8}})
    assert isinstance(doc, ProfileDocument)
    assert [lvl.pressure_hpa for lvl in doc.levels] == [1000.0, 900.0, 800.0]
    assert doc.levels[1].relative_humidity_pct == 95.0 and doc.levels[1].dewpoint_c is None
    assert doc.site.id == "ALPHA" and doc.surface.precipitation_rate_mm_h == 0.8
    # ISO 8601 time with a UTC offset: 06:00+01:00 is 05:00 UTC.
    assert doc.valid_time.astimezone(UTC) == datetime(2026, 1, 14, 5, 0, tzinfo=UTC)
    assert doc.valid_time.utcoffset() == timedelta(hours=1)


def test_parse_document_integers_are_numbers():
    # JSON has one number type (RFC 8259, section 6): 1000 and 1000.0 are the same value.
    doc = parse_document({"levels": [{"pressure_hpa": 1000, "temperature_c": 0,
                                      "dewpoint_c": -1}]})
    assert doc.levels[0].pressure_hpa == 1000.0


# -- refusals name the field -----------------------------------------------------------------------

def test_parse_document_not_an_object():
    with pytest.raises(ProfileError, match="must be a JSON object, got list"):
        parse_document([1, 2, 3])


def test_parse_document_unknown_top_level_field_named():
    err = _error(station="x")
    assert str(err).startswith("station: unknown field (value 'x')") and err.field == "station"


def test_parse_document_unknown_level_field_named():
    with pytest.raises(ProfileError) as info:
        parse_document({"levels": [{"pressure_hpa": 900.0, "temperature_c": 1.0, "rh": 50}]})
    assert info.value.field == "levels[0].rh" and "unknown field" in str(info.value)


def test_parse_document_missing_required_field():
    with pytest.raises(ProfileError) as info:
        parse_document({"levels": [{"pressure_hpa": 900.0}]})
    assert str(info.value) == "levels[0].temperature_c: required field is missing"
    with pytest.raises(ProfileError, match="^levels: required field is missing"):
        parse_document({"site": {"id": "A"}})


@pytest.mark.parametrize("value", ["12.5", True])
def test_parse_document_strict_numbers(value):
    # Strings and booleans are not numbers (JSON types, RFC 8259 section 3): no coercion.
    with pytest.raises(ProfileError) as info:
        parse_document({"levels": [{"pressure_hpa": 900.0, "temperature_c": value}]})
    assert info.value.field == "levels[0].temperature_c" and repr(value) in str(info.value)


def test_validation_error_counts_the_other_problems():
    from pydantic import ValidationError
    try:
        ProfileDocument.model_validate({"levels": [{"pressure_hpa": "a", "temperature_c": "b"}]})
    except ValidationError as exc:
        err = validation_error_to_profile_error(exc)
    assert err.field == "levels[0].pressure_hpa" and "(and 1 more problem(s))" in str(err)


def test_parse_document_long_values_are_shortened_in_messages():
    with pytest.raises(ProfileError) as info:
        parse_document({"levels": [{"pressure_hpa": "x" * 200, "temperature_c": 1.0}]})
    assert "..." in str(info.value) and len(str(info.value)) < 200


@pytest.mark.parametrize("section, field, value, expected", [
    ("surface", "temperature_2m_c", math.nan, "finite number"),
    ("surface", "road_surface_temperature_c", math.inf, "finite number"),
    ("surface", "road_surface_temperature_c", 500.0, "less than or equal to 80"),
    ("surface", "pressure_hpa", 0.0, "greater than 0"),
    ("surface", "precipitation_rate_mm_h", -1.0, "greater than or equal to 0"),
    ("surface", "wind_speed_m_s", "3", "valid number"),
    ("site", "latitude", math.nan, "finite number"),
    ("site", "latitude", 90.5, "less than or equal to 90"),
    ("site", "elevation_m", 12000.0, "less than or equal to 9000"),
])
def test_parse_document_surface_and_site_values_checked(section, field, value, expected):
    # A NaN road temperature would silently disable the surface checks downstream.  Latitude
    # lies in -90..90 degrees (ISO 6709).
    err = _error(**{section: {field: value}})
    assert str(err).startswith(f"{section}.{field}: ") and expected in str(err)
    assert err.field == f"{section}.{field}"


# -- the published JSON Schema ---------------------------------------------------------------------

def test_json_schema_is_a_2020_12_schema_of_the_document():
    schema = json_schema()
    assert schema["$schema"] == "https://json-schema.org/draft/2020-12/schema"
    assert schema["type"] == "object" and set(schema["required"]) == {"levels"}
    assert schema["additionalProperties"] is False  # unknown fields are refused


def test_json_schema_matches_committed_file():
    committed = json.loads((ROOT / "docs" / "profile.schema.json").read_text())
    assert committed == json_schema(), ("docs/profile.schema.json is stale: regenerate with "
                                        "python -m ptype.profile.document > "
                                        "docs/profile.schema.json")


def test_json_schema_module_entry_point_prints_schema():
    out = subprocess.run([sys.executable, "-m", "ptype.profile.document"], capture_output=True,
                         text=True, check=True, cwd=ROOT)
    assert json.loads(out.stdout) == json_schema()
