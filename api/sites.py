"""Road sites, their forecast profiles and observations, and their timelines.

``POST /v1/sites`` (key) -> 201 ``{"id", ...}``; ``GET /v1/sites``; ``GET /v1/sites/<id>``;
``POST /v1/sites/<id>/profiles`` (key); ``POST /v1/sites/<id>/observations`` (key);
``GET /v1/sites/<id>/timeline?hours=12&step=15min``.

Writes need ``Authorization: Bearer <key>`` (see ``ptype keys create``); a missing key is
401, an unknown key 401, a revoked key 403, a key of another owner than the site's 403
(:mod:`ptype.api.tenants`; reads may be owner-scoped by configuration).  Every
acknowledged write has been committed (and its alerts evaluated) before the response is
sent.
"""

from __future__ import annotations

from datetime import UTC, datetime
from typing import Any

import sqlalchemy as sa
from flask import Blueprint, Response, current_app, jsonify, request
from ptype.api import budget, examples
from ptype.api.errors import ApiError
from ptype.api.inputs import query_time
from ptype.api.models import (
    IngestResult,
    ObservationIn,
    ObservationsIn,
    ProfilesIn,
    SiteIn,
    SiteList,
    SiteOut,
    Timeline,
    TimelineOptions,
)
from ptype.api.openapi import Operation
from ptype.api.plumbing import clock, get_store, load_json_body, now, store_for, validate_body
from ptype.api.site_ops import evaluate_after_ingest, site_dict, site_or_404
from ptype.api.tenants import check_read, check_write, read_owner, reader, require_caller
from sqlalchemy.orm import Session

from ptype import Profile
from ptype.clock import Clock, iso, parse_time
from ptype.errors import OptionError, ProfileError
from ptype.roads.alerts import service
from ptype.store import Observation, ProfileRecord, Site

#: ``store_for`` stays importable from here: scripts and tests outside the service use it.
__all__ = ["bp", "store_for"]

bp = Blueprint("sites", __name__, url_prefix="/v1")

#: The path parameter of every per-site operation.
SITE_ID = {"site_id": {"description": "Site id from `POST /v1/sites` or `GET /v1/sites`.",
                       "schema": {"type": "integer", "minimum": 1}}}
#: The statuses of a write.
WRITE_ERRORS = (400, 401, 403, 404, 413, 415, 422, 429, 503)
#: The statuses of a read that only owner-scoped reads (``PTYPE_OWNER_READS``) give.
READ_ERRORS = (401, 403)


def _json_body() -> Any:
    """The JSON body of a write: 415 when not JSON by its type, 400 when empty or broken."""
    return load_json_body()


def _naive(dt: datetime) -> datetime:
    """``dt`` in UTC without a time zone, as the store keeps times."""
    return dt.astimezone(UTC).replace(tzinfo=None)


def _upsert(session: Session, model: type, values: dict, keys: tuple[str, ...]) -> None:
    """Insert or replace on the unique ``keys`` (SQLite and PostgreSQL ON CONFLICT)."""
    dialect = session.bind.dialect.name if session.bind is not None else "sqlite"
    if dialect == "postgresql":
        from sqlalchemy.dialects.postgresql import insert
    else:
        from sqlalchemy.dialects.sqlite import insert
    stmt = insert(model.__table__).values(**values)
    stmt = stmt.on_conflict_do_update(index_elements=list(keys),
                                      set_={k: stmt.excluded[k] for k in values if k not in keys})
    session.execute(stmt)


@bp.post("/sites")
@Operation(
    id="site_create", tag="Sites", auth=True, status=201, summary="Register a road site",
    description="Name, position, elevation and optional alert thresholds. Needs an API key.",
    body={"application/json": {"schema": SiteIn, "example": examples.SITE_EXAMPLE}},
    ok=SiteOut, errors=(400, 401, 403, 409, 413, 415, 422, 429))
