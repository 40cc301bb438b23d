"""Alerts against the store: build a site's timeline, apply the rules and the lifecycle.

This is the thin I/O layer over :mod:`.rules`, :mod:`.lifecycle` and
:func:`ptype.roads.nowcast.build_timeline`; it is run after every ingest of profiles or
observations for a site, inside the same write transaction, so an acknowledged ingest
always has its alerts evaluated.
"""

from __future__ import annotations

import uuid
from collections.abc import Callable, Iterable, Mapping, Sequence
from contextlib import AbstractContextManager, nullcontext
from dataclasses import dataclass
from datetime import datetime, timedelta
from typing import Any

import sqlalchemy as sa
from sqlalchemy.orm import Session

from ptype.clock import iso
from ptype.profile import Profile
from ptype.roads.alerts.lifecycle import decide
from ptype.roads.alerts.rules import Candidate, evaluate_rules
from ptype.store.models import Alert, AlertMessage, Observation, ProfileRecord, Site

#: Alerts that ended less than this long ago are still listed (ours).
RECENT = timedelta(hours=24)
#: Timeline length evaluated for alerts, h (the rule windows are shorter; ice accretion is
#: totalled over all of it).
ALERT_HOURS = 24.0
ALERT_STEP = "30min"
ALERT_MEMBERS = 20


def latest_issue(session: Session, site_id: int) -> list[ProfileRecord]:
    """The profiles of the site's latest issue (latest issued_time; its most recent source)."""
    top = session.execute(
        sa.select(ProfileRecord.issued_time, ProfileRecord.source)
        .where(ProfileRecord.site_id == site_id)
        .order_by(ProfileRecord.issued_time.desc(), ProfileRecord.received_at.desc(),
                  ProfileRecord.id.desc()).limit(1)).first()
    if top is None:
        return []
    return list(session.scalars(
        sa.select(ProfileRecord).where(ProfileRecord.site_id == site_id,
                                       ProfileRecord.issued_time == top.issued_time,
                                       ProfileRecord.source == top.source)
        .order_by(ProfileRecord.valid_time)))


def recent_observations(session: Session, site_id: int, now: datetime) -> list[dict]:
    """The site's last 12 observations of the 6 hours up to ``now``, newest first."""
    rows = session.scalars(
        sa.select(Observation).where(Observation.site_id == site_id, Observation.time <= now,
                                     Observation.time >= now - timedelta(hours=6))
        .order_by(Observation.time.desc()).limit(12))
    return [observation_dict(o) for o in rows]


def observation_dict(o: Observation) -> dict:
    """A stored observation as the mapping the timeline reads."""
    return {"time": o.time, "air_temperature_c": o.air_temperature_c, "dewpoint_c": o.dewpoint_c,
            "road_surface_temperature_c": o.road_surface_temperature_c,
            "precipitation_rate_mm_h": o.precipitation_rate_mm_h,
            "wind_speed_m_s": o.wind_speed_m_s, "present_weather": o.present_weather}


def covering(records: Sequence[ProfileRecord], start: datetime,
             end: datetime) -> list[ProfileRecord]:
    """The records (sorted by valid time) a timeline from ``start`` to ``end`` reads: those
    inside, and the last one before and the first one after (interpolation brackets)."""
    times = [r.valid_time for r in records]
    lo = max((i for i, t in enumerate(times) if t <= start), default=0)
    hi = min((i for i, t in enumerate(times) if t >= end), default=len(times) - 1)
    return list(records[lo:hi + 1])


@dataclass(frozen=True)
class TimelineInputs:
    """What a site's timeline is built from, read from the store (no session needed after):
    the site's summary, its latest issue (documents by ensemble member: one group for a
    deterministic run; issued time, source) and its recent observations."""

    site: dict
    groups: tuple[tuple[str, tuple[dict, ...]], ...]
    issued_time: datetime | None
    source: str | None
    observations: tuple[dict, ...]


def timeline_inputs(session: Session, site: Site, now: datetime, *,
                    covering_hours: float | None = None) -> TimelineInputs:
    """Read what the site's timeline at ``now`` needs (cheap: a few queries).

    ``covering_hours`` reads only the profiles a window of that length needs
    (:func:`covering`; the steps are the same, ``issued_profiles`` lists only those): for
    alerts, on long runs."""
    records = latest_issue(session, site.id)
    groups = ensemble_members(session, records) if records else {}
    out = []
    for name, group in groups.items():
        if covering_hours is not None:
            group = covering(group, now, now + timedelta(hours=covering_hours))
        out.append((name, tuple(r.document for r in group)))
    source = records[0].source if records else None
    if source and len(out) > 1:
        source = source.rpartition(" member ")[0]
    return TimelineInputs(site_summary(site), tuple(out),
                          records[0].issued_time if records else None, source,
                          tuple(recent_observations(session, site.id, now)))


