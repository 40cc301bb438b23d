"""Pydantic models of every HTTP request and response.

They are the single description of the wire format: :mod:`ptype.api.openapi` builds the
OpenAPI document from them, and the views use the request models to validate query
options and bodies.  Response bodies come from the library (``Diagnosis.to_dict()``, the
road-alert service) and are not re-validated on the hot path; the tests check them against
these models instead.

Two bases: :class:`RequestModel` refuses unknown fields (the error names the field), and
:class:`ResponseModel` is open, because an answer may gain fields in a later version and
clients ignore keys they do not know.  The few answers whose shape is fixed for good (the
error body, the health check, the batch and demo envelopes) say so with ``extra="forbid"``.
"""

from __future__ import annotations

from datetime import datetime
from typing import Annotated, Any, Literal

from pydantic import AfterValidator, BaseModel, ConfigDict, Field, ValidationInfo, field_validator

from ptype.clock import in_time_range
from ptype.profile.document import ProfileDocument
from ptype.store.text import single_line
from ptype.verify.report import DEFAULT_SEED

PTYPE_CODES = ("NONE", "RA", "SN", "PL", "FZRA", "FZDZ", "DZ", "RASN", "RAPL", "FZRAPL")
METHOD_NAMES = ("bourgouin", "ramer", "baldwin", "baldwin_revised", "czys", "cloud_top",
                "thickness", "jennings")

PtypeCode = Literal["NONE", "RA", "SN", "PL", "FZRA", "FZDZ", "DZ", "RASN", "RAPL", "FZRAPL"]

#: Monte-Carlo members per case of ``POST /v1/verify`` when the request names none.
VERIFY_MEMBERS = 50


class RequestModel(BaseModel):
    """Base of request bodies and query options: an unknown field is refused, by name."""

    model_config = ConfigDict(extra="forbid")


class BodyModel(RequestModel):
    """Base of JSON request bodies: strict types as well (a number is never a boolean or a
    string), times excepted (:data:`ApiTime` parses ISO 8601 strings)."""

    model_config = ConfigDict(extra="forbid", strict=True)


#: A time in a request body: ISO 8601, within the range of :mod:`ptype.clock`.
ApiTime = Annotated[datetime, Field(strict=False), AfterValidator(in_time_range)]
#: One line of text (names, codes, sources): no control characters or line breaks.
Line = Annotated[str, AfterValidator(single_line)]


class ResponseModel(BaseModel):
    """Base of answers: open, as an answer may gain fields in later versions."""

    model_config = ConfigDict(extra="allow")


# -- errors -----------------------------------------------------------------------------
class ErrorDetail(ResponseModel, extra="forbid"):
    code: str = Field(
        ..., description="Stable machine-readable error code, e.g. `invalid_profile`.",
        examples=["invalid_profile"])
    message: str = Field(
        ..., description="One sentence naming the problem and what was expected.",
        examples=["levels[2].temperature_c = 'warm': expected a number"])
    field: str | None = Field(None, description="Dotted path of the offending field when known.",
                              examples=["levels[2].temperature_c"])
    limit: int | None = Field(None, description="`too_much_work` only: the most work this "
                                                "server does for the request, in `unit`.")
    asked: int | None = Field(None, description="`too_much_work` only: the work the request "
                                                "asks for, in `unit`.")
    unit: str | None = Field(None, description="`too_much_work` only: what `limit` and "
                                               "`asked` count, e.g. `member-levels`.")


class ErrorResponse(ResponseModel, extra="forbid"):
    """Every 4xx/5xx answer has this shape."""

    error: ErrorDetail