def create_site() -> tuple[Response, int, dict[str, str]]:
    """Store a new site, owned by the key's owner; 409 when its ``code`` is taken."""
    caller = require_caller()
    body = validate_body(SiteIn, _json_body())
    with get_store().write() as s:
        if body.code and s.scalar(sa.select(Site.id).where(Site.code == body.code)) is not None:
            raise ApiError(409, "conflict", f"code: a site with code {body.code!r} exists", "code")
        site = Site(name=body.name, latitude=body.latitude, longitude=body.longitude,
                    elevation_m=body.elevation_m, code=body.code,
                    thresholds=body.thresholds.model_dump(exclude_none=True)
                    if body.thresholds else {}, created_at=now(), owner=caller.owner)
        s.add(site)
        s.flush()
        out = site_dict(site)
    return jsonify(out), 201, {"Location": f"/v1/sites/{out['id']}"}


@bp.get("/sites")
@Operation(id="site_list", tag="Sites", summary="List the sites",
           description="Every registered site (only the key owner's when reads are "
                       "owner-scoped, `PTYPE_OWNER_READS`).", ok=SiteList, errors=READ_ERRORS)
def list_sites() -> Response:
    """Every site (every site of the caller's owner when reads are owner-scoped), by id."""
    owner = read_owner(reader())
    query = sa.select(Site).order_by(Site.id)
    if owner is not None:
        query = query.where(Site.owner == owner)
    with get_store().read() as s:
        sites = [site_dict(x) for x in s.scalars(query)]
    return jsonify({"sites": sites})


@bp.get("/sites/<int:site_id>")
@Operation(id="site_get", tag="Sites", summary="One site",
           description="The site and its thresholds.", path_params=SITE_ID, ok=SiteOut,
           errors=(*READ_ERRORS, 404))
def get_site(site_id: int) -> Response:
    """One site with its latest issue of profiles and latest observation."""
    caller = reader()
    with get_store().read() as s:
        site = site_or_404(s, site_id)
        check_read(caller, site)
        return jsonify(site_dict(site, s))


def _validated_profiles(documents: list[dict[str, Any]]) -> list[Profile]:
    """Every document as a profile with a valid time of its own; the first problem is a 422."""
    validated = []
    seen: dict[datetime, int] = {}
    for i, doc in enumerate(documents):
        try:
            pr = Profile.from_document(doc)
        except ProfileError as exc:
            field = f"profiles[{i}]" + (f".{exc.field}" if exc.field else "")
            raise ProfileError(f"profiles[{i}]: {exc.message}", field=field) from None
        if pr.valid_time is None:
            raise ProfileError(f"profiles[{i}].valid_time: required field is missing",
                               field=f"profiles[{i}].valid_time")
        if pr.valid_time in seen:
            raise ProfileError(f"profiles[{i}].valid_time: same valid time as profiles"
                               f"[{seen[pr.valid_time]}] ({iso(pr.valid_time)})",
                               field=f"profiles[{i}].valid_time")
        seen[pr.valid_time] = i
        validated.append(pr)
    return validated


@bp.post("/sites/<int:site_id>/profiles")
@Operation(
    id="site_profiles", tag="Sites", auth=True, status=201,
    summary="Store forecast profiles for a site",
    description="A series of profile documents, each with a `valid_time`, from one model "
                "run (`issued_time`, `source`). Re-posting the same site, source and valid "
                "time replaces the profile. All profiles are validated before anything is "
                "stored; the site's alerts are then re-evaluated.",
    path_params=SITE_ID,
    body={"application/json": {"schema": ProfilesIn, "example": examples.PROFILES_EXAMPLE}},
    ok=IngestResult, errors=WRITE_ERRORS)
def post_profiles(site_id: int) -> tuple[Response, int]:
    """Store a model run's profiles (all validated before any is stored), then the alerts."""
    caller = require_caller()
    body = validate_body(ProfilesIn, _json_body())
    limit = int(current_app.config.get("PTYPE_MAX_BATCH", 500))
    if len(body.profiles) > limit:
        raise ApiError(413, "too_many_profiles",
                       f"profiles: {len(body.profiles)} given; at most {limit} per request",
                       "profiles")
    t_now = now()
    issued = parse_time(body.issued_time) if body.issued_time is not None else t_now
    source = body.source or "unspecified"
    validated = _validated_profiles(body.profiles)
    with get_store().write() as s:
        check_write(caller, site_or_404(s, site_id))
        existing = set(s.scalars(sa.select(ProfileRecord.valid_time).where(
            ProfileRecord.site_id == site_id, ProfileRecord.source == source,
            ProfileRecord.valid_time.in_([p.valid_time for p in validated]))))
        for pr in validated:
            _upsert(s, ProfileRecord, {
                "site_id": site_id, "source": source,
                "valid_time": _naive(pr.valid_time),
                "issued_time": _naive(issued), "document": pr.to_document(),
                "received_at": _naive(t_now)}, ("site_id", "source", "valid_time"))
    actions = evaluate_after_ingest(site_id)
    replaced = sum(1 for p in validated if p.valid_time in existing)
    return jsonify({"site_id": site_id, "stored": len(validated), "replaced": replaced,
                    "issued_time": iso(issued), "source": source, "alerts": actions}), 201


