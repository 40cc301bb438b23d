"""``POST /v1/verify``: score diagnoses of inline profiles against observed present weather.

Body::

    {"cases": [{"profile": <profile document>, "observed": "-FZRA BR",
                "valid_time": "2025-01-14T06:00Z", "site": "..."}, ...],
     "members": 50, "seed": 0, "methods": ["bourgouin", "ramer"]}

``members``, ``seed`` and ``methods`` are optional.  The answer is the JSON report of
:func:`ptype.verify.report.run_verification` (the same as ``ptype verify --format json``).
Profiles must be inline documents: the service never reads files named in a request.
"""

from __future__ import annotations

from typing import Any

from flask import Blueprint, current_app, jsonify, request
from pydantic import Field

from api import models as m
from api.errors import ApiError
from ptype.profile.document import ProfileDocument
from ptype.verify.manifest import cases_from_entries
from ptype.verify.report import DEFAULT_SEED, run_verification

bp = Blueprint("verify", __name__)

BODY_FIELDS = ("cases", "members", "seed", "methods")
DEFAULT_MEMBERS = 50


# -- OpenAPI description (api.docs collects OPENAPI_OPERATIONS) -------------------------
class VerifyCase(m._Model):
    """One paired case: a profile and the present weather observed with it."""

    profile: ProfileDocument
    observed: str = Field(..., max_length=200, description=(
        "Present weather as written in a METAR/SYNOP-style report, e.g. `-FZRA BR`, "
        "`FZRA PL`, `+SN BLSN`, `NSW` (docs/verification.md has the mapping table)."),
        examples=["-FZRA BR"])
    valid_time: str | None = Field(None, description="ISO 8601 time; overrides the profile's.")
    site: str | None = Field(None, description="Site name shown in the report.")


class VerifyRequest(m._Model):
    """Cases to verify and the Monte-Carlo settings."""

    cases: list[VerifyCase] = Field(..., min_length=1, description=(
        "Paired cases; at most the server's case limit (500 by default)."))
    members: int | None = Field(DEFAULT_MEMBERS, ge=0, description=(
        "Monte-Carlo members per case for the probabilities (0 = none). cases x members is "
        "limited by the server (50 000 by default)."))
    seed: int | None = Field(DEFAULT_SEED, ge=0, description="Seed of the members.")
    methods: list[str] | str | None = Field(None, description="Methods to run (default all).")


class VerifyReport(m._Open):
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


_EXAMPLE_CASE_PROFILE = {
    "levels": [
        {"pressure_hpa": 990, "temperature_c": -2.4, "dewpoint_c": -3.0},
        {"pressure_hpa": 900, "temperature_c": 1.5, "dewpoint_c": 1.0},
        {"pressure_hpa": 850, "temperature_c": 4.2, "dewpoint_c": 3.8},
        {"pressure_hpa": 800, "temperature_c": 1.0, "dewpoint_c": 0.6},
        {"pressure_hpa": 700, "temperature_c": -6.5, "dewpoint_c": -7.2},
        {"pressure_hpa": 500, "temperature_c": -23.0, "dewpoint_c": -26.0},
    ]}

OPENAPI_OPERATIONS = [
    {"path": "/v1/verify", "method": "post", "id": "verify", "tag": "Verification",
     "summary": "Score diagnoses against observed present weather",
     "description": "Send paired cases (an inline profile document and the present weather "
                    "observed with it). Each profile is diagnosed and the consensus and every "
                    "method are scored: contingency table, accuracy, Heidke, Peirce and "
                    "Gerrity scores, POD/FAR/CSI/bias per class and, for the Monte-Carlo "
                    "probabilities, Brier and ranked probability scores and reliability "
                    "data. Unverifiable observations are excluded and counted by reason.",
     "body": {"application/json": {"model": VerifyRequest, "example": {
         "cases": [{"profile": _EXAMPLE_CASE_PROFILE, "observed": "-FZRA BR"},
                   {"profile": _EXAMPLE_CASE_PROFILE, "observed": "FZRA PL"}],
         "members": 20, "seed": 0}}},
     "ok": ("application/json", VerifyReport), "errors": (400, 413, 422)},
]


