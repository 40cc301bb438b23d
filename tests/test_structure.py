"""The shape of the code: layering, no import cycles, short functions, a small flat top level.

These read the source as text (``ast``), so they hold for every import, including the ones
inside functions.  The layers (lower may never import higher) are stated in DEVELOPERS.md.
"""

from __future__ import annotations

import ast
import re
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
PACKAGES = ("ptype", "api")  # api/ installs as ptype.api
MAX_FUNCTION_LINES = 100
MAX_FLAT_MODULES = 8

#: Packages the engine (and what it builds on) must never import: the engine is a pure
#: computation under the road side, grids, plots, the store and the service.
ENGINE_FORBIDDEN = ("ptype.roads", "ptype.grid", "ptype.plot", "ptype.store", "ptype.cli",
                    "ptype.verify", "ptype.api")
#: What each lower layer may not import (prefix match).
LAYER_RULES = {
    "ptype.thermo": ENGINE_FORBIDDEN + ("ptype.engine", "ptype.readers", "ptype.profile"),
    "ptype.profile": ENGINE_FORBIDDEN + ("ptype.engine",),
    "ptype.readers": ENGINE_FORBIDDEN + ("ptype.engine",),
    "ptype.engine": ENGINE_FORBIDDEN,
    "ptype.plot": ("ptype.roads", "ptype.grid", "ptype.store", "ptype.cli", "ptype.api"),
    "ptype.roads": ("ptype.grid", "ptype.plot", "ptype.cli", "ptype.api"),
    "ptype.grid": ("ptype.roads", "ptype.store", "ptype.cli", "ptype.api"),
    "ptype.verify": ("ptype.roads", "ptype.grid", "ptype.store", "ptype.cli", "ptype.api"),
    "ptype.store": ("ptype.engine", "ptype.grid", "ptype.plot", "ptype.cli", "ptype.api"),
    # Model runs into the store: above grid, roads and store, below the doors.
    "ptype.ingest": ("ptype.plot", "ptype.cli", "ptype.api"),
    "ptype": ("ptype.api", "ptype.cli"),
    # The doors are the top layer: `ptype serve` starts the service.
    "ptype.cli": (),
    "ptype.api": ("ptype.cli",),
    "ptype.__main__": (),
}


def _module_name(path: Path) -> str:
    parts = list(path.relative_to(ROOT).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts = parts[:-1]
    if parts[0] == "api":  # installed as ptype.api (setup.py maps the folder)
        parts = ["ptype"] + parts
    return ".".join(parts)


def _sources() -> dict[str, Path]:
    return {_module_name(p): p for pkg in PACKAGES for p in (ROOT / pkg).rglob("*.py")}


SOURCES = _sources()


def _imports(name: str, path: Path) -> set[str]:
    """Modules of ours that ``name`` imports anywhere in its file (as module names)."""
    tree = ast.parse(path.read_text(), filename=str(path))
    is_package = path.name == "__init__.py"
    out: set[str] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            targets = [a.name for a in node.names]
        elif isinstance(node, ast.ImportFrom):
            base = node.module or ""
            if node.level:
                here = name.split(".") if is_package else name.split(".")[:-1]
                here = here[:len(here) - (node.level - 1)]
                base = ".".join(here + ([base] if base else []))
            # `from pkg import sub` names the submodule when there is one.
            targets = [f"{base}.{a.name}" if f"{base}.{a.name}" in SOURCES else base
                       for a in node.names]
        else:
            continue
        out.update(t for t in targets if t in SOURCES)
    out.discard(name)
    return out


GRAPH = {name: _imports(name, path) for name, path in SOURCES.items()}


def test_no_import_cycle():
    """Depth-first search for a back edge; the cycle found is printed whole."""
    state: dict[str, int] = {}
    stack: list[str] = []

    def visit(node):
        state[node] = 1
        stack.append(node)
        for nxt in sorted(GRAPH[node]):
            if state.get(nxt) == 1:
                cycle = stack[stack.index(nxt):] + [nxt]
                pytest.fail("import cycle: " + " -> ".join(cycle))
            if nxt not in state:
                visit(nxt)
        stack.pop()
        state[node] = 2

    for name in sorted(GRAPH):
        if name not in state:
            visit(name)


@pytest.mark.parametrize("layer", sorted(LAYER_RULES))
def test_layering(layer):
    bad = []
    for name, targets in GRAPH.items():
        if name != layer and not name.startswith(layer + "."):
            continue
        # The most specific rule applies to a module (ptype.engine over ptype).
        rule = max((k for k in LAYER_RULES if name == k or name.startswith(k + ".")), key=len)
        if rule != layer:
            continue
        for target in targets:
            if any(target == f or target.startswith(f + ".") for f in LAYER_RULES[layer]):
                bad.append(f"{name} imports {target}")
    assert not bad, "layering broken:\n" + "\n".join(sorted(bad))


def test_no_function_over_100_lines():
    long = []
    for path in SOURCES.values():
        tree = ast.parse(path.read_text())
        for node in ast.walk(tree):
            if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)):
                length = node.end_lineno - node.lineno + 1
                if length > MAX_FUNCTION_LINES:
                    long.append(f"{path.relative_to(ROOT)}:{node.lineno} {node.name} "
                                f"({length} lines)")
    assert not long, "functions over 100 lines:\n" + "\n".join(long)


def test_flat_top_level_is_small():
    flat = sorted(p.name for p in (ROOT / "ptype").glob("*.py"))
    assert len(flat) <= MAX_FLAT_MODULES, flat


def test_public_names_listed_and_typed():
    import ptype
    for name in ("diagnose", "diagnose_many", "Diagnosis", "read_profile", "Profile",
                 "wet_bulb_temperature", "CAUTION"):
        assert name in ptype.__all__
        assert getattr(ptype, name) is not None
    assert (ROOT / "ptype" / "py.typed").is_file()


def test_developers_layout_table_matches_tree():
    """Every package and flat module of ptype/ is named in DEVELOPERS.md's layout table."""
    text = (ROOT / "DEVELOPERS.md").read_text()
    table = text[text.index("## Layout"):text.index("## Conventions")]
    wanted = [f"ptype/{p.name}/" for p in (ROOT / "ptype").iterdir()
              if p.is_dir() and not p.is_symlink() and (p / "__init__.py").is_file()]
    wanted += [f"ptype/{p.name}" for p in (ROOT / "ptype").glob("*.py")
               if p.name not in ("__init__.py", "__main__.py")]
    missing = [w for w in wanted if f"`{w}" not in table]
    assert not missing, f"DEVELOPERS.md layout table misses {missing}"
    named = set(re.findall(r"`(ptype/[\w./]*)`", table))
    stale = [w for w in named if not (ROOT / w).exists()]
    assert not stale, f"DEVELOPERS.md names paths that do not exist: {stale}"
