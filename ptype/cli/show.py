"""``ptype show PATH``: print a parsed profile with derived columns."""

from __future__ import annotations

import argparse
import json

from ptype.constants import CAUTION
from ptype.profile import Profile
from ptype.readers import read_profile


def register(sub: argparse._SubParsersAction) -> None:
    """Add the ``show`` command to the sub-command parsers ``sub``."""
    p = sub.add_parser("show",
                       help="print a parsed profile with derived columns (height, RH, wet-bulb)",
                       description="Read one profile (JSON, CSV, WMO TEMP or NetCDF) and print its "
                                   "levels surface -> top with height, relative humidity and "
                                   "wet-bulb.")
    p.add_argument("path", help="profile file, or - for standard input")
    p.add_argument("--format", choices=("table", "json"), default="table", help="output format")
    p.add_argument("--input-format", choices=("json", "csv", "temp", "netcdf"), default=None,
                   help="skip format detection")
    p.set_defaults(func=run)


def profile_rows(profile: Profile) -> list[dict]:
    """One row per level, surface first: pressure, height, T, Td, RH and the
    isobaric wet-bulb, rounded for display."""
    rh = profile.relative_humidity_pct
    tw = profile.wetbulb_c("isobaric")
    rows = []
    for i in range(profile.n_levels):
        rows.append({"pressure_hpa": round(float(profile.pressure_hpa[i]), 1),
                     "height_m": round(float(profile.height_m[i]), 0),
                     "temperature_c": round(float(profile.temperature_c[i]), 1),
                     "dewpoint_c": round(float(profile.dewpoint_c[i]), 1),
                     "relative_humidity_pct": round(float(rh[i]), 0),
                     "wetbulb_c": round(float(tw[i]), 1)})
    return rows


def run(args: argparse.Namespace) -> int:
    """Print one profile with its derived columns; exit status."""
    import sys
    # Standard input as bytes: text formats are decoded as UTF-8, NetCDF is recognised by its
    # signature.
    source = sys.stdin.buffer.read() if args.path == "-" else args.path
    profile = read_profile(source, format=args.input_format)
    rows = profile_rows(profile)
    if args.format == "json":
        out = profile.to_document()
        out["derived"] = rows
        out["warnings"] = list(profile.warnings)
        out["caution"] = CAUTION
        print(json.dumps(out, indent=2))
        return 0
    head = []
    if profile.site is not None and (profile.site.name or profile.site.id):
        head.append(profile.site.name or profile.site.id)
    if profile.valid_time is not None:
        head.append(profile.valid_time.strftime("%Y-%m-%d %H:%M UTC"))
    elif profile.source:
        head.append(profile.source)  # e.g. a TEMP's day and hour when the month is unknown
    if head:
        print(" | ".join(head))
    print(f"{'p hPa':>8} {'z m':>7} {'T C':>6} {'Td C':>6} {'RH %':>5} {'Tw C':>6}")
    for r in rows:
        print(f"{r['pressure_hpa']:8.1f} {r['height_m']:7.0f} {r['temperature_c']:6.1f} "
              f"{r['dewpoint_c']:6.1f} {r['relative_humidity_pct']:5.0f} {r['wetbulb_c']:6.1f}")
    for w in profile.warnings:
        print(f"note: {w}")
    print(CAUTION)
    return 0
