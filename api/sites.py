"""Sites, their forecast profiles and observations, and their timelines.

``POST /v1/sites`` (key) -> 201 ``{"id", ...}``; ``GET /v1/sites``; ``GET /v1/sites/<id>``;
``POST /v1/sites/<id>/profiles`` (key); ``POST /v1/sites/<id>/observations`` (key);
``GET /v1/sites/<id>/timeline?hours=12&step=15min``.

Writes need ``Authorization: Bearer <key>`` (see ``ptype keys create``); a missing key is 401,
an unknown key 401, a revoked key 403.  Every acknowledged write has been committed (and
its alerts evaluated) before the response is sent.
"""

from __future__ import annotations

import hashlib
import logging
import os
import threading
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

import sqlalchemy as sa
from flask import Blueprint, current_app, jsonify, request
from pydantic import BaseModel, ConfigDict, Field, ValidationError, field_validator

from api.errors import ApiError
from ptype import Profile
from ptype.clock import iso, parse_time, utcnow
from ptype.errors import OptionError, ProfileError
from ptype.profile.document import _loc
from ptype.roads.alerts import service
from ptype.store import ApiKey, Observation, ProfileRecord, Site, Store, open_store
from ptype.store import keys as keystore

log = logging.getLogger("ptype.api.sites")
bp = Blueprint("sites", __name__)

EXTENSION = "ptype_store"


# ----------------------------------------------------------------------------------------
# Set-up, store, clock, authentication
# ----------------------------------------------------------------------------------------

_open_lock = threading.Lock()


def init_app(app) -> None:
    """Register the store (opened and migrated on first use); load the demo when asked."""
    app.extensions.setdefault(EXTENSION, None)
    if app.config.get("PTYPE_DEMO") or os.environ.get("PTYPE_DEMO") in ("1", "true", "yes"):
        _load_demo(app)


def _load_demo(app) -> None:
    """Preload the demo sites and storm; the demo clock is the series' issued time."""
    from ptype.store.demo import default_demo_dir, demo_issued_time, load_demo
    demo_dir = Path(app.config.get("PTYPE_DEMO_DIR") or default_demo_dir())
    if not (demo_dir / "sites.json").is_file():
        log.warning("demo requested but %s/sites.json is missing", demo_dir)
        return
    issued = demo_issued_time(demo_dir)
    if issued is not None and not (app.config.get("PTYPE_NOW") or os.environ.get("PTYPE_NOW")):
        app.config["PTYPE_NOW"] = iso(issued)
    # Invented data: its CAP messages say so.
    app.config.setdefault("PTYPE_CAP_STATUS", "Exercise")
    store = store_for(app)
    added = load_demo(store, demo_dir, now=utcnow(app.config))
    if added["profiles"]:
        with app.app_context():
            with store.read() as s:
                ids = list(s.scalars(sa.select(Site.id).order_by(Site.id)))
            for site_id in ids:
                _evaluate_after_ingest(site_id)


def store_for(app) -> Store:
    """The store of ``app`` (opened and migrated on first use in this process)."""
    store = app.extensions.get(EXTENSION)
    if store is None:
        with _open_lock:
            store = app.extensions.get(EXTENSION)
            if store is None:
                store = app.extensions[EXTENSION] = open_store(app.config)
    return store


def get_store() -> Store:
    """The application's store, opened (and migrated) on first use in this process."""
    return store_for(current_app._get_current_object())


def now() -> datetime:
    return utcnow(current_app.config)


_verified: dict[str, str] = {}
_verified_lock = threading.Lock()


def require_key() -> str:
    """Check the bearer key; returns its key id.  Raises 401/403 :class:`ApiError`."""
    header = request.headers.get("Authorization", "")
    scheme, _, token = header.partition(" ")
    if not header:
        raise ApiError(401, "unauthorized", "this request changes data and needs an API key: "
                       "send 'Authorization: Bearer <key>' (create one with 'ptype keys create')",
                       "Authorization")
    if scheme.lower() != "bearer" or not token.strip():
        raise ApiError(401, "unauthorized", "Authorization header: expected 'Bearer <key>'",
                       "Authorization")
    token = token.strip()
    # The scrypt check is deliberately slow; a process-local memo of keys already verified
    # (by a SHA-256 of the key, never the key itself) keeps bursts fast.  Revocation is still
    # read from the database on every request.
    memo = hashlib.sha256(token.encode()).hexdigest()
    with _verified_lock:
        key_id = _verified.get(memo)
    with get_store().read() as s:
        if key_id is None:
            status, info = keystore.verify_key(s, token)
            if status == "unknown":
                raise ApiError(401, "unauthorized", "the API key is not valid", "Authorization")
            key_id = info.key_id
            if status == "ok":
                with _verified_lock:
                    _verified[memo] = key_id
        revoked = s.scalar(sa.select(ApiKey.revoked_at).where(ApiKey.key_id == key_id))
    if revoked is not None:
        raise ApiError(403, "forbidden", "the API key has been revoked", "Authorization")
    return key_id


