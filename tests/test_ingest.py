"""Sites fed from model runs (ptype.grid.points, ptype.ingest.site_columns, ptype.ingest.pipeline,
ptype.ingest.inbox, ``ptype ingest``/``ptype watch``): bilinear columns, the elevation
adjustment, idempotent and crash-safe storing, newer runs superseding older ones, the inbox.
Every model file is written by the real encoders (ecCodes, netCDF4) from invented fields."""

from __future__ import annotations

import importlib.util
import json
import os
import signal
import subprocess
import sys
from datetime import UTC, datetime, timedelta
from pathlib import Path

import numpy as np
import pytest

pytest.importorskip("eccodes")
sa = pytest.importorskip("sqlalchemy")
xr = pytest.importorskip("xarray")

import ptype
from ptype import grid
from ptype.cli import main
from ptype.errors import ReaderError
from ptype.grid import grib, points
from ptype.ingest import pipeline as ingest
from ptype.ingest import site_columns
from ptype.ingest.inbox import Inbox
from ptype.roads.alerts import service
from ptype.roads.nowcast import build_timeline
from ptype.store import IngestedFile, ProfileRecord, Site, Store

ROOT = Path(__file__).resolve().parents[1]
REF = datetime(2031, 1, 14, 6, tzinfo=UTC)
GRID = grib.RegularGrid(lat_first=48.0, lon_first=-34.0, dlat=0.25, dlon=0.25, ny=12, nx=16)


