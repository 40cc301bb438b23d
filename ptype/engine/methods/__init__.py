"""Published precipitation-type methods, one module each (see :mod:`ptype.engine.methods.base`)."""

from __future__ import annotations

import importlib
from types import ModuleType

#: Method names in the order results list them.
METHOD_NAMES = ("bourgouin", "ramer", "baldwin", "baldwin_revised", "czys", "cloud_top",
                "thickness", "jennings", "particles")

#: How a sentence names each method, so that a method's verdict reads as its own judgement
#: ("Cloud-top method: ...") and not as the overall explanation.
METHOD_LABELS = {
    "bourgouin": "Bourgouin method", "ramer": "Ramer method", "baldwin": "Baldwin tree",
    "baldwin_revised": "Revised Baldwin tree", "czys": "Czys method",
    "cloud_top": "Cloud-top method", "thickness": "Thickness rules",
    "jennings": "Jennings method", "particles": "Particle model",
}

_MODULE_OF: dict[str, str] = {}


def method_label(name: str) -> str:
    """The name of method ``name`` as a sentence gives it (``Cloud-top method``)."""
    return METHOD_LABELS.get(name, name.replace("_", " ").capitalize())


def get_method(name: str) -> ModuleType:
    """The module implementing method ``name``."""
    if name not in METHOD_NAMES:
        from ptype.errors import OptionError
        raise OptionError(f"unknown method {name!r}; expected one of {', '.join(METHOD_NAMES)}",
                          field="methods")
    module = importlib.import_module(f"{__name__}.{_MODULE_OF.get(name, name)}")
    return module
