"""Benchmark: a site timeline in one vectorised pass vs the same steps one at a time.

Both are measured in this one process on the same 24-hour series (the demo storm of one
site when ``soundings_demo/series`` exists, else a synthetic series), 15-minute steps:

* ``ptype.roads.nowcast.build_timeline`` — every step's column interpolated, adjusted, diagnosed
  and given Monte-Carlo probabilities in one batch;
* the reference — the same interpolated columns, each diagnosed and given probabilities
  separately (``diagnose_columns`` and ``member_probabilities`` on one column at a time).

Reports the wall times (best of 3) and their ratio; also the latency of an observation
ingest with its alert evaluation through the Flask app (SQLite, temporary directory).
Writes ``bench/results/timeline.json``.

    .venv/bin/python bench/bench_timeline.py [--members 20]
"""

from __future__ import annotations

import argparse
import json
import platform
import tempfile
import time
from datetime import UTC, datetime, timedelta
from pathlib import Path

import numpy as np
from _common import best_of  # sibling module of the scripts

from ptype import Profile
from ptype.engine.run import diagnose_columns, member_probabilities
from ptype.readers import read_profile
from ptype.roads.nowcast import build_timeline

ROOT = Path(__file__).resolve().parents[1]
T0 = datetime(2026, 1, 27, tzinfo=UTC)


def series() -> list[Profile]:
    """One demo site's series, or a synthetic 24-hour series without the demo tree."""
    manifest = ROOT / "soundings_demo" / "series" / "manifest.json"
    if manifest.is_file():
        m = json.loads(manifest.read_text())
        name = min(m["sites"])
        return [read_profile(manifest.parent / f) for f in m["sites"][name]["files"]]
    p = np.array([1000, 950, 900, 850, 800, 700, 600, 500.0])
    out = []
    for h in range(25):
        t = -3 - 6.5 * 7.29 * np.log(1000 / p) + (h / 3) * np.exp(-((p - 860) / 45) ** 2)
        out.append(Profile.from_document({
            "valid_time": (T0 + timedelta(hours=h)).isoformat(),
            "levels": [{"pressure_hpa": float(a), "temperature_c": float(b),
                        "dewpoint_c": float(b - 0.5)} for a, b in zip(p, t)],
            "surface": {"precipitation_rate_mm_h": 1.5, "road_surface_temperature_c": -1.0}}))
    return out


def main(argv: list[str] | None = None) -> dict:
    """Run the benchmark, write bench/results/timeline.json and return it."""
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--members", type=int, default=20)
    args = ap.parse_args(argv)
    profiles = series()
    now = min(p.valid_time for p in profiles)
    kw = {"now": now, "hours": 24, "step": "15min", "members": args.members, "seed": 0}
    build_timeline(profiles, **kw)  # warm caches and compiled kernels outside the timing
    vectorised = best_of(lambda: build_timeline(profiles, **kw))

    # Reference: capture the adjusted columns, then diagnose them one by one.
    import ptype.roads.nowcast as nc
    captured = {}
    original = nc.Columns.from_arrays

    def capture(*a, **k):
        captured["columns"] = original(*a, **k)
        return captured["columns"]
    nc.Columns.from_arrays = capture
    try:
        build_timeline(profiles, **kw)
    finally:
        nc.Columns.from_arrays = original
    cols = captured["columns"]
    n = cols.n_columns

    def one_by_one():
        for i in range(n):
            c = cols.take(slice(i, i + 1))
            diagnose_columns(c)
            member_probabilities(c, args.members, 0)
    loop = best_of(one_by_one)

    # Ingest latency through the app (observation post + alert evaluation).
    from ptype.api import create_app
    from ptype.api.sites import store_for

    from ptype.store import keys
    with tempfile.TemporaryDirectory() as d:
        app = create_app({"PTYPE_DATA_DIR": d, "PTYPE_NOW": now.isoformat()})
        c = app.test_client()
        with store_for(app).write() as s:
            key, _ = keys.create_key(s, "bench", now)
        h = {"Authorization": f"Bearer {key}"}
        sid = c.post("/v1/sites", json={"name": "Bench", "latitude": 0, "longitude": 0},
                     headers=h).json["id"]
        docs = [p.to_document() for p in profiles]
        c.post(f"/v1/sites/{sid}/profiles", json={"profiles": docs}, headers=h)
        times = []
        for k in range(5):
            t0 = time.perf_counter()
            r = c.post(f"/v1/sites/{sid}/observations",
                       json={"time": (now - timedelta(minutes=k)).isoformat(),
                             "air_temperature_c": -2.0}, headers=h)
            times.append(time.perf_counter() - t0)
            assert r.status_code == 201
        store_for(app).dispose()

    result = {"steps": n, "members": args.members, "levels": int(cols.pressure_hpa.shape[1]),
              "vectorised_s": round(vectorised, 4), "one_by_one_s": round(loop, 4),
              "speedup": round(loop / vectorised, 2),
              "ingest_with_alerts_median_s": round(float(np.median(times)), 3),
              "python": platform.python_version(), "machine": platform.machine()}
    out = ROOT / "bench" / "results" / "timeline.json"
    out.parent.mkdir(parents=True, exist_ok=True)
    out.write_text(json.dumps(result, indent=2) + "\n")
    print(json.dumps(result, indent=2))
    return result


if __name__ == "__main__":
    main()
