"""Benchmark: ``ptype grid`` at scale, read -> diagnose -> write, with peak memory.

Runs, each as its own ``python -m ptype grid`` process (wall time and peak resident
memory of that process from ``os.wait4``):

1. deterministic consensus on 1.9 million columns x 40 levels (1800 x 1060, one time),
   targets <= 30 s and <= 4 GB peak RSS;
2. 20-member probabilities on 200,000 columns x 40 levels (500 x 400), target <= 60 s;
3. run 1 again with the particle model's mass fractions written (``--fractions``), same
   targets (the particle model votes in every run; this adds only its four output fields);

and, in this process, as the reference for ratios:

4. the single-profile path, ``ptype.diagnose(document, members=0)``, on 200 columns of
   the same grid (columns per second), and the grid kernel on the same 200 columns;
5. a cProfile of the column kernel on 32,768 columns x 40 levels in one thread, the
   top functions written to ``bench/results/grid_profile.txt``.

The grids are the invented atmosphere of ``soundings_demo/grid/make_grid.py`` built at
a quarter of the resolution and repeated 4 x 4 with independent 0.15 K temperature noise
(so that no two columns are equal); they are cached in ``$PTYPE_BENCH_DIR`` (default
``/tmp/ptype-bench``).  Writes ``bench/results/grid.json``.

    .venv/bin/python bench/bench_grid.py [--quick]
"""

from __future__ import annotations

import argparse
import cProfile
import importlib.util
import io
import json
import os
import platform
import pstats
import subprocess
import sys
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
RESULTS = Path(__file__).with_name("results")
TARGETS = {"deterministic_1p9M_s": 30.0, "deterministic_peak_rss_gb": 4.0,
           "members20_200k_s": 60.0, "fractions_1p9M_s": 30.0}

from _common import code_version  # sibling module of the scripts


