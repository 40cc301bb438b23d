"""Alerts for road authorities: rules over a timeline, a lifecycle, and standard encodings.

* :mod:`.rules` — which hazards of a timeline make an alert (per-site thresholds with defaults);
* :mod:`.lifecycle` — new -> updated -> cancelled / expired, as pure decisions;
* :mod:`.cap` — OASIS CAP 1.2 XML; :mod:`.atom` — an RFC 4287 Atom feed;
* :mod:`.service` — the thin layer that runs the above against the store on every ingest.
"""

from ptype.roads.alerts.rules import DEFAULT_THRESHOLDS, EVENTS, Candidate, evaluate_rules

__all__ = ["DEFAULT_THRESHOLDS", "EVENTS", "Candidate", "evaluate_rules"]
