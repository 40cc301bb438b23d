"""Package list for setuptools (the project metadata is in pyproject.toml).

The HTTP service lives in the repository folder ``api/``, visibly separate from the library,
but installs under our own namespace as ``ptype.api``: a wheel holds the one top-level package
``ptype`` and never a module named ``api``.
"""

from setuptools import find_packages, setup

setup(
    packages=find_packages(include=["ptype", "ptype.*"]) + ["ptype.api"],
    package_dir={"ptype.api": "api"},
)