# ----------------------------------------------------------------------------------------
# Request bodies
# ----------------------------------------------------------------------------------------

class _Body(BaseModel):
    model_config = ConfigDict(extra="forbid")


class RoadThresholds(_Body):
    """Per-site alert thresholds (all optional; defaults in ``ptype.roads.alerts.rules``)."""

    freezing_probability: float | None = Field(None, ge=0, le=1)
    freezing_window_hours: float | None = Field(None, gt=0, le=48)
    accretion_mm: float | None = Field(None, gt=0, le=100)
    frost: bool | None = None
    frost_window_hours: float | None = Field(None, gt=0, le=48)
    snow_rate_mm_h: float | None = Field(None, gt=0, le=50)
    snow_probability: float | None = Field(None, ge=0, le=1)
    snow_window_hours: float | None = Field(None, gt=0, le=48)


class SiteIn(_Body):
    name: str = Field(..., min_length=1, max_length=200)
    latitude: float = Field(..., ge=-90, le=90)
    longitude: float = Field(..., ge=-180, le=180)
    elevation_m: float | None = Field(None, ge=-500, le=9000)
    code: str | None = Field(None, min_length=1, max_length=100,
                             description="Your own identifier for the site (unique).")
    thresholds: RoadThresholds | None = None


class ProfilesIn(_Body):
    profiles: list[dict[str, Any]] = Field(..., min_length=1)
    issued_time: datetime | None = None
    source: str | None = Field(None, min_length=1, max_length=200)


class ObservationIn(_Body):
    time: datetime
    air_temperature_c: float | None = Field(None, ge=-80, le=60)
    dewpoint_c: float | None = Field(None, ge=-100, le=60)
    road_surface_temperature_c: float | None = Field(None, ge=-80, le=90)
    precipitation_rate_mm_h: float | None = Field(None, ge=0, le=500)
    wind_speed_m_s: float | None = Field(None, ge=0, le=120)
    present_weather: str | None = Field(None, max_length=40)

    @field_validator("dewpoint_c")
    @classmethod
    def _dewpoint(cls, v, info):
        t = info.data.get("air_temperature_c")
        if v is not None and t is not None and v > t + 0.5:
            raise ValueError(f"dew point {v} degC is above the air temperature {t} degC")
        return v


class ObservationsIn(_Body):
    observations: list[ObservationIn] = Field(..., min_length=1, max_length=1000)


def _parse(model, data, prefix: str = ""):
    if not isinstance(data, dict):
        raise ApiError(400, "invalid_body", "request body must be a JSON object")
    try:
        return model.model_validate(data)
    except ValidationError as exc:
        err = exc.errors()[0]
        field = prefix + _loc(err["loc"])
        kind = err["type"]
        if kind == "extra_forbidden":
            msg = f"{field}: unknown field"
        elif kind == "missing":
            msg = f"{field}: required field is missing"
        else:
            msg = f"{field}: {err['msg']} (got {err.get('input')!r})"
        raise ApiError(422, "invalid_body", msg, field) from None


def _json_body() -> Any:
    data = request.get_json(silent=True)
    if data is None:
        raise ApiError(400, "invalid_body", "expected a JSON body (Content-Type: application/json)")
    return data


def _aware(dt: datetime | None) -> datetime | None:
    return None if dt is None else parse_time(dt)


#: Site ids are 64-bit integers in every database we support; larger numbers name no site.
_MAX_ID = 2 ** 63 - 1


def _site_or_404(session, site_id: int) -> Site:
    site = session.get(Site, site_id) if 0 < site_id <= _MAX_ID else None
    if site is None:
        raise ApiError(404, "not_found", f"site {site_id} does not exist", "id")
    return site


