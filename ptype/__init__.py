"""ptype: diagnose the type of precipitation reaching the ground from vertical profiles.

The public namespace is flat::

    import ptype
    profile = ptype.read_profile("soundings_demo/json/mistleby-bridge_20260127T1600.json")
    tw = ptype.wet_bulb_temperature(profile.pressure_hpa, profile.temperature_c, profile.dewpoint_c)
    diagnosis = ptype.diagnose(profile)

Results are guidance: they defer to official warnings, local codes and licensed practice.
"""

from __future__ import annotations

from importlib.metadata import PackageNotFoundError
from importlib.metadata import version as _version

from .errors import OptionError, ProfileError, ReaderError
from .profile import Profile
from .readers import read_profile
from .thermo import wet_bulb_temperature

try:
    __version__ = _version("ptype")
except PackageNotFoundError:  # pragma: no cover - running from a source tree
    __version__ = "0.0.0"

#: The short caution every human-facing output carries.
CAUTION = ("Guidance only: an automated diagnosis that can be wrong. Official warnings, "
           "local codes and licensed practice take precedence.")

__all__ = [
    "CAUTION",
    "OptionError",
    "Profile",
    "ProfileError",
    "ReaderError",
    "__version__",
    "read_profile",
    "wet_bulb_temperature",
]


def __getattr__(name):
    # The diagnosis engine is imported lazily so that `import ptype` stays light.
    if name in ("diagnose", "diagnose_many", "Diagnosis"):
        from . import diagnosis
        return getattr(diagnosis, name)
    raise AttributeError(f"module 'ptype' has no attribute {name!r}")
