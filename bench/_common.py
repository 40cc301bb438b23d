"""Helpers shared by the benchmark scripts (run as `python bench/<name>.py`)."""

from __future__ import annotations

import subprocess
import time
from collections.abc import Callable
from pathlib import Path


def code_version() -> dict:
    """Commit measured, and whether ptype/ had uncommitted changes (shared working tree)."""
    root = Path(__file__).resolve().parents[1]
    try:
        head = subprocess.run(["git", "rev-parse", "--short", "HEAD"], cwd=root,
                              capture_output=True, text=True, timeout=10,
                              check=False).stdout.strip()
        dirty = subprocess.run(["git", "status", "--porcelain", "--", "ptype"], cwd=root,
                               capture_output=True, text=True, timeout=10,
                               check=False).stdout.split("\n")
    except (OSError, subprocess.SubprocessError):
        return {"commit": None, "uncommitted_ptype_files": None}
    return {"commit": head or None,
            "uncommitted_ptype_files": sorted(line[3:] for line in dirty
                                              if line.strip() and not line.startswith("??"))}


def best_of(fn: Callable[[], object], repeat: int = 3) -> float:
    """Best wall time of ``repeat`` runs (the machine may be shared: best is least disturbed)."""
    best = float("inf")
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best
