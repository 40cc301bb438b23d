"""``ptype watch DIR``: ingest every complete new model-run file dropped into a folder."""

from __future__ import annotations

import argparse
import logging
import os
import signal
import sys


def register(sub: argparse._SubParsersAction) -> None:
    """Add the ``watch`` command to the sub-command parsers ``sub``."""
    p = sub.add_parser(
        "watch", help="watch an inbox folder and ingest each complete new model-run file once",
        description="Poll DIR for GRIB2 or CF NetCDF model runs; each complete file (unchanged "
                    "for --settle seconds) is ingested once for every registered site (as "
                    "ptype ingest does) and moved to DIR/done/, or to DIR/rejected/ with a "
                    "reason file when it cannot be read.  The state is kept in the database, "
                    "so restarts and several watchers on one folder are safe.  Progress is "
                    "logged on stderr.  See docs/operations.md.")
    p.add_argument("directory", metavar="DIR", help="the inbox folder")
    p.add_argument("--interval", type=float, default=10.0, metavar="S",
                   help="seconds between polls (default 10)")
    p.add_argument("--settle", type=float, default=5.0, metavar="S",
                   help="a file must be unchanged this long to be taken (default 5)")
    p.add_argument("--once", action="store_true", help="one pass, then exit (for cron)")
    p.add_argument("--source", default=None, metavar="NAME",
                   help="source name of the stored profiles (default: model)")
    p.add_argument("--no-alerts", action="store_true", help="do not evaluate alerts")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    """Watch until SIGTERM/SIGINT (or one pass with --once); exit status."""
    from ptype.clock import utcnow
    from ptype.constants import CAUTION
    from ptype.errors import OptionError
    from ptype.ingest.inbox import Inbox
    from ptype.store import open_store
    if args.interval <= 0 or args.settle < 0:
        raise OptionError("--interval must be positive and --settle not negative",
                          field="interval")
    logging.basicConfig(level=logging.INFO, stream=sys.stderr,
                        format="%(asctime)s %(name)s %(levelname)s %(message)s")
    inbox = Inbox(open_store(), args.directory, clock=utcnow, source=args.source,
                  settle_s=args.settle, evaluate=not args.no_alerts,
                  cap_status=os.environ.get("PTYPE_CAP_STATUS"))
    if args.once:
        from ptype.cli.ingest import describe
        for result in inbox.poll_once():
            print(describe(result) if "profiles" in result or "reason" not in result
                  else f"{result['file']}: rejected: {result['reason']}")
        print(CAUTION)
        return 0
    stop = {"now": False}

    def _stop(signum, frame):
        stop["now"] = True
    signal.signal(signal.SIGTERM, _stop)
    try:
        inbox.run(args.interval, lambda: stop["now"])
    except KeyboardInterrupt:
        pass
    return 0
