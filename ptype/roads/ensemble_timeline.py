"""Site timelines from an ensemble run: one timeline per member, combined step by step.

Each ensemble member's profiles give a timeline of their own (with ``members`` Monte-Carlo
perturbations each when asked: the widening of docs/formats.md, "Ensembles").  At every
step the combined timeline reports:

* ``probabilities``: the mean over the ensemble members of their step probabilities, i.e.
  the fraction of the members giving each type when they are not widened (the ensemble
  relative frequency; Wilks 2011, sec. 8.1);
* ``ptype``: the most probable type (ties to the most hazardous,
  :data:`ptype.codes.HAZARD_ORDER`), and ``member_types``, each member's type;
* ``hazards``: probabilities and amounts (snow cm, ice mm) averaged over the members (the
  ensemble mean: the expected value); a yes/no hazard (freezing on the road, frost, snow,
  ice pellets) when at least half of the members have it.

The other step values (surface, layer areas) are those of the first member giving the
reported type.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from datetime import timedelta
from typing import Any

from ptype.codes import GRIB2_4201, LABELS, Code
from ptype.roads.nowcast import parse_step, timeline_totals, transitions

#: Member sources are named ``<source> member <label>`` by the model-run ingest.
MEMBER_MARK = " member "


def _mean(values: Sequence[float | None], nd: int = 3) -> float | None:
    known = [v for v in values if v is not None]
    return None if len(known) != len(values) else round(sum(known) / len(known), nd)


def _hazards(records: Sequence[Mapping[str, Any]]) -> dict[str, Any]:
    out: dict[str, Any] = {}
    for key, value in records[0].items():
        vals = [r[key] for r in records]
        if isinstance(value, bool):
            out[key] = 2 * sum(bool(v) for v in vals) >= len(vals)
        else:
            out[key] = _mean(vals)
    return out


def _most_likely(probs: Mapping[str, float]) -> Code:
    from ptype.codes import HAZARD_RANK
    return min((Code[k] for k in probs), key=lambda c: (-round(probs[c.name], 9),
                                                         HAZARD_RANK[c]))


def combine_steps(member_steps: Sequence[Mapping[str, Any]]) -> dict[str, Any]:
    """One step of the combined timeline from the members' records of that step."""
    n = len(member_steps)
    probs: dict[str, float] = {}
    for st in member_steps:
        for code, p in st["probabilities"].items():
            probs[code] = probs.get(code, 0.0) + float(p) / n
    probs = {k: round(v, 3) for k, v in probs.items() if v > 0}
    code = _most_likely(probs) if probs else Code(Code[member_steps[0]["ptype"]])
    first = next((st for st in member_steps if st["ptype"] == code.name), member_steps[0])
    out = dict(first)
    out.update(ptype=code.name, ptype_label=LABELS[code], grib2_code=GRIB2_4201[code],
               probabilities=dict(sorted(probs.items(), key=lambda kv: -kv[1])),
               hazards=_hazards([st["hazards"] for st in member_steps]),
               member_types=[st["ptype"] for st in member_steps])
    return out


def combine_timelines(timelines: Sequence[Mapping[str, Any]], labels: Sequence[str],
                      step: str | timedelta) -> dict[str, Any]:
    """The ensemble timeline of the members' timelines (same clock), see the module notes."""
    base = dict(timelines[0])
    n_steps = min(len(t["steps"]) for t in timelines)
    steps = [combine_steps([t["steps"][i] for t in timelines]) for i in range(n_steps)]
    base.update(steps=steps, transitions=transitions(steps),
                totals=timeline_totals(steps, parse_step(step)),
                ensemble={"members": len(timelines), "labels": list(labels)})
    return base
