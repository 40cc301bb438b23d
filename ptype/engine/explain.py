"""Plain-language narrative of a diagnosis.

Every sentence is built from numbers already in the diagnosis (layers, method
values, consensus votes, probabilities), so a reader can trace each claim to
the structured trace in ``Diagnosis.to_dict()``.
"""

from __future__ import annotations

import numpy as np

from ptype.codes import HAZARD_RANK, Code
from ptype.engine.consensus import _tally
from ptype.engine.methods import bourgouin, cloud_top


def _melting_verdict(area: float) -> str:
    # Bourgouin (2000) surface-layer thresholds, used here as a scale of melting.
    if area > bourgouin.SURFACE_RAIN_J_KG:
        return f"enough to melt snow completely (more than {bourgouin.SURFACE_RAIN_J_KG} J/kg)"
    if area >= bourgouin.SURFACE_SNOW_J_KG:
        return (f"enough to melt snow partly ({bourgouin.SURFACE_SNOW_J_KG}-"
                f"{bourgouin.SURFACE_RAIN_J_KG} J/kg)")
    if area >= bourgouin.MIN_ALOFT_J_KG:
        return f"too little to melt much snow (under {bourgouin.SURFACE_SNOW_J_KG} J/kg)"
    return f"negligible (under {bourgouin.MIN_ALOFT_J_KG} J/kg)"


