"""Verification of diagnoses against observed present weather.

* :mod:`ptype.verify.observations` - present-weather reports (METAR/SYNOP style) -> codes
* :mod:`ptype.verify.scores` - contingency tables and skill scores (pure numpy)
* :mod:`ptype.verify.manifest` - reading a manifest of paired cases
* :mod:`ptype.verify.report` - running the verification and writing JSON/table/HTML reports
"""

from __future__ import annotations

from .observations import Observation, parse_observation

__all__ = ["Observation", "parse_observation"]
