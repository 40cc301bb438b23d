"""Model runs into the store: every registered site gets its forecast profiles, then alerts.

``ingest_file(store, path)`` is what ``ptype ingest``, ``ptype watch`` and
``POST /v1/ingest`` run for one file (GRIB2 or CF NetCDF, one run or several):

1. **Claim** the file by its content (SHA-256) in the ``ingested_files`` table.  The unique
   key makes one process the owner; a file already done is not ingested again (idempotent);
   a claim left by a process that died (same host, process gone) or older than the lease is
   taken over.
2. **Read** the runs (:func:`model_runs`): one per reference time.
3. **Extract** every site's column, bilinear and moved to its elevation
   (:mod:`ptype.ingest.site_columns`).
4. **Store** all profiles of the file and mark it done in *one* transaction: a crash at any
   point leaves no partial run (the database rolls the transaction back).  A profile
   replaces a stored one of the same site, source and valid time only when its run is at
   least as recent (``issued_time``), so an old run arriving late never overwrites a newer
   one; the site's timeline then uses its latest issue, as for posted profiles.
5. **Alerts** of the sites that got profiles are evaluated (timelines are built from the
   store on demand, so they are up to date as soon as the transaction commits).

An unreadable file is marked ``rejected`` with the reason and raises
:class:`~ptype.errors.ReaderError`.
"""

from __future__ import annotations

import dataclasses
import hashlib
import logging
import os
import socket
import time
from collections.abc import Iterable, Sequence
from datetime import UTC, datetime, timedelta
from pathlib import Path
from typing import Any

import numpy as np
import sqlalchemy as sa

from ptype.errors import OptionError, ProfileError, ReaderError
from ptype.ingest.site_columns import SitePoint, columns_at_sites
from ptype.store import IngestedFile, ProfileRecord, Site, Store

log = logging.getLogger("ptype.ingest")

#: Default source name of ingested profiles.
DEFAULT_SOURCE = "model"
#: A claim older than this is taken over even when its owner cannot be checked (another
#: host), s.
DEFAULT_LEASE_S = 3600.0
#: Environment variable: seconds to wait inside the storing transaction before it commits
#: (used by the crash-safety test and for demonstrations; 0 or unset in service).
HOLD_ENV = "PTYPE_INGEST_HOLD_S"
#: Rows per INSERT statement when storing profiles.
INSERT_BATCH = 2000


@dataclasses.dataclass
class ModelRun:
    """One run of a model file: its reference time, dataset, fields and valid times."""

    reference_time: datetime
    dataset: Any
    fields: Any
    valid_times: list[datetime]


def _aware(value) -> datetime:
    seconds = np.datetime64(value, "s").astype(np.int64)
    return datetime.fromtimestamp(int(seconds), tz=UTC)


def _grib_runs(path: str) -> list[ModelRun]:
    from ptype.grid import grib
    from ptype.grid.fields import find_fields
    messages, geometry = grib.read_messages(path)
    by_reference: dict[datetime, list] = {}
    for m in messages:
        by_reference.setdefault(m.reference, []).append(m)
    runs = []
    for reference, group in sorted(by_reference.items()):
        ds = grib.assemble(group, geometry, [path])
        fields = find_fields(ds, path)
        runs.append(ModelRun(reference, ds, fields, [_aware(t) for t in ds["time"].values]))
    return runs


