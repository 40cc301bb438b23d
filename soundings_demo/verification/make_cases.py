"""Generate the invented verification demo set: parametric profiles + "observed" weather.

    .venv/bin/python soundings_demo/verification/make_cases.py [OUT_DIR]

Writes ``profiles/case_NNN.json`` (compact ptype profile documents) and ``cases.csv``
(the manifest) beside this script (or into OUT_DIR).  Deterministic: the same files on every run.

EVERYTHING HERE IS INVENTED: the sites, the region, the profiles and the observations.
The set exists to exercise ``ptype verify``; it says nothing about how well any method
performs on real weather.

Profiles
--------
Levels every 25 hPa from the surface (975-1015 hPa) to 300 hPa.  Temperature is a
6.5 K/km environment from the surface temperature (-7 to +5 degC), plus (in about 60 % of
cases) a warm nose: a raised-cosine bump centred between 900 and 760 hPa, 40-160 hPa deep,
whose peak temperature is drawn from 0 to +8 degC.  Moisture: saturated (dew-point depression
0.2-1.2 K) from the surface, or from the top of a dry sub-cloud layer, up to the cloud
top (drawn from 720 to 420 hPa; in one case in eight a shallow cloud, 880 to 760 hPa),
dry above it (depression 12-25 K).

Truth ("observed" before noise): an invented observation process of its own
----------------------------------------------------------------------------
The observed type is **drawn at random** from the design of each profile, by a process that
shares no code, quantity or threshold with any method ptype ships (so that verifying those
methods against it is not circular).  It works on the generator's own arrays (air
temperature on a scale-height grid, z = 8 km ln(p_sfc/p)) and invented rates:

1. Ice: the cloud makes ice with probability ``1 / (1 + exp((T_top + 11) / 2))`` (T_top the
   cloud-top air temperature, degC); otherwise it rains drizzle, freezing on a surface at or
   below 0 degC.
2. Melting aloft: the nose's melting potential ``M = sum max(T, 0) dz`` (K m, air
   temperature, the elevated part only; halved when the nose lies in dry air) melts a
   fraction ``f = 1 - exp(-M / M0)`` of the snow, with ``M0`` drawn per case around 600 K m
   (log-normal, sigma 0.35).
3. Refreezing below the nose: completely melted drops (f > 0.9) refreeze with probability
   ``s((-T_cold - 7) / 1.5) (1 - exp(-D / 500 m))``; partly melted ones (0.1 < f <= 0.9),
   which keep an ice core, with ``s((-T_cold - 1) / 1.0)`` (s the logistic function, T_cold
   and D the coldest temperature and the depth of the cold layer below the nose); the
   outcome is drawn: refrozen, liquid, or (probability near one half) both.
4. The surface layer melts a fraction ``g = 1 - exp(-M_s / M1)`` of what reaches it
   (``M_s`` its own melting potential, ``M1`` around 250 K m); drops land freezing on a
   surface at or below 0 degC.

The rates and scales are ours and invented; they are NOT fitted to any observations.
Scores computed on these cases prove nothing about the real skill of any method: the set
only exercises the verification and calibration machinery.

Noise: 13 % of observations are moved to a neighbouring class (FZRA<->PL, FZRA<->FZDZ,
SN<->RASN, RA<->RASN, RA<->DZ, PL<->SN, FZRAPL<->FZRA/PL) to mimic observer and sensor
confusion; the text is then written as a report would write it (intensity signs,
obscurations, blowing snow, showers, mixtures in both orders, ``FZRA PL`` and
``FZRAPL``), and a few reports are unidentified (``UP``, ``FZUP``), hail/graupel only,
or garbled, so the exclusion accounting has something to count.
"""

from __future__ import annotations

import csv
import json
import sys
from datetime import UTC, datetime, timedelta
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parents[1]))

from ptype.profile import Profile

N_CASES = 240
SEED = 20260114
NOISE = 0.13
#: Invented sites of an invented upland region.
SITES = ("Quarnmoor", "Skelder Fen", "Tarnhollow", "Oxelby Ridge", "Marrowick", "Vellbrook",
         "Cindergate", "Harlow Tops")
NEIGHBOURS = {"FZRA": ("PL", "FZDZ", "FZRAPL"), "PL": ("FZRA", "SN", "FZRAPL"),
              "SN": ("RASN", "PL"), "RASN": ("SN", "RA"), "RA": ("RASN", "DZ"),
              "DZ": ("RA",), "FZDZ": ("FZRA",), "FZRAPL": ("FZRA", "PL"), "RAPL": ("RA", "PL")}


