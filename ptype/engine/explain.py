"""Plain-language narrative of a diagnosis.

Every sentence is built from numbers already in the diagnosis (layers, method
values, consensus votes, probabilities), so a reader can trace each claim to
the structured trace in ``Diagnosis.to_dict()``.  Numbers are written by
:mod:`ptype.engine.wording`, as in the methods' steps.
"""

from __future__ import annotations

from typing import Protocol

import numpy as np

from ptype.codes import HAZARD_RANK, Code
from ptype.engine import wording as w
from ptype.engine.columns import Columns
from ptype.engine.consensus import _tally
from ptype.engine.layers import TOP_LIMIT_HPA
from ptype.engine.methods import bourgouin, cloud_top
from ptype.engine.methods.base import Context, MethodResult
from ptype.engine.probability import MIN_SUPPORT
from ptype.profile import Profile

_ZERO = w.temperature(0.0, trim=True)


class Explained(Protocol):
    """What the narrative reads of a diagnosis (a :class:`ptype.engine.diagnosis.Diagnosis`)."""

    profile: Profile
    results: dict[str, MethodResult]
    context: Context
    columns: Columns
    row: int
    consensus_result: MethodResult
    code: Code
    members: int
    probability: float
    confidence: str


def _melting_verdict(area: float) -> str:
    # Bourgouin (2000) surface-layer thresholds, used here as a scale of melting.
    snow, rain = w.energy(bourgouin.SURFACE_SNOW_J_KG), w.energy(bourgouin.SURFACE_RAIN_J_KG)
    # The verdict names its scale: a method's own row may judge the same layer otherwise
    # (the cloud-top method looks at the peak temperature, not the area).
    if area > bourgouin.SURFACE_RAIN_J_KG:
        return f"on Bourgouin's scale, enough to melt snow completely (more than {rain})"
    if area >= bourgouin.SURFACE_SNOW_J_KG:
        span = w.energy_range(bourgouin.SURFACE_SNOW_J_KG, bourgouin.SURFACE_RAIN_J_KG)
        return f"on Bourgouin's scale, enough to melt snow partly ({span})"
    if area >= bourgouin.MIN_ALOFT_J_KG:
        return f"on Bourgouin's scale, too little to melt much snow (under {snow})"
    return f"on Bourgouin's scale, negligible (under {w.energy(bourgouin.MIN_ALOFT_J_KG)})"


def narrative(diagnosis: Explained) -> list[str]:
    """Short sentences explaining ``diagnosis`` (a :class:`ptype.engine.diagnosis.Diagnosis`).

    In order: no precipitation reported, the cloud and its ice, the warm layers, the
    refreezing layer below them, the surface air, Ramer's ice fraction, the votes, the
    consensus notes and the consensus itself.
    """
    out: list[str] = []
    surface = diagnosis.profile.surface
    if surface is not None and surface.precipitation_rate_mm_h == 0:
        out.append("The surface readings report no precipitation (0 mm/h): what follows is the "
                   "type precipitation would take if it fell now.")
    results = diagnosis.results
    i = diagnosis.row
    if "cloud_top" in results:
        out.append(_cloud_sentence(results["cloud_top"], i))
    layers = diagnosis.context.air_layers.column(i)
    out.extend(_warm_layer_sentences(layers))
    if "bourgouin" in results:
        out.extend(_refreezing_sentences(results["bourgouin"], i, layers))
    out.append(_surface_sentence(diagnosis.columns, i))
    if "ramer" in results:
        out.extend(_ice_fraction_sentences(results["ramer"], i))
    if "particles" in results:
        out.extend(_particle_sentences(results["particles"], i))
    out.extend(_consensus_sentences(diagnosis))
    return out


def _cloud_sentence(result: MethodResult, i: int) -> str:
    """Where the precipitation forms and whether its cloud makes ice (cloud-top method)."""
    v = {k: a[i] for k, a in result.values.items()}
    nucleation = w.temperature(cloud_top.ICE_NUCLEATION_C, trim=True)
    if not v["has_cloud"]:
        return ("No layer of the profile is saturated, so where the precipitation forms is not "
                "visible in it.")
    if v["ice"] and v["seeded"]:
        return (f"The low cloud is too warm to make ice (coldest "
                f"{w.temperature(v['lowest_cloud_min_c'])}) but ice falls into it from a higher "
                f"cloud topping at {w.pressure(v['top_cloud_top_hpa'])} "
                f"({w.temperature(v['top_cloud_min_c'])}).")
    if v["ice"]:
        return (f"The cloud top is at {w.pressure(v['top_cloud_top_hpa'])}, where the cloud "
                f"reaches {w.temperature(v['top_cloud_min_c'])}: cold enough to make ice (at or "
                f"below {nucleation}).")
    text = (f"The cloud top is at {w.pressure(v['lowest_cloud_top_hpa'])} and the cloud is "
            f"nowhere colder than {w.temperature(v['lowest_cloud_min_c'])}: too warm to make ice "
            f"(ice needs about {nucleation})")
    if v.get("drizzle", True):
        return text + ", so its drops grow as drizzle."
    return (text + f"; its liquid part, {w.height(v['lowest_cloud_depth_m'])} deep, is too "
            "shallow to grow drizzle.")