# -- query options ----------------------------------------------------------------------
class DiagnoseOptions(RequestModel, populate_by_name=True):
    """Query options of the diagnosis endpoints."""

    methods: str | None = Field(
        None, description="Comma-separated method names to run (default: all). Known: "
                          + ", ".join(METHOD_NAMES) + ".", examples=["bourgouin,ramer"])
    members: int | None = Field(
        None, ge=0,
        description="Monte-Carlo members for the probabilities (default 50; "
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


class DiagramOptions(DiagnoseOptions):
    """Query options of the diagram endpoint."""

    image_format: Literal["png", "svg"] | None = Field(
        None, alias="format", description="Image format; overrides the `Accept` header. "
                                         "Default PNG.")


# -- diagnosis --------------------------------------------------------------------------
Number = float | int | None
Value = float | int | str | bool | None | list[Any] | dict[str, Any]


class Step(ResponseModel):
    """One step of reasoning: the rule that fired with the numbers it compared."""

    rule: str = Field(..., description="Short stable identifier of the rule.",
                      examples=["warm_layer_melts_fully"])
    text: str = Field(..., description="A sentence with the numbers in it.")
    values: dict[str, Value] = Field(default_factory=dict, description="Numbers compared.")
    thresholds: dict[str, Value] = Field(default_factory=dict,
                                         description="Limits they were compared with.")
    source: str = Field("", description="Where the rule or threshold comes from.")


class MethodOutcome(ResponseModel):
    ptype: PtypeCode | None = Field(..., description="Type this method diagnosed; null when it "
                                                     "abstains (outside its domain).")
    title: str = Field(..., description="Human-readable method name.")
    rule: str | None = Field(None, description="The rule that decided (last step).")
    wetbulb: str | None = Field(None, description="Wet-bulb kind the method uses, if any.")
    reference: str = Field(..., description="Published source of the method.")
    steps: list[Step] = Field(default_factory=list)


class Consensus(ResponseModel):
    rule: str | None = Field(None, description="The consensus rule that decided.")
    steps: list[Step] = Field(default_factory=list)


class Layer(ResponseModel):
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


class CloudLayer(ResponseModel):
    bottom_hpa: Number = None
    top_hpa: Number = None
    bottom_m: Number = None
    top_m: Number = None
    top_temperature_c: Number = None
    min_temperature_c: Number = None


class ProfileArrays(ResponseModel):
    """The profile as used, surface -> top, with derived columns."""

    pressure_hpa: list[Number]
    height_m: list[Number]
    temperature_c: list[Number]
    dewpoint_c: list[Number]
    relative_humidity_pct: list[Number] = Field(default_factory=list)
    wetbulb_c: list[Number] = Field(default_factory=list)


class Diagnosis(ResponseModel):
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
    when: str | None = Field(None, description="The time for a verdict line: the valid time, "
                             "or the day and hour of a WMO TEMP message (which gives no month "
                             "or year).")


# -- batch ------------------------------------------------------------------------------
class BatchRequest(RequestModel):
    """Several profile documents; each is diagnosed on its own."""

    profiles: list[ProfileDocument] = Field(
        ..., description="Profile documents. An invalid one gets its own error entry in the "
                         "answer; the others are still diagnosed.")


class BatchResponse(ResponseModel, extra="forbid"):
    results: list[Diagnosis | ErrorResponse] = Field(
        ..., description="One entry per profile, in the order given.")


# -- demo -------------------------------------------------------------------------------
class DemoEntry(ResponseModel, extra="forbid"):
    name: str = Field(..., description="Identifier to fetch with `GET /v1/demo/{name}`.",
                      examples=["harrowgate_0600"])
    format: Literal["json", "csv", "temp"]
    title: str = Field(..., description="Site and time when known, else the name.")
    site: str | None = None
    valid_time: str | None = None
    url: str


class DemoList(ResponseModel, extra="forbid"):
    soundings: list[DemoEntry]
    caution: str


class Health(ResponseModel, extra="forbid"):
    status: Literal["ok"]
    version: str


# -- verification ----------------------------------------------------------------------
class VerifyCase(RequestModel):
    """One paired case: a profile and the present weather observed with it."""

    profile: ProfileDocument
    observed: str = Field(..., max_length=200, description=(
        "Present weather as written in a METAR/SYNOP-style report, e.g. `-FZRA BR`, "
        "`FZRA PL`, `+SN BLSN`, `NSW` (docs/verification.md has the mapping table)."),
        examples=["-FZRA BR"])
    valid_time: str | None = Field(None, description="ISO 8601 time; overrides the profile's.")
    site: str | None = Field(None, description="Site name shown in the report.")


class VerifyRequest(RequestModel):
    """Cases to verify and the Monte-Carlo settings."""

    cases: list[VerifyCase] = Field(..., min_length=1, description=(
        "Paired cases; at most the server's case limit (500 by default)."))
    members: int | None = Field(VERIFY_MEMBERS, ge=0, description=(
        "Monte-Carlo members per case for the probabilities (0 = none). cases x members is "
        "limited by the server (50 000 by default)."))
    seed: int | None = Field(DEFAULT_SEED, ge=0, description="Seed of the members.")
    methods: list[str] | str | None = Field(None, description="Methods to run (default all).")


class VerifyReport(ResponseModel):
    """The verification report (docs/verification.md describes every field)."""

    n: int = Field(..., description="Verified cases.")
    n_cases: int = Field(..., description="All cases sent.")
    members: int
    seed: int | None
    order: list[str] = Field(..., description="Category order of the tables, Gerrity and RPS.")
    excluded: dict[str, Any] = Field(..., description="count, reasons {reason: count}, cases.")
    cases: list[dict[str, Any]]
    consensus: dict[str, Any] | None = Field(..., description=(
        "Scores of the consensus; null when every observation was excluded."))
    methods: dict[str, dict[str, Any]]
    caution: str


# -- sites: requests ------------------------------------------------------------------
class RoadThresholds(BodyModel):
    """Per-site alert thresholds (all optional; defaults in ``ptype.roads.alerts.rules``)."""

    freezing_probability: float | None = Field(None, ge=0, le=1)
    freezing_window_hours: float | None = Field(None, gt=0, le=48)
    accretion_mm: float | None = Field(None, gt=0, le=100)
    frost: bool | None = None
    frost_window_hours: float | None = Field(None, gt=0, le=48)
    snow_rate_mm_h: float | None = Field(None, gt=0, le=50)
    snow_probability: float | None = Field(None, ge=0, le=1)
    snow_window_hours: float | None = Field(None, gt=0, le=48)


class SiteIn(BodyModel):
    name: Line = Field(..., min_length=1, max_length=200, description=(
        "One line: no control characters, line breaks or non-characters (docs/api.md)."))
    latitude: float = Field(..., ge=-90, le=90)
    longitude: float = Field(..., ge=-180, le=180)
    elevation_m: float | None = Field(None, ge=-500, le=9000)
    code: Line | None = Field(None, min_length=1, max_length=100,
                             description="Your own identifier for the site (unique).")
    thresholds: RoadThresholds | None = None


class ProfilesIn(BodyModel):
    profiles: list[dict[str, Any]] = Field(..., min_length=1)
    issued_time: ApiTime | None = None
    source: Line | None = Field(None, min_length=1, max_length=200)


class ObservationIn(BodyModel):
    time: ApiTime
    air_temperature_c: float | None = Field(None, ge=-80, le=60)
    dewpoint_c: float | None = Field(None, ge=-100, le=60)
    road_surface_temperature_c: float | None = Field(None, ge=-80, le=90)
    precipitation_rate_mm_h: float | None = Field(None, ge=0, le=500)
    wind_speed_m_s: float | None = Field(None, ge=0, le=120)
    present_weather: Line | None = Field(None, max_length=40)

    @field_validator("dewpoint_c")
    @classmethod
    def _dewpoint(cls, v: float | None, info: ValidationInfo) -> float | None:
        # A dew point above the air temperature is a faulty report; the half degree of slack
        # keeps rounded reports of saturated air (ours).
        t = info.data.get("air_temperature_c")
        if v is not None and t is not None and v > t + 0.5:
            raise ValueError(f"dew point {v} degC is above the air temperature {t} degC")
        return v


class ObservationsIn(BodyModel):
    observations: list[ObservationIn] = Field(..., min_length=1, max_length=1000)


# -- sites: responses and query options ------------------------------------------------
class SiteOut(ResponseModel):
    """A stored site."""

    id: int
    name: str
    latitude: float
    longitude: float
    elevation_m: float | None = None
    code: str | None = None
    owner: str | None = Field(None, description="Whose site it is: the owner of the key that "
                                                "created it (docs/api.md, Owners).")
    thresholds: dict[str, Any] | None = None


class SiteList(ResponseModel):
    sites: list[SiteOut]


class IngestResult(ResponseModel):
    """What a write stored and the alert actions it triggered."""

    site_id: int
    stored: int
    alerts: list[dict[str, Any]] = Field(default_factory=list,
                                         description="Alerts created, updated or cancelled.")


class IngestFileResult(ResponseModel):
    """What ``POST /v1/ingest`` did with one model file."""

    file: str
    status: str = Field(description="ingested, already ingested, already rejected or busy.")
    file_key: str = Field(description="SHA-256 of the file's content.")
    source: str | None = None
    runs: list[dict[str, Any]] = Field(default_factory=list,
                                       description="Each run: reference time, steps, profiles.")
    profiles: int = 0
    sites: int = 0
    skipped: list[dict[str, Any]] = Field(default_factory=list,
                                          description="Sites outside the model grid.")
    alerts: dict[str, int] = Field(default_factory=dict,
                                   description="Alert actions taken, by kind.")


class TimelineStep(ResponseModel):
    valid_time: str
    ptype: str
    probabilities: dict[str, float]
    hazards: dict[str, Any]


class ClockOut(ResponseModel, extra="forbid"):
    """The one clock of the service: the time it used and where that time came from."""

    now: str = Field(..., description="The time used, ISO 8601 UTC.")
    source: str = Field(..., description="`PTYPE_NOW` (fixed by configuration), `demo` (the "
                                         "issue time of the invented demo storm), `system`, or "
                                         "`request` (a time the request asked for).")
    text: str = Field(..., description="The time and its source in words, for screens.")


class Timeline(ResponseModel):
    """Steps, type transitions and hazard totals for one site; guidance only."""

    steps: list[TimelineStep]
    transitions: list[dict[str, Any]] = Field(
        ..., description="`{time, from, to}` changes of type.")
    totals: dict[str, Any]
    clock: ClockOut
    caution: str


class TimelineOptions(RequestModel):
    hours: float | None = Field(12, gt=0, le=72, description="Length of the timeline, hours.")
    step: str | None = Field("15min", description="Step between times, e.g. `15min`, `1h`.")
    members: int | None = Field(None, ge=0, description="Monte-Carlo members per step.")
    adjustments: str | None = Field(None, description=(
        "Comma list of nowcast adjustments to apply (`observation,onset,melting`), or `none`; "
        "default all (docs/nowcast.md)."))
    now: str | None = Field(None, description="ISO 8601 time the timeline starts (default: now).")


# -- alerts ----------------------------------------------------------------------------
class AlertOut(ResponseModel):
    """One alert and its latest message (CAP vocabulary for severity, certainty, urgency)."""

    id: str
    status: str = Field(..., description="`active`, `cancelled` or `expired`.")
    event: str
    onset: str | None = None
    expires: str | None = None
    sent: str
    site: dict
    severity: str
    certainty: str
    urgency: str
    msg_type: str = Field(
        ..., description="CAP msgType of the latest message: Alert, Update, Cancel.")
    references: list


class AlertList(ResponseModel):
    alerts: list[AlertOut]
    now: str
    clock: ClockOut
    caution: str


class AlertListOptions(RequestModel):
    site: int | None = Field(None, ge=1, le=2 ** 63 - 1, description="Only this site's alerts.")
    active: str | None = Field(None, description="`1` for active alerts only (default: active "
                                                 "and recently ended).")


class EvaluateResult(ResponseModel):
    evaluated_sites: int
    actions: list