def site_dict(site: Site, session=None) -> dict:
    d = {"id": site.id, "code": site.code, "name": site.name, "latitude": site.latitude,
         "longitude": site.longitude, "elevation_m": site.elevation_m,
         "thresholds": site.thresholds or {}, "created": iso(site.created_at)}
    if session is not None:
        latest = service.latest_issue(session, site.id)
        d["latest_issue"] = None if not latest else {
            "issued_time": iso(latest[0].issued_time), "source": latest[0].source,
            "profiles": len(latest), "first_valid_time": iso(latest[0].valid_time),
            "last_valid_time": iso(latest[-1].valid_time)}
        obs = session.scalars(sa.select(Observation).where(Observation.site_id == site.id)
                              .order_by(Observation.time.desc()).limit(1)).first()
        d["latest_observation"] = None if obs is None else {
            k: (iso(v) if isinstance(v, datetime) else v)
            for k, v in service.observation_dict(obs).items()}
    return d


def _upsert(session, model, values: dict, keys: tuple[str, ...]) -> None:
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


def _evaluate_after_ingest(site_id: int) -> list[dict] | dict:
    """Evaluate alerts after a committed ingest.  The data is stored whatever happens here,
    so a failure is reported in the body (and logged) instead of failing the request."""
    try:
        return _evaluate_alerts(site_id)
    except (ProfileError, OptionError) as exc:
        log.warning("alert evaluation for site %s failed: %s", site_id, exc)
        return {"error": f"alerts not evaluated: {exc}"}
    except Exception:  # the write is committed; never turn it into a 500
        log.exception("alert evaluation for site %s failed", site_id)
        return {"error": "alerts not evaluated: internal error (logged)"}


def _evaluate_alerts(site_id: int) -> list[dict]:
    """Evaluate the site's alerts: timeline outside the write lock, decisions inside it."""
    store = get_store()
    t = now()
    members = int(current_app.config.get("PTYPE_ALERT_MEMBERS")
                  or os.environ.get("PTYPE_ALERT_MEMBERS") or service.ALERT_MEMBERS)
    with store.read() as s:
        site = _site_or_404(s, site_id)
        candidates = service.site_candidates(s, site, t, members=members)
    cap_status = current_app.config.get("PTYPE_CAP_STATUS") or os.environ.get("PTYPE_CAP_STATUS")
    with store.write() as s:
        site = _site_or_404(s, site_id)
        return service.apply_candidates(s, site, candidates, t, cap_status=cap_status)


# ----------------------------------------------------------------------------------------
# Views
# ----------------------------------------------------------------------------------------

@bp.post("/v1/sites")
def create_site():
    require_key()
    body = _parse(SiteIn, _json_body())
    with get_store().write() as s:
        if body.code and s.scalar(sa.select(Site.id).where(Site.code == body.code)) is not None:
            raise ApiError(409, "conflict", f"code: a site with code {body.code!r} exists", "code")
        site = Site(name=body.name, latitude=body.latitude, longitude=body.longitude,
                    elevation_m=body.elevation_m, code=body.code,
                    thresholds=body.thresholds.model_dump(exclude_none=True)
                    if body.thresholds else {}, created_at=now())
        s.add(site)
        s.flush()
        out = site_dict(site)
    return jsonify(out), 201, {"Location": f"/v1/sites/{out['id']}"}


@bp.get("/v1/sites")
def list_sites():
    with get_store().read() as s:
        sites = [site_dict(x) for x in s.scalars(sa.select(Site).order_by(Site.id))]
    return jsonify({"sites": sites})


@bp.get("/v1/sites/<int:site_id>")
def get_site(site_id: int):
    with get_store().read() as s:
        return jsonify(site_dict(_site_or_404(s, site_id), s))


@bp.post("/v1/sites/<int:site_id>/profiles")
def post_profiles(site_id: int):
    require_key()
    body = _parse(ProfilesIn, _json_body())
    limit = int(current_app.config.get("PTYPE_MAX_BATCH", 500))
    if len(body.profiles) > limit:
        raise ApiError(413, "too_many_profiles",
                       f"profiles: {len(body.profiles)} given; at most {limit} per request",
                       "profiles")
    t_now = now()
    issued = _aware(body.issued_time) or t_now
    source = body.source or "unspecified"
    # Validate everything before storing anything.
    validated = []
    seen = {}
    for i, doc in enumerate(body.profiles):
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
    with get_store().write() as s:
        _site_or_404(s, site_id)
        existing = set(s.scalars(sa.select(ProfileRecord.valid_time).where(
            ProfileRecord.site_id == site_id, ProfileRecord.source == source,
            ProfileRecord.valid_time.in_([p.valid_time for p in validated]))))
        for pr in validated:
            _upsert(s, ProfileRecord, {
                "site_id": site_id, "source": source,
                "valid_time": _naive(pr.valid_time),
                "issued_time": _naive(issued), "document": pr.to_document(),
                "received_at": _naive(t_now)}, ("site_id", "source", "valid_time"))
    actions = _evaluate_after_ingest(site_id)
    replaced = sum(1 for p in validated if p.valid_time in existing)
    return jsonify({"site_id": site_id, "stored": len(validated), "replaced": replaced,
                    "issued_time": iso(issued), "source": source, "alerts": actions}), 201