def _generator():
    path = ROOT / "soundings_demo" / "grid" / "make_grid.py"
    spec = importlib.util.spec_from_file_location("ptype_demo_make_grid_ingest", path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


@pytest.fixture(scope="module")
def fields():
    """The invented demo grid: 16 x 12 columns, 3 steps (3 h apart), 20 levels."""
    return _generator().make_grid(nx=16, ny=12, times=3, spacing_km=40.0)


@pytest.fixture(scope="module")
def run_file(fields, tmp_path_factory):
    path = tmp_path_factory.mktemp("runs") / "run_06.grib2"
    grib.write_fields_grib2(fields, path, GRID, REF)
    return path


def _grid_lat_lon(j, i):
    return GRID.lat_first - j * GRID.dlat, GRID.lon_first + i * GRID.dlon


def _store(tmp_path, sites):
    store = Store(f"sqlite:///{tmp_path / 'ptype.sqlite3'}")
    with store.write() as s:
        for k, (lat, lon, elev) in enumerate(sites):
            s.add(Site(code=f"site-{k}", name=f"Invented site {k}", latitude=lat, longitude=lon,
                       elevation_m=elev, thresholds={}, created_at=REF))
    return store


# --- bilinear columns ------------------------------------------------------------------------

def test_bilinear_is_exact_for_a_bilinear_field():
    """Bilinear interpolation reproduces any field a + b x + c y + d x y exactly (Press et
    al. 2007, sec. 3.6.1)."""
    lat = np.linspace(50.0, 45.0, 21)
    lon = np.linspace(-35.0, -30.0, 31)
    f = 2.0 + 0.3 * lon[None, :] - 0.7 * lat[:, None] + 0.05 * lon[None, :] * lat[:, None]
    plat, plon = np.array([47.13, 45.0, 49.99]), np.array([-33.37, -30.01, -34.9])
    w = points.point_weights(lat, lon, plat, plon)
    expected = 2.0 + 0.3 * plon - 0.7 * plat + 0.05 * plon * plat
    np.testing.assert_allclose(points.extract(f, w), expected, rtol=1e-12)
    off = points.point_weights(lat, lon, [60.0], [-33.0])
    assert not off.inside[0] and np.isnan(points.extract(f, off)[0])


def test_bilinear_on_a_curvilinear_grid_recovers_positions():
    """A rotated grid with 2-D coordinates: interpolating latitude and longitude themselves
    gives back the point (the inverse bilinear map, to 1e-6 degree)."""
    j, i = np.mgrid[0:30, 0:40].astype(float)
    angle = np.radians(20.0)
    lat = 45.0 + 0.1 * (j * np.cos(angle) - i * np.sin(angle))
    lon = -34.0 + 0.14 * (j * np.sin(angle) + i * np.cos(angle))
    plat, plon = np.array([46.0, 46.9]), np.array([-32.5, -31.2])
    w = points.point_weights(lat, lon, plat, plon)
    assert w.inside.all()
    np.testing.assert_allclose(points.extract(lat, w), plat, atol=1e-6)
    np.testing.assert_allclose(points.extract(lon, w), plon, atol=1e-6)


def test_missing_corners_are_left_out():
    lat, lon = np.array([1.0, 0.0]), np.array([0.0, 1.0])
    f = np.array([[1.0, np.nan], [3.0, 5.0]])
    w = points.point_weights(lat, lon, [0.5], [0.5])
    assert points.extract(f, w)[0] == pytest.approx(3.0)  # mean of the three valid corners


def test_elevation_adjustment_matches_the_standard_atmosphere():
    """A site 500 m above a model ground at 1013.25 hPa and 15 degC: the ICAO standard
    atmosphere (ICAO Doc 7488, 1993) gives 954.61 hPa and 11.75 degC at 500 m."""
    c = site_columns.Columns(
        pressure_hpa=np.array([1000.0, 850.0, 700.0]),
        temperature_c=np.array([[14.0, 5.0, -3.0]]), dewpoint_c=np.array([[10.0, 0.0, -9.0]]),
        height_m=None, surface_pressure_hpa=np.array([1013.25]),
        model_ground_m=np.array([0.0]), temperature_2m_c=np.array([15.0]),
        dewpoint_2m_c=np.array([12.0]))
    out = site_columns.adjust_to_elevation(c, np.array([500.0]))
    assert out["p_site"][0] == pytest.approx(954.61, abs=0.05)
    assert out["t_site"][0] == pytest.approx(11.75, abs=1e-9)
    assert out["t_site"][0] - out["td_site"][0] == pytest.approx(3.0)  # depression kept
    doc = site_columns.column_documents(c, out)[0]
    assert [lv["pressure_hpa"] for lv in doc["levels"]] == [954.61, 850.0, 700.0]


# --- ingest ----------------------------------------------------------------------------------

def test_ingest_stores_every_site_and_step_and_is_idempotent(run_file, fields, tmp_path):
    j, i = 5, 7
    lat, lon = _grid_lat_lon(j, i)
    orog = float(fields["orog"].values[j, i])
    store = _store(tmp_path, [(lat, lon, orog), (46.6, -32.3, 250.0), (60.0, 10.0, 5.0)])
    first = ingest.ingest_file(store, run_file, now=REF)
    assert first["status"] == "ingested" and first["profiles"] == 2 * 3
    assert first["skipped"] == [{"site_id": 3, "reason": "outside the model grid"}]
    with store.read() as s:
        rows = s.scalars(sa.select(ProfileRecord).order_by(ProfileRecord.id)).all()
        stamp = [(r.id, r.received_at) for r in rows]
        assert {r.issued_time for r in rows} == {REF}
        assert sorted({r.valid_time for r in rows}) == [REF + timedelta(hours=h)
                                                       for h in (0, 3, 6)]
        doc = next(r.document for r in rows if r.site_id == 1 and r.valid_time == REF)
    again = ingest.ingest_file(store, run_file, now=REF + timedelta(hours=1))
    assert again["status"] == "already ingested"
    with store.read() as s:
        assert [(r.id, r.received_at) for r in
                s.scalars(sa.select(ProfileRecord).order_by(ProfileRecord.id))] == stamp
    # A site on a grid point at the model's ground height gets the model column itself, so
    # its diagnosis is the grid's (the same column through two paths).
    out = grid.diagnose_dataset(grid.open_grid(str(run_file))).compute()
    code = ptype.diagnose(doc, members=0).to_dict()["grib2_code"]
    assert code == int(out["precipitation_type"].values[0, j, i])
    t_model = fields["ta"].values[0, :, j, i] - 273.15
    p_model = fields["plev"].values
    by_p = {lv["pressure_hpa"]: lv["temperature_c"] for lv in doc["levels"][1:]}
    for p, t in zip(p_model, t_model):
        if p in by_p:
            assert by_p[p] == pytest.approx(t, abs=0.006)


def test_newer_run_supersedes_and_a_late_older_run_does_not(fields, run_file, tmp_path):
    store = _store(tmp_path, [(46.6, -32.3, 250.0)])
    newer = tmp_path / "run_12.grib2"
    warmer = fields.copy(deep=True)
    warmer["ta"] = warmer["ta"] + 2.0
    grib.write_fields_grib2(warmer, newer, GRID, REF + timedelta(hours=6))
    assert ingest.ingest_file(store, newer, now=REF)["status"] == "ingested"
    assert ingest.ingest_file(store, run_file, now=REF)["status"] == "ingested"
    with store.read() as s:
        latest = service.latest_issue(s, 1)
        assert {r.issued_time for r in latest} == {REF + timedelta(hours=6)}
        # The older run's valid time 12 UTC (its step 6 h) overlaps the newer run's step 0:
        # the newer profile stays.
        row = s.scalars(sa.select(ProfileRecord).where(
            ProfileRecord.valid_time == REF + timedelta(hours=6))).one()
        assert row.issued_time == REF + timedelta(hours=6)


def test_netcdf_run_gives_the_same_profiles_as_grib(fields, run_file, tmp_path):
    lat = GRID.lat_first - GRID.dlat * np.arange(GRID.ny)
    lon = GRID.lon_first + GRID.dlon * np.arange(GRID.nx)
    nc = fields.rename(y="latitude", x="longitude").assign_coords(
        latitude=("latitude", lat, {"standard_name": "latitude", "units": "degrees_north"}),
        longitude=("longitude", lon, {"standard_name": "longitude", "units": "degrees_east"}))
    nc.attrs["forecast_reference_time"] = REF.isoformat()
    path = tmp_path / "run_06.nc"
    nc.to_netcdf(path, engine="netcdf4")
    (tmp_path / "a").mkdir()
    (tmp_path / "b").mkdir()
    a = _store(tmp_path / "a", [(46.61, -32.33, 250.0)])
    b = _store(tmp_path / "b", [(46.61, -32.33, 250.0)])
    ingest.ingest_file(a, path, now=REF, evaluate=False)
    ingest.ingest_file(b, run_file, now=REF, evaluate=False)
    docs = []
    for store in (a, b):
        with store.read() as s:
            docs.append([(r.valid_time, r.issued_time, r.document["levels"]) for r in
                         s.scalars(sa.select(ProfileRecord).order_by(ProfileRecord.valid_time))])
    assert docs[0] == docs[1]


def test_unreadable_file_is_rejected_with_a_reason(tmp_path):
    store = _store(tmp_path, [(46.6, -32.3, 250.0)])
    bad = tmp_path / "broken.grib2"
    bad.write_bytes(b"GRIB" + b"\0" * 40)
    with pytest.raises(ReaderError, match="broken.grib2"):
        ingest.ingest_file(store, bad, now=REF)
    with store.read() as s:
        row = s.scalars(sa.select(IngestedFile)).one()
        assert row.status == "rejected" and "broken.grib2" in row.reason


def _ptype(args, data_dir, **env):
    e = {**os.environ, "PTYPE_DATA_DIR": str(data_dir), **env}
    e.pop("PTYPE_DATABASE_URL", None)
    return subprocess.Popen([sys.executable, "-m", "ptype", *args], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True, env=e, cwd=ROOT)


def test_grib2_to_cap_alerts_in_two_commands(run_file, tmp_path):
    sites = tmp_path / "sites.json"
    sites.write_text(json.dumps({"sites": [
        {"id": "korrim-pass", "name": "Korrim Pass", "latitude": 47.4, "longitude": -33.2,
         "elevation_m": 1380.0, "description": "invented"},
        {"id": "mistleby-bridge", "name": "Mistleby Bridge", "latitude": 46.6,
         "longitude": -32.3, "elevation_m": 250.0}]}))
    env = {"PTYPE_NOW": REF.isoformat()}
    r = _ptype(["ingest", str(run_file), "--sites", str(sites)], tmp_path, **env)
    out, err = r.communicate(timeout=300)
    assert r.returncode == 0, err
    assert "2 sites added" in out and "6 profiles for 2 sites" in out
    assert "Guidance only" in out
    r = _ptype(["alerts", "--format", "cap"], tmp_path, **env)
    out, err = r.communicate(timeout=300)
    assert r.returncode == 0, err
    assert "urn:oasis:names:tc:emergency:cap:1.2" in out


def test_sites_file_errors_name_the_field(tmp_path):
    from ptype.ingest.sites_file import load_sites
    store = _store(tmp_path, [])
    bad = tmp_path / "sites.json"
    bad.write_text(json.dumps({"sites": [{"id": "a", "name": "A", "latitude": 95.0,
                                          "longitude": 1.0}]}))
    with pytest.raises(ReaderError, match=r"sites\[0\]\.latitude = 95.0: expected a number"):
        load_sites(store, bad, REF)
    good = tmp_path / "good.json"
    good.write_text(json.dumps({"sites": [{"id": "a", "name": "A", "latitude": 45.0,
                                           "longitude": 1.0}]}))
    assert load_sites(store, good, REF) == {"added": 1, "updated": 0}
    assert load_sites(store, good, REF) == {"added": 0, "updated": 1}


def test_crash_mid_ingest_leaves_no_partial_run(run_file, tmp_path):
    store = _store(tmp_path, [(47.4, -33.2, 1380.0), (46.6, -32.3, 250.0)])
    proc = _ptype(["ingest", str(run_file), "--no-alerts", "--verbose"], tmp_path,
                  **{ingest.HOLD_ENV: "120"})
    # Wait until every profile is written inside the open transaction, then kill.
    lines = []
    for line in proc.stderr:
        lines.append(line)
        if "holding the transaction" in line:
            break
    assert proc.poll() is None, lines
    proc.send_signal(signal.SIGKILL)
    proc.wait(timeout=30)
    proc.stdout.close()
    proc.stderr.close()
    with store.read() as s:
        assert s.scalar(sa.select(sa.func.count()).select_from(ProfileRecord)) == 0
        row = s.scalars(sa.select(IngestedFile)).one()
        assert row.status == "claimed"
    assert store.integrity_check() == "ok"
    # Restarted: the dead process's claim is taken over and the run stored whole.
    again = ingest.ingest_file(store, run_file, now=REF, evaluate=False)
    assert again["status"] == "ingested" and again["profiles"] == 6
    with store.read() as s:
        assert s.scalar(sa.select(sa.func.count()).select_from(ProfileRecord)) == 6


def test_inbox_ingests_once_and_rejects_unreadable_files(run_file, tmp_path):
    store = _store(tmp_path, [(46.6, -32.3, 250.0)])
    inbox_dir = tmp_path / "inbox"
    inbox_dir.mkdir()
    (inbox_dir / "run_06.grib2").write_bytes(run_file.read_bytes())
    (inbox_dir / "notes.nc").write_text("not a model run")
    (inbox_dir / "arriving.grib2.part").write_bytes(b"GRIB")
    inbox = Inbox(store, inbox_dir, clock=lambda: REF, settle_s=0.0, evaluate=False)
    results = {r["file"]: r["status"] for r in inbox.poll_once()}
    assert results == {"run_06.grib2": "ingested", "notes.nc": "rejected"}
    assert (inbox_dir / "done" / "run_06.grib2").exists()
    reason = (inbox_dir / "rejected" / "notes.nc.reason.txt").read_text()
    assert "notes.nc" in reason and "not a readable" in reason
    assert (inbox_dir / "arriving.grib2.part").exists()
    # The same content again (another name): recognised, filed as done, nothing stored.
    (inbox_dir / "run_06_copy.grib2").write_bytes(run_file.read_bytes())
    assert [r["status"] for r in inbox.poll_once()] == ["already ingested"]
    with store.read() as s:
        assert s.scalar(sa.select(sa.func.count()).select_from(ProfileRecord)) == 3


def test_watch_once_command(run_file, tmp_path, capsys, monkeypatch):
    store = _store(tmp_path, [(46.6, -32.3, 250.0)])
    store.dispose()
    monkeypatch.setenv("PTYPE_DATA_DIR", str(tmp_path))
    monkeypatch.delenv("PTYPE_DATABASE_URL", raising=False)
    inbox_dir = tmp_path / "inbox"
    inbox_dir.mkdir()
    (inbox_dir / "run_06.grib2").write_bytes(run_file.read_bytes())
    assert main(["watch", str(inbox_dir), "--once", "--settle", "0", "--no-alerts"]) == 0
    out = capsys.readouterr().out
    assert "run_06.grib2: 3 profiles for 1 sites" in out and "Guidance only" in out
    assert main(["watch", str(tmp_path / "missing")]) == 2
    assert "not a directory" in capsys.readouterr().err


# --- POST /v1/ingest -------------------------------------------------------------------------

@pytest.fixture
def api(make_app, tmp_path):
    from ptype.api.plumbing import store_for

    from ptype.store import keys
    app = make_app(PTYPE_NOW=REF.isoformat(), PTYPE_ALERT_MEMBERS=5,
                   PTYPE_MAX_INGEST_BYTES=2_000_000)
    with store_for(app).write() as s:
        key, _ = keys.create_key(s, "model feed", REF, admin=True)
        plain, _ = keys.create_key(s, "depot", REF)
        s.add(Site(code="mistleby-bridge", name="Mistleby Bridge", latitude=46.6,
                   longitude=-32.3, elevation_m=250.0, thresholds={}, created_at=REF))
    client = app.test_client()
    client.plain_auth = {"Authorization": f"Bearer {plain}"}
    return client, {"Authorization": f"Bearer {key}"}


def test_api_ingest_needs_a_key_and_stores_once(api, run_file):
    client, auth = api
    body = run_file.read_bytes()
    headers = {"Content-Type": "application/x-grib2"}
    assert client.post("/v1/ingest", data=body, headers=headers).status_code == 401
    # A run feeds every owner's sites: an owner's ordinary key may not (api/tenants.py).
    r = client.post("/v1/ingest", data=body, headers={**headers, **client.plain_auth})
    assert r.status_code == 403 and "administrator" in r.json["error"]["message"]
    r = client.post("/v1/ingest?name=run_06.grib2", data=body, headers={**headers, **auth})
    assert r.status_code == 201, r.json
    assert r.json["status"] == "ingested" and r.json["profiles"] == 3
    assert r.json["runs"][0]["reference_time"] == REF.isoformat()
    r = client.post("/v1/ingest", data=body, headers={**headers, **auth})
    assert r.status_code == 200 and r.json["status"] == "already ingested"
    tl = client.get("/v1/sites/1/timeline?hours=6&members=0")
    assert tl.status_code == 200 and tl.json["steps"]
    assert tl.json["issued_time"].startswith("2031-01-14T06:00")


def test_api_ingest_refusals(api, tmp_path):
    client, auth = api
    r = client.post("/v1/ingest", data=b"x" * 2_000_001,
                    headers={"Content-Type": "application/x-grib2", **auth})
    assert r.status_code == 413 and "2000000" in r.json["error"]["message"]
    r = client.post("/v1/ingest", data=b"GRIB" + b"\0" * 60,
                    headers={"Content-Type": "application/x-grib2", **auth})
    assert r.status_code == 422 and "message 1" in r.json["error"]["message"]
    r = client.post("/v1/ingest", json={"a": 1}, headers=auth)
    assert r.status_code == 415
    # Above the service's 1 MB limit for other requests, below this one's: read, then
    # refused for what it is.
    r = client.post("/v1/ingest", data=b"GRIB" + b"\0" * 1_500_000,
                    headers={"Content-Type": "application/octet-stream", **auth})
    assert r.status_code == 422, r.json


def test_ensemble_run_gives_site_timelines_with_member_fractions(fields, tmp_path):
    members = []
    for k in range(3):
        m = fields.drop_vars("orog").copy(deep=True)
        m["ta"] = m["ta"] + (k - 1) * 2.0
        m["tas"] = m["tas"] + (k - 1) * 2.0
        members.append(m)
    ens = xr.concat(members, dim="realization", data_vars="all", coords="minimal",
                    compat="override")
    ens = ens.assign_coords(realization=("realization", np.arange(3),
                                         {"standard_name": "realization"}))
    ens["orog"] = fields["orog"]
    path = tmp_path / "ens_06.grib2"
    grib.write_fields_grib2(ens, path, GRID, REF)
    store = _store(tmp_path, [(47.1, -33.0, 300.0)])
    result = ingest.ingest_file(store, path, now=REF, evaluate=False)
    assert result["profiles"] == 3 * 3
    with store.read() as s:
        site = s.get(Site, 1)
        tl = service.site_timeline(s, site, REF, hours=6, step="1h", members=0,
                                   adjustments=[])
        singles = []
        for k in range(3):
            rows = s.scalars(sa.select(ProfileRecord).where(
                ProfileRecord.source == f"model member {k}").order_by(
                ProfileRecord.valid_time)).all()
            singles.append(build_timeline([ptype.Profile.from_document(r.document)
                                           for r in rows], now=REF, hours=6, step="1h",
                                          members=0, adjustments=[]))
    assert tl["ensemble"] == {"members": 3, "labels": ["0", "1", "2"]}
    assert tl["source"] == "model"
    spread = False
    for i, st in enumerate(tl["steps"]):
        types = [one["steps"][i]["ptype"] for one in singles]
        assert st["member_types"] == types
        for code in set(types):
            # Fraction of the members (Wilks 2011, sec. 8.1).
            assert st["probabilities"][code] == pytest.approx(types.count(code) / 3, abs=1e-3)
        assert types.count(st["ptype"]) == max(types.count(t) for t in types)
        spread |= len(set(types)) > 1
    assert spread  # the cold and warm members disagree at some step: a real test


def test_ingest_on_a_lambert_grid_takes_the_column_at_a_grid_point(fields, tmp_path):
    from test_grib import lambert_template
    path = tmp_path / "lambert.grib2"
    grib.write_fields_grib2(fields, path, lambert_template(16, 12), REF)
    ds = grib.open_grib_dataset(path)
    j, i = 6, 9
    lat, lon = float(ds["latitude"][j, i]), float(ds["longitude"][j, i])
    orog = float(fields["orog"].values[j, i])
    store = _store(tmp_path, [(lat, lon, orog), (lat + 0.05, lon + 0.07, None)])
    assert ingest.ingest_file(store, path, now=REF, evaluate=False)["profiles"] == 6
    with store.read() as s:
        doc = s.scalars(sa.select(ProfileRecord).where(ProfileRecord.site_id == 1,
                                                       ProfileRecord.valid_time == REF)).one()
        doc = doc.document
    by_p = {lv["pressure_hpa"]: lv["temperature_c"] for lv in doc["levels"][1:]}
    t_model = fields["ta"].values[0, :, j, i] - 273.15
    checked = 0
    for p, t in zip(fields["plev"].values, t_model):
        if p in by_p:
            assert by_p[p] == pytest.approx(t, abs=0.006)
            checked += 1
    assert checked >= 10


def test_ingest_command_bad_file_is_one_line(tmp_path, capsys, monkeypatch):
    _store(tmp_path, [(46.6, -32.3, 250.0)]).dispose()
    monkeypatch.setenv("PTYPE_DATA_DIR", str(tmp_path))
    monkeypatch.delenv("PTYPE_DATABASE_URL", raising=False)
    bad = tmp_path / "cut.grib2"
    bad.write_bytes(b"GRIB\0\0\0\x02" + b"\0" * 30)
    assert main(["ingest", str(bad)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "cut.grib2" in err and "Traceback" not in err
    assert main(["ingest", str(tmp_path / "missing.grib2")]) == 2
    assert "missing.grib2" in capsys.readouterr().err


def test_a_file_claimed_by_a_live_process_is_left_to_it(run_file, tmp_path):
    """Several watchers on one inbox: the claim (a unique row per content) decides; a claim
    of a live process is respected, one of a dead process is taken over."""
    import socket
    store = _store(tmp_path, [(46.6, -32.3, 250.0)])
    key = ingest.file_key(run_file)
    with store.write() as s:
        s.add(IngestedFile(file_key=key, name="run_06.grib2", size_bytes=1, status="claimed",
                           claimed_by=f"{socket.gethostname()}:{os.getppid()}",
                           claimed_at=REF))
    assert ingest.ingest_file(store, run_file, now=REF)["status"] == "busy"
    gone = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"],
                          capture_output=True, text=True, check=True)
    with store.write() as s:
        row = s.scalars(sa.select(IngestedFile)).one()
        row.claimed_by = f"{socket.gethostname()}:{gone.stdout.strip()}"
    assert ingest.ingest_file(store, run_file, now=REF, evaluate=False)["status"] == "ingested"
    # A claim from another host is taken over only after the lease.
    with store.write() as s:
        s.add(IngestedFile(file_key="0" * 64, name="other", size_bytes=1, status="claimed",
                           claimed_by="elsewhere:1", claimed_at=REF))
    assert ingest.claim_file(store, "0" * 64, "other", 1, REF + timedelta(minutes=5)) == "busy"
    assert ingest.claim_file(store, "0" * 64, "other", 1, REF + timedelta(hours=2)) == "claimed"


def test_timeline_grid_of_model_profiles_is_their_own_levels():
    """Profiles on common pressure levels whose surface moves (a model run at a site): the
    timeline works on the levels of one of them, not on a copy of every level per step;
    profiles that share all their levels get exactly those levels."""
    from series_helpers import storm_docs

    from ptype.roads import nowcast
    same = [ptype.Profile.from_document(d) for d in storm_docs()]
    grid_same = nowcast._common_grid(same)
    s0 = np.log(same[0].pressure_hpa / same[0].pressure_hpa[0])
    np.testing.assert_allclose(grid_same, s0, atol=1e-12)
    moving = []
    for k, d in enumerate(storm_docs() * 10):
        levels = [dict(lv) for lv in d["levels"][1:]]
        surface = {"pressure_hpa": 1003.0 + 0.37 * k, "temperature_c": -3.0, "dewpoint_c": -3.5}
        moving.append(ptype.Profile.from_document({"levels": [surface, *levels]}))
    grid = nowcast._common_grid(moving)
    assert grid.size == len(moving[0].pressure_hpa)  # not one level per profile and level
    assert grid[0] == 0.0 and np.all(np.diff(grid) < 0)
