"""``ptype alerts``: list the alerts in the service's database (active by default).

A listing only reads: alerts past their expiry are shown expired without being changed in
the store.  The alert lifecycle is written only by an evaluation (``--evaluate`` here,
``POST /v1/alerts/evaluate`` or an ingest in the service).  Every output states the clock
used, the same one the service uses (:func:`ptype.store.demo.store_clock`).
"""

from __future__ import annotations

import argparse
import json


def register(sub: argparse._SubParsersAction) -> None:
    """Add the ``alerts`` command to the sub-command parsers ``sub``."""
    p = sub.add_parser("alerts", help="list alerts from the service's database",
                       description="List the alerts stored by the service (PTYPE_DATABASE_URL "
                                   "or PTYPE_DATA_DIR), active ones by default, at the "
                                   "service's clock (PTYPE_NOW, else the demo's clock in a "
                                   "demo store, else the system clock). Listing never "
                                   "changes the store.")
    p.add_argument("--format", choices=("table", "json", "cap", "atom"), default="table",
                   help="table, JSON, CAP 1.2 XML (one document per alert) or an Atom feed")
    p.add_argument("--all", action="store_true", help="include alerts ended in the last 24 h")
    p.add_argument("--evaluate", action="store_true",
                   help="re-evaluate every site's alerts at the clock and record the changes "
                        "before listing (for cron); without it nothing is written")
    p.set_defaults(func=run)


def run(args: argparse.Namespace) -> int:
    """List (and with ``--evaluate`` first re-evaluate) the stored alerts; exit status."""
    import os

    from ptype.errors import OptionError
    from ptype.roads.alerts.cap import deployment_scope
    from ptype.store import open_existing_store, open_store
    from ptype.store.demo import store_clock
    try:
        scope = deployment_scope()
    except ValueError as exc:  # checked before anything is read or written
        raise OptionError(f"PTYPE_CAP_SCOPE: {exc}", field="PTYPE_CAP_SCOPE") from None
    store = open_store() if args.evaluate else open_existing_store()
    clock = store_clock(store)
    sender = os.environ.get("PTYPE_CAP_SENDER") or "ptype@localhost"
    if args.evaluate:
        from ptype.roads.alerts import service
        with store.write() as s:
            service.evaluate_all(s, clock.now, cap_status=os.environ.get("PTYPE_CAP_STATUS"))
            service.expire_due(s, clock.now)
    if args.format == "cap":
        _print_cap(store, clock.now, sender, args.all, scope)
        return 0
    alerts = _listing(store, clock.now, sender, args.all)
    _print(alerts, clock, sender, args.format, args.all)
    return 0


def _listing(store, now, sender: str, include_recent: bool) -> list[dict]:
    from ptype.roads.alerts import service
    if store is None:
        return []
    with store.read() as s:
        return service.list_alerts(s, now, sender, include_recent=include_recent)


def _print_cap(store, now, sender: str, include_recent: bool, scope: dict) -> None:
    """One CAP document per listed alert (the status recorded unless PTYPE_CAP_STATUS)."""
    import os

    from ptype.roads.alerts import service
    from ptype.store import Alert
    if store is None:
        return
    status = os.environ.get("PTYPE_CAP_STATUS")
    with store.read() as s:
        for a in service.list_alerts(s, now, sender, include_recent=include_recent):
            print(service.cap_for(s.get(Alert, a["id"]), sender, status, 10.0,
                                  **scope).decode())


def _print(alerts: list[dict], clock, sender: str, fmt: str, include_recent: bool) -> None:
    from ptype.constants import CAUTION
    if fmt == "json":
        print(json.dumps({"alerts": alerts, "now": clock.to_dict()["now"],
                          "clock": clock.to_dict(), "caution": CAUTION}, indent=2))
        return
    if fmt == "atom":
        from ptype.roads.alerts.atom import build_feed
        print(build_feed(alerts, base_url="", sender=sender, now=clock.now).decode())
        return
    kind = "Active and recently ended alerts" if include_recent else "Active alerts"
    print(f"{kind} at {clock.describe()}")
    if not alerts:
        print("No alerts active or ended in the last 24 h." if include_recent
              else "No active alerts.")
    else:
        print(f"{'status':<10} {'severity':<9} {'event':<23} {'onset':<21} {'expires':<21} site")
        for a in alerts:
            print(f"{a['status']:<10} {a['severity']:<9} {a['event']:<23} {a['onset']:<21} "
                  f"{a['expires']:<21} {a['site']['name']}")
    print(CAUTION)
