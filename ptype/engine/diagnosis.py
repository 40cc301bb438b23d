"""``ptype.diagnose``: from one profile to the type at the ground, its probability and its reasons.

Pipeline (each stage its own module)::

    read/validate (readers, profile) -> Columns -> layers -> methods -> consensus
        -> Monte-Carlo probabilities (probability) -> explanation (explain)

:func:`ptype.engine.run.run_columns` is the vectorised core used by every path;
:func:`diagnose` calls it for one profile and returns a :class:`Diagnosis` with the full
trace, :func:`diagnose_many` for several.
"""

from __future__ import annotations

import os
from collections.abc import Iterable, Mapping
from datetime import datetime
from math import isfinite
from typing import Any

import numpy as np

from ptype.codes import GRIB2_4201, Code
from ptype.constants import CAUTION
from ptype.engine import consensus as consensus_module
from ptype.engine import wording as w
from ptype.engine.calibration import UNCALIBRATED, Calibration
from ptype.engine.columns import Columns
from ptype.engine.layers import analyse_layers, zero_height_m
from ptype.engine.methods import get_method
from ptype.engine.methods.base import Context, MethodResult
from ptype.engine.probability import DEFAULT_MEMBERS, check_members, confidence_word
from ptype.engine.run import EngineRun, MethodsLike, method_names, run_columns
from ptype.errors import OptionError
from ptype.profile import Profile
from ptype.thermo import check_wet_bulb_kind

#: What :func:`diagnose` reads: a profile, a profile document, or a file path, text or bytes.
ProfileSource = Profile | Mapping[str, Any] | str | os.PathLike | bytes


def _to_profile(source: ProfileSource) -> Profile:
    if isinstance(source, Profile):
        return source
    if isinstance(source, Mapping):
        return Profile.from_document(source)
    if isinstance(source, (str, os.PathLike, bytes)):
        from ptype.readers import read_profile
        return read_profile(source)
    raise OptionError(f"cannot diagnose a {type(source).__name__}: expected a Profile, a profile "
                      "document (dict) or a path", field="source")


