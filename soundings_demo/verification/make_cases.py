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

Truth rule ("observed" before noise; ours, physically motivated)
---------------------------------------------------------------
1. Ice in cloud: the cloud-top temperature must be below -10 degC (heterogeneous
   nucleation is likely below about -10 degC; NWS training material quoted in the
   methods brief, section 6).  Otherwise the cloud is supercooled liquid: drizzle,
   FZDZ when the surface wet-bulb is <= 0 degC, else DZ.
2. Elevated warm layer (wet-bulb nose above 0 degC): melting follows the peak wet-bulb
   of the nose (Stewart & King 1987 as quoted in the methods brief, section 6):
   below 0.5 degC it is ignored; 0.5-1.5 partial melting; 1.5-3 most of the mass melts;
   above 3 complete melting.  Then the surface:
   - surface wet-bulb > 0.5 degC: complete melting -> RA, otherwise RAPL (PL if the cold
     layer below the nose is colder than -8 degC and melting was only partial);
   - surface wet-bulb <= 0.5 degC: partial -> PL; most melted -> PL if the cold layer is
     colder than -6 degC, else FZRAPL; complete -> PL below -10 degC, FZRAPL from -10 to
     -6 degC, FZRA otherwise (refreezing needs about -8 degC or colder, WPC slides quoted
     in section 6; the exact bands are ours).
3. No elevated warm layer: depth of the surface-based wet-bulb warm layer (snow
   survives roughly 300 m below the melting level, section 6): < 250 m SN,
   250-500 m RASN, > 500 m RA.

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

from ptype import thermo
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


def truth(profile: Profile, p_top: float) -> str:
    """The documented truth rule (module docstring) applied to a validated profile."""
    p, z = profile.pressure_hpa, profile.height_m
    t = profile.temperature_c
    tw = thermo.wet_bulb_temperature(p, t, profile.dewpoint_c)
    tw_sfc = float(tw[0])
    cloud_top_t = float(np.interp(-p_top, -p, t))
    if cloud_top_t > -10.0:
        return "FZDZ" if tw_sfc <= 0.0 else "DZ"
    above0 = tw > 0
    # Elevated warm layer: a run of Tw > 0 that does not touch the surface.
    first_cold = int(np.argmax(~above0)) if (~above0).any() else len(tw)
    aloft = above0.copy()
    aloft[:first_cold] = False
    aloft &= p > 500
    nose_tw = float(tw[aloft].max()) if aloft.any() else -np.inf
    if nose_tw >= 0.5:
        k_nose = int(np.flatnonzero(aloft)[0])
        cold_min = float(t[:k_nose].min())
        melt = "partial" if nose_tw < 1.5 else ("most" if nose_tw < 3.0 else "complete")
        if tw_sfc > 0.5:
            if melt == "complete":
                return "RA"
            return "PL" if (melt == "partial" and cold_min < -8.0) else "RAPL"
        if melt == "partial":
            return "PL"
        if melt == "most":
            return "PL" if cold_min < -6.0 else "FZRAPL"
        if cold_min < -10.0:
            return "PL"
        return "FZRAPL" if cold_min < -6.0 else "FZRA"
    # Surface-based warm layer only: its depth decides whether the snow survives.
    depth = float(np.interp(0.0, -tw[: first_cold + 1], z[: first_cold + 1]) - z[0]) \
        if tw_sfc > 0 and first_cold < len(tw) else 0.0
    if depth < 250:
        return "SN"
    return "RASN" if depth < 500 else "RA"


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
        profile = Profile.from_document(doc)
        code = truth(profile, params["p_top"])
        if rng.random() < NOISE and code in NEIGHBOURS:
            code = str(rng.choice(NEIGHBOURS[code]))
        counts[code] = counts.get(code, 0) + 1
        report = write_report(code, rng)
        # A handful of reports that cannot be verified, for the exclusion accounting.
        if i % 60 == 17:
            report = rng.choice(["UP", "-FZUP BR"])
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