def _naive(dt: datetime) -> datetime:
    return dt.astimezone(UTC).replace(tzinfo=None)


@bp.post("/v1/sites/<int:site_id>/observations")
def post_observations(site_id: int):
    require_key()
    data = _json_body()
    if isinstance(data, dict) and "observations" in data:
        items = _parse(ObservationsIn, data).observations
    else:
        items = [_parse(ObservationIn, data)]
    t_now = now()
    with get_store().write() as s:
        _site_or_404(s, site_id)
        for ob in items:
            values = ob.model_dump()
            values["time"] = _naive(parse_time(values["time"]))
            values.update(site_id=site_id, received_at=_naive(t_now))
            _upsert(s, Observation, values, ("site_id", "time"))
    actions = _evaluate_after_ingest(site_id)
    return jsonify({"site_id": site_id, "stored": len(items), "alerts": actions}), 201


@bp.get("/v1/sites/<int:site_id>/timeline")
def get_timeline(site_id: int):
    args = request.args
    try:
        hours = float(args.get("hours", 12))
    except ValueError:
        raise OptionError(f"hours = {args.get('hours')!r}: expected a number", field="hours")
    try:
        members = int(args.get("members", service.ALERT_MEMBERS))
    except ValueError:
        raise OptionError(f"members = {args.get('members')!r}: expected an integer",
                          field="members")
    max_members = int(current_app.config.get("PTYPE_MAX_MEMBERS", 1000))
    if not 0 <= members <= max_members:
        raise OptionError(f"members = {members}: expected 0 to {max_members}", field="members")
    adjustments = None
    if "adjustments" in args:
        text = args["adjustments"].strip()
        adjustments = [] if text in ("", "none") else [a.strip() for a in text.split(",")]
    t = parse_time(args["now"], "now") if "now" in args else now()
    with get_store().read() as s:
        site = _site_or_404(s, site_id)
        out = service.site_timeline(s, site, t, hours=hours, step=args.get("step", "15min"),
                                    members=members, adjustments=adjustments)
    return jsonify(out)


# -- OpenAPI description (api.docs collects OPENAPI_OPERATIONS) -------------------------
class _Out(BaseModel):
    model_config = ConfigDict(extra="allow")


class SiteOut(_Out):
    """A stored site."""

    id: int
    name: str
    latitude: float
    longitude: float
    elevation_m: float | None = None
    code: str | None = None
    thresholds: dict[str, Any] | None = None


class SiteList(_Out):
    sites: list[SiteOut]


class IngestResult(_Out):
    """What a write stored and the alert actions it triggered."""

    site_id: int
    stored: int
    alerts: list[dict[str, Any]] = Field(default_factory=list,
                                         description="Alerts created, updated or cancelled.")


class TimelineStep(_Out):
    valid_time: str
    ptype: str
    probabilities: dict[str, float]
    hazards: dict[str, Any]


class Timeline(_Out):
    """Steps, type transitions and hazard totals for one site; guidance only."""

    steps: list[TimelineStep]
    transitions: list[dict[str, Any]] = Field(..., description="`{time, from, to}` changes of type.")
    totals: dict[str, Any]
    caution: str


class TimelineOptions(_Body):
    hours: float | None = Field(12, gt=0, le=72, description="Length of the timeline, hours.")
    step: str | None = Field("15min", description="Step between times, e.g. `15min`, `1h`.")
    members: int | None = Field(None, ge=0, description="Monte-Carlo members per step.")
    adjustments: str | None = Field(None, description=(
        "Comma list of nowcast adjustments to apply (`observation,onset,melting`), or `none`; "
        "default all (docs/nowcast.md)."))
    now: str | None = Field(None, description="ISO 8601 time the timeline starts (default: now).")


_SITE_EXAMPLE = {"name": "Quenmoor Overpass", "latitude": 47.31, "longitude": -33.52,
                 "elevation_m": 120, "code": "QMO", "thresholds": {"freezing_probability": 0.25}}