def site_timeline(session: Session, site: Site, now: datetime, *, covering_only: bool = False,
                  **options: Any) -> dict[str, Any]:
    """The site's timeline from its latest issue of profiles and its recent observations
    (:func:`timeline_from_inputs` of :func:`timeline_inputs`; same options, and
    ``covering_only`` as ``covering_hours`` there)."""
    hours = options.get("hours", ALERT_HOURS) if covering_only else None
    return timeline_from_inputs(timeline_inputs(session, site, now, covering_hours=hours), now,
                                **options)


def timeline_from_inputs(inputs: TimelineInputs, now: datetime, *, hours: float = ALERT_HOURS,
                         step: str = ALERT_STEP, members: int = ALERT_MEMBERS, seed: int = 0,
                         adjustments: Iterable[str] | None = None,
                         max_member_levels: int | None = None,
                         guard: Callable[[], AbstractContextManager] | None = None
                         ) -> dict[str, Any]:
    """The timeline of ``inputs`` (:func:`timeline_inputs`), no store needed; an ensemble
    run's members are combined (:mod:`ptype.roads.ensemble_timeline`).

    With ``max_member_levels``, a timeline whose ``max(members, 1) x steps x levels`` (summed
    over the ensemble's members) is larger is refused with
    :class:`ptype.errors.WorkLimitError` before any diagnosis.  ``guard()``, when given, is
    entered around the computation, after that check (the service's work slot and time
    limit).
    """
    from ptype.roads.nowcast import ADJUSTMENTS, build_timeline
    base = {"site": inputs.site}
    if not inputs.groups:
        from ptype.constants import CAUTION
        return {**base, "now": iso(now), "steps": [], "transitions": [], "totals": {},
                "caution": CAUTION, "message": "no profiles have been posted for this site"}
    groups = [[Profile.from_document(d) for d in docs] for _, docs in inputs.groups]
    if max_member_levels is not None:
        check_timeline_work(groups, now, hours, step, members, max_member_levels)
    with guard() if guard is not None else nullcontext():
        timelines = [build_timeline(profiles, now=now, hours=hours, step=step,
                                    observations=list(inputs.observations),
                                    adjustments=ADJUSTMENTS if adjustments is None
                                    else adjustments, members=members, seed=seed)
                     for profiles in groups]
    if len(timelines) == 1:
        out = timelines[0]
    else:
        from ptype.roads.ensemble_timeline import combine_timelines
        out = combine_timelines(timelines, [name for name, _ in inputs.groups], step)
    out["source"] = inputs.source
    out["issued_time"] = iso(inputs.issued_time)
    return {**base, **out}


def ensemble_members(session: Session, records: Sequence[ProfileRecord]
                     ) -> dict[str, list[ProfileRecord]]:
    """The latest issue by source: one group, or, when it is an ensemble member (source
    ``NAME member K``, as the model-run ingest names them), every member of that run."""
    source = records[0].source
    base, mark, _ = source.rpartition(" member ")
    if not mark:
        return {source: list(records)}
    rows = session.scalars(
        sa.select(ProfileRecord).where(ProfileRecord.site_id == records[0].site_id,
                                       ProfileRecord.issued_time == records[0].issued_time,
                                       ProfileRecord.source.like(f"{base} member %"))
        .order_by(ProfileRecord.source, ProfileRecord.valid_time))
    groups: dict[str, list[ProfileRecord]] = {}
    for r in rows:
        groups.setdefault(r.source.rpartition(" member ")[2], []).append(r)
    return groups


def check_timeline_work(groups: list[list[Profile]], now: datetime, hours: float, step: str,
                        members: int, limit: int) -> None:
    """Refuse (:class:`ptype.errors.WorkLimitError`) a timeline of more than ``limit``
    member-levels (``max(members, 1) x steps x levels``, summed over the groups of an
    ensemble run), before any diagnosis."""
    from ptype.errors import WorkLimitError
    from ptype.roads.nowcast import timeline_size
    asked, parts = 0, []
    for profiles in groups:
        n_steps, n_levels = timeline_size(profiles, now=now, hours=hours, step=step)
        asked += max(members, 1) * n_steps * n_levels
        parts.append((n_steps, n_levels))
    if asked > limit:
        n_steps, n_levels = parts[0]
        runs = f" x {len(groups)} ensemble members" if len(groups) > 1 else ""
        raise WorkLimitError(
            f"members = {members} x {n_steps} steps x {n_levels} levels{runs} = {asked} "
            f"member-levels; this server computes at most {limit} per timeline (ask for "
            "fewer members, a longer step or fewer hours)",
            asked=asked, limit=limit, unit="member-levels", field="members")


