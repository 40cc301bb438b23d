"""Run every benchmark script in ``bench/`` (``make bench``), one process each.

Every ``bench/*.py`` except this file and names starting with ``_`` is a benchmark;
each writes its own ``bench/results/<name>.json``.  A summary of wall times and exit
statuses is printed at the end; the exit status is non-zero if any script failed.

    .venv/bin/python bench/run_all.py [NAME ...]     # e.g. bench_wetbulb bench_grid
"""

from __future__ import annotations

import os
import subprocess
import sys
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent


def scripts(names: list[str] | None = None) -> list[Path]:
    """The benchmark scripts of this folder (all, or those named)."""
    found = sorted(p for p in HERE.glob("*.py")
                   if p.name != Path(__file__).name and not p.name.startswith("_"))
    if names:
        wanted = {n.removesuffix(".py") for n in names}
        unknown = wanted - {p.stem for p in found}
        if unknown:
            raise SystemExit(f"run_all: unknown benchmark(s) {', '.join(sorted(unknown))}; "
                             f"available: {', '.join(p.stem for p in found)}")
        found = [p for p in found if p.stem in wanted]
    return found


def main(argv: list[str] | None = None) -> int:
    """Run every benchmark (or those named) and print a summary; exit status."""
    argv = sys.argv[1:] if argv is None else argv
    summary = []
    for path in scripts(argv):
        print(f"== {path.name} (load average {os.getloadavg()[0]:.1f})", flush=True)
        t0 = time.perf_counter()
        rc = subprocess.call([sys.executable, str(path)], cwd=HERE.parent)
        summary.append((path.name, rc, time.perf_counter() - t0))
    print("\n== summary")
    for name, rc, wall in summary:
        print(f"  {name:<28} {'ok' if rc == 0 else f'FAILED ({rc})':<12} {wall:8.1f} s")
    return 0 if all(rc == 0 for _, rc, _ in summary) else 1


if __name__ == "__main__":
    raise SystemExit(main())
