"""The shape of the service package ``api/``: independent blueprints over shared plumbing,
one home for the wire models, every public function documented and annotated.

Read from the source with ``ast`` (like tests/test_structure.py) or from the imported
modules.  The conventions are ours (DEVELOPERS.md), after the habits of Flask's tutorial
application: views parse, call pure functions and serialise; blueprints stand alone.
"""

from __future__ import annotations

import ast
import importlib
import inspect
from pathlib import Path

import pytest
from ptype.api import BLUEPRINT_MODULES
from pydantic import BaseModel

API = Path(__file__).resolve().parents[1] / "api"
MODULES = sorted("ptype.api." + p.stem if p.stem != "__init__" else "ptype.api"
                 for p in API.glob("*.py"))


def _imported_api_modules(path: Path) -> set[str]:
    """Modules of the ``api`` package that the file imports anywhere (as module names)."""
    out = set()
    for node in ast.walk(ast.parse(path.read_text())):
        if isinstance(node, ast.ImportFrom) and node.module and node.module.startswith("ptype.api"):
            out.add(node.module)
            out.update(f"{node.module}.{a.name}" for a in node.names)
        elif isinstance(node, ast.Import):
            out.update(a.name for a in node.names if a.name.startswith("ptype.api"))
    return out


@pytest.mark.parametrize("name", BLUEPRINT_MODULES)
def test_blueprint_imports_no_other_blueprint(name):
    # Ours: what two views share lives in ptype.api.plumbing or ptype.api.site_ops, never in
    # a blueprint.
    path = API / f"{name.split('.')[-1]}.py"
    others = (_imported_api_modules(path) & set(BLUEPRINT_MODULES)) - {name}
    assert not others, f"{name} imports {sorted(others)}"


@pytest.mark.parametrize("name", MODULES)
def test_pydantic_models_live_in_models(name):
    # Ours: one description of the wire format, api/models.py.
    module = importlib.import_module(name)
    defined_here = [obj.__name__ for obj in vars(module).values()
                    if inspect.isclass(obj) and issubclass(obj, BaseModel)
                    and obj.__module__ == name]
    assert name == "ptype.api.models" or not defined_here, defined_here


def test_models_share_one_base_pair():
    from ptype.api import models
    from ptype.api.models import RequestModel, ResponseModel
    for obj in vars(models).values():
        if (inspect.isclass(obj) and issubclass(obj, BaseModel)
                and obj.__module__ == "ptype.api.models"):
            assert issubclass(obj, (RequestModel, ResponseModel)), obj.__name__
    # An unknown field of a request is refused (pydantic: extra="forbid").
    assert RequestModel.model_config["extra"] == "forbid"


def _public_functions(tree: ast.Module):
    """Top-level functions and methods of top-level classes whose names are public."""
    for node in tree.body:
        if isinstance(node, ast.FunctionDef) and not node.name.startswith("_"):
            yield node
        elif isinstance(node, ast.ClassDef) and not node.name.startswith("_"):
            yield from (item for item in node.body if isinstance(item, ast.FunctionDef)
                        and (not item.name.startswith("_") or item.name == "__call__"))


@pytest.mark.parametrize("name", MODULES)
def test_public_functions_documented_and_annotated(name):
    path = API / ("__init__.py" if name == "ptype.api" else f"{name.split('.')[-1]}.py")
    missing = []
    for fn in _public_functions(ast.parse(path.read_text())):
        args = fn.args.posonlyargs + fn.args.args + fn.args.kwonlyargs
        unannotated = [a.arg for a in args if a.annotation is None and a.arg not in ("self", "cls")]
        if ast.get_docstring(fn) is None:
            missing.append(f"{fn.name}: no docstring")
        if unannotated or fn.returns is None:
            missing.append(f"{fn.name}: annotations missing ({unannotated or 'return'})")
    assert not missing, missing
