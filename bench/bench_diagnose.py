"""Benchmark: one full diagnosis (default members) of a 60-level profile.

Reports the median (and the fastest) time per ``ptype.diagnose(doc, seed=0).to_dict()``
and, as the in-process reference, the time of MetPy's ``wet_bulb_temperature`` on the same
60 levels (a single MetPy call that any pure-Python approach would need at least once per
member).  Target: <= 5 ms per diagnosis with default members, which leaves the HTTP service
(~1.5 ms of framework per request) room for 300 req/s on 2 cores (docs/api.md).
:data:`BEFORE_MS` is the median of this script before the engine's overhead was cut
(recorded on a quiet machine); the load average is written next to the numbers, since
other work on the machine inflates them.

    .venv/bin/python bench/bench_diagnose.py
"""

from __future__ import annotations

import json
import os
import statistics
import time
import warnings
from collections.abc import Callable
from pathlib import Path

import numpy as np
from _common import code_version  # sibling module of the scripts

import ptype
from ptype.engine.probability import DEFAULT_MEMBERS

TARGET_MS = 5.0
#: The upper limit of one 50-member diagnosis since the phase path and the particle model
#: joined the engine (they may cost up to 3x the rest); TARGET_MS is the throughput aim of the
#: engine before them, kept to show the gap.
LIMIT_MS = 20.0
#: Median of this benchmark before the engine's call overhead was cut (same profile, quiet
#: machine): 8.35 ms with members, 4.82 ms without.
BEFORE_MS = {"diagnose_ms": 8.35, "diagnose_no_members_ms": 4.82}


def sixty_level_document() -> dict:
    """A 60-level freezing-rain profile document (invented)."""
    p = np.linspace(1000.0, 250.0, 60)
    z = np.linspace(0.0, 10500.0, 60)
    # A freezing-rain shape: warm nose peaking at +4 degC near 820 hPa over a cold surface layer.
    t = np.interp(p, [250, 500, 700, 760, 820, 880, 950, 1000],
                  [-50, -22, -6, 0.5, 4.0, 0.5, -4.0, -2.0])
    td = t - np.where(p > 450, 0.6, 8.0)
    return {"levels": [{"pressure_hpa": float(a), "height_m": float(b), "temperature_c": float(c),
                        "dewpoint_c": float(d)} for a, b, c, d in zip(p, z, t, td)]}


def timeit(fn: Callable[[], object], repeat: int, *, fastest: bool = False) -> float:
    """Median (or with ``fastest`` the best) wall time of ``repeat`` runs, s."""
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return min(times) if fastest else statistics.median(times)


def main() -> dict:
    """Run the benchmark, write bench/results/diagnose.json and return it."""
    doc = sixty_level_document()
    ptype.diagnose(doc, seed=0).to_dict()  # warm up imports and caches
    t_diag = timeit(lambda: ptype.diagnose(doc, seed=0).to_dict(), 200)
    t_fast = timeit(lambda: ptype.diagnose(doc, seed=0).to_dict(), 200, fastest=True)
    t_nomc = timeit(lambda: ptype.diagnose(doc, members=0).to_dict(), 200)
    import metpy.calc as mpcalc
    from metpy.units import units
    prof = ptype.Profile.from_document(doc)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        t_metpy = timeit(lambda: mpcalc.wet_bulb_temperature(prof.pressure_hpa * units.hPa,
                                                             prof.temperature_c * units.degC,
                                                             prof.dewpoint_c * units.degC), 9)
    result = {"levels": 60, "members": DEFAULT_MEMBERS,
              "diagnose_ms": round(t_diag * 1e3, 2), "diagnose_fastest_ms": round(t_fast * 1e3, 2),
              "diagnose_no_members_ms": round(t_nomc * 1e3, 2),
              "before": BEFORE_MS,
              "metpy_wet_bulb_60_levels_ms": round(t_metpy * 1e3, 2),
              "ratio_metpy_wetbulb_over_full_diagnosis": round(t_metpy / t_diag, 1),
              "target_ms": TARGET_MS, "meets_target": t_diag * 1e3 <= TARGET_MS,
              "limit_ms": LIMIT_MS, "meets_limit": t_diag * 1e3 <= LIMIT_MS,
              "load_average_1m": round(os.getloadavg()[0], 2), **code_version()}
    out = Path(__file__).parent / "results"
    out.mkdir(exist_ok=True)
    (out / "diagnose.json").write_text(json.dumps(result, indent=2) + "\n")
    print(json.dumps(result, indent=2))
    return result


if __name__ == "__main__":
    main()