def narrative(diagnosis) -> list[str]:
    """Short sentences explaining ``diagnosis`` (a :class:`ptype.engine.diagnosis.Diagnosis`)."""
    out: list[str] = []
    surface = diagnosis.profile.surface
    if surface is not None and surface.precipitation_rate_mm_h == 0:
        out.append("The surface readings report no precipitation (0 mm/h): what follows is the type "
                   "precipitation would take if it fell now.")
    results = diagnosis.results
    ctx = diagnosis.context
    cols = diagnosis.columns
    i = diagnosis.row

    if "cloud_top" in results:
        v = {k: a[i] for k, a in results["cloud_top"].values.items()}
        if not v["has_cloud"]:
            out.append("No layer of the profile is saturated, so where the precipitation forms is not "
                       "visible in it.")
        elif v["ice"] and v["seeded"]:
            out.append(f"The low cloud is too warm to make ice (coldest {v['lowest_cloud_min_c']:.1f} °C) but "
                       f"ice falls into it from a higher cloud topping at {v['top_cloud_top_hpa']:.0f} hPa "
                       f"({v['top_cloud_min_c']:.1f} °C).")
        elif v["ice"]:
            out.append(f"The cloud tops at {v['top_cloud_top_hpa']:.0f} hPa and reaches "
                       f"{v['top_cloud_min_c']:.1f} °C, cold enough to make ice "
                       f"(at or below {cloud_top.ICE_NUCLEATION_C:.0f} °C).")
        else:
            out.append(f"The cloud tops at {v['lowest_cloud_top_hpa']:.0f} hPa and is no colder than "
                       f"{v['lowest_cloud_min_c']:.1f} °C, too warm to make ice "
                       f"(ice needs about {cloud_top.ICE_NUCLEATION_C:.0f} °C): drops grow as drizzle.")

    layers = ctx.air_layers.column(i)
    warm = [lay for lay in layers if lay["kind"] == "warm"]
    for lay in warm:
        where = "at the surface" if lay["bottom_hpa"] == layers[0]["bottom_hpa"] else "aloft"
        out.append(f"The air is above 0 °C {where} from {lay['bottom_hpa']:.0f} to {lay['top_hpa']:.0f} hPa "
                   f"({lay['bottom_m']:.0f}-{lay['top_m']:.0f} m), peaking at {lay['extreme_c']:+.1f} °C with "
                   f"{lay['area_j_kg']:.0f} J/kg: {_melting_verdict(lay['area_j_kg'])}.")
    if not warm:
        out.append("The whole column up to 250 hPa is below 0 °C: nothing melts on the way down.")

    if "bourgouin" in results:
        b = {k: float(a[i]) for k, a in results["bourgouin"].values.items()}
        if int(b["case"]) in (2, 3):
            cold_below = [lay for lay in layers if lay["kind"] == "cold"
                          and lay["top_hpa"] >= min(w["bottom_hpa"] for w in warm if w is not layers[0])]
            coldest = min((lay["extreme_c"] for lay in cold_below), default=float("nan"))
            if b["na_j_kg"] > b["line_ice_j_kg"]:
                verdict = (f"more than the {b['line_ice_j_kg']:.0f} J/kg that refreezes drops "
                           "to ice pellets")
            elif b["na_j_kg"] < b["line_liquid_j_kg"]:
                verdict = (f"less than the {b['line_liquid_j_kg']:.0f} J/kg needed to refreeze them, so "
                           "drops stay liquid")
            else:
                verdict = (f"between {b['line_liquid_j_kg']:.0f} and {b['line_ice_j_kg']:.0f} J/kg: "
                           "some drops refreeze")
            out.append(f"Below the warm layer the air is below 0 °C, down to {coldest:+.1f} °C, with "
                       f"{b['na_j_kg']:.0f} J/kg of refreezing energy, {verdict}.")

    t_s = float(cols.surface_temperature_c[i])
    tw_s = float(cols.surface_wetbulb_c[i])
    sentence = f"At the surface the air is {t_s:+.1f} °C with a wet-bulb of {tw_s:+.1f} °C"
    if t_s > 0 >= tw_s:
        sentence += ": evaporation can cool the air below freezing"
    out.append(sentence + ".")
    if "ramer" in results and "ice_fraction" in results["ramer"].values:
        f = float(results["ramer"].values["ice_fraction"][i])
        if np.isfinite(f):
            out.append(f"Ramer's ice fraction at the ground is {f:.2f} (1 = all ice, 0 = all liquid).")

    cons = diagnosis.consensus_result
    counts = cons.values["counts"][i]
    if int(cons.values["n_voters"][i]) > 0:
        tally = ", ".join(f"{name} {votes}" for name, votes in _tally(counts).items())
        out.append(f"Method votes: {tally}.")
    for step in cons.steps(i):
        if step.rule.startswith(("surface_humidity", "phase_")) or step.rule == "no_ice_drizzle":
            out.append(step.text)
    support = support_sentence(diagnosis)
    if support:
        out.append(support)
    code = diagnosis.code
    if diagnosis.members:
        out.append(f"Consensus: {code.label} ({code.name}), probability {diagnosis.probability:.2f} over "
                   f"{diagnosis.members} perturbed profiles ({diagnosis.confidence} confidence).")
    else:
        out.append(f"Consensus: {code.label} ({code.name}); probabilities not computed.")
    return out


def support_sentence(diagnosis) -> str | None:
    """Why the reported type differs from the most probable one, or from the profile's own
    consensus (:func:`ptype.engine.probability.supported_codes`); None when it does not."""
    reason = int(diagnosis.run.fields["support_reason"][diagnosis.row])
    if not diagnosis.members or reason == 0:
        return None
    probs = diagnosis.probability_vector
    code = diagnosis.code
    control = Code(int(diagnosis.run.fields["control_ptype"][diagnosis.row]))
    if reason == 1:
        most = Code(int(np.argmax(probs)))
        why = (f"it is the more hazardous ({code.label} over {most.label}), a hazard preference"
               if HAZARD_RANK[code] < HAZARD_RANK[most] else
               "the profile's own layers decide where the members split")
        return (f"The members give {most.name} more often ({probs[most]:.2f}) than {code.name} "
                f"({probs[code]:.2f}); {code.name} is reported because the profile itself gives "
                f"it, at least a quarter of the members agree, and {why}.")
    return (f"The profile itself gives {control.name} ({control.label}), but only "
            f"{probs[control]:.2f} of the members do, fewer than a quarter; the most probable "
            f"type, {code.name} ({probs[code]:.2f}), is reported.")
