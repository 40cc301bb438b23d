"""The project metadata read statically (fast, offline): an SPDX licence expression that
matches the LICENSE file, PEP 639 fields that setuptools reads without deprecation warnings,
and no legacy licence classifiers.  tests/test_packaging.py builds and installs for real.

Sources: PEP 639 (licence expression and ``license-files``); the SPDX License List
(identifier ``Apache-2.0``); setuptools 77 release notes (first release reading PEP 639,
from memory); the Apache License 2.0 text itself (its title lines).
"""

from __future__ import annotations

import re
import tomllib
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
PYPROJECT = tomllib.loads((ROOT / "pyproject.toml").read_text())


def test_licence_is_an_spdx_expression_matching_the_licence_file():
    project = PYPROJECT["project"]
    assert project["license"] == "Apache-2.0"
    assert project["license-files"] == ["LICENSE"]
    head = (ROOT / "LICENSE").read_text().split("\n", 4)
    assert "Apache License" in head[1] and "Version 2.0, January 2004" in head[2]


def test_no_deprecated_licence_fields_or_classifiers():
    project = PYPROJECT["project"]
    assert not any(c.startswith("License ::") for c in project.get("classifiers", []))
    assert not isinstance(project["license"], dict)  # the table form is deprecated (PEP 639)
    setup_py = (ROOT / "setup.py").read_text()
    assert not re.search(r"\blicen[cs]e\w*\s*=", setup_py)


def test_build_backend_reads_pep_639():
    requires = PYPROJECT["build-system"]["requires"]
    (setuptools,) = [r for r in requires if r.startswith("setuptools")]
    minimum = re.search(r">=\s*(\d+)", setuptools)
    assert minimum and int(minimum.group(1)) >= 77, setuptools
