"""Benchmark of physical invariants over many generated winter soundings.

Draws soundings with ``tests/winter_soundings.py`` (invented, from structural parameters) and
counts, for the consensus:

* **warming violations**: warming every level (same relative humidity) moves the control
  consensus toward more ice (ice content SN = PL > RASN = RAPL = FZRAPL > the liquid types);
  measured for +1 K and +3 K;
* **melted-to-snow**: a column whose snow melts completely (aloft or in the surface layer,
  :mod:`ptype.engine.phase`) yet reported as SN or RASN;
* **under-supported reports**: the reported type given by fewer than 25 % of its members
  while some type the phase path allows reaches 25 % (where the members split over five or
  more types none may reach it: those columns are counted as ``split_columns``);
* **probability sums** different from 1.

Targets: all zero.  Writes ``bench/results/invariants.json``.

    .venv/bin/python bench/bench_invariants.py [--n 10000] [--members 50]
"""

from __future__ import annotations

import argparse
import json
import sys
import time
from collections import Counter
from pathlib import Path

import numpy as np
from _common import code_version  # sibling module of the scripts

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "tests"))

from winter_soundings import build_columns, draw_parameters

from ptype import thermo
from ptype.codes import Code
from ptype.engine.columns import Columns
from ptype.engine.probability import MIN_SUPPORT
from ptype.engine.run import diagnose_columns, run_columns

ICE = {Code.SN: 2, Code.PL: 2, Code.RASN: 1, Code.RAPL: 1, Code.FZRAPL: 1}
ICE_OF_CODE = np.array([ICE.get(Code(k), 0) for k in range(len(Code))])


def warmed(columns: Columns, kelvin: float) -> Columns:
    t = columns.temperature_c + kelvin
    td = thermo.dewpoint_from_relative_humidity_c(t, columns.relative_humidity_pct)
    return Columns.from_arrays(columns.pressure_hpa, t, td, columns.height_m,
                               surface_height_m=columns.height_m[:, 0])


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--n", type=int, default=10000)
    parser.add_argument("--members", type=int, default=50)
    parser.add_argument("--seed", type=int, default=2026)
    args = parser.parse_args(argv)
    t0 = time.perf_counter()
    prm = draw_parameters(np.random.default_rng(args.seed), args.n)
    cols = build_columns(prm)
    control = diagnose_columns(cols, return_context=True)
    codes = control["ptype"]
    result = {"soundings": args.n, "members": args.members, "seed": args.seed,
              "control_types": {Code(k).name: int((codes == k).sum())
                                for k in range(len(Code)) if (codes == k).any()}}
    for kelvin in (1.0, 3.0):
        after = diagnose_columns(warmed(cols, kelvin), consensus_only=True)["ptype"]
        worse = ICE_OF_CODE[after] > ICE_OF_CODE[codes]
        result[f"warming_{kelvin:g}K_violations"] = int(worse.sum())
        result[f"warming_{kelvin:g}K_examples"] = [
            f"{Code(b).name}->{Code(a).name}" for b, a in zip(codes[worse][:5], after[worse][:5])]
    values = control["_consensus"].values
    melted = values["melted_aloft"] | values["melted_at_surface"]
    run = run_columns(cols, args.members, args.seed)
    reported = run.codes
    rows = np.arange(args.n)
    p_reported = run.probabilities[rows, reported]
    p_best = np.where(run.fields["possible"], run.probabilities, 0.0).max(axis=1)
    split = p_best < MIN_SUPPORT - 1e-12
    result.update({
        "melted_columns": int(melted.sum()),
        "melted_to_snow": int(np.isin(codes[melted], [Code.SN, Code.RASN]).sum()
                              + np.isin(reported[melted], [Code.SN, Code.RASN]).sum()),
        "under_supported_reports": int(((p_reported < MIN_SUPPORT - 1e-12) & ~split).sum()),
        "split_columns": int(split.sum()),
        "split_reports_most_probable": int((p_reported[split] >= p_best[split] - 1e-12).sum()),
        "probability_sum_errors": int((np.abs(run.probabilities.sum(axis=1) - 1) > 1e-9).sum()),
        "reported_reasons": dict(Counter(
            ("control", "hazard_preference", "most_probable")[r]
            for r in run.fields["support_reason"].tolist())),
        "reported_types": {Code(k).name: int((reported == k).sum())
                           for k in range(len(Code)) if (reported == k).any()},
        "seconds": round(time.perf_counter() - t0, 1),
        "code": code_version(),
    })
    out = ROOT / "bench" / "results" / "invariants.json"
    out.write_text(json.dumps(result, indent=2) + "\n")
    print(json.dumps(result, indent=2))
    failed = [k for k in ("warming_1K_violations", "warming_3K_violations", "melted_to_snow",
                          "under_supported_reports", "probability_sum_errors") if result[k]]
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
