"""The invented verification demo set is what its generator makes, and stays small."""

from __future__ import annotations

import importlib.util
from pathlib import Path

from ptype.verify.manifest import read_manifest

DEMO = Path(__file__).resolve().parents[1] / "soundings_demo" / "verification"


def _generator():
    spec = importlib.util.spec_from_file_location("make_cases", DEMO / "make_cases.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def test_make_cases_is_deterministic_and_matches_committed_set(tmp_path, capsys):
    assert _generator().main([str(tmp_path)]) == 0
    capsys.readouterr()
    assert (tmp_path / "cases.csv").read_text() == (DEMO / "cases.csv").read_text()
    made = sorted(p.name for p in (tmp_path / "profiles").glob("*.json"))
    kept = sorted(p.name for p in (DEMO / "profiles").glob("*.json"))
    assert made == kept and len(made) >= 200
    for name in made[::37]:
        assert (tmp_path / "profiles" / name).read_bytes() == \
            (DEMO / "profiles" / name).read_bytes()


def test_demo_set_is_small_and_readable():
    size = sum(p.stat().st_size for p in DEMO.rglob("*") if p.is_file())
    assert size < 2 * 1024 * 1024
    cases = read_manifest(DEMO / "cases.csv")
    assert len(cases) >= 200
    assert "invented" in (DEMO / "README.md").read_text().lower()