def init_app(app) -> None:
    # Largest number of cases in one request.
    app.config.setdefault("PTYPE_MAX_VERIFY_CASES", 500)
    # Largest cases x members product in one request (bounds the work per request).
    app.config.setdefault("PTYPE_MAX_VERIFY_MEMBER_COLUMNS", 50_000)


def _whole(body: dict, name: str, default, low: int, high: int | None):
    value = body.get(name, default)
    if value is None and name == "seed":
        return None
    if isinstance(value, bool) or not isinstance(value, int):
        raise ApiError(400, "invalid_field", f"{name}: expected a whole number, got "
                       f"{type(value).__name__}", name)
    if value < low or (high is not None and value > high):
        limit = f"{low} to {high}" if high is not None else f"{low} or more"
        raise ApiError(400, "invalid_field", f"{name} = {value}: expected {limit}", name)
    return value


@bp.post("/v1/verify")
def verify():
    body = request.get_json(silent=True)
    if body is None:
        raise ApiError(400, "invalid_json", "request body must be JSON (Content-Type: "
                       "application/json) holding {\"cases\": [...]}")
    if not isinstance(body, dict):
        raise ApiError(400, "invalid_body", f"request body must be a JSON object, got "
                       f"{type(body).__name__}")
    for key in body:
        if key not in BODY_FIELDS:
            raise ApiError(400, "unknown_field", f"{key}: unknown field; expected "
                           f"{', '.join(BODY_FIELDS)}", key)
    cases = body.get("cases")
    if not isinstance(cases, list):
        raise ApiError(400, "invalid_field", "cases: required, a list of {\"profile\": "
                       "<profile document>, \"observed\": \"...\"} objects", "cases")
    max_cases = int(current_app.config["PTYPE_MAX_VERIFY_CASES"])
    if not cases:
        raise ApiError(400, "invalid_field", "cases: expected at least one case", "cases")
    if len(cases) > max_cases:
        raise ApiError(400, "too_many_cases", f"cases: {len(cases)} cases, more than the limit "
                       f"of {max_cases} per request", "cases")
    members = _whole(body, "members", DEFAULT_MEMBERS, 0,
                     int(current_app.config["PTYPE_MAX_MEMBERS"]))
    budget = int(current_app.config["PTYPE_MAX_VERIFY_MEMBER_COLUMNS"])
    if members * len(cases) > budget:
        raise ApiError(400, "too_much_work", f"members: {len(cases)} cases x {members} members "
                       f"= {members * len(cases)} perturbed profiles, more than the limit of "
                       f"{budget}; send fewer members or fewer cases", "members")
    seed = _whole(body, "seed", DEFAULT_SEED, 0, None)
    methods = body.get("methods")
    if methods is not None and not (isinstance(methods, str) or (
            isinstance(methods, list) and all(isinstance(m, str) for m in methods))):
        raise ApiError(400, "invalid_field", "methods: expected a list of method names",
                       "methods")
    max_levels = int(current_app.config["PTYPE_MAX_LEVELS"])
    for i, case in enumerate(cases):
        profile = case.get("profile") if isinstance(case, dict) else None
        levels = profile.get("levels") if isinstance(profile, dict) else None
        if isinstance(levels, list) and len(levels) > max_levels:
            raise ApiError(400, "too_many_levels", f"cases[{i}].profile.levels: {len(levels)} "
                           f"levels, more than the limit of {max_levels}",
                           f"cases[{i}].profile.levels")
    parsed = cases_from_entries(cases, name="cases", allow_paths=False)
    report = run_verification(parsed, members=members, seed=seed, methods=methods,
                              source="request")
    return jsonify(report)
