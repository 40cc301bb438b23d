"""Package list for setuptools (the project metadata is in pyproject.toml).

The HTTP service lives in the repository folder ``api/``, visibly separate from the library,
but installs under our own namespace as ``ptype.api``: a wheel holds the one top-level package
``ptype`` and never a module named ``api`` (``tests/test_packaging.py`` checks the wheel).
"""

from setuptools import find_packages, setup

#: The service's packages, found in ``api/`` and installed under ``ptype.api``.
SERVICE = ["ptype.api"] + [f"ptype.api.{name}" for name in find_packages("api")]

setup(
    # A development tree may hold a link ptype/api -> ../api; the mapping below is what counts.
    packages=find_packages(include=["ptype", "ptype.*"], exclude=["ptype.api", "ptype.api.*"])
    + SERVICE,
    package_dir={"ptype.api": "api"},
)
