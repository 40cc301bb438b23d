"""Product-wide constants: the caution every human-facing output carries.

Physical constants live in :mod:`ptype.thermo.constants`.
"""

from __future__ import annotations

#: The short caution every human-facing output carries (pages, reports, alerts, figures,
#: CLI tables, JSON answers): the diagnosis is guidance and defers to official warnings,
#: local codes and licensed practice.
CAUTION = ("Guidance only: an automated diagnosis that can be wrong. Official warnings, "
           "local codes and licensed practice take precedence.")