def _netcdf_runs(path: str) -> list[ModelRun]:
    import xarray as xr

    from ptype.grid.fields import find_fields
    try:
        ds = xr.open_dataset(path, engine="netcdf4", decode_timedelta=False).load()
    except (OSError, ValueError, TypeError) as exc:
        reason = (str(exc).strip().splitlines() or [type(exc).__name__])[0]
        raise ReaderError(f"{path}: not a readable GRIB2 or NetCDF file ({reason})",
                          field="input") from None
    fields = find_fields(ds, path)
    if fields.time_dim is None:
        raise ReaderError(f"{path}: the temperature has no time dimension; a model run needs "
                          "valid times", field="time")
    times = [_aware(t) for t in ds[fields.time_dim].values]
    ref = next((ds[n] for n in ds.coords
                if ds[n].attrs.get("standard_name") == "forecast_reference_time"), None)
    if ref is None:
        text = ds.attrs.get("forecast_reference_time")
        from ptype.clock import parse_time
        reference = parse_time(text, "forecast_reference_time") if text else times[0]
        return [ModelRun(reference, ds, fields, times)]
    refs = [_aware(v) for v in np.atleast_1d(ref.values)]
    if len(refs) == 1:
        return [ModelRun(refs[0], ds, fields, times)]
    runs = []
    for reference in sorted(set(refs)):
        idx = [i for i, r in enumerate(refs) if r == reference]
        sub = ds.isel({fields.time_dim: idx})
        runs.append(ModelRun(reference, sub, fields, [times[i] for i in idx]))
    return runs


def model_runs(path: str | os.PathLike) -> list[ModelRun]:
    """The runs of a GRIB2 or CF NetCDF file, one per reference time (GRIB2 reference time;
    CF ``forecast_reference_time`` coordinate or attribute, else the first valid time)."""
    from ptype.grid import grib
    name = os.fspath(path)
    if not os.path.exists(name):
        raise FileNotFoundError(2, "No such file or directory", name)
    return _grib_runs(name) if grib.is_grib(name) else _netcdf_runs(name)


