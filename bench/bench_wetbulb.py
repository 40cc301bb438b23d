"""Benchmark: wet-bulb temperature throughput, compiled path vs numpy path vs MetPy.

All three are measured in this one process on the same population of points
(temperature -40..+35 degC, pressure 300..1050 hPa, relative humidity 10..100 %):

* ``ptype.thermo.fast.wet_bulb_c`` (numba, both cores) on 20 million points, best of 3;
* ``ptype.wetbulb._isobaric_wet_bulb_c`` (the numpy solver) on 2 million points;
* MetPy's ``wet_bulb_temperature`` on 300 points (it integrates a moist adiabat per point).

Targets: >= 20 million level-points per second for the compiled isobaric wet-bulb, i.e.
>= 40,000 x MetPy's rate.  Writes ``bench/results/wetbulb.json``.

    .venv/bin/python bench/bench_wetbulb.py [--points 20000000]
"""

from __future__ import annotations

import argparse
import functools
import json
import os
import platform
import time
import warnings
from collections.abc import Callable
from pathlib import Path

import numpy as np

from ptype import thermo
from ptype.thermo import fast as fastthermo
from ptype.thermo import wetbulb

TARGET_POINTS_PER_S = 20e6
TARGET_RATIO_METPY = 40_000

from _common import best_of, code_version  # sibling module of the scripts


def population(n: int, seed: int = 0) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """``n`` random (p hPa, T degC, Td degC) over the range soundings cover."""
    rng = np.random.default_rng(seed)
    p = rng.uniform(300.0, 1050.0, n)
    t = rng.uniform(-40.0, 35.0, n)
    rh = rng.uniform(10.0, 100.0, n)
    return p, t, thermo.dewpoint_from_relative_humidity_c(t, rh)


def cpu_seconds(fn: Callable[[], object]) -> float:
    """Process CPU time (all threads) of one run: a load-independent cost measure."""
    c0 = time.process_time()
    fn()
    return time.process_time() - c0


def main(argv: list[str] | None = None) -> dict:
    """Run the benchmark, write bench/results/wetbulb.json and return it."""
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--points", type=int, default=20_000_000)
    ap.add_argument("--metpy-points", type=int, default=300)
    args = ap.parse_args(argv)

    p, t, td = population(args.points)
    # Compile (or load from the on-disk cache) outside the timing.
    for kind in ("isobaric", "adiabatic"):
        fastthermo.wet_bulb_c(p[:8], t[:8], td[:8], kind=kind, parallel=True)
        fastthermo.wet_bulb_c(p[:8], t[:8], td[:8], kind=kind, parallel=False)
    results = {}
    for kind in ("isobaric", "adiabatic"):
        n = args.points if kind == "isobaric" else args.points // 4
        par = best_of(functools.partial(fastthermo.wet_bulb_c, p[:n], t[:n], td[:n], kind=kind,
                                        parallel=True), 5)
        ser_cpu = cpu_seconds(functools.partial(fastthermo.wet_bulb_c, p[:n], t[:n], td[:n],
                                                kind=kind, parallel=False))
        results[kind] = {"points": n, "compiled_parallel_points_per_s": n / par,
                         "compiled_serial_points_per_cpu_s": n / ser_cpu,
                         "compiled_idle_machine_estimate_points_per_s":
                             n / ser_cpu * (os.cpu_count() or 1)}

    n_np = min(2_000_000, args.points)
    t_np = best_of(lambda: wetbulb._isobaric_wet_bulb_c(p[:n_np], t[:n_np], td[:n_np]), 2)
    results["isobaric"]["numpy_points_per_s"] = n_np / t_np
    results["isobaric"]["numpy_points_per_cpu_s"] = n_np / cpu_seconds(
        lambda: wetbulb._isobaric_wet_bulb_c(p[:n_np], t[:n_np], td[:n_np]))
    n_np_a = min(500_000, args.points)
    t_np_a = best_of(lambda: wetbulb._adiabatic_wet_bulb_c(p[:n_np_a], t[:n_np_a],
                                                          td[:n_np_a]), 2)
    results["adiabatic"]["numpy_points_per_s"] = n_np_a / t_np_a

    import metpy.calc as mpcalc
    from metpy.units import units
    m = args.metpy_points
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        t_mp = best_of(lambda: mpcalc.wet_bulb_temperature(p[:m] * units.hPa, t[:m] * units.degC,
                                                           td[:m] * units.degC), 1)
        c_mp = cpu_seconds(lambda: mpcalc.wet_bulb_temperature(
            p[:m] * units.hPa, t[:m] * units.degC, td[:m] * units.degC))
    metpy_rate = m / t_mp
    # Agreement on the benchmark population (same equations, two solvers).
    k = 200_000
    agree = float(np.max(np.abs(fastthermo.wet_bulb_c(p[:k], t[:k], td[:k])
                                - wetbulb._isobaric_wet_bulb_c(p[:k], t[:k], td[:k]))))
    rate = results["isobaric"]["compiled_parallel_points_per_s"]
    out = {
        "benchmark": "wetbulb",
        "code": code_version(),
        "machine": {"cores": os.cpu_count(), "python": platform.python_version(),
                    "load_average_1min_at_start": os.getloadavg()[0]},
        "population": "T -40..35 degC, p 300..1050 hPa, RH 10..100 % (uniform)",
        "metpy_points": m,
        "metpy_points_per_s": metpy_rate,
        "metpy_points_per_cpu_s": m / c_mp,
        "isobaric": results["isobaric"],
        "adiabatic": results["adiabatic"],
        "compiled_vs_metpy_ratio": rate / metpy_rate,
        "compiled_vs_metpy_ratio_cpu_time": results["isobaric"]["compiled_serial_points_per_cpu_s"]
        / (m / c_mp),
        "compiled_vs_numpy_ratio": rate / results["isobaric"]["numpy_points_per_s"],
        "max_abs_difference_compiled_vs_numpy_k": agree,
        "targets": {"points_per_s": TARGET_POINTS_PER_S, "ratio_vs_metpy": TARGET_RATIO_METPY},
        "meets_targets": bool(rate >= TARGET_POINTS_PER_S
                              and rate / metpy_rate >= TARGET_RATIO_METPY),
    }
    path = Path(__file__).with_name("results") / "wetbulb.json"
    path.parent.mkdir(exist_ok=True)
    path.write_text(json.dumps(out, indent=2) + "\n")
    print(f"isobaric wet-bulb: compiled {rate / 1e6:.1f} M points/s "
          f"(serial {results['isobaric']['compiled_serial_points_per_cpu_s'] / 1e6:.1f} M per "
          f"CPU-second), "
          f"numpy {results['isobaric']['numpy_points_per_s'] / 1e6:.2f} M/s, "
          f"MetPy {metpy_rate:.0f} points/s -> {rate / metpy_rate:,.0f} x MetPy")
    print(f"adiabatic wet-bulb: compiled "
          f"{results['adiabatic']['compiled_parallel_points_per_s'] / 1e6:.1f} M points/s, "
          f"numpy {results['adiabatic']['numpy_points_per_s'] / 1e6:.2f} M/s")
    print(f"max |compiled - numpy| = {agree:.1e} K; targets met: {out['meets_targets']}; "
          f"wrote {path}")
    return out


if __name__ == "__main__":
    main()