def site_summary(site: Site) -> dict:
    """Id, name and position of a site, as alerts carry it."""
    return {"id": site.id, "name": site.name, "latitude": site.latitude,
            "longitude": site.longitude, "elevation_m": site.elevation_m}


def _snapshot(site: Site, cand) -> dict:
    snap = cand.to_dict()
    snap["site"] = site_summary(site)
    return snap


def _add_message(session: Session, alert: Alert, msg_type: str, now: datetime, snap: dict,
                 cap_status: str | None = None):
    if cap_status:
        snap = {**snap, "cap_status": cap_status}
    seq = 1 + max((m.seq for m in alert.messages), default=0)
    msg = AlertMessage(alert_id=alert.id, seq=seq, identifier=f"{alert.id}.{seq}",
                       msg_type=msg_type, sent=now, snapshot=snap)
    alert.messages.append(msg)
    session.add(msg)


def site_candidates(session: Session, site: Site, now: datetime, *,
                    members: int = ALERT_MEMBERS) -> list | None:
    """Alert candidates from the site's current timeline (read-only; the slow part).

    None when no forecast covers now: active alerts are then neither updated nor cancelled
    (they still expire), because "the hazard left the forecast" cannot be told from "there is
    no forecast"."""
    return candidates_from_timeline(
        site_timeline(session, site, now, members=members, covering_only=True), now, site)


def candidates_from_timeline(timeline: dict[str, Any], now: datetime,
                             site: Site) -> list | None:
    """Alert candidates of a site's timeline (see :func:`site_candidates`)."""
    if not timeline.get("steps"):
        return None  # no forecast covers now: nothing can be said about the hazards
    return evaluate_rules(timeline, now, site.name, site.thresholds)


def evaluate_site(session: Session, site: Site, now: datetime, *,
                  members: int = ALERT_MEMBERS, cap_status: str | None = None) -> list[dict]:
    """Evaluate the site's alerts now in one transaction; returns the actions taken."""
    return apply_candidates(session, site, site_candidates(session, site, now, members=members),
                            now, cap_status=cap_status)


def apply_candidates(session: Session, site: Site, candidates: Sequence[Candidate] | None,
                     now: datetime, *, cap_status: str | None = None) -> list[dict]:
    """Apply the lifecycle to fresh state (call inside a write transaction).

    ``cap_status`` (CAP ``status``: Actual, Exercise...) is recorded with each message so that
    every later rendering of it says the same."""
    active = list(session.scalars(sa.select(Alert).where(Alert.site_id == site.id,
                                                         Alert.status == "active")))
    if candidates is None:
        expired = [a for a in active if a.expires <= now]
        for a in expired:
            a.status, a.ended_at, a.updated_at = "expired", a.expires, now
        return [{"action": "expire", "event": a.event, "alert_id": a.id} for a in expired]
    by_id = {a.id: a for a in active}
    actions = decide([{"id": a.id, "event": a.event, "onset": a.onset, "expires": a.expires,
                       "severity": a.severity, "certainty": a.certainty} for a in active],
                     candidates, now)
    done = []
    for act in actions:
        if act.kind == "new":
            c = act.candidate
            alert = Alert(id=str(uuid.uuid4()), site_id=site.id, event=c.event, status="active",
                          severity=c.severity, certainty=c.certainty, urgency=c.urgency,
                          onset=c.onset, expires=c.expires, details=c.to_dict(), version=1,
                          created_at=now, updated_at=now)
            session.add(alert)
            session.flush()
            _add_message(session, alert, "Alert", now, _snapshot(site, c), cap_status)
        else:
            alert = by_id[act.alert_id]
            if act.kind == "update":
                c = act.candidate
                alert.severity, alert.certainty, alert.urgency = c.severity, c.certainty, c.urgency
                alert.onset, alert.expires, alert.details = c.onset, c.expires, c.to_dict()
                alert.version += 1
                alert.updated_at = now
                _add_message(session, alert, "Update", now, _snapshot(site, c), cap_status)
            elif act.kind == "cancel":
                alert.status, alert.ended_at, alert.updated_at = "cancelled", now, now
                snap = dict(alert.messages[-1].snapshot)
                _add_message(session, alert, "Cancel", now, snap, cap_status)
            elif act.kind == "expire":
                alert.status, alert.ended_at, alert.updated_at = "expired", alert.expires, now
        done.append({"action": act.kind, "event": act.event, "alert_id": alert.id})
    return done