def build_profile(rng: np.random.Generator) -> tuple[dict, dict]:
    """One invented profile document and the parameters that made it."""
    p_sfc = float(rng.uniform(975, 1015))
    pressure = np.concatenate([[p_sfc], np.arange(np.floor(p_sfc / 25) * 25, 299, -25.0)])
    pressure = pressure[np.r_[True, np.diff(pressure) < -5]]
    z_approx = 8000.0 * np.log(p_sfc / pressure)                      # m, scale height
    t_sfc = float(rng.uniform(-7, 5))
    temperature = t_sfc - 6.5e-3 * z_approx
    nose = rng.random() < 0.6
    params = {"t_sfc": t_sfc, "nose": nose}
    if nose:
        p_nose = float(rng.uniform(760, 900))
        depth = float(rng.uniform(40, 160))
        t_peak = float(rng.uniform(0, 8))
        bump = np.where(np.abs(pressure - p_nose) < depth / 2,
                        0.5 * (1 + np.cos(2 * np.pi * (pressure - p_nose) / depth)), 0.0)
        t_env_nose = t_sfc - 6.5e-3 * 8000.0 * np.log(p_sfc / p_nose)
        temperature = temperature + max(0.0, t_peak - t_env_nose) * bump
        # A cold pool under the nose: cool the lowest levels a little, more under strong noses.
        temperature = temperature - float(rng.uniform(0, 3)) * np.exp(-z_approx / 400.0) * (
            pressure > p_nose)
        params.update(p_nose=p_nose, depth=depth, t_peak=t_peak)
    # Mostly deep cloud; one case in eight a shallow cloud whose top may be too warm for ice.
    p_top = float(rng.uniform(760, 880) if rng.random() < 0.125 else rng.uniform(420, 720))
    dry_base = float(rng.uniform(0, 60)) if rng.random() < 0.25 else 0.0  # hPa of dry air
    depression = np.where(pressure >= p_top, rng.uniform(0.2, 1.2, pressure.size),
                          rng.uniform(12, 25, pressure.size))
    depression = np.where(pressure > p_sfc - dry_base, rng.uniform(3, 7, pressure.size),
                          depression)
    dewpoint = temperature - depression
    levels = [{"pressure_hpa": round(float(p), 1), "temperature_c": round(float(t), 1),
               "dewpoint_c": round(float(d), 1)} for p, t, d in zip(pressure, temperature,
                                                                     dewpoint)]
    params.update(p_top=p_top, dry_base=dry_base)
    return {"levels": levels}, params


def _logistic(x: float) -> float:
    return 1.0 / (1.0 + float(np.exp(-x)))


def _melting_potential_k_m(temperature: np.ndarray, z: np.ndarray, mask: np.ndarray) -> float:
    """``sum max(T, 0) dz`` over the levels in ``mask`` (K m), trapezoids on the design grid."""
    warm = np.where(mask, np.maximum(temperature, 0.0), 0.0)
    return float(np.sum(0.5 * (warm[1:] + warm[:-1]) * np.diff(z)))


def truth(doc: dict, params: dict, rng: np.random.Generator) -> str:
    """The observed type drawn from the design of one profile (module notes: an invented
    process sharing nothing with ptype's methods)."""
    lv = doc["levels"]
    p = np.array([x["pressure_hpa"] for x in lv])
    t = np.array([x["temperature_c"] for x in lv])
    dd = t - np.array([x["dewpoint_c"] for x in lv])
    z = 8000.0 * np.log(p[0] / p)
    freezing_surface = t[0] <= 0.0
    t_top = float(np.interp(-params["p_top"], -p, t))
    if rng.random() > _logistic(-(t_top + 11.0) / 2.0):
        return "FZDZ" if freezing_surface else "DZ"
    warm = t > 0.0
    surface_run = np.cumprod(warm).astype(bool)
    aloft = warm & ~surface_run & (p > 500.0)
    m_aloft = _melting_potential_k_m(t, z, aloft)
    if aloft.any() and float(np.mean(dd[aloft])) > 3.0:
        m_aloft *= 0.5  # a dry nose: sublimation cools the falling snow
    f = 1.0 - np.exp(-m_aloft / (600.0 * np.exp(0.35 * rng.standard_normal())))
    g = 1.0 - np.exp(-_melting_potential_k_m(t, z, surface_run)
                     / (250.0 * np.exp(0.35 * rng.standard_normal())))
    if f <= 0.1:  # snow reaches the surface layer
        return "RA" if g > 0.8 else ("RASN" if g > 0.3 else "SN")
    below = ~aloft & (z < z[np.flatnonzero(aloft)[0]]) if aloft.any() else np.zeros_like(warm)
    t_cold = float(t[below].min()) if below.any() else 0.0
    d_cold = float(z[below].max() - z[below].min()) if below.any() else 0.0
    if f > 0.9:
        r = _logistic((-t_cold - 7.0) / 1.5) * (1.0 - np.exp(-d_cold / 500.0))
    else:
        r = _logistic((-t_cold - 1.0) / 1.0)
    u = rng.random()
    frozen = "pellets" if u < r * 0.8 else ("mix" if u < min(1.0, r * 1.2) else "liquid")
    if not freezing_surface:
        if frozen == "liquid" or g > 0.8:
            return "RA"
        return "RAPL" if (frozen == "mix" or g > 0.3) else "PL"
    return {"pellets": "PL", "mix": "FZRAPL", "liquid": "FZRA"}[frozen]