class Diagnosis:
    """The full result for one profile; :meth:`to_dict` is the JSON contract.

    ``run`` is the engine run the profile took part in and ``row`` its column there (the
    control and its trace); ``probabilities`` its member probabilities, ``(len(Code),)``.
    """

    def __init__(self, profile: Profile, run: EngineRun, row: int, probabilities: np.ndarray,
                 members: int, seed, wetbulb: str, calibration: Calibration | None = None):
        self.profile = profile
        self.run = run
        self.row = row
        self.columns: Columns = run.context.columns
        self.context: Context = run.context
        self.results: dict[str, MethodResult] = run.results
        self.consensus_result: MethodResult = run.consensus
        self.code = Code(int(run.fields["ptype"][row]))
        self.members = members
        self.seed = seed
        self.wetbulb = wetbulb
        self.calibration = calibration
        self.probability_vector = probabilities
        self.probabilities = ({} if members == 0 else
                              {Code(k).name: float(probabilities[k]) for k in range(len(Code))
                               if probabilities[k] > 0})
        p_cons = self.probabilities.get(self.code.name, 0.0) if members else float("nan")
        self.probability = p_cons
        self.confidence = confidence_word(p_cons) if members else "not assessed"

    @property
    def ptype(self) -> str:
        """The consensus type as its METAR abbreviation (``"FZRA"``)."""
        return self.code.name

    def to_dict(self) -> dict:
        """The JSON contract of a diagnosis (documented in docs/api.md)."""
        from ptype.engine.explain import narrative
        i = self.row
        ctx = self.context
        fields = self.run.fields
        pr = self.profile
        fl = fields["freezing_level_m"][i]
        wbz = fields["wetbulb_zero_height_m"][i]
        return {
            "ptype": self.code.name,
            "ptype_label": self.code.label,
            "grib2_code": GRIB2_4201[self.code],
            "probability": None if not self.members else round(self.probability, 4),
            "probabilities": {k: round(v, 4) for k, v in sorted(self.probabilities.items(),
                                                                key=lambda kv: -kv[1])},
            "confidence": self.confidence,
            "calibration": (self.calibration.summary() | {"calibrated": True}
                            if self.calibration is not None and self.members else UNCALIBRATED),
            "members": self.members,
            "seed": self.seed,
            "methods": self._methods_dict(),
            "consensus": self._consensus_dict(),
            "layers": ctx.air_layers.column(i),
            "wetbulb_layers": ctx.wetbulb_layers.column(i),
            "cloud_layers": ctx.cloud_layers.column(i),
            "freezing_level_m": None if not np.isfinite(fl) else round(float(fl), 0),
            "wetbulb_zero_height_m": None if not np.isfinite(wbz) else round(float(wbz), 0),
            "warm_area_j_kg": round(float(fields["warm_area_j_kg"][i]), 1),
            "cold_area_j_kg": round(float(fields["cold_area_j_kg"][i]), 1),
            "surface": self._surface_dict(),
            "profile": self._profile_dict(),
            "explanation": narrative(self),
            "caution": CAUTION,
            "warnings": list(pr.warnings),
            "site": None if pr.site is None else pr.site.model_dump(exclude_none=True),
            "valid_time": None if pr.valid_time is None else _iso(pr.valid_time),
            # The time as a verdict line states it (a WMO TEMP message gives day and hour).
            "when": w.profile_time(None if pr.valid_time is None else _iso(pr.valid_time),
                                   pr.source),
        }

    def _consensus_dict(self) -> dict[str, Any]:
        """The consensus rule and steps of the profile itself (the control), the type it gives
        and, when the members change the reported type, why."""
        from ptype.engine.explain import support_sentence
        i = self.row
        control = Code(int(self.run.fields["control_ptype"][i]))
        reason = int(self.run.fields["support_reason"][i])
        return {"rule": _rule_name(consensus_module, self.consensus_result, i),
                "steps": [s.to_dict() for s in self.consensus_result.steps(i)],
                "control_ptype": control.name,
                "reported": ("control", "hazard_preference", "most_probable")[reason],
                "reported_because": support_sentence(self)}

    def _methods_dict(self) -> dict[str, dict]:
        i = self.row
        methods = {}
        for name, res in self.results.items():
            mod = get_method(name)
            code = int(res.code[i])
            methods[name] = {"ptype": None if code < 0 else Code(code).name,
                             "title": mod.TITLE, "reference": mod.REFERENCE,
                             "wetbulb": getattr(mod, "WETBULB", None),
                             "rule": None if res.rule is None else _rule_name(mod, res, i),
                             "steps": [s.to_dict() for s in res.steps(i)]}
            details = getattr(mod, "details", None)
            if details is not None:
                # A method with more to say than its type (the particle model's fractions).
                methods[name].update(details(res, i, self.profile.n_levels))
        return methods

    def _surface_dict(self) -> dict[str, float]:
        c, i = self.columns, self.row
        return {"temperature_c": round(float(c.surface_temperature_c[i]), 2),
                "dewpoint_c": round(float(c.surface_dewpoint_c[i]), 2),
                "wetbulb_c": round(float(c.surface_wetbulb_c[i]), 2),
                "relative_humidity_pct": round(float(c.surface_relative_humidity_pct[i]), 1)}

    def _profile_dict(self) -> dict[str, Any]:
        c, i = self.columns, self.row
        k = self.profile.n_levels
        tw = c.wetbulb_c[i] if self.wetbulb == "isobaric" else c.wetbulb_adiabatic_c[i]

        def clean(a):
            # tolist() gives Python floats: math.isfinite and round on them skip a numpy
            # scalar call per level.
            return [round(x, 2) if isfinite(x) else None for x in a[:k].tolist()]

        return {"pressure_hpa": clean(c.pressure_hpa[i]), "height_m": clean(c.height_m[i]),
                "temperature_c": clean(c.temperature_c[i]), "dewpoint_c": clean(c.dewpoint_c[i]),
                "relative_humidity_pct": clean(c.relative_humidity_pct[i]),
                "wetbulb_c": clean(tw), "wetbulb_kind": self.wetbulb,
                **self._particle_levels()}

    def _particle_levels(self) -> dict[str, list]:
        """The particle model's mean melted and refrozen fractions per level, when it ran."""
        res = self.results.get("particles")
        if res is None:
            return {}
        k, i = self.profile.n_levels, self.row

        def clean(a):
            return [round(x, 4) if isfinite(x) else None for x in a[i, :k].tolist()]

        return {"melted_fraction": clean(res.values["melted_fraction_levels"]),
                "refrozen_fraction": clean(res.values["refrozen_fraction_levels"])}


def _iso(t: datetime) -> str:
    return t.isoformat().replace("+00:00", "Z")


def _rule_name(module, result: MethodResult, i: int):
    rules = getattr(module, "RULES", None)
    r = int(result.rule[i])
    if rules is None or not 0 <= r < len(rules):
        return None
    rule = rules[r]
    return rule if isinstance(rule, str) else getattr(rule, "id", str(rule))


def _check_options(members, seed, wetbulb: str) -> int:
    check_wet_bulb_kind(wetbulb, field="wetbulb")
    members = check_members(members)
    if seed is not None and (isinstance(seed, bool) or not isinstance(seed, (int, np.integer))
                             or seed < 0):
        raise OptionError(f"seed = {seed!r}: expected a non-negative whole number", field="seed")
    return members