def _generator():
    spec = importlib.util.spec_from_file_location(
        "ptype_demo_make_grid", ROOT / "soundings_demo" / "grid" / "make_grid.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def make_bench_grid(path: Path, nx: int, ny: int, levels: int = 40, repeat: int = 4) -> Path:
    """Write (once) an ``nx`` x ``ny`` x ``levels`` grid, uncompressed."""
    if path.exists():
        return path
    gen = _generator()
    base = gen.make_grid(nx=nx // repeat, ny=ny // repeat, times=1, levels=levels,
                         spacing_km=3.0 * repeat)
    ds = base.isel(x=np.repeat(np.arange(nx // repeat), repeat),
                   y=np.repeat(np.arange(ny // repeat), repeat))
    ds = ds.assign_coords(x=("x", np.arange(ds.sizes["x"]) * 3.0, base.x.attrs),
                          y=("y", np.arange(ds.sizes["y"]) * 3.0, base.y.attrs))
    rng = np.random.default_rng(1)
    ds["ta"] = ds.ta + rng.normal(0.0, 0.15, ds.ta.shape).astype(np.float32)
    tmp = path.with_suffix(".tmp")
    gen.write_grid(ds, str(tmp), compress=False)
    os.replace(tmp, path)
    return path


def _cpu_ticks() -> list[int] | None:
    """Machine-wide CPU ticks (user, nice, system, idle, iowait, irq, softirq, steal) from
    /proc/stat, or None where there is no such file."""
    try:
        with open("/proc/stat") as fh:
            return [int(x) for x in fh.readline().split()[1:9]]
    except (OSError, ValueError):
        return None


def _machine_share(before, after) -> dict:
    """Share of the machine's CPU time that was idle, and stolen by the hypervisor (a
    virtual machine's cores lent to other guests), between two :func:`_cpu_ticks`."""
    if before is None or after is None:
        return {}
    d = [b - a for a, b in zip(before, after)]
    total = sum(d) or 1
    return {"machine_idle_share": round(d[3] / total, 3),
            "machine_steal_share": round(d[7] / total, 3)}


def run_command(args: list[str]) -> dict:
    """Run ``python -m ptype grid ARGS``; wall seconds, the child's CPU time and peak RSS
    (GB), and how much of the machine was idle or stolen meanwhile."""
    ticks = _cpu_ticks()
    t0 = time.perf_counter()
    proc = subprocess.Popen([sys.executable, "-m", "ptype", "grid", *args],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, cwd=ROOT)
    _, status, usage = os.wait4(proc.pid, 0)
    wall = time.perf_counter() - t0
    out = proc.stdout.read().decode()
    err = proc.stderr.read().decode()
    proc.returncode = os.waitstatus_to_exitcode(status)
    if proc.returncode != 0:
        raise RuntimeError(f"ptype grid failed ({proc.returncode}): {err.strip()}")
    return {"wall_s": wall, "peak_rss_gb": usage.ru_maxrss * 1024 / 1e9,
            "cpu_s": usage.ru_utime + usage.ru_stime, "user_s": usage.ru_utime,
            "system_s": usage.ru_stime, **_machine_share(ticks, _cpu_ticks()),
            "output": out.strip().splitlines()}


def reference_single_profile(path: Path, n: int = 200) -> dict:
    """Columns per second of ptype.diagnose (single-profile path) vs the grid kernel."""
    import xarray as xr

    import ptype
    from ptype import grid
    with xr.open_dataset(path) as ds:
        sub = ds.isel(y=slice(0, 10), x=slice(0, n // 10)).load()
    docs = []
    for j in range(sub.sizes["y"]):
        for i in range(sub.sizes["x"]):
            c = sub.isel(time=0, y=j, x=i)
            ps = float(c.ps) / 100.0
            levels = [{"pressure_hpa": ps, "height_m": float(c.orog),
                       "temperature_c": float(c.tas) - 273.15,
                       "dewpoint_c": min(float(c.tds), float(c.tas)) - 273.15}]
            levels += [{"pressure_hpa": float(c.plev[k]), "height_m": float(c.zg[k]),
                        "temperature_c": float(c.ta[k]) - 273.15,
                        "relative_humidity_pct": float(c.hur[k])}
                       for k in range(c.sizes["plev"]) if float(c.plev[k]) < ps]
            docs.append({"levels": levels})
    ptype.diagnose(docs[0], members=0)
    t0 = time.perf_counter()
    for d in docs:
        ptype.diagnose(d, members=0).to_dict()
    single = len(docs) / (time.perf_counter() - t0)
    grid.diagnose_dataset(sub).compute()
    t0 = time.perf_counter()
    grid.diagnose_dataset(sub).compute()
    kernel = len(docs) / (time.perf_counter() - t0)
    return {"columns": len(docs), "single_profile_columns_per_s": single,
            "grid_kernel_columns_per_s_same_200": kernel}


def profile_kernel(path: Path, columns: int = 32768) -> dict:
    """Where the time of one kernel call on ``columns`` columns of the grid goes."""
    import xarray as xr

    from ptype import grid
    side = int(np.sqrt(columns))
    with xr.open_dataset(path) as ds:
        sub = ds.isel(y=slice(0, columns // side), x=slice(0, side)).load()
    n = sub.sizes["y"] * sub.sizes["x"]
    grid.diagnose_dataset(sub)  # imports, compiled kernels for these shapes, page faults
    prof = cProfile.Profile()
    t0 = time.perf_counter()
    prof.enable()
    grid.diagnose_dataset(sub)
    prof.disable()
    total = time.perf_counter() - t0
    text = io.StringIO()
    stats = pstats.Stats(prof, stream=text)
    stats.sort_stats("tottime").print_stats(25)
    (RESULTS / "grid_profile.txt").write_text(
        f"cProfile of ptype.grid.diagnose_dataset on {n} columns x {sub.sizes['plev']} levels "
        f"(numpy-backed, one thread; compiled wet-bulb uses both cores)\n\n" + text.getvalue())
    top = []
    for (file, line, func), (cc, nc, tt, ct, _) in sorted(
            stats.stats.items(), key=lambda kv: -kv[1][2])[:15]:
        rel = os.path.relpath(file, ROOT) if file.startswith(str(ROOT)) else file
        top.append({"function": f"{rel}:{line}({func})", "calls": nc,
                    "self_s": round(tt, 3), "cumulative_s": round(ct, 3),
                    "self_share": round(tt / total, 3)})
    by_cum = {}
    for (file, line, func), (cc, nc, tt, ct, _) in stats.stats.items():
        if str(ROOT / "ptype") in file:
            key = f"{os.path.relpath(file, ROOT)}:{func}"
            by_cum[key] = max(by_cum.get(key, 0.0), ct)
    stages = {k: round(v, 3) for k, v in sorted(by_cum.items(), key=lambda kv: -kv[1])[:25]}
    return {"columns": n, "levels": sub.sizes["plev"], "total_s": total,
            "columns_per_s_one_thread": n / total, "top_self_time": top,
            "cumulative_s": stages}


def main(argv: list[str] | None = None) -> dict:
    """Run the benchmark, write bench/results/grid.json (grid_quick.json) and return it."""
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true",
                    help="small grids (1/16 of the sizes) for a smoke run")
    ap.add_argument("--chunk-columns", type=int, default=None,
                    help="columns per chunk (default: the command's default)")
    args = ap.parse_args(argv)
    cache = Path(os.environ.get("PTYPE_BENCH_DIR", "/tmp/ptype-bench"))
    cache.mkdir(parents=True, exist_ok=True)
    scale = 4 if args.quick else 1
    # Sizes divisible by the 4 x 4 repetition.
    big_nx, big_ny = 1800 // scale // 4 * 4, 1060 // scale // 4 * 4
    mid_nx, mid_ny = 500 // scale // 4 * 4, 400 // scale // 4 * 4
    load0 = os.getloadavg()[0]
    t0 = time.perf_counter()
    big = make_bench_grid(cache / f"grid_{big_nx}x{big_ny}x40.nc", big_nx, big_ny)
    mid = make_bench_grid(cache / f"grid_{mid_nx}x{mid_ny}x40.nc", mid_nx, mid_ny)
    gen_s = time.perf_counter() - t0
    chunk_args = []
    if args.chunk_columns:
        side = int(np.sqrt(args.chunk_columns))
        chunk_args = ["--chunks", f"y={side},x={args.chunk_columns // side}"]
    det = run_command([str(big), "-o", str(cache / "out_det.nc"), "--no-progress", *chunk_args])
    mem = run_command([str(mid), "-o", str(cache / "out_mem.nc"), "--members", "20",
                       "--seed", "1", "--no-progress", *chunk_args])
    frac = run_command([str(big), "-o", str(cache / "out_frac.nc"), "--fractions", "--no-progress",
                        *chunk_args])
    ref = reference_single_profile(mid)
    prof = profile_kernel(mid)
    n_big, n_mid = big_nx * big_ny, mid_nx * mid_ny
    out = {
        "benchmark": "grid",
        "code": code_version(),
        "machine": {"cores": os.cpu_count(), "python": platform.python_version(),
                    "load_average_1min_at_start": load0,
                    "load_average_1min_at_end": os.getloadavg()[0]},
        "grid_generation_s": gen_s,
        "deterministic": {"columns": n_big, "levels": 40, **det,
                          "columns_per_s": n_big / det["wall_s"]},
        "members20": {"columns": n_mid, "levels": 40, "members": 20, **mem,
                      "member_columns_per_s": 20 * n_mid / mem["wall_s"]},
        "fractions": {"columns": n_big, "levels": 40, **frac,
                      "columns_per_s": n_big / frac["wall_s"]},
        "reference": ref,
        "grid_vs_single_profile_ratio": (n_big / det["wall_s"])
        / ref["single_profile_columns_per_s"],
        "profile": prof,
        "targets": TARGETS,
        "meets_targets": {
            "deterministic_1p9M_s": det["wall_s"] <= TARGETS["deterministic_1p9M_s"],
            "deterministic_peak_rss_gb": det["peak_rss_gb"] <= TARGETS["deterministic_peak_rss_gb"],
            "members20_200k_s": mem["wall_s"] <= TARGETS["members20_200k_s"],
            "fractions_1p9M_s": frac["wall_s"] <= TARGETS["fractions_1p9M_s"],
        },
        "quick": args.quick,
    }
    name = "grid_quick.json" if args.quick else "grid.json"
    (RESULTS / name).write_text(json.dumps(out, indent=2) + "\n")
    print(f"deterministic {n_big:,} columns x 40 levels: {det['wall_s']:.1f} s wall, "
          f"{det['cpu_s']:.1f} s CPU, peak RSS {det['peak_rss_gb']:.2f} GB, "
          f"machine steal {det.get('machine_steal_share', float('nan')):.0%}")
    print(f"20 members on {n_mid:,} columns: {mem['wall_s']:.1f} s wall, {mem['cpu_s']:.1f} s CPU, "
          f"peak RSS {mem['peak_rss_gb']:.2f} GB, "
          f"machine steal {mem.get('machine_steal_share', float('nan')):.0%}")
    print(f"with --fractions: {frac['wall_s']:.1f} s wall, {frac['cpu_s']:.1f} s CPU, "
          f"peak RSS {frac['peak_rss_gb']:.2f} GB")
    print(f"single-profile path {ref['single_profile_columns_per_s']:.0f} columns/s; grid "
          f"{n_big / det['wall_s']:,.0f} columns/s -> {out['grid_vs_single_profile_ratio']:.0f} x")
    print(f"kernel profile: {prof['columns_per_s_one_thread']:,.0f} columns/s in one thread; "
          f"see bench/results/grid_profile.txt")
    print(f"targets met: {out['meets_targets']}; wrote {RESULTS / name}")
    return out


if __name__ == "__main__":
    main()
