"""Benchmark: the cost of the particle model against the rest of the engine, in one process.

The workload is one profile with its default Monte-Carlo members (50): 51 columns.  Reference:
:func:`ptype.engine.run.diagnose_columns` on those 51 columns with every other method and the
consensus.  Measured: the particle method alone (a fresh :class:`Context`, so its cloud layers
are computed inside the timing) on the same 51 columns; and the whole ``ptype.diagnose`` with
50 members with and without the particle model voting (``diagnose_50_members``).  Both are
timed alternately, many times, and the ratio of the medians is reported (target: at most 3).
Two profiles: the 60-level freezing-rain profile of ``bench/bench_diagnose.py`` and a demo
sounding.

    .venv/bin/python bench/bench_particles.py
"""

from __future__ import annotations

import json
import os
import statistics
import time
from pathlib import Path

from _common import code_version  # sibling module of the scripts
from bench_diagnose import sixty_level_document

import ptype
from ptype.engine.columns import Columns
from ptype.engine.methods import METHOD_NAMES, particles
from ptype.engine.methods.base import Context
from ptype.engine.probability import DEFAULT_MEMBERS, perturb
from ptype.engine.run import diagnose_columns

TARGET_RATIO = 3.0
REPEATS = 60
ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "soundings_demo" / "json" / "drovan-junction_20260127T1300.json"


def batch_of(document: dict) -> Columns:
    cols = Columns.from_profiles([ptype.Profile.from_document(document)])
    return Columns.concat([cols, perturb(cols, DEFAULT_MEMBERS, seed=0)])


def measure(batch: Columns) -> dict:
    others = [m for m in METHOD_NAMES if m != particles.NAME]
    diagnose_columns(batch, others)
    particles.run(Context(batch))                                # compile / warm caches
    rest, mine = [], []
    for _ in range(REPEATS):                                     # alternate: same conditions
        t0 = time.perf_counter()
        diagnose_columns(batch, others)
        t1 = time.perf_counter()
        particles.run(Context(batch))
        t2 = time.perf_counter()
        rest.append(t1 - t0)
        mine.append(t2 - t1)
    ratios = sorted(b / a for a, b in zip(rest, mine))
    return {"columns": batch.n_columns, "levels": int(batch.pressure_hpa.shape[1]),
            "rest_of_engine_ms": round(statistics.median(rest) * 1e3, 3),
            "particles_ms": round(statistics.median(mine) * 1e3, 3),
            "ratio_of_medians": round(statistics.median(mine) / statistics.median(rest), 2),
            "ratio_quartiles": [round(ratios[len(ratios) // 4], 2),
                                round(ratios[3 * len(ratios) // 4], 2)]}


def measure_diagnosis(document: dict) -> dict:
    """The whole ``ptype.diagnose`` with 50 members, the particle model voting, against the same
    diagnosis without it: what adding the model costs a service request."""
    profile = ptype.Profile.from_document(document)
    others = [m for m in METHOD_NAMES if m != particles.NAME]
    for methods in (None, others):
        ptype.diagnose(profile, members=DEFAULT_MEMBERS, seed=0, methods=methods)
    with_model, without = [], []
    for _ in range(REPEATS):
        t0 = time.perf_counter()
        ptype.diagnose(profile, members=DEFAULT_MEMBERS, seed=0).to_dict()
        t1 = time.perf_counter()
        ptype.diagnose(profile, members=DEFAULT_MEMBERS, seed=0, methods=others).to_dict()
        t2 = time.perf_counter()
        with_model.append(t1 - t0)
        without.append(t2 - t1)
    a, b = statistics.median(with_model), statistics.median(without)
    return {"with_particles_ms": round(a * 1e3, 3), "without_particles_ms": round(b * 1e3, 3),
            "added_over_rest": round((a - b) / b, 2)}


def main() -> dict:
    cases = {"sixty_level_freezing_rain": measure(batch_of(sixty_level_document())),
             "demo_" + DEMO.stem: measure(batch_of(json.loads(DEMO.read_text())))}
    cases["sixty_level_freezing_rain"]["diagnose_50_members"] = measure_diagnosis(
        sixty_level_document())
    worst = max(c["ratio_of_medians"] for c in cases.values())
    result = {"members": DEFAULT_MEMBERS, "repeats": REPEATS, "cases": cases,
              "target_ratio": TARGET_RATIO, "worst_ratio": worst,
              "meets_target": worst <= TARGET_RATIO,
              "load_average_1m": round(os.getloadavg()[0], 2), **code_version()}
    out = Path(__file__).parent / "results"
    out.mkdir(exist_ok=True)
    (out / "particles.json").write_text(json.dumps(result, indent=2) + "\n")
    return result


if __name__ == "__main__":
    print(json.dumps(main(), indent=2))
