"""``ptype timeline FILES...``: the type timeline of a series of profile files (no database)."""

from __future__ import annotations

import argparse
import json


def register(sub: argparse._SubParsersAction) -> None:
    """Add the ``timeline`` command to the sub-command parsers ``sub``."""
    p = sub.add_parser("timeline", help="type, hazards and transitions over a series of profiles",
                       description="Read a series of profiles (each with a valid time), "
                                   "interpolate between them and print the type, its probability "
                                   "and the road hazards at each step, with the transitions.")
    p.add_argument("files", nargs="+", help="profile files (JSON, CSV, TEMP, NetCDF)")
    p.add_argument("--format", choices=("table", "json"), default="table")
    p.add_argument("--step", default="1h", help="step length, e.g. 15min or 1h (default 1h)")
    p.add_argument("--hours", type=float, default=None,
                   help="length in hours (default: the whole series)")
    p.add_argument("--now", default=None, help="start time, ISO 8601 (default: first valid time)")
    p.add_argument("--members", type=int, default=30, help="Monte-Carlo members (0 = none)")
    p.add_argument("--seed", type=int, default=0)
    p.add_argument("--no-adjust", action="store_true",
                   help="no onset or melting-layer cooling adjustments")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    """Build and print the timeline of a series of profiles; exit status."""
    from ptype.clock import parse_time
    from ptype.constants import CAUTION
    from ptype.errors import ProfileError
    from ptype.readers import read_profile
    from ptype.roads.nowcast import ADJUSTMENTS, build_timeline
    profiles = [read_profile(f) for f in args.files]
    for path, pr in zip(args.files, profiles, strict=True):
        if pr.valid_time is None:
            raise ProfileError(f"{path}: valid_time is missing; every profile of a timeline "
                               "needs one", field="valid_time")
    times = sorted(p.valid_time for p in profiles if p.valid_time is not None)
    hours = args.hours
    if hours is None and times:
        hours = max((times[-1] - times[0]).total_seconds() / 3600.0, 0.01)
    out = build_timeline(profiles, now=parse_time(args.now, "now") if args.now else None,
                         hours=hours or 1.0, step=args.step, members=args.members,
                         seed=args.seed, adjustments=() if args.no_adjust else ADJUSTMENTS)
    if args.format == "json":
        print(json.dumps(out, indent=2))
        return 0
    print(f"{'valid time (UTC)':<17} {'type':<7} {'p':>5} {'P(frz)':>6} {'road C':>6} "
          f"{'mm/h':>5} {'ice mm':>6}  hazards")
    for s in out["steps"]:
        hz = s["hazards"]
        p = s["probabilities"].get(s["ptype"])
        flags = [name for name, on in (("freezing-on-road", hz["freezing_on_road"]),
                                       ("frost", hz["frost"]), ("snow", hz["snow"])) if on]

        def f(v, fmt):
            return format(v, fmt) if v is not None else "-"
        print(f"{s['valid_time'][:16].replace('T', ' '):<17} {s['ptype']:<7} "
              f"{f(p, '5.2f'):>5} {f(hz['freezing_probability'], '6.2f'):>6} "
              f"{f(s['surface']['road_surface_temperature_c'], '6.1f'):>6} "
              f"{f(s['surface']['precipitation_rate_mm_h'], '5.1f'):>5} "
              f"{f(hz['ice_accretion_mm'], '6.2f'):>6}  {' '.join(flags)}")
    if out["transitions"]:
        print("transitions:")
        for t in out["transitions"]:
            print(f"  {t['time']}  {t['from']} -> {t['to']}")
    tot = out["totals"]
    if tot:
        print(f"totals: ice accretion {tot['ice_accretion_mm']} mm, flat glaze "
              f"{tot['flat_glaze_mm']} mm, snow {tot['snow_cm']} cm, freezing on road "
              f"{tot['freezing_on_road_hours']} h, frost {tot['frost_hours']} h")
    print(CAUTION)
    return 0