def _warm_layer_sentences(layers: list[dict]) -> list[str]:
    """One sentence per layer above 0 degC, with its area on Bourgouin's (2000) scale."""
    warm = [lay for lay in layers if lay["kind"] == "warm"]
    if not warm:
        return [(f"The whole column up to {w.pressure(TOP_LIMIT_HPA)} is below {_ZERO}: "
                 "nothing melts on the way down.")]
    out = []
    for lay in warm:
        where = "at the surface" if lay["bottom_hpa"] == layers[0]["bottom_hpa"] else "aloft"
        out.append(f"The air is above {_ZERO} {where} in the layer "
                   f"{w.pressure_range(lay['bottom_hpa'], lay['top_hpa'])} "
                   f"({w.height_range(lay['bottom_m'], lay['top_m'])}), peaking at "
                   f"{w.temperature(lay['extreme_c'])} with {w.energy(lay['area_j_kg'])}: "
                   f"{_melting_verdict(lay['area_j_kg'])}.")
    return out


def _refreezing_sentences(result: MethodResult, i: int, layers: list[dict]) -> list[str]:
    """Bourgouin's (2000) refreezing area under a warm layer aloft (cases A and B)."""
    b = {k: float(a[i]) for k, a in result.values.items()}
    if int(b["case"]) not in (2, 3):
        return []
    warm_aloft = [lay for lay in layers if lay["kind"] == "warm" and lay is not layers[0]]
    lowest_aloft_hpa = min(lay["bottom_hpa"] for lay in warm_aloft)
    cold_below = [lay for lay in layers if lay["kind"] == "cold"
                  and lay["top_hpa"] >= lowest_aloft_hpa]
    coldest = min((lay["extreme_c"] for lay in cold_below), default=float("nan"))
    na, lo, hi = b["na_j_kg"], b["line_liquid_j_kg"], b["line_ice_j_kg"]
    if na > hi:
        verdict = f"more than the {w.energy(hi)} that refreezes drops to ice pellets"
    elif na < lo:
        verdict = (f"less than the {w.energy(lo)} needed to refreeze the drops, so they stay "
                   "liquid")
    else:
        verdict = f"between {w.energy(lo)} and {w.energy(hi)}: some drops refreeze"
    return [(f"Below the warm layer the air is below {_ZERO}, down to "
             f"{w.temperature(coldest)}, with {w.energy(na)} of refreezing energy, {verdict}.")]


def _surface_sentence(columns: Columns, i: int) -> str:
    """The surface air and wet-bulb, and whether evaporation can cool it below freezing."""
    t_s = float(columns.surface_temperature_c[i])
    tw_s = float(columns.surface_wetbulb_c[i])
    sentence = (f"At the surface the air is {w.temperature(t_s)} with a wet-bulb of "
                f"{w.temperature(tw_s)}")
    if t_s > 0 >= tw_s:
        sentence += ": evaporation can cool the air below freezing"
    return sentence + "."


def _ice_fraction_sentences(result: MethodResult, i: int) -> list[str]:
    """Ramer's (1993) ice fraction at the ground, when his march reached it."""
    if "ice_fraction" not in result.values:
        return []
    f = float(result.values["ice_fraction"][i])
    if not np.isfinite(f):
        return []
    return [(f"Ramer's ice fraction at the ground is {w.fraction(f)} (1 = all ice, 0 = all "
             "liquid).")]


def _particle_sentences(result: MethodResult, i: int) -> list[str]:
    """The particle model's mass at the ground and where it melted, when it ran."""
    v = result.values
    if not np.isfinite(v["generating_height_m"][i]):
        return []
    shares = ", ".join(f"{w.percent(100.0 * float(v[k][i]))} {word}" for k, word in
                       (("snow", "snow"), ("melting", "melting snow"), ("liquid", "liquid"),
                        ("refrozen", "refrozen ice")) if float(v[k][i]) >= 0.005)
    text = f"The particle model brings to the ground {shares}"
    half, done = float(v["melting_half_m"][i]), float(v["melting_complete_m"][i])
    if np.isfinite(done):
        text += f"; the snow is half melted at {w.height(half)} and melted at {w.height(done)}"
    elif np.isfinite(half):
        text += f"; the snow is half melted at {w.height(half)}"
    return [text + "."]


def _consensus_sentences(diagnosis: Explained) -> list[str]:
    """The vote tally, the consensus steps a reader needs, and the consensus with its
    probability."""
    out = []
    cons = diagnosis.consensus_result
    i = diagnosis.row
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
        out.append(f"Consensus: {w.code(code)}, probability {w.fraction(diagnosis.probability)} "
                   f"over {diagnosis.members} perturbed profiles ({diagnosis.confidence} "
                   "confidence).")
    else:
        out.append(f"Consensus: {w.code(code)}; probabilities not computed.")
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
    sentence = (f"The profile itself gives {control.name} ({control.label}), but only "
                f"{probs[control]:.2f} of the members do, fewer than a quarter; the most probable "
                f"type, {code.name} ({probs[code]:.2f}), is reported.")
    if probs[code] < MIN_SUPPORT - 1e-12:
        spread = int((np.asarray(probs) > 0).sum())
        sentence += (f" No type has a quarter of the members: they split over {spread} types, "
                     "so this answer is uncertain.")
    return sentence
