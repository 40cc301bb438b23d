"""Owners: who may write to a site, and who may read it.

Every API key belongs to an owner (``ptype keys create --name N [--owner O] [--admin]``).
A site created with a key belongs to the key's owner; a write to a site (profiles,
observations, re-evaluating its alerts) needs a key of the site's owner or an
administrator's key, else 403.  Reads are open by default; with ``PTYPE_OWNER_READS``
(configuration or environment: ``1``, ``true``, ``yes``) every read of sites, timelines and
alerts needs a key as well and shows only that owner's sites (all of them to an
administrator's key); another owner's site is then a 404, as if it did not exist.
"""

from __future__ import annotations

import os
from dataclasses import dataclass

import sqlalchemy as sa
from flask import current_app
from ptype.api.errors import ApiError
from ptype.api.plumbing import get_store, require_key

from ptype.store import ApiKey, Site


@dataclass(frozen=True)
class Caller:
    """The owner behind the key of a request."""

    key_id: str
    owner: str
    admin: bool

    def may_write(self, site: Site) -> bool:
        """True when this caller may change ``site``."""
        return self.admin or site.owner == self.owner


def require_caller() -> Caller:
    """The owner of the request's key (401 without a valid key, 403 when revoked)."""
    key_id = require_key()
    with get_store().read() as s:
        row = s.execute(sa.select(ApiKey.owner, ApiKey.is_admin)
                        .where(ApiKey.key_id == key_id)).first()
    if row is None:  # removed since it was verified
        raise ApiError(401, "unauthorized", "the API key is not valid", "Authorization")
    return Caller(key_id, row.owner, bool(row.is_admin))


def check_write(caller: Caller, site: Site) -> None:
    """Refuse (403) a write by ``caller`` to another owner's ``site``."""
    if not caller.may_write(site):
        raise ApiError(403, "forbidden", f"site {site.id} belongs to another owner; this key "
                       f"(owner {caller.owner!r}) may write only to its owner's sites",
                       "site_id")


def owner_reads() -> bool:
    """True when reads are owner-scoped (``PTYPE_OWNER_READS``)."""
    value = current_app.config.get("PTYPE_OWNER_READS")
    if value is None:
        value = os.environ.get("PTYPE_OWNER_READS", "")
    return value is True or str(value).strip().lower() in ("1", "true", "yes")


def reader() -> Caller | None:
    """Who reads: None when reads are open, else the caller (a key is then needed)."""
    return require_caller() if owner_reads() else None


def read_owner(caller: Caller | None) -> str | None:
    """The owner whose sites ``caller`` may read; None for every site."""
    if caller is None or caller.admin:
        return None
    return caller.owner


def check_read(caller: Caller | None, site: Site) -> None:
    """Hide (404) another owner's site when reads are owner-scoped."""
    owner = read_owner(caller)
    if owner is not None and site.owner != owner:
        raise ApiError(404, "not_found", f"site {site.id} does not exist", "id")