def expire_due(session: Session, now: datetime) -> int:
    """Mark every active alert whose expiry has passed as expired (the evaluation path only:
    listings show the same through :func:`status_at` without writing)."""
    rows = list(session.scalars(sa.select(Alert).where(Alert.status == "active",
                                                       Alert.expires <= now)))
    for a in rows:
        a.status, a.ended_at, a.updated_at = "expired", a.expires, now
    return len(rows)


def status_at(alert: Alert, now: datetime | None) -> tuple[str, datetime | None]:
    """``(status, ended)`` of a stored alert as seen at ``now``, without changing it.

    An alert stored as active whose expiry has passed is shown expired (ended at its
    expiry): listings read, and only the evaluation path writes the lifecycle.
    """
    if now is not None and alert.status == "active" and alert.expires <= now:
        return "expired", alert.expires
    return alert.status, alert.ended_at


def alert_dict(alert: Alert, sender: str, now: datetime | None = None) -> dict:
    """JSON-ready form of a stored alert with its latest message and CAP references
    (its status as seen at ``now``, see :func:`status_at`)."""
    from ptype.roads.alerts.cap import reference
    last = alert.messages[-1]
    earlier = alert.messages[:-1]
    d = alert.details or {}
    status, ended = status_at(alert, now)
    return {
        "id": alert.id, "status": status, "event": alert.event,
        "onset": iso(alert.onset), "expires": iso(alert.expires), "sent": iso(last.sent),
        "site": last.snapshot.get("site"), "severity": alert.severity,
        "certainty": alert.certainty, "urgency": alert.urgency, "msg_type": last.msg_type,
        "identifier": last.identifier,
        "references": [reference(sender, m.identifier, m.sent) for m in earlier],
        "headline": d.get("headline"), "description": d.get("description"),
        "instruction": d.get("instruction"), "parameters": d.get("parameters", {}),
        "created": iso(alert.created_at), "updated": iso(alert.updated_at),
        "ended": iso(ended), "version": alert.version,
    }


def list_alerts(session: Session, now: datetime, sender: str, *, include_recent: bool = True,
                site_id: int | None = None, owner: str | None = None) -> list[dict]:
    """Alerts active at ``now`` (and, with ``include_recent``, those ended in the last
    :data:`RECENT`), by onset; of one site and of one owner's sites when those are given.
    Read-only: an active alert past its expiry is listed as expired (:func:`status_at`) but
    stays as stored until the next evaluation."""
    live = sa.and_(Alert.status == "active", Alert.expires > now)
    if include_recent:
        lapsed = sa.and_(Alert.status == "active", Alert.expires <= now,
                         Alert.expires >= now - RECENT)
        ended = sa.and_(Alert.status != "active", Alert.ended_at >= now - RECENT)
        q = sa.select(Alert).where(sa.or_(live, lapsed, ended))
    else:
        q = sa.select(Alert).where(live)
    if site_id is not None:
        q = q.where(Alert.site_id == site_id)
    if owner is not None:
        q = q.where(Alert.site_id.in_(sa.select(Site.id).where(Site.owner == owner)))
    rows = session.scalars(q.order_by(Alert.onset, Alert.id))
    return [alert_dict(a, sender, now) for a in rows]


def cap_for(alert: Alert, sender: str, status: str | None, radius_km: float,
            **scope: str | None) -> bytes:
    """CAP XML of the alert's latest message; ``status`` None uses the one recorded with it;
    ``scope`` the deployment's ``scope``, ``restriction`` and ``addresses``
    (:func:`ptype.roads.alerts.cap.build_cap`; its defaults when not given)."""
    from ptype.roads.alerts.cap import build_cap
    last = alert.messages[-1]
    msg = {"identifier": last.identifier, "msg_type": last.msg_type, "sent": last.sent,
           "snapshot": last.snapshot}
    earlier = [{"identifier": m.identifier, "sent": m.sent} for m in alert.messages[:-1]]
    status = status or last.snapshot.get("cap_status") or "Actual"
    given = {k: v for k, v in scope.items() if v}
    return build_cap(msg, earlier, sender=sender, status=status, radius_km=radius_km, **given)


def evaluate_all(session: Session, now: datetime, *, members: int = ALERT_MEMBERS,
                 cap_status: str | None = None) -> list[dict]:
    """Evaluate every site's alerts now; the actions taken, site by site."""
    out = []
    for site in session.scalars(sa.select(Site).order_by(Site.id)):
        out.extend(evaluate_site(session, site, now, members=members, cap_status=cap_status))
    return out


def config_value(config: Mapping[str, Any] | None, key: str, default: Any) -> Any:
    """``key`` from ``config``, else from the environment, else ``default``."""
    import os
    return (config or {}).get(key) or os.environ.get(key) or default