def file_key(path: str | os.PathLike) -> str:
    """SHA-256 of the file's content, hex."""
    digest = hashlib.sha256()
    with open(path, "rb") as f:
        for block in iter(lambda: f.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()


def owner_id() -> str:
    """This process as a claim owner: ``host:pid``."""
    return f"{socket.gethostname()}:{os.getpid()}"


def _owner_gone(owner: str) -> bool:
    host, _, pid = owner.rpartition(":")
    if host != socket.gethostname() or not pid.isdigit():
        return False
    try:
        os.kill(int(pid), 0)
    except ProcessLookupError:
        return True
    except PermissionError:
        return False
    return False


def claim_file(store: Store, key: str, name: str, size: int, now: datetime,
               lease_s: float = DEFAULT_LEASE_S) -> str:
    """Claim a file for this process: ``claimed``, or its state when another has it
    (``done``, ``rejected``, ``busy``: claimed by a live process)."""
    me = owner_id()
    try:
        with store.write() as s:
            s.add(IngestedFile(file_key=key, name=name[:500], size_bytes=size, status="claimed",
                               claimed_by=me, claimed_at=now))
        return "claimed"
    except sa.exc.IntegrityError:
        pass
    with store.write() as s:
        row = s.scalars(sa.select(IngestedFile).where(IngestedFile.file_key == key)).one()
        if row.status in ("done", "rejected"):
            return row.status
        stale = row.claimed_at <= now - timedelta(seconds=lease_s)
        if row.claimed_by == me or stale or _owner_gone(row.claimed_by):
            log.info("taking over %s (claimed by %s at %s)", name, row.claimed_by,
                     row.claimed_at)
            row.claimed_by, row.claimed_at, row.name = me, now, name[:500]
            return "claimed"
        return "busy"


def _site_points(store: Store) -> list[SitePoint]:
    with store.read() as s:
        return [SitePoint(x.id, x.code, x.name, x.latitude, x.longitude, x.elevation_m)
                for x in s.scalars(sa.select(Site).order_by(Site.id))]


def _insert_statement(session):
    dialect = session.bind.dialect.name if session.bind is not None else "sqlite"
    if dialect == "postgresql":
        from sqlalchemy.dialects.postgresql import insert
    else:
        from sqlalchemy.dialects.sqlite import insert
    table = ProfileRecord.__table__
    stmt = insert(table)
    # A late older run never replaces a newer run's profile.
    return stmt.on_conflict_do_update(
        index_elements=["site_id", "source", "valid_time"],
        set_={k: stmt.excluded[k] for k in ("issued_time", "document", "received_at")},
        where=table.c.issued_time <= stmt.excluded.issued_time)


def _naive(dt: datetime) -> datetime:
    return dt.astimezone(UTC).replace(tzinfo=None)


def _rows(run: ModelRun, sites: Sequence[SitePoint], source: str, now: datetime):
    """The profile rows of one run, and the sites it left out."""
    label = f"{source} run {run.reference_time:%Y-%m-%dT%H:%MZ} (bilinear, adjusted to the " \
            "site elevation)"
    items = columns_at_sites(run.dataset, run.fields, sites, run.valid_times, label)
    rows, skipped = [], []
    for it in items:
        if "skipped" in it:
            skipped.append({"site_id": it["site_id"], "reason": it["skipped"]})
            continue
        member = it["member"]
        rows.append({"site_id": it["site_id"],
                     "source": source if member is None else f"{source} member {member}",
                     "valid_time": _naive(it["valid_time"]),
                     "issued_time": _naive(run.reference_time), "document": it["document"],
                     "received_at": _naive(now)})
    return rows, skipped


def _store(store: Store, key: str, rows: list[dict], summary: dict, now: datetime) -> None:
    """All rows and the file's ``done`` mark in one transaction."""
    with store.write() as s:
        stmt = _insert_statement(s)
        for start in range(0, len(rows), INSERT_BATCH):
            s.execute(stmt, rows[start:start + INSERT_BATCH])
        hold = float(os.environ.get(HOLD_ENV) or 0)
        if hold > 0:
            log.info("holding the transaction %.1f s before commit (%s)", hold, HOLD_ENV)
            time.sleep(hold)
        row = s.scalars(sa.select(IngestedFile).where(IngestedFile.file_key == key)).one()
        row.status, row.finished_at, row.summary = "done", now, summary


def _cpu_s() -> float:
    """CPU seconds of this process and its finished children (the timeline workers)."""
    try:
        import resource
    except ImportError:  # pragma: no cover - not on this platform
        return time.process_time()
    own, kids = resource.getrusage(resource.RUSAGE_SELF), \
        resource.getrusage(resource.RUSAGE_CHILDREN)
    return own.ru_utime + own.ru_stime + kids.ru_utime + kids.ru_stime


def reject(store: Store, key: str, reason: str, now: datetime) -> None:
    """Mark a claimed file rejected with its reason."""
    with store.write() as s:
        row = s.scalars(sa.select(IngestedFile).where(IngestedFile.file_key == key)).one()
        row.status, row.finished_at, row.reason = "rejected", now, reason[:4000]


def ingest_file(store: Store, path: str | os.PathLike, *, now: datetime,
                source: str = DEFAULT_SOURCE, name: str | None = None,
                evaluate: bool = True, members: int | None = None,
                cap_status: str | None = None, lease_s: float = DEFAULT_LEASE_S) -> dict:
    """Ingest one model file for every registered site (see the module notes); a summary.

    ``{"file", "status": "ingested" | "already ingested" | "busy", "runs": [...],
    "profiles", "sites", "skipped", "alerts"}``.
    """
    path = Path(path)
    name = name or path.name
    key = file_key(path)
    state = claim_file(store, key, name, path.stat().st_size, now, lease_s)
    if state != "claimed":
        status = {"done": "already ingested", "rejected": "already rejected"}.get(state, state)
        return {"file": name, "status": status, "file_key": key}
    log.info("%s: claimed %s (cpu %.2f s)", name, key[:12], _cpu_s())
    try:
        runs = model_runs(path)
    except ReaderError as exc:
        reject(store, key, str(exc), now)
        raise
    log.info("%s: read %d runs (cpu %.2f s)", name, len(runs), _cpu_s())
    sites = _site_points(store)
    rows, skipped, run_info = [], [], []
    for run in runs:
        r, sk = _rows(run, sites, source, now)
        rows.extend(r)
        skipped = sk
        run_info.append({"reference_time": run.reference_time.isoformat(),
                         "steps": len(run.valid_times), "profiles": len(r),
                         "first_valid_time": run.valid_times[0].isoformat(),
                         "last_valid_time": run.valid_times[-1].isoformat()})
    site_ids = sorted({r["site_id"] for r in rows})
    summary = {"file": name, "status": "ingested", "file_key": key, "source": source,
               "runs": run_info, "profiles": len(rows), "sites": len(site_ids),
               "skipped": skipped}
    log.info("%s: extracted %d profiles for %d sites (cpu %.2f s)", name, len(rows),
             len(site_ids), _cpu_s())
    _store(store, key, rows, summary, now)
    log.info("%s: stored (cpu %.2f s)", name, _cpu_s())
    if evaluate and site_ids:
        summary["alerts"] = evaluate_sites(store, site_ids, now, members=members,
                                           cap_status=cap_status)
        log.info("%s: alerts evaluated %s (cpu %.2f s)", name, summary["alerts"], _cpu_s())
    return summary


#: Environment variable: processes that build the sites' timelines (default: the cores, at
#: most 4; 1 builds them in this process).
WORKERS_ENV = "PTYPE_INGEST_WORKERS"
#: Fewer sites than this are evaluated in this process (starting workers costs more).
MIN_SITES_PER_WORKER = 50


def _workers(n_sites: int) -> int:
    wanted = os.environ.get(WORKERS_ENV)
    n = int(wanted) if wanted and wanted.isdigit() else min(os.cpu_count() or 1, 4)
    return max(1, min(n, n_sites // MIN_SITES_PER_WORKER))


def _candidates(url: str | Store, site_ids: Sequence[int], now: datetime,
                members: int) -> dict[int, Any]:
    """Alert candidates of the sites (read-only: their timelines); a site whose profiles
    cannot be used gets its error message instead."""
    from ptype.roads.alerts import service
    store = Store(url, migrate=False) if isinstance(url, str) else url
    out: dict[int, Any] = {}
    try:
        with store.read() as s:
            for site_id in site_ids:
                site = s.get(Site, site_id)
                if site is None:
                    continue
                try:
                    out[site_id] = service.site_candidates(s, site, now, members=members)
                except (ProfileError, OptionError) as exc:  # the profiles stay stored
                    out[site_id] = str(exc)
    finally:
        if isinstance(url, str):
            store.dispose()
    return out


def _all_candidates(store: Store, site_ids: list[int], now: datetime,
                    members: int) -> dict[int, Any]:
    """Candidates of every site, the sites shared among worker processes (each builds whole
    timelines, so every site's result is the one its own timeline gives)."""
    workers = _workers(len(site_ids))
    if workers == 1:
        return _candidates(store, site_ids, now, members)
    import multiprocessing
    from concurrent.futures import ProcessPoolExecutor
    chunks = [site_ids[k::workers] for k in range(workers)]
    # fork: the workers inherit the compiled kernels; each opens its own connections.
    with ProcessPoolExecutor(workers, mp_context=multiprocessing.get_context("fork")) as pool:
        parts = pool.map(_candidates, [store.url] * workers, chunks, [now] * workers,
                         [members] * workers)
        out: dict[int, Any] = {}
        for part in parts:
            out.update(part)
    return out


def evaluate_sites(store: Store, site_ids: Iterable[int], now: datetime, *,
                   members: int | None = None, cap_status: str | None = None) -> dict:
    """Re-evaluate the alerts of the sites: timelines read outside the write lock (in
    worker processes when there are many sites, :data:`WORKERS_ENV`), the decisions in one
    write transaction; counts of the actions taken."""
    from ptype.roads.alerts import service
    members = service.ALERT_MEMBERS if members is None else members
    candidates = _all_candidates(store, list(site_ids), now, members)
    counts: dict[str, int] = {}
    with store.write() as s:
        for site_id, cands in candidates.items():
            site = s.get(Site, site_id)
            if site is None:
                continue
            if isinstance(cands, str):
                log.warning("site %s: alerts not evaluated: %s", site_id, cands)
                counts["not_evaluated"] = counts.get("not_evaluated", 0) + 1
                continue
            for act in service.apply_candidates(s, site, cands, now, cap_status=cap_status):
                counts[act["action"]] = counts.get(act["action"], 0) + 1
    return counts
