"""``ptype keys create|list|revoke``: API keys for the write endpoints of the service.

The database is the one the service uses (``PTYPE_DATABASE_URL``, else ``ptype.sqlite3``
under ``PTYPE_DATA_DIR``).  ``create`` prints the new key on the last line of standard
output; only its salted hash is stored, so it cannot be shown again.
"""

from __future__ import annotations

import argparse
import json


def register(sub: argparse._SubParsersAction) -> None:
    """Add the ``keys`` command to the sub-command parsers ``sub``."""
    p = sub.add_parser("keys", help="create, list or revoke API keys for the service",
                       description="Manage the API keys that the service's write endpoints "
                                   "require (Authorization: Bearer KEY).")
    ks = p.add_subparsers(dest="keys_command", metavar="ACTION", parser_class=type(p))
    c = ks.add_parser("create", help="create a key and print it (shown once)")
    c.add_argument("--name", required=True, help="who or what the key is for")
    c.add_argument("--owner", help="whose sites the key writes (default: the name); sites it "
                                   "creates belong to this owner")
    c.add_argument("--admin", action="store_true",
                   help="an administrator's key: may write to every owner's sites")
    c.set_defaults(func=run_create)
    li = ks.add_parser("list", help="list keys (never the secrets)")
    li.add_argument("--format", choices=("table", "json"), default="table")
    li.set_defaults(func=run_list)
    r = ks.add_parser("revoke", help="revoke a key by its id (or the full key)")
    r.add_argument("key_id")
    r.set_defaults(func=run_revoke)
    p.set_defaults(func=lambda args: (p.print_help(), 2)[1])


def _store():
    from ptype.store import open_store
    return open_store()


def run_create(args: argparse.Namespace) -> int:
    """Create a key and print it once; exit status."""
    from ptype.clock import utcnow
    from ptype.store import keys
    store = _store()
    try:
        with store.write() as s:
            key, info = keys.create_key(s, args.name, utcnow(), owner=args.owner,
                                        admin=args.admin)
    except ValueError as exc:
        from ptype.errors import OptionError
        raise OptionError(str(exc), field=str(exc).split(":")[0]) from None
    kind = "administrator key" if info.admin else "key"
    print(f"created {kind} {info.key_id} for {info.name!r} (owner {info.owner!r}); store it "
          "now, it is not shown again:")
    print(key)
    return 0


def run_list(args: argparse.Namespace) -> int:
    """List the keys (never their secrets); exit status."""
    from ptype.store import keys
    with _store().read() as s:
        rows = [k.to_dict() for k in keys.list_keys(s)]
    if args.format == "json":
        print(json.dumps({"keys": rows}, indent=2))
        return 0
    print(f"{'key id':<14} {'status':<8} {'admin':<6} {'created':<21} {'owner':<20} name")
    for r in rows:
        admin = "yes" if r["admin"] else "no"
        print(f"{r['key_id']:<14} {r['status']:<8} {admin:<6} {r['created_at']:<21} "
              f"{r['owner']:<20} {r['name']}")
    return 0


def run_revoke(args: argparse.Namespace) -> int:
    """Revoke a key by its id or full value; exit status."""
    from ptype.clock import utcnow
    from ptype.errors import OptionError
    from ptype.store import keys
    with _store().write() as s:
        info = keys.revoke_key(s, args.key_id, utcnow())
    if info is None:
        raise OptionError(f"key_id = {args.key_id!r}: no such key (see 'ptype keys list')",
                          field="key_id")
    print(f"revoked key {info.key_id} ({info.name})")
    return 0
