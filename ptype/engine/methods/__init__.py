"""Published precipitation-type methods, one module each (see :mod:`ptype.engine.methods.base`)."""

from __future__ import annotations

import importlib
from types import ModuleType

#: Method names in the order results list them.
METHOD_NAMES = ("bourgouin", "ramer", "baldwin", "baldwin_revised", "czys", "cloud_top",
                "thickness", "jennings", "particles")

_MODULE_OF: dict[str, str] = {}


def get_method(name: str) -> ModuleType:
    """The module implementing method ``name``."""
    if name not in METHOD_NAMES:
        from ptype.errors import OptionError
        raise OptionError(f"unknown method {name!r}; expected one of {', '.join(METHOD_NAMES)}",
                          field="methods")
    module = importlib.import_module(f"{__name__}.{_MODULE_OF.get(name, name)}")
    return module