def write_report(code: str, rng: np.random.Generator) -> str:
    """Write a class the way a present-weather report would (METAR w'w' groups)."""
    sign = rng.choice(["-", "", "+"], p=[0.5, 0.38, 0.12])
    if code == "SN":
        body = rng.choice(["SN", "SN", "SHSN", "SG"], p=[0.6, 0.2, 0.15, 0.05])
    elif code == "RA":
        body = rng.choice(["RA", "SHRA", "RADZ"], p=[0.7, 0.2, 0.1])
    elif code == "RASN":
        body = rng.choice(["RASN", "SNRA", "SHRASN"])
    elif code == "RAPL":
        body = rng.choice(["RAPL", "PLRA"])
    elif code == "FZRAPL":
        body = rng.choice(["FZRA PL", "FZRAPL", "PL FZRA"], p=[0.6, 0.25, 0.15])
    elif code == "PL":
        body = rng.choice(["PL", "PL", "PLSN"], p=[0.6, 0.3, 0.1])
    else:  # FZRA, FZDZ, DZ
        body = code
    text = sign + body
    extra = []
    if code in ("FZDZ", "DZ", "FZRA") and rng.random() < 0.5:
        extra.append(rng.choice(["BR", "FG", "FZFG"]) if code != "DZ" else "BR")
    if code == "SN" and sign == "+" and rng.random() < 0.6:
        extra.append("BLSN")
    if rng.random() < 0.15:
        extra.append("BR")
    return " ".join([text] + sorted(set(extra), key=extra.index))


def main(argv: list[str] | None = None) -> int:
    """Write the set beside this script, or into the folder given as the only argument."""
    argv = sys.argv[1:] if argv is None else argv
    root = Path(argv[0]) if argv else HERE
    rng = np.random.default_rng(SEED)
    # The observations draw from a stream of their own, so the profiles stay the same.
    truth_rng = np.random.default_rng(SEED + 1)
    out_dir = root / "profiles"
    out_dir.mkdir(parents=True, exist_ok=True)
    for old in out_dir.glob("case_*.json"):
        old.unlink()
    start = datetime(2025, 1, 13, 0, tzinfo=UTC)
    rows = []
    counts: dict[str, int] = {}
    for i in range(N_CASES):
        doc, params = build_profile(rng)
        site = SITES[i % len(SITES)]
        valid = start + timedelta(hours=3 * (i // len(SITES)))
        doc = {"site": {"id": site.lower().replace(" ", "-"), "name": site},
               "valid_time": valid.strftime("%Y-%m-%dT%H:%MZ"),
               "source": "invented verification demo", **doc}
        Profile.from_document(doc)  # the documents must be valid profiles
        code = truth(doc, params, truth_rng)
        if truth_rng.random() < NOISE and code in NEIGHBOURS:
            code = str(truth_rng.choice(NEIGHBOURS[code]))
        counts[code] = counts.get(code, 0) + 1
        report = write_report(code, truth_rng)
        # A handful of reports that cannot be verified, for the exclusion accounting.
        if i % 60 == 17:
            report = truth_rng.choice(["UP", "-FZUP BR"])
        elif i % 80 == 41:
            report = "SHGS"
        elif i % 120 == 73:
            report = "RAIN?"
        name = f"case_{i + 1:03d}.json"
        (out_dir / name).write_text(json.dumps(doc, separators=(",", ":")) + "\n")
        rows.append({"profile": f"profiles/{name}", "observed": report,
                     "valid_time": doc["valid_time"], "site": site})
    with open(root / "cases.csv", "w", newline="") as fh:
        fh.write("# Invented verification demo set (see README.md); made by make_cases.py\n")
        writer = csv.DictWriter(fh, fieldnames=["profile", "observed", "valid_time", "site"],
                                lineterminator="\n")
        writer.writeheader()
        writer.writerows(rows)
    print(f"wrote {N_CASES} cases to {root}; classes before text/exclusions: "
          + ", ".join(f"{k} {v}" for k, v in sorted(counts.items())))
    return 0


if __name__ == "__main__":
    sys.exit(main())
