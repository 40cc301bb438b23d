"""Alert rules: from a timeline (:func:`ptype.roads.nowcast.build_timeline`) to alert candidates.

Default thresholds (per site, overridable; all ours unless noted):

==========================  ========  ==========================================================
key                          default   meaning
==========================  ========  ==========================================================
freezing_probability         0.3       freezing precipitation on the road at least this likely ...
freezing_window_hours        6         ... within this many hours
accretion_mm                 2.0       Jones radial ice accretion over the timeline at least this
frost                        true      warn of hoar frost (road <= 0 degC and below the frost point)
frost_window_hours           12
snow_rate_mm_h               1.0       liquid-equivalent rate for "heavy" snow (about 1 cm/h of snow
                                       at 10:1, common practice, from memory) ...
snow_probability             0.5       ... when snow is at least this likely
snow_window_hours            12
ice_pellets_probability      0.4       ice pellets (PL, or half of RAPL/FZRAPL) at least this
                                       likely ...
ice_pellets_window_hours     6         ... within this many hours
==========================  ========  ==========================================================

Severity of ice pellets, by the accumulated depth over the alert period (ours; pellets make
untreated roads slippery even in small amounts): Minor below 0.5 cm, Moderate from 0.5 cm,
Severe from 2.5 cm.

Severity of ice accretion: 6.35 mm (0.25 in) Severe and 12.7 mm (0.5 in) Extreme, the
quarter- and half-inch radial-ice levels common in ice-storm warning practice (from
memory, unverified).  CAP certainty follows the CAP 1.2 definitions: Likely for
p > ~50 %, Possible for p <= ~50 %.  CAP urgency: Immediate when the hazard has
begun, Expected within the next hour, Future beyond.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from datetime import datetime, timedelta
from typing import Any

from ptype.codes import GRIB2_4201, Code
from ptype.constants import CAUTION
from ptype.engine import wording as w

DEFAULT_THRESHOLDS: dict[str, Any] = {
    "freezing_probability": 0.3,
    "freezing_window_hours": 6.0,
    "accretion_mm": 2.0,
    "frost": True,
    "frost_window_hours": 12.0,
    "snow_rate_mm_h": 1.0,
    "snow_probability": 0.5,
    "snow_window_hours": 12.0,
    "ice_pellets_probability": 0.4,
    "ice_pellets_window_hours": 6.0,
}

#: Ice-pellet depths (cm) from which the alert is Moderate, and Severe (ours).
PELLETS_MODERATE_CM = 0.5
PELLETS_SEVERE_CM = 2.5

ACCRETION_SEVERE_MM = 6.35
ACCRETION_EXTREME_MM = 12.7

#: event key -> (CAP event text, response type, instruction)
EVENTS: dict[str, tuple[str, str, str]] = {
    "freezing_precipitation": (
        "Freezing precipitation on roads", "Prepare",
        ("Treat road surfaces before onset and expect glaze ice; check the latest official "
         "warnings.")),
    "ice_accretion": (
        "Ice accretion on exposed structures", "Prepare",
        "Expect glaze on lines, trees, signs and bridges; plan for loads and falling ice."),
    "frost": (
        "Road frost", "Prepare",
        "Expect hoar frost on untreated road surfaces; consider preventive treatment."),
    "heavy_snow": (
        "Heavy snow", "Prepare",
        "Expect snow-covered roads; plan ploughing and treatment."),
    "ice_pellets": (
        "Ice pellets on roads", "Prepare",
        ("Expect ice pellets (sleet) settling on untreated roads and making them slippery; "
         "treat and plough as for snow.")),
}


@dataclass
class Candidate:
    """An alert that the current timeline calls for (before the lifecycle is applied)."""

    event: str
    onset: datetime
    expires: datetime
    severity: str
    certainty: str
    urgency: str
    headline: str
    description: str
    instruction: str
    parameters: dict[str, Any] = field(default_factory=dict)

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready form, times as ISO 8601 UTC."""
        from ptype.clock import iso
        return {"event": self.event, "onset": iso(self.onset), "expires": iso(self.expires),
                "severity": self.severity, "certainty": self.certainty, "urgency": self.urgency,
                "headline": self.headline, "description": self.description,
                "instruction": self.instruction, "parameters": self.parameters}


def merged_thresholds(site_thresholds: Mapping[str, Any] | None) -> dict[str, Any]:
    """The default thresholds with a site's own values (known keys, not None) laid over."""
    out = dict(DEFAULT_THRESHOLDS)
    for key, value in (site_thresholds or {}).items():
        if key in out and value is not None:
            out[key] = value
    return out


