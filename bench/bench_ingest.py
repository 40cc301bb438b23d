"""Benchmark: a model run into 2,000 road sites, read -> extract -> store -> timelines -> alerts.

The run is an invented GRIB2 file on a 0.25 degree regular latitude/longitude grid over a
European-sized box (30-72 N, 25 W-45 E: 169 x 281 points), 49 hourly steps (0-48 h),
13 pressure levels with temperature, relative humidity and geopotential height, and surface
pressure, 2 m temperature and dew point and precipitation rate per step and the orography
once: 2,108 messages
encoded by ecCodes with 16-bit simple packing (about 200 MB).  The atmosphere is analytic
and invented: a warm nose aloft south of a front that moves north through the run, a moist
band along the front, mountains.  2,000 sites are spread at random over the box (seeded),
their elevations near the model orography.

Measured, as its own ``python -m ptype ingest --verbose`` process (wall time and peak
resident memory from ``os.wait4``; phase times from its log): read the GRIB2 file, extract
the 2,000 columns (bilinear, elevation adjustment, documents), store 98,000 profiles in one
SQLite transaction, and evaluate every site's alerts (which builds each site's timeline,
24 h at 30 min with 20 members).  Reference in this process: ``ptype.diagnose`` with 20
members on 100 stored profiles (profiles per second), for the ratio of the timeline phase.

Targets: <= 60 s and <= 4 GB on 2 cores.  The file and the sites are cached in
``$PTYPE_BENCH_DIR`` (default ``/tmp/ptype-bench``).  Writes ``bench/results/ingest.json``.

    .venv/bin/python bench/bench_ingest.py [--quick] [--sites N]
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import re
import subprocess
import sys
import time
from datetime import UTC, datetime
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
RESULTS = Path(__file__).with_name("results")
TARGETS = {"total_s": 60.0, "peak_rss_gb": 4.0}
LEVELS_HPA = (1000, 975, 950, 925, 900, 850, 800, 700, 600, 500, 400, 300, 250)
REFERENCE = datetime(2031, 1, 14, 0, tzinfo=UTC)

from _common import code_version  # sibling module of the scripts

sys.path.insert(0, str(ROOT))


def std_height_m(p_hpa):
    """ICAO standard-atmosphere height of a pressure (troposphere), m."""
    return 44330.8 * (1.0 - (np.asarray(p_hpa) / 1013.25) ** 0.190263)


def step_fields(lat2, lon2, orog, hour):
    """The invented atmosphere at one step: level fields (L, ny, nx) and surface fields.

    A front runs west-east and moves north through the run; south of it the air is mild,
    north of it cold at the ground; along a band north of the front a warm nose aloft
    (about 1.5 km) rides over the cold air and it precipitates (up to 2 mm/h)."""
    front = 40.0 + 0.35 * hour + 2.0 * np.sin(np.radians(lon2 * 4.0))
    south = 1.0 / (1.0 + np.exp(-(front - lat2) / 0.8))        # 1 south of the front
    band = np.exp(-((lat2 - front - 1.5) / 2.0) ** 2)           # the precipitating band
    t_sl = 274.0 - 0.45 * (lat2 - 45.0) + 1.5 * np.sin(2 * np.pi * (hour - 9) / 24.0) \
        + 5.0 * south
    t, r, z = [], [], []
    for p in LEVELS_HPA:
        zp = std_height_m(p) + 8.0 * (t_sl - 281.0)
        nose = 9.0 * band * (1.0 - 0.5 * south) * np.exp(-((zp - 1600.0) / 700.0) ** 2)
        t.append(t_sl - 0.0065 * zp + nose)
        r.append(np.clip(55.0 + 44.0 * band * (p >= 500) + 10 * south, 5.0, 100.0))
        z.append(zp)
    ps = 101325.0 * (1.0 - 0.0065 * orog / 288.15) ** 5.2559
    t2 = t_sl - 0.0065 * orog
    td2 = t2 - (0.5 + 4.0 * (1 - band))
    rate = 2.0 / 3600.0 * np.where(band > 0.3, band, 0.0)      # kg m-2 s-1
    return {"t": np.array(t), "r": np.array(r), "gh": np.array(z)}, \
        {"sp": ps, "t2": t2, "td2": td2, "rate": rate}


def make_run(path: Path, ny: int, nx: int, steps: int) -> Path:
    """Write (once) the invented GRIB2 run; see the module notes."""
    if path.exists():
        return path
    from ptype.grid import grib
    grid = grib.RegularGrid(72.0, -25.0, 0.25, 0.25, ny, nx)
    lat = grid.lat_first - grid.dlat * np.arange(ny)
    lon = grid.lon_first + grid.dlon * np.arange(nx)
    lon2, lat2 = np.meshgrid(lon, lat)
    orog = 1800.0 * np.exp(-((lat2 - 46.5) / 1.5) ** 2 - ((lon2 - 10.0) / 5.0) ** 2) \
        + 900.0 * np.exp(-((lat2 - 62.0) / 3.0) ** 2 - ((lon2 - 9.0) / 3.0) ** 2)
    codes = {"t": (0, 0, 0), "r": (0, 1, 1), "gh": (0, 3, 5)}

    def messages():
        yield grib.FieldMessage((0, 3, 5), orog, REFERENCE, 0, grib.SURFACE_GROUND)
        for h in range(steps):
            lv, sf = step_fields(lat2, lon2, orog, h)
            for key, code in codes.items():
                for k, p in enumerate(LEVELS_HPA):
                    yield grib.FieldMessage(code, lv[key][k], REFERENCE, h,
                                            grib.SURFACE_ISOBARIC, float(p))
            yield grib.FieldMessage((0, 3, 0), sf["sp"], REFERENCE, h, grib.SURFACE_GROUND)
            yield grib.FieldMessage((0, 0, 0), sf["t2"], REFERENCE, h,
                                    grib.SURFACE_ABOVE_GROUND, 2.0)
            yield grib.FieldMessage((0, 0, 6), sf["td2"], REFERENCE, h,
                                    grib.SURFACE_ABOVE_GROUND, 2.0)
            yield grib.FieldMessage((0, 1, 52), sf["rate"], REFERENCE, h, grib.SURFACE_GROUND)
    tmp = path.with_suffix(".tmp")
    grib.write_messages(tmp, messages(), grid, packing="grid_simple", bits=16)
    os.replace(tmp, path)
    return path


def make_store(data_dir: Path, n_sites: int, ny: int, nx: int) -> None:
    """A fresh store with ``n_sites`` invented sites inside the grid."""
    from ptype.store import Site, Store
    data_dir.mkdir(parents=True, exist_ok=True)
    for suffix in ("", "-wal", "-shm"):
        (data_dir / f"ptype.sqlite3{suffix}").unlink(missing_ok=True)
    store = Store(f"sqlite:///{data_dir / 'ptype.sqlite3'}")
    rng = np.random.default_rng(7)
    lat = rng.uniform(72.0 - 0.25 * (ny - 1) + 0.5, 71.5, n_sites)
    lon = rng.uniform(-24.5, -25.0 + 0.25 * (nx - 1) - 0.5, n_sites)
    elev = np.clip(1800.0 * np.exp(-((lat - 46.5) / 1.5) ** 2 - ((lon - 10.0) / 5.0) ** 2)
                   + rng.normal(0.0, 120.0, n_sites), 0.0, 3000.0)
    with store.write() as s:
        for k in range(n_sites):
            s.add(Site(code=f"bench-{k:04d}", name=f"Invented road site {k}",
                       latitude=float(lat[k]), longitude=float(lon[k]),
                       elevation_m=round(float(elev[k]), 1), thresholds={},
                       created_at=REFERENCE))
    store.dispose()


_LOG = re.compile(r"^(\d{4}-\d\d-\d\d \d\d:\d\d:\d\d,\d{3}) ptype\.ingest INFO (.*)$")


def _phases(log_text: str, started: float) -> tuple[dict, dict]:
    """Phase durations (wall, from the log's time stamps) and CPU seconds (the process and
    its finished workers, as it logs them)."""
    names = {"claimed": "start", "read": "read_s", "extracted": "extract_s", "stored": "store_s",
             "alerts": "timelines_and_alerts_s"}
    wall, cpu = {}, {}
    prev_t, prev_cpu = started, 0.0
    for line in log_text.splitlines():
        m = _LOG.match(line)
        if not m:
            continue
        t = datetime.strptime(m.group(1), "%Y-%m-%d %H:%M:%S,%f").timestamp()
        text = m.group(2).split(": ", 1)[-1]
        c = _CPU.search(text)
        c = float(c.group(1)) if c else prev_cpu
        key = next((v for k, v in names.items() if text.startswith(k)), None)
        if key and key != "start":
            wall[key] = round(t - prev_t, 2)
            cpu[key] = round(c - prev_cpu, 2)
        prev_t, prev_cpu = t, c
    return wall, cpu


_CPU = re.compile(r"\(cpu ([0-9.]+) s\)")


def run_ingest(path: Path, data_dir: Path) -> dict:
    """``python -m ptype ingest`` in a child process: wall time, peak RSS, phases, output."""
    env = {**os.environ, "PTYPE_DATA_DIR": str(data_dir), "PTYPE_NOW": REFERENCE.isoformat(),
           "PYTHONPATH": str(ROOT)}
    env.pop("PTYPE_DATABASE_URL", None)
    t0 = time.time()
    start = time.perf_counter()
    proc = subprocess.Popen([sys.executable, "-m", "ptype", "ingest", str(path), "--verbose",
                             "--format", "json"], env=env, stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True)
    out, err = proc.communicate()
    wall = time.perf_counter() - start
    if proc.returncode:
        raise SystemExit(f"ingest failed: {err}")
    import resource
    usage = resource.getrusage(resource.RUSAGE_CHILDREN)
    result = json.loads(out)["files"][0]
    wall_phases, cpu_phases = _phases(err, t0)
    return {"wall_s": round(wall, 2), "peak_rss_gb": round(usage.ru_maxrss * 1024 / 1e9, 3),
            "cpu_s": round(usage.ru_utime + usage.ru_stime, 1), "phases": wall_phases,
            "phases_cpu_s": cpu_phases,
            "profiles": result.get("profiles"), "sites": result.get("sites"),
            "alerts": result.get("alerts")}


def reference_rate(data_dir: Path, n: int = 100) -> float:
    """Stored profiles diagnosed per second by ``ptype.diagnose`` with 20 members."""
    import sqlalchemy as sa

    import ptype
    from ptype.store import ProfileRecord, Store
    store = Store(f"sqlite:///{data_dir / 'ptype.sqlite3'}")
    with store.read() as s:
        docs = [r.document for r in s.scalars(sa.select(ProfileRecord).limit(n))]
    store.dispose()
    ptype.diagnose(docs[0], members=20, seed=0)  # warm up
    t0 = time.perf_counter()
    for d in docs:
        ptype.diagnose(d, members=20, seed=0)
    return len(docs) / (time.perf_counter() - t0)


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="a small grid, 100 sites, 13 steps")
    ap.add_argument("--sites", type=int, default=None)
    args = ap.parse_args()
    bench_dir = Path(os.environ.get("PTYPE_BENCH_DIR", "/tmp/ptype-bench"))
    bench_dir.mkdir(parents=True, exist_ok=True)
    ny, nx, steps, sites = (41, 61, 13, 100) if args.quick else (169, 281, 49, 2000)
    sites = args.sites or sites
    t0 = time.perf_counter()
    path = make_run(bench_dir / f"run2_{ny}x{nx}x{steps}.grib2", ny, nx, steps)
    generation = time.perf_counter() - t0
    data_dir = bench_dir / f"ingest-store-{sites}"
    make_store(data_dir, sites, ny, nx)
    load0 = os.getloadavg()[0]
    measured = run_ingest(path, data_dir)
    rate = reference_rate(data_dir)
    timeline_s = measured["phases"].get("timelines_and_alerts_s")
    cpu = measured["phases_cpu_s"]
    serial = sum(cpu.get(k, 0.0) for k in ("read_s", "extract_s", "store_s"))
    parallel = cpu.get("timelines_and_alerts_s", 0.0)
    cores = os.cpu_count() or 1
    result = {
        "benchmark": "ingest", "code": code_version(),
        "machine": {"cores": os.cpu_count(), "python": platform.python_version(),
                    "load_average_1min_at_start": load0,
                    "load_average_1min_at_end": os.getloadavg()[0]},
        "input": {"grid": f"{ny} x {nx} (0.25 deg)", "steps": steps, "levels": len(LEVELS_HPA),
                  "file_mb": round(path.stat().st_size / 1e6, 1), "sites": sites,
                  "generation_s_first_time_only": round(generation, 1)},
        "measured": measured,
        "reference": {"diagnose_members20_profiles_per_s": round(rate, 1),
                      "timeline_phase_per_site_s": None if not timeline_s
                      else round(timeline_s / sites, 4),
                      "timeline_phase_site_in_diagnoses": None if not timeline_s
                      else round(timeline_s / sites * rate, 1)},
        "idle_machine_estimate_s": {
            "how": "serial phases' CPU + timeline CPU / cores (+ 2 s start-up)",
            "value": round(serial + parallel / cores + 2.0, 1)},
        "targets": TARGETS,
        "meets_targets": {"total_s": measured["wall_s"] <= TARGETS["total_s"],
                          "peak_rss_gb": measured["peak_rss_gb"] <= TARGETS["peak_rss_gb"]},
        "quick": bool(args.quick),
    }
    print(json.dumps(result, indent=2))
    if not args.quick:
        RESULTS.mkdir(exist_ok=True)
        (RESULTS / "ingest.json").write_text(json.dumps(result, indent=2) + "\n")
    return 0


if __name__ == "__main__":
    sys.exit(main())
