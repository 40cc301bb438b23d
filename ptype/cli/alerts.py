"""``ptype alerts``: list the alerts in the service's database (active by default)."""

from __future__ import annotations

import argparse
import json


def register(sub: argparse._SubParsersAction) -> None:
    """Add the ``alerts`` command to the sub-command parsers ``sub``."""
    p = sub.add_parser("alerts", help="list alerts from the service's database",
                       description="List the alerts stored by the service (PTYPE_DATABASE_URL "
                                   "or PTYPE_DATA_DIR), active ones by default.")
    p.add_argument("--format", choices=("table", "json", "cap", "atom"), default="table",
                   help="table, JSON, CAP 1.2 XML (one document per alert) or an Atom feed")
    p.add_argument("--all", action="store_true", help="include alerts ended in the last 24 h")
    p.add_argument("--evaluate", action="store_true",
                   help="re-evaluate every site's alerts now before listing (for cron)")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    """List (and with ``--evaluate`` first re-evaluate) the stored alerts; exit status."""
    import os

    from ptype.clock import utcnow
    from ptype.constants import CAUTION
    from ptype.errors import OptionError
    from ptype.roads.alerts import service
    from ptype.roads.alerts.cap import deployment_scope
    from ptype.store import Alert, open_store
    try:
        scope = deployment_scope()
    except ValueError as exc:  # checked before anything is read or written
        raise OptionError(f"PTYPE_CAP_SCOPE: {exc}", field="PTYPE_CAP_SCOPE") from None
    store = open_store()
    now = utcnow()
    sender = os.environ.get("PTYPE_CAP_SENDER") or "ptype@localhost"
    with store.write() as s:
        if args.evaluate:
            service.evaluate_all(s, now, cap_status=os.environ.get("PTYPE_CAP_STATUS"))
        service.expire_due(s, now)
    with store.read() as s:
        alerts = service.list_alerts(s, now, sender, include_recent=args.all)
        if args.format == "cap":
            status = os.environ.get("PTYPE_CAP_STATUS")  # else the status recorded
            for a in alerts:
                print(service.cap_for(s.get(Alert, a["id"]), sender, status, 10.0,
                                      **scope).decode())
            return 0
    if args.format == "json":
        print(json.dumps({"alerts": alerts, "caution": CAUTION}, indent=2))
        return 0
    if args.format == "atom":
        from ptype.roads.alerts.atom import build_feed
        print(build_feed(alerts, base_url="", sender=sender, now=now).decode())
        return 0
    if not alerts:
        print("no alerts")
    else:
        print(f"{'status':<10} {'severity':<9} {'event':<23} {'onset':<21} {'expires':<21} site")
        for a in alerts:
            print(f"{a['status']:<10} {a['severity']:<9} {a['event']:<23} {a['onset']:<21} "
                  f"{a['expires']:<21} {a['site']['name']}")
    print(CAUTION)
    return 0
