"""The ptype JSON profile document (pydantic models).

This is the structure of our own JSON format and of the HTTP request bodies.
It checks *structure and types* (unknown fields, strings where numbers belong);
the physical checks (ranges, ordering, duplicates) live in
:mod:`ptype.profile` so that every reader (JSON, CSV, TEMP, NetCDF) gets the
same messages.  The JSON Schema is published in ``docs/profile.schema.json``
(regenerate with ``python -m ptype.profile.document > docs/profile.schema.json``).
"""

from __future__ import annotations

import json
from datetime import datetime
from typing import Annotated, Any

from pydantic import AfterValidator, BaseModel, ConfigDict, Field, ValidationError

from ptype.clock import in_time_range
from ptype.errors import ProfileError

# Strict numbers: a JSON string such as "12.5" is refused rather than coerced,
# and booleans are never numbers.
_NUM = {"strict": True, "allow_inf_nan": True}


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", strict=True)


class Site(_Strict):
    """Where the profile applies."""

    id: str | None = Field(None, max_length=100, description="Identifier chosen by the user.")
    name: str | None = Field(None, max_length=200, description="Human-readable site name.")
    latitude: float | None = Field(None, ge=-90, le=90, allow_inf_nan=False,
                                   description="Degrees north.")
    longitude: float | None = Field(None, ge=-180, le=360, allow_inf_nan=False,
                                    description="Degrees east.")
    elevation_m: float | None = Field(None, ge=-500, le=9000, allow_inf_nan=False,
                                      description="Station elevation above mean sea level, m.")


class Level(_Strict):
    """One level of the sounding.  Give humidity in exactly one of the four forms."""

    pressure_hpa: float = Field(..., description="Pressure, hPa.")
    height_m: float | None = Field(None, description="Geopotential height above mean sea level, m.")
    temperature_c: float = Field(..., description="Air temperature, degC.")
    dewpoint_c: float | None = Field(None, description="Dew point over water, degC.")
    relative_humidity_pct: float | None = Field(None,
                                                description="Relative humidity over water, %.")
    mixing_ratio_g_kg: float | None = Field(None, description="Water-vapour mixing ratio, g/kg.")
    wetbulb_c: float | None = Field(
        None, description="Psychrometer wet-bulb reading, degC (converted to a dew point).")


class Surface(_Strict):
    """Surface (screen-level and road) readings that go with the profile.

    Values must be finite and physically possible (common-practice bounds); a NaN or an
    infinity here would silently switch off the surface checks of the diagnosis.
    """

    temperature_2m_c: float | None = Field(None, ge=-100, le=60, allow_inf_nan=False,
                                           description="Screen-level (2 m) air temperature, degC.")
    dewpoint_2m_c: float | None = Field(None, ge=-100, le=60, allow_inf_nan=False,
                                        description="Screen-level (2 m) dew point, degC.")
    road_surface_temperature_c: float | None = Field(None, ge=-80, le=80, allow_inf_nan=False,
                                                     description="Road-surface temperature, degC.")
    precipitation_rate_mm_h: float | None = Field(None, ge=0, le=500, allow_inf_nan=False,
                                                  description="Precipitation rate, mm/h "
                                                              "(liquid equivalent).")
    wind_speed_m_s: float | None = Field(None, ge=0, le=150, allow_inf_nan=False,
                                         description="Wind speed, m/s.")
    elevation_m: float | None = Field(None, ge=-500, le=9000, allow_inf_nan=False,
                                      description="Station elevation, m.")
    pressure_hpa: float | None = Field(None, gt=0, le=1100, allow_inf_nan=False,
                                       description="Station pressure, hPa.")


class ProfileDocument(_Strict):
    """A single vertical profile with optional site, valid time and surface readings."""

    site: Site | None = None
    valid_time: Annotated[datetime, AfterValidator(in_time_range)] | None = Field(
        None, description="ISO 8601 time the profile is valid for; UTC assumed when no offset; "
                          "from 1900 up to (not including) 2200.")
    source: str | None = Field(None, max_length=200,
                               description="Free text: radiosonde, aircraft, model name...")
    levels: list[Level] = Field(..., description="Levels in any order.")
    surface: Surface | None = None

    model_config = ConfigDict(extra="forbid", strict=False,
                              json_schema_extra={"title": "ptype profile document"})


def _loc(loc: tuple) -> str:
    out = ""
    for part in loc:
        if isinstance(part, int):
            out += f"[{part}]"
        else:
            out += ("." if out else "") + str(part)
    return out


def validation_error_to_profile_error(exc: ValidationError) -> ProfileError:
    """Turn the first pydantic error into a one-line :class:`ProfileError` naming the field."""
    err = exc.errors()[0]
    field = _loc(err["loc"])
    kind = err["type"]
    value = err.get("input")
    if kind == "extra_forbidden":
        msg = (f"{field}: unknown field (value {value!r}); see docs/formats.md for the accepted "
               "fields")
    elif kind == "missing":
        msg = f"{field}: required field is missing"
    else:
        shown = repr(value)
        if len(shown) > 60:
            shown = shown[:57] + "..."
        msg = f"{field}: {err['msg'].removeprefix('Value error, ').lower()} (got {shown})"
    if len(exc.errors()) > 1:
        msg += f" (and {len(exc.errors()) - 1} more problem(s))"
    return ProfileError(msg, field=field)


def parse_document(data: Any) -> ProfileDocument:
    """Validate a decoded JSON object as a :class:`ProfileDocument`.

    Raises :class:`ProfileError` naming the first offending field.
    """
    if not isinstance(data, dict):
        raise ProfileError(f"profile document must be a JSON object, got {type(data).__name__}")
    try:
        return ProfileDocument.model_validate(data)
    except ValidationError as exc:
        raise validation_error_to_profile_error(exc) from None


def json_schema() -> dict:
    """The JSON Schema of the profile document."""
    schema = ProfileDocument.model_json_schema()
    schema["$schema"] = "https://json-schema.org/draft/2020-12/schema"
    return schema


if __name__ == "__main__":  # pragma: no cover - regenerates docs/profile.schema.json
    print(json.dumps(json_schema(), indent=2))