@bp.post("/sites/<int:site_id>/observations")
@Operation(
    id="site_observations", tag="Sites", auth=True, status=201,
    summary="Store surface observations",
    description="Air and road-surface temperature, dew point, precipitation rate, wind and "
                "observed present weather; the latest one is blended into the timeline.",
    path_params=SITE_ID,
    body={"application/json": {"schema": ObservationsIn,
                               "example": examples.OBSERVATIONS_EXAMPLE}},
    ok=IngestResult, errors=WRITE_ERRORS)
def post_observations(site_id: int) -> tuple[Response, int]:
    """Store one observation or ``{"observations": [...]}``, then evaluate the alerts."""
    caller = require_caller()
    data = _json_body()
    if isinstance(data, dict) and "observations" in data:
        items = validate_body(ObservationsIn, data).observations
    else:
        items = [validate_body(ObservationIn, data)]
    t_now = now()
    with get_store().write() as s:
        check_write(caller, site_or_404(s, site_id))
        for ob in items:
            values = ob.model_dump()
            values["time"] = _naive(parse_time(values["time"]))
            values.update(site_id=site_id, received_at=_naive(t_now))
            _upsert(s, Observation, values, ("site_id", "time"))
    actions = evaluate_after_ingest(site_id)
    return jsonify({"site_id": site_id, "stored": len(items), "alerts": actions}), 201


def _timeline_members() -> int:
    """The ``members`` option of a timeline, 0 to ``PTYPE_MAX_MEMBERS``."""
    try:
        members = int(request.args.get("members", service.ALERT_MEMBERS))
    except ValueError:
        raise OptionError(f"members = {request.args.get('members')!r}: expected an integer",
                          field="members") from None
    max_members = int(current_app.config.get("PTYPE_MAX_MEMBERS", 1000))
    if not 0 <= members <= max_members:
        raise OptionError(f"members = {members}: expected 0 to {max_members}", field="members")
    return members


@bp.get("/sites/<int:site_id>/timeline")
@Operation(
    id="site_timeline", tag="Sites", summary="Type timeline, transitions and road hazards",
    description="Built from the latest issue of profiles, interpolated in time, with the "
                "nowcast adjustments of docs/nowcast.md.",
    path_params=SITE_ID, query=TimelineOptions, ok=Timeline,
    errors=(400, *READ_ERRORS, 404, 422, 503))
def get_timeline(site_id: int) -> Response:
    """The site's type timeline, transitions and road hazards from its latest issue."""
    args = request.args
    try:
        hours = float(args.get("hours", 12))
    except ValueError:
        raise OptionError(f"hours = {args.get('hours')!r}: expected a number",
                          field="hours") from None
    members = _timeline_members()
    adjustments = None
    if "adjustments" in args:
        text = args["adjustments"].strip()
        adjustments = [] if text in ("", "none") else [a.strip() for a in text.split(",")]
    asked = query_time("now")
    used = Clock(asked, "request") if asked is not None else clock()
    t = used.now
    caller = reader()
    with get_store().read() as s:
        site = site_or_404(s, site_id)
        check_read(caller, site)
        inputs = service.timeline_inputs(s, site, t)
    # Computed with no database connection held: a request waiting for a work slot does not
    # take one of the pool's connections from the reads.
    out = service.timeline_from_inputs(
        inputs, t, hours=hours, step=args.get("step", "15min"), members=members,
        adjustments=adjustments,
        max_member_levels=budget.setting("PTYPE_MAX_TIMELINE_MEMBER_LEVELS"),
        guard=budget.computing)
    return jsonify({**out, "clock": used.to_dict()})
