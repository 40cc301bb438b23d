"""Alert lifecycle as pure decisions.

An alert is one hazard episode (one event at one site).  On every evaluation:

* no active alert for an event the rules now call for -> **new** (CAP ``msgType`` Alert);
* an active alert whose onset or expiry moved by at least :data:`CHANGE_TOLERANCE`, or whose
  severity or certainty changed -> **updated** (CAP Update, referencing every earlier message);
* an active alert whose event is no longer called for -> **cancelled** (CAP Cancel);
* an active alert whose ``expires`` has passed -> **expired** (no message: CAP expiry is
  carried by the ``expires`` element itself).

An alert that has already begun keeps its onset while the hazard goes on, so the start of a
timeline moving forward does not count as a change.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from datetime import datetime, timedelta
from typing import Any

from ptype.roads.alerts.rules import Candidate

#: Smallest change of onset or expiry that is worth an Update (ours).
CHANGE_TOLERANCE = timedelta(minutes=30)


@dataclass
class Action:
    """One lifecycle step for an alert: issue, update, cancel or expire it."""

    kind: str                      # "new" | "update" | "cancel" | "expire"
    event: str
    alert_id: str | None = None    # None for "new"
    candidate: Candidate | None = None


def decide(active: Sequence[Mapping[str, Any]], candidates: Sequence[Candidate],
           now: datetime) -> list[Action]:
    """Decide what to do.

    ``active``: mappings with id, event, onset, expires, severity, certainty.
    """
    actions: list[Action] = []
    by_event = {c.event: c for c in candidates}
    live = {}
    for a in active:
        if a["expires"] <= now:
            actions.append(Action("expire", a["event"], a["id"]))
        else:
            live[a["event"]] = a
    for event, a in live.items():
        cand = by_event.get(event)
        if cand is None:
            actions.append(Action("cancel", event, a["id"]))
            continue
        if a["onset"] <= now and cand.onset <= now + CHANGE_TOLERANCE:
            cand.onset = a["onset"]  # the hazard is under way: keep its original start
        changed = (abs(cand.onset - a["onset"]) >= CHANGE_TOLERANCE
                   or abs(cand.expires - a["expires"]) >= CHANGE_TOLERANCE
                   or cand.severity != a["severity"] or cand.certainty != a["certainty"])
        if changed:
            actions.append(Action("update", event, a["id"], cand))
    for event, cand in by_event.items():
        if event not in live:
            actions.append(Action("new", event, None, cand))
    return actions
