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

from flask import Blueprint, Response, current_app, jsonify
from ptype.api import budget
from ptype.api.errors import ApiError
from ptype.api.examples import VERIFY_EXAMPLE
from ptype.api.models import VERIFY_MEMBERS, VerifyReport, VerifyRequest
from ptype.api.openapi import Operation
from ptype.api.plumbing import load_json_body

from ptype.verify.manifest import cases_from_entries
from ptype.verify.report import DEFAULT_SEED, run_verification

bp = Blueprint("verify", __name__, url_prefix="/v1")

BODY_FIELDS = ("cases", "members", "seed", "methods")


@bp.post("/verify")
@Operation(
    id="verify", tag="Verification",
    summary="Score diagnoses against observed present weather",
    description="Send paired cases (an inline profile document and the present weather "
                "observed with it). Each profile is diagnosed and the consensus and every "
                "method are scored: contingency table, accuracy, Heidke, Peirce and "
                "Gerrity scores, POD/FAR/CSI/bias per class and, for the Monte-Carlo "
                "probabilities, Brier and ranked probability scores and reliability "
                "data. Unverifiable observations are excluded and counted by reason.",
    body={"application/json": {"schema": VerifyRequest, "example": VERIFY_EXAMPLE}},
    ok=VerifyReport, errors=(400, 413, 415, 422, 503))
def verify() -> Response:
    """Diagnose and score the cases of the body; the answer is the verification report."""
    body = load_json_body('{"cases": [...]}')
    if not isinstance(body, dict):
        raise ApiError(400, "invalid_body", f"request body must be a JSON object, got "
                       f"{type(body).__name__}")
    for key in body:
        if key not in BODY_FIELDS:
            raise ApiError(400, "unknown_field", f"{key}: unknown field; expected "
                           f"{', '.join(BODY_FIELDS)}", key)
    cases = _cases(body)
    members = _whole(body, "members", VERIFY_MEMBERS, 0,
                     int(current_app.config["PTYPE_MAX_MEMBERS"]))
    limit = budget.setting("PTYPE_MAX_VERIFY_MEMBER_COLUMNS")
    budget.refuse(members * len(cases), limit, "perturbed profiles",
                  f"members: {len(cases)} cases x {members} members = {members * len(cases)} "
                  f"perturbed profiles, more than the limit of {limit}; send fewer members or "
                  "fewer cases", "members")
    seed = _whole(body, "seed", DEFAULT_SEED, 0, None)
    methods = body.get("methods")
    if methods is not None and not (isinstance(methods, str) or (
            isinstance(methods, list) and all(isinstance(m, str) for m in methods))):
        raise ApiError(400, "invalid_field", "methods: expected a list of method names",
                       "methods")
    _check_levels(cases)
    parsed = cases_from_entries(cases, name="cases", allow_paths=False)
    with budget.computing():
        report = run_verification(parsed, members=members, seed=seed, methods=methods,
                                  source="request")
    return jsonify(report)


def _cases(body: dict[str, Any]) -> list[Any]:
    """The ``cases`` list: present, not empty, within ``PTYPE_MAX_VERIFY_CASES``."""
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
    return cases


def _whole(body: dict[str, Any], name: str, default: int, low: int,
           high: int | None) -> int | None:
    """The whole number ``body[name]`` (``default`` when absent) within ``low``..``high``.

    A null ``seed`` stays None (no seed); anything else that is not whole is a 400.
    """
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


def _check_levels(cases: list[Any]) -> None:
    """Refuse a case whose profile has more levels than ``PTYPE_MAX_LEVELS``."""
    max_levels = int(current_app.config["PTYPE_MAX_LEVELS"])
    for i, case in enumerate(cases):
        profile = case.get("profile") if isinstance(case, dict) else None
        levels = profile.get("levels") if isinstance(profile, dict) else None
        if isinstance(levels, list) and len(levels) > max_levels:
            raise ApiError(400, "too_many_levels", f"cases[{i}].profile.levels: {len(levels)} "
                           f"levels, more than the limit of {max_levels}",
                           f"cases[{i}].profile.levels")