EXAMPLE_PROFILE = {  # invented
    "levels": [
        {"pressure_hpa": 995, "height_m": 120, "temperature_c": -1.8, "dewpoint_c": -2.3},
        {"pressure_hpa": 950, "temperature_c": -3.0, "dewpoint_c": -3.4},
        {"pressure_hpa": 900, "temperature_c": 1.2, "dewpoint_c": 0.8},
        {"pressure_hpa": 850, "temperature_c": 3.9, "dewpoint_c": 3.5},
        {"pressure_hpa": 800, "temperature_c": 0.8, "dewpoint_c": 0.4},
        {"pressure_hpa": 700, "temperature_c": -6.8, "dewpoint_c": -7.5},
        {"pressure_hpa": 500, "temperature_c": -24.0, "dewpoint_c": -27.0},
    ],
    "surface": {"temperature_2m_c": -1.6, "dewpoint_2m_c": -2.2, "road_surface_temperature_c": -2.4,
                "precipitation_rate_mm_h": 1.2, "wind_speed_m_s": 4.0},
}
_SITE_ID = {"site_id": {"description": "Site id from `POST /v1/sites` or `GET /v1/sites`.",
                        "schema": {"type": "integer", "minimum": 1}}}

OPENAPI_OPERATIONS = [
    {"path": "/v1/sites", "method": "post", "id": "site_create", "tag": "Sites", "auth": True,
     "status": 201, "summary": "Register a road site",
     "description": "Name, position, elevation and optional alert thresholds. Needs an API key.",
     "body": {"application/json": {"model": SiteIn, "example": _SITE_EXAMPLE}},
     "ok": ("application/json", SiteOut), "errors": (400, 401, 403, 409, 413, 415, 422)},
    {"path": "/v1/sites", "method": "get", "id": "site_list", "tag": "Sites",
     "summary": "List the sites", "description": "Every registered site.",
     "ok": ("application/json", SiteList), "errors": ()},
    {"path": "/v1/sites/{site_id}", "method": "get", "id": "site_get", "tag": "Sites",
     "summary": "One site", "description": "The site and its thresholds.",
     "path_params": _SITE_ID, "ok": ("application/json", SiteOut), "errors": (404,)},
    {"path": "/v1/sites/{site_id}/profiles", "method": "post", "id": "site_profiles",
     "tag": "Sites", "auth": True, "status": 201,
     "summary": "Store forecast profiles for a site",
     "description": "A series of profile documents, each with a `valid_time`, from one model "
                    "run (`issued_time`, `source`). Re-posting the same site, source and valid "
                    "time replaces the profile. All profiles are validated before anything is "
                    "stored; the site's alerts are then re-evaluated.",
     "path_params": _SITE_ID,
     "body": {"application/json": {"model": ProfilesIn, "example": {
         "issued_time": "2026-01-27T00:00Z", "source": "demo model run",
         "profiles": [dict(EXAMPLE_PROFILE, valid_time="2026-01-27T06:00Z")]}}},
     "ok": ("application/json", IngestResult), "errors": (400, 401, 403, 404, 413, 415, 422)},
    {"path": "/v1/sites/{site_id}/observations", "method": "post", "id": "site_observations",
     "tag": "Sites", "auth": True, "status": 201, "summary": "Store surface observations",
     "description": "Air and road-surface temperature, dew point, precipitation rate, wind and "
                    "observed present weather; the latest one is blended into the timeline.",
     "path_params": _SITE_ID,
     "body": {"application/json": {"model": ObservationsIn, "example": {"observations": [
         {"time": "2026-01-27T05:50Z", "air_temperature_c": -1.2, "dewpoint_c": -2.0,
          "road_surface_temperature_c": -2.5, "precipitation_rate_mm_h": 0.4,
          "wind_speed_m_s": 3.0, "present_weather": "-FZRA"}]}}},
     "ok": ("application/json", IngestResult), "errors": (400, 401, 403, 404, 413, 415, 422)},
    {"path": "/v1/sites/{site_id}/timeline", "method": "get", "id": "site_timeline",
     "tag": "Sites", "summary": "Type timeline, transitions and road hazards",
     "description": "Built from the latest issue of profiles, interpolated in time, with the "
                    "nowcast adjustments of docs/nowcast.md.",
     "path_params": _SITE_ID, "query": TimelineOptions,
     "ok": ("application/json", Timeline), "errors": (400, 404)},
]