def certainty_word(probability: float) -> str:
    """CAP ``certainty``: Likely above a probability of 0.5, else Possible (CAP12, 3.2.2)."""
    return "Likely" if probability > 0.5 else "Possible"


def urgency_word(onset: datetime, now: datetime) -> str:
    """CAP ``urgency``: Immediate once begun, Expected within the hour, else Future (ours)."""
    if onset <= now:
        return "Immediate"
    if onset - now <= timedelta(hours=1):
        return "Expected"
    return "Future"


#: Observed present weather (METAR w'w' groups, WMO code table 4678) that confirms an event.
OBSERVED_CONFIRMS = {
    "freezing_precipitation": ("FZRA", "FZDZ", "FZUP", "FZRAPL"),
    "ice_accretion": ("FZRA", "FZDZ", "FZUP", "FZRAPL"),
    "heavy_snow": ("+SN", "+SHSN"),
    "ice_pellets": ("PL", "SHPL", "FZRAPL", "RAPL"),
}


def observed_confirms(event: str, present_weather: str | None) -> bool:
    """True when an observed present-weather report (e.g. ``-FZRA``, ``+SN BR``) shows the event.

    Groups are matched as written in METAR/SPECI (WMO-No. 306 code table 4678): intensity
    prefix kept for heavy snow (``+SN``), ignored for the freezing types.
    """
    if not present_weather:
        return False
    groups = present_weather.upper().split()
    wanted = OBSERVED_CONFIRMS.get(event, ())
    for g in groups:
        bare = g.lstrip("+-").removeprefix("VC")
        if g in wanted or (bare in wanted and not wanted[0].startswith("+")):
            return True
        if any(g.startswith(w) for w in wanted if w.startswith("+")):
            return True
    return False


def _time(s: str) -> datetime:
    from ptype.clock import parse_time
    return parse_time(s)


def _span(steps, flags, step: timedelta):
    idx = [i for i, f in enumerate(flags) if f]
    if not idx:
        return None
    return idx, _time(steps[idx[0]]["valid_time"]), _time(steps[idx[-1]]["valid_time"]) + step


def _dominant_code(steps, idx) -> Code:
    from ptype.codes import HAZARD_RANK
    codes = {Code[steps[i]["ptype"]] for i in idx}
    return min(codes, key=lambda c: HAZARD_RANK[c])


@dataclass
class _Rules:
    """What every event rule reads: the timeline's steps, the thresholds and the clock."""

    timeline: Mapping[str, Any]
    steps: list
    now: datetime
    site_name: str
    th: dict
    step: timedelta
    out: list = field(default_factory=list)

    def lead_ok(self, s: Mapping[str, Any], hours: Any) -> bool:
        return s["lead_hours"] <= float(hours)

    def span(self, flags):
        return _span(self.steps, flags, self.step)

    def make(self, event: str, idx, onset: datetime, expires: datetime, severity: str,
             probability: float, detail: str, params: dict) -> None:
        """Append the candidate of ``event`` over steps ``idx``."""
        text, _, instruction = EVENTS[event]
        code = Code.NONE if event == "frost" else _dominant_code(self.steps, idx)
        onset_text = onset.strftime("%d %b %H:%M UTC")
        headline = f"{text} at {self.site_name} from {onset_text}"
        description = (f"{detail} Period: {onset.strftime('%Y-%m-%d %H:%M')} to "
                       f"{expires.strftime('%Y-%m-%d %H:%M')} UTC. {CAUTION}")
        params = {"ptype": code.name, "grib2_code": GRIB2_4201[code],
                  "max_probability": round(probability, 3), **params}
        certainty = certainty_word(probability)
        obs = self.timeline.get("observation") or {}
        if onset <= self.now and observed_confirms(event, obs.get("present_weather")):
            # CAP 1.2 "Observed": determined to have occurred or to be ongoing.
            certainty = "Observed"
            params["observed_present_weather"] = obs["present_weather"]
        self.out.append(Candidate(event, onset, expires, severity, certainty,
                                  urgency_word(onset, self.now), headline, description,
                                  f"{instruction} {CAUTION}", params))


def _freezing_rule(r: _Rules) -> None:
    """Freezing precipitation on the road within the window."""
    steps, th = r.steps, r.th
    flags = [r.lead_ok(s, th["freezing_window_hours"])
             and s["hazards"]["freezing_probability"] is not None
             and s["hazards"]["freezing_probability"] >= float(th["freezing_probability"])
             for s in steps]
    span = r.span(flags)
    if span:
        idx, onset, expires = span
        p = max(steps[i]["hazards"]["freezing_probability"] for i in idx)
        glaze = sum(steps[i]["hazards"]["flat_glaze_mm"] or 0.0 for i in idx)
        severity = "Severe" if p >= 0.6 or glaze >= ACCRETION_SEVERE_MM else "Moderate"
        r.make("freezing_precipitation", idx, onset, expires, severity, p,
               f"Freezing precipitation on the road surface is forecast with a probability up "
               f"to {w.percent(100.0 * p)}; flat-surface glaze up to {glaze:.1f} mm.",
               {"flat_glaze_mm": round(glaze, 2)})


