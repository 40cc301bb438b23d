"""ptype: diagnose the type of precipitation reaching the ground from vertical profiles.

The public namespace is flat::

    import ptype
    profile = ptype.read_profile("soundings_demo/json/mistleby-bridge_20260127T1600.json")
    tw = ptype.wet_bulb_temperature(profile.pressure_hpa, profile.temperature_c, profile.dewpoint_c)
    diagnosis = ptype.diagnose(profile)

The package reads as the pipeline (see DEVELOPERS.md):

``readers`` / ``profile`` -> ``thermo`` -> ``engine`` (columns, layers, methods, consensus,
probability, explanation) -> ``roads`` (timelines, hazards, alerts), ``grid``, ``plot``,
``verify`` -> ``cli`` and the HTTP service.

Results are guidance: they defer to official warnings, local codes and licensed practice.
"""

from __future__ import annotations

from importlib.metadata import PackageNotFoundError
from importlib.metadata import version as _version

from ptype.constants import CAUTION
from ptype.errors import OptionError, ProfileError, ReaderError
from ptype.profile import Profile
from ptype.readers import read_profile, read_profiles
from ptype.thermo import wet_bulb_temperature

try:
    __version__ = _version("ptype")
except PackageNotFoundError:  # pragma: no cover - running from a source tree
    __version__ = "0.0.0"

#: Names served by the diagnosis engine, imported on first use so that ``import ptype``
#: stays light (the engine compiles its kernels on first import).
_ENGINE_NAMES = ("Diagnosis", "diagnose", "diagnose_many")

__all__ = [
    "CAUTION",
    "Diagnosis",
    "OptionError",
    "Profile",
    "ProfileError",
    "ReaderError",
    "__version__",
    "diagnose",
    "diagnose_many",
    "read_profile",
    "read_profiles",
    "wet_bulb_temperature",
]


def __getattr__(name: str):
    if name in _ENGINE_NAMES:
        from ptype.engine import diagnosis
        return getattr(diagnosis, name)
    raise AttributeError(f"module 'ptype' has no attribute {name!r}")


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(__all__))
