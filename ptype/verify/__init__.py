"""Verification of diagnoses against observed present weather.

* :mod:`ptype.verify.observations` - present-weather reports (METAR/SYNOP style) -> codes
* :mod:`ptype.verify.scores` - contingency tables and skill scores (pure numpy)
* :mod:`ptype.verify.manifest` - reading a manifest of paired cases
* :mod:`ptype.verify.report` - running the verification and writing JSON/table/HTML reports

::

    from ptype.verify import read_manifest, run_verification
    report = run_verification(read_manifest("soundings_demo/verification/cases.csv"))

See docs/verification.md.
"""

from __future__ import annotations

from ptype.verify.manifest import Case, read_manifest
from ptype.verify.observations import Observation, parse_observation
from ptype.verify.report import ORDER, run_verification

__all__ = ["ORDER", "Case", "Observation", "parse_observation", "read_manifest",
           "run_verification"]
