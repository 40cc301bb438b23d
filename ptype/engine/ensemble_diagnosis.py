"""One sounding from an ensemble: every member diagnosed, probabilities from the members.

The probability of a type is the fraction of the ensemble members whose type it is (the
ensemble relative frequency; Wilks 2011, sec. 8.1); with Monte-Carlo members as well
(``members`` > 0) each ensemble member is widened by its own perturbations and the
probability is the mean over the ensemble members of their perturbed-member fractions
(docs/formats.md, "Ensembles").  The reported type is the most probable one, ties to the
most hazardous (:data:`ptype.codes.HAZARD_ORDER`); the reasoning shown is that of the first
member giving that type.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from typing import Any

from ptype.codes import GRIB2_4201, HAZARD_RANK, Code
from ptype.engine.probability import confidence_word


def ensemble_probabilities(types: Sequence[Code],
                           member_probabilities: Sequence[dict[str, float]] | None = None
                           ) -> dict[str, float]:
    """Probability of each type (by abbreviation) over the ensemble members: the fraction of
    ``types``, or the mean of each member's own ``member_probabilities``."""
    n = len(types)
    out: dict[str, float] = {}
    if member_probabilities:
        for probs in member_probabilities:
            for code, p in probs.items():
                out[code] = out.get(code, 0.0) + float(p) / n
    else:
        for code in types:
            out[code.name] = out.get(code.name, 0.0) + 1.0 / n
    return {k: v for k, v in out.items() if v > 0.0}


def most_likely(probabilities: dict[str, float]) -> Code:
    """The type of the highest probability, ties to the most hazardous."""
    return min((Code[k] for k in probabilities),
               key=lambda c: (-round(probabilities[c.name], 9), HAZARD_RANK[c]))


def diagnose_ensemble(documents: Iterable[dict], *, members: int = 0, seed: int | None = None,
                      methods: Any = None, wetbulb: str = "isobaric") -> dict[str, Any]:
    """Diagnose every member profile document; the diagnosis dict of the member that carries
    the most likely type, with the ensemble's type, probabilities and an ``ensemble`` entry
    (member count and each member's type)."""
    from ptype.engine.diagnosis import diagnose_many
    from ptype.profile import Profile
    profiles = [Profile.from_document(d) for d in documents]
    results = diagnose_many(profiles, members=members, seed=seed, methods=methods,
                            wetbulb=wetbulb)
    types = [r.code for r in results]
    probs = ensemble_probabilities(
        types, [r.probabilities for r in results] if members else None)
    code = most_likely(probs)
    k = types.index(code) if code in types else 0
    out = results[k].to_dict()
    p = probs.get(code.name, 0.0)
    out.update(ptype=code.name, ptype_label=code.label, grib2_code=GRIB2_4201[code],
               probability=round(p, 4),
               probabilities={c: round(v, 4) for c, v in
                              sorted(probs.items(), key=lambda kv: -kv[1])},
               confidence=confidence_word(p), members=members)
    out["ensemble"] = {"members": len(results), "member_types": [c.name for c in types],
                       "perturbations_per_member": members, "explained_member": k}
    note = (f"ensemble of {len(results)} members: {code.name} in "
            f"{sum(1 for c in types if c == code)} of them; the reasoning shown is that of "
            f"member {k}")
    out["warnings"] = [*out.get("warnings", []), note]
    return out
