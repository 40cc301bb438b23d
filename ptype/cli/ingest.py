"""``ptype ingest FILE...``: model runs (GRIB2 or CF NetCDF) into every registered site."""

from __future__ import annotations

import argparse
import json
import os


def register(sub: argparse._SubParsersAction) -> None:
    """Add the ``ingest`` command to the sub-command parsers ``sub``."""
    p = sub.add_parser(
        "ingest", help="store model runs (GRIB2 or CF NetCDF) as forecast profiles of every "
                       "registered site, then evaluate their alerts",
        description="For every site in the service's database (PTYPE_DATABASE_URL or "
                    "PTYPE_DATA_DIR): the model column at the site (bilinear), moved to the "
                    "site's elevation, stored as forecast profiles (issued at the run's "
                    "reference time, one per valid time); then the sites' alerts are "
                    "evaluated.  A file already ingested is skipped; a newer run supersedes "
                    "an older one.  See docs/operations.md.",
        epilog="Example: ptype ingest run_2031011406.grib2 --sites my_sites.json && "
               "ptype alerts --format cap")
    p.add_argument("files", nargs="+", metavar="FILE", help="GRIB2 or CF NetCDF model run(s)")
    p.add_argument("--sites", default=None, metavar="SITES.json",
                   help="first add or update the road sites of this file ({\"sites\": "
                        "[{\"id\", \"name\", \"latitude\", \"longitude\", "
                        "\"elevation_m\", \"thresholds\"}]}, as soundings_demo/sites.json)")
    p.add_argument("--source", default=None, metavar="NAME",
                   help="source name of the stored profiles (default: model)")
    p.add_argument("--no-alerts", action="store_true",
                   help="store the profiles only; do not evaluate alerts")
    p.add_argument("--format", choices=("text", "json"), default="text", help="output format")
    p.add_argument("-v", "--verbose", action="store_true", help="log progress on stderr")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    """Ingest every file in turn; exit status 2 at the first unreadable one."""
    from ptype.clock import utcnow
    from ptype.constants import CAUTION
    from ptype.ingest.pipeline import DEFAULT_SOURCE, ingest_file
    from ptype.store import open_store
    if args.verbose:
        import logging
        import sys
        logging.basicConfig(level=logging.INFO, stream=sys.stderr,
                            format="%(asctime)s %(name)s %(levelname)s %(message)s")
    for path in args.files:
        if not os.path.isfile(path):
            raise FileNotFoundError(2, "No such file or directory", path)
    store = open_store()
    if args.sites:
        from ptype.ingest.sites_file import load_sites
        counts = load_sites(store, args.sites, utcnow())
        if args.format == "text":
            print(f"{args.sites}: {counts['added']} sites added, {counts['updated']} updated")
    results = []
    for path in args.files:
        results.append(ingest_file(store, path, now=utcnow(), source=args.source or
                                   DEFAULT_SOURCE, evaluate=not args.no_alerts,
                                   cap_status=os.environ.get("PTYPE_CAP_STATUS")))
    if args.format == "json":
        print(json.dumps({"files": results, "caution": CAUTION}, indent=2))
        return 0
    for r in results:
        print(describe(r))
    print(CAUTION)
    return 0


def describe(r: dict) -> str:
    """One file's result in a line or two."""
    if r["status"] != "ingested":
        return f"{r['file']}: {r['status']}"
    runs = ", ".join(f"run {x['reference_time']} ({x['steps']} steps)" for x in r["runs"])
    line = f"{r['file']}: {r['profiles']} profiles for {r['sites']} sites from {runs}"
    if r.get("skipped"):
        line += f"; {len(r['skipped'])} sites skipped (outside the model grid)"
    if "alerts" in r:
        acts = ", ".join(f"{k} {v}" for k, v in sorted(r["alerts"].items())) or "no change"
        line += f"; alerts: {acts}"
    return line