def _accretion_rule(r: _Rules) -> None:
    """Ice accretion (Jones) over the whole timeline."""
    steps = r.steps
    acc = [s["hazards"]["ice_accretion_mm"] or 0.0 for s in steps]
    total = sum(acc)
    if total >= float(r.th["accretion_mm"]):
        idx, onset, expires = r.span([a > 0 for a in acc])
        severity = ("Extreme" if total >= ACCRETION_EXTREME_MM else
                    "Severe" if total >= ACCRETION_SEVERE_MM else "Moderate")
        p = max(steps[i]["hazards"]["freezing_probability"] or 0.0 for i in idx)
        r.make("ice_accretion", idx, onset, expires, severity, p,
               f"Radial ice accretion of about {total:.1f} mm on exposed wires and structures "
               f"(Jones simple flux model, an upper bound).",
               {"ice_accretion_mm": round(total, 2)})


def _frost_rule(r: _Rules) -> None:
    """Hoar frost on the road within the window."""
    if not r.th["frost"]:
        return
    steps = r.steps
    span = r.span([r.lead_ok(s, r.th["frost_window_hours"]) and s["hazards"]["frost"]
                   for s in steps])
    if span:
        idx, onset, expires = span
        road = min(steps[i]["surface"]["road_surface_temperature_c"] for i in idx)
        r.make("frost", idx, onset, expires, "Minor", 0.8,
               f"Road surface at or below {w.temperature(0.0, trim=True)} and below the "
               f"frost point of the air (lowest road temperature {w.temperature(road)}): hoar "
               "frost deposition.",
               {"min_road_surface_temperature_c": road})


def _pellets_rule(r: _Rules) -> None:
    """Ice pellets within the window, severity by the depth over the period."""
    steps, th = r.steps, r.th
    span = r.span([r.lead_ok(s, th["ice_pellets_window_hours"])
                   and (s["hazards"].get("ice_pellets_probability") or 0.0)
                   >= float(th["ice_pellets_probability"]) for s in steps])
    if span:
        idx, onset, expires = span
        depth = sum(steps[i]["hazards"]["ice_pellets_cm"] or 0.0 for i in idx)
        p = max(steps[i]["hazards"]["ice_pellets_probability"] for i in idx)
        severity = ("Severe" if depth >= PELLETS_SEVERE_CM else
                    "Moderate" if depth >= PELLETS_MODERATE_CM else "Minor")
        r.make("ice_pellets", idx, onset, expires, severity, p,
               f"Ice pellets are forecast with a probability up to {w.percent(100.0 * p)}, "
               f"about {depth:.1f} cm (at a 2.5:1 pellet-to-liquid ratio).",
               {"ice_pellets_cm": round(depth, 2)})


def _snow_rule(r: _Rules) -> None:
    """Heavy snow within the window."""
    steps, th = r.steps, r.th
    span = r.span([r.lead_ok(s, th["snow_window_hours"])
                   and (s["hazards"]["snow_probability"] or 0.0) >= float(th["snow_probability"])
                   and (s["surface"]["precipitation_rate_mm_h"] or 0.0)
                   >= float(th["snow_rate_mm_h"]) for s in steps])
    if span:
        idx, onset, expires = span
        snow = sum(steps[i]["hazards"]["snow_cm"] or 0.0 for i in idx)
        p = max(steps[i]["hazards"]["snow_probability"] for i in idx)
        r.make("heavy_snow", idx, onset, expires, "Severe" if snow >= 15.0 else "Moderate", p,
               f"Heavy snow with about {snow:.0f} cm (at a 10:1 snow-to-liquid ratio).",
               {"snow_cm": round(snow, 1)})


#: The event rules, in the order their candidates are listed.
EVENT_RULES = (_freezing_rule, _accretion_rule, _frost_rule, _pellets_rule, _snow_rule)


def evaluate_rules(timeline: Mapping[str, Any], now: datetime, site_name: str,
                   thresholds: Mapping[str, Any] | None = None) -> list[Candidate]:
    """Alert candidates for one site's timeline, at most one per event."""
    steps = timeline.get("steps") or []
    if not steps:
        return []
    r = _Rules(timeline, steps, now, site_name, merged_thresholds(thresholds),
               timedelta(minutes=float(timeline["step_minutes"])))
    for rule in EVENT_RULES:
        rule(r)
    return r.out
