"""Pydantic models of every HTTP request and response.

They are the single description of the wire format: :mod:`api.docs` builds the
OpenAPI document from them, and the views use the request models to validate
query options.  Response bodies come from the library (``Diagnosis.to_dict()``)
and are not re-validated on the hot path; the tests check them against these
models instead.
"""

from __future__ import annotations

from typing import Any, Literal

from pydantic import BaseModel, ConfigDict, Field

from ptype.profile.document import ProfileDocument

PTYPE_CODES = ("NONE", "RA", "SN", "PL", "FZRA", "FZDZ", "DZ", "RASN", "RAPL", "FZRAPL")
METHOD_NAMES = ("bourgouin", "ramer", "baldwin", "baldwin_revised", "czys", "cloud_top",
                "thickness", "jennings")

PtypeCode = Literal["NONE", "RA", "SN", "PL", "FZRA", "FZDZ", "DZ", "RASN", "RAPL", "FZRAPL"]


class _Model(BaseModel):
    model_config = ConfigDict(extra="forbid")


class _Open(BaseModel):
    """A response object that may gain fields in later versions (clients ignore unknown keys)."""

    model_config = ConfigDict(extra="allow")


# -- errors -----------------------------------------------------------------------------
class ErrorDetail(_Model):
    code: str = Field(..., description="Stable machine-readable error code, e.g. `invalid_profile`.",
                      examples=["invalid_profile"])
    message: str = Field(..., description="One sentence naming the problem and what was expected.",
                         examples=["levels[2].temperature_c = 'warm': expected a number"])
    field: str | None = Field(None, description="Dotted path of the offending field when known.",
                              examples=["levels[2].temperature_c"])


class ErrorResponse(_Model):
    """Every 4xx/5xx answer has this shape."""

    error: ErrorDetail


# -- query options ----------------------------------------------------------------------
class DiagnoseOptions(_Model):
    """Query options of the diagnosis endpoints."""

    methods: str | None = Field(
        None, description="Comma-separated method names to run (default: all). Known: "
                          + ", ".join(METHOD_NAMES) + ".", examples=["bourgouin,ramer"])
    members: int | None = Field(
        None, ge=0, description="Monte-Carlo members for the probabilities (default 50; "
                                "0 = the deterministic methods only). Upper limit set by the server.",
        examples=[50])
    seed: int | None = Field(None, ge=0, le=2**32 - 1,
                             description="Random seed for reproducible probabilities.",
                             examples=[7])
    wetbulb: Literal["isobaric", "adiabatic"] = Field(
        "isobaric", description="Wet-bulb temperature used by methods that need one.")
    input_format: Literal["json", "csv", "temp"] | None = Field(
        None, alias="input",
        description="Format of a `text/plain` body (default: detected from the content: "
                    "CSV header naming pressure_hpa, or a WMO TEMP message).")

    model_config = ConfigDict(extra="forbid", populate_by_name=True)


class DiagramOptions(DiagnoseOptions):
    """Query options of the diagram endpoint."""

    image_format: Literal["png", "svg"] | None = Field(
        None, alias="format", description="Image format; overrides the `Accept` header. "
                                         "Default PNG.")


# -- diagnosis --------------------------------------------------------------------------
Number = float | int | None
Value = float | int | str | bool | None | list[Any] | dict[str, Any]


class Step(_Open):
    """One step of reasoning: the rule that fired with the numbers it compared."""

    rule: str = Field(..., description="Short stable identifier of the rule.",
                      examples=["warm_layer_melts_fully"])
    text: str = Field(..., description="A sentence with the numbers in it.")
    values: dict[str, Value] = Field(default_factory=dict, description="Numbers compared.")
    thresholds: dict[str, Value] = Field(default_factory=dict,
                                         description="Limits they were compared with.")
    source: str = Field("", description="Where the rule or threshold comes from.")


class MethodOutcome(_Open):
    ptype: PtypeCode | None = Field(..., description="Type this method diagnosed; null when it "
                                                     "abstains (outside its domain).")
    title: str = Field(..., description="Human-readable method name.")
    rule: str | None = Field(None, description="The rule that decided (last step).")
    wetbulb: str | None = Field(None, description="Wet-bulb kind the method uses, if any.")
    reference: str = Field(..., description="Published source of the method.")
    steps: list[Step] = Field(default_factory=list)