def _use_adiabatic_wetbulb_layers(run: EngineRun, columns: Columns) -> None:
    """Report the wet-bulb layers (and the wet-bulb-zero height) of the pseudo-adiabatic
    wet-bulb instead of the isobaric one; the methods keep the wet-bulb their authors used."""
    ctx = run.context
    ctx.__dict__["wetbulb_layers"] = analyse_layers(columns.pressure_hpa, columns.height_m,
                                                    columns.wetbulb_adiabatic_c)
    run.fields["wetbulb_zero_height_m"] = zero_height_m(ctx.wetbulb_layers)[:columns.n_columns]


def _calibration(calibration: Calibration | str | os.PathLike | None) -> Calibration | None:
    if calibration is None or isinstance(calibration, Calibration):
        return calibration
    if isinstance(calibration, (str, os.PathLike)):
        return Calibration.load(calibration)
    raise OptionError(f"calibration: expected a Calibration or a path to its JSON file, got "
                      f"{type(calibration).__name__}", field="calibration")


def diagnose(source: ProfileSource, *, members: int = DEFAULT_MEMBERS, seed: int | None = None,
             methods: MethodsLike = None, wetbulb: str = "isobaric",
             calibration: Calibration | str | os.PathLike | None = None) -> Diagnosis:
    """Diagnose the precipitation type at the ground for one profile.

    Parameters
    ----------
    source : Profile, dict or path
        A validated profile, a profile document, or a file path / text in any supported format.
    members : int
        Monte-Carlo members for the probabilities (0 disables them).
    seed : int, optional
        Random seed, for reproducible probabilities.
    methods : iterable of str or comma-separated str, optional
        Restrict to these methods (default: all of :data:`ptype.engine.methods.METHOD_NAMES`).
    wetbulb : {"isobaric", "adiabatic"}
        Which wet-bulb to report in ``profile.wetbulb_c`` and the wet-bulb layers.  Each
        method always uses the wet-bulb its authors used (recorded in its ``wetbulb`` field).
    calibration : Calibration or path, optional
        A fitted calibration (``ptype calibrate``) that turns the member frequencies into
        calibrated probabilities; the result says which (``calibration`` in ``to_dict``).

    Returns
    -------
    Diagnosis
        ``.ptype`` (code string), ``.probabilities``, ``.confidence`` and ``.to_dict()``.
    """
    members = _check_options(members, seed, wetbulb)
    names = method_names(methods)
    cal = _calibration(calibration)
    profile = _to_profile(source)
    columns = Columns.from_profiles([profile])
    run = run_columns(columns, members, seed, names, trace=True, calibration=cal)
    if wetbulb == "adiabatic":
        _use_adiabatic_wetbulb_layers(run, columns)
    probs = run.probabilities[0] if members else np.full(len(Code), np.nan)
    return Diagnosis(profile, run, 0, probs, members, seed, wetbulb, cal)


#: Profiles whose Monte-Carlo members :func:`diagnose_many` diagnoses in one vectorised pass
#: (bounds memory: profiles x members x levels values per array).
MANY_MEMBER_BATCH = 64


def diagnose_many(sources: Iterable, *, members: int = DEFAULT_MEMBERS, seed: int | None = None,
                  methods: MethodsLike = None, wetbulb: str = "isobaric",
                  calibration: Calibration | str | os.PathLike | None = None
                  ) -> list[Diagnosis]:
    """Diagnose several profiles; each result as :func:`diagnose` gives it.

    ``sources`` are what :func:`diagnose` accepts (profiles, documents, paths).  The control
    of every profile runs in one vectorised pass, and the Monte-Carlo members of up to
    :data:`MANY_MEMBER_BATCH` profiles go through the engine together, about half the cost
    per profile of one call each (measured by ``bench/load_diagnose.py``'s stage timings).
    With a seed the batch is reproducible as a whole; its probabilities are not those of the
    same profiles diagnosed one by one (the random draws are shared out differently).
    """
    sources = list(sources)
    members = _check_options(members, seed, wetbulb)
    cal = _calibration(calibration)
    if len(sources) < 2 or members == 0:
        return [diagnose(s, members=members, seed=seed, methods=methods, wetbulb=wetbulb,
                         calibration=cal) for s in sources]
    names = method_names(methods)
    profiles = [_to_profile(s) for s in sources]
    columns = Columns.from_profiles(profiles)
    run = run_columns(columns, members, seed, names, trace=True,
                      batch_columns=MANY_MEMBER_BATCH,
                      batch_seed=lambda k, start: None if seed is None else seed + start,
                      calibration=cal)
    if wetbulb == "adiabatic":
        _use_adiabatic_wetbulb_layers(run, columns)
    return [Diagnosis(pr, run, i, run.probabilities[i], members, seed, wetbulb, cal)
            for i, pr in enumerate(profiles)]