class Consensus(_Open):
    rule: str | None = Field(None, description="The consensus rule that decided.")
    steps: list[Step] = Field(default_factory=list)


class Layer(_Open):
    """A layer above (warm) or below (cold) 0 degC."""

    kind: Literal["warm", "cold"]
    bottom_hpa: Number = None
    top_hpa: Number = None
    bottom_m: Number = None
    top_m: Number = None
    depth_m: Number = None
    area_j_kg: Number = Field(None, description="Positive area between the curve and 0 degC "
                                               "on a thermodynamic diagram, J/kg.")
    extreme_c: Number = Field(None, description="Warmest (warm layer) or coldest (cold layer) "
                                                "value, degC.")


class CloudLayer(_Open):
    bottom_hpa: Number = None
    top_hpa: Number = None
    bottom_m: Number = None
    top_m: Number = None
    top_temperature_c: Number = None
    min_temperature_c: Number = None


class ProfileArrays(_Open):
    """The profile as used, surface -> top, with derived columns."""

    pressure_hpa: list[Number]
    height_m: list[Number]
    temperature_c: list[Number]
    dewpoint_c: list[Number]
    relative_humidity_pct: list[Number] = Field(default_factory=list)
    wetbulb_c: list[Number] = Field(default_factory=list)


class Diagnosis(_Open):
    """The diagnosis of one profile: consensus, probabilities, each method's reasoning."""

    ptype: PtypeCode = Field(..., description="Consensus type (METAR/WMO abbreviation).",
                             examples=["FZRA"])
    ptype_label: str = Field(..., examples=["freezing rain"])
    grib2_code: int = Field(..., description="WMO GRIB2 code table 4.201 value.", examples=[3])
    probabilities: dict[str, float] = Field(
        ..., description="Probability of each type over the Monte-Carlo members (sums to 1).",
        examples=[{"FZRA": 0.82, "FZRAPL": 0.12, "PL": 0.06}])
    probability: float | None = Field(None, description="Probability of the consensus type "
                                                        "(null without members).")
    confidence: str = Field(..., description="high, moderate or low.", examples=["high"])
    members: int | None = Field(None, description="Monte-Carlo members used.")
    seed: int | None = Field(None, description="Random seed used, when one was given.")
    methods: dict[str, MethodOutcome]
    consensus: Consensus
    layers: list[Layer] = Field(..., description="Warm and cold layers of air temperature.")
    wetbulb_layers: list[Layer] = Field(..., description="The same on wet-bulb temperature.")
    cloud_layers: list[CloudLayer]
    freezing_level_m: Number = None
    wetbulb_zero_height_m: Number = None
    warm_area_j_kg: Number = Field(None, description="Melting area aloft, J/kg.")
    cold_area_j_kg: Number = Field(None, description="Refreezing area below it, J/kg.")
    surface: dict[str, Number] | None = Field(None, description="Screen-level values used.")
    profile: ProfileArrays
    explanation: list[str] = Field(..., description="Plain-language sentences, most important "
                                                    "first.")
    caution: str = Field(..., description="Guidance only; defers to official warnings.")
    warnings: list[str] = Field(default_factory=list,
                                description="Input oddities that were accepted but adjusted.")
    site: dict[str, Any] | None = None
    valid_time: str | None = None


# -- batch ------------------------------------------------------------------------------
class BatchRequest(_Model):
    """Several profile documents; each is diagnosed on its own."""

    profiles: list[ProfileDocument] = Field(
        ..., description="Profile documents. An invalid one gets its own error entry in the "
                         "answer; the others are still diagnosed.")


class BatchResponse(_Model):
    results: list[Diagnosis | ErrorResponse] = Field(
        ..., description="One entry per profile, in the order given.")


# -- demo -------------------------------------------------------------------------------
class DemoEntry(_Model):
    name: str = Field(..., description="Identifier to fetch with `GET /v1/demo/{name}`.",
                      examples=["harrowgate_0600"])
    format: Literal["json", "csv", "temp"]
    title: str = Field(..., description="Site and time when known, else the name.")
    site: str | None = None
    valid_time: str | None = None
    url: str


class DemoList(_Model):
    soundings: list[DemoEntry]
    caution: str


class Health(_Model):
    status: Literal["ok"]
    version: str


__all__ = [name for name in dir() if name[0].isupper() and not name.startswith("_")]
