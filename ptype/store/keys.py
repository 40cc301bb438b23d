"""API keys: random secrets shown once, stored only as a salted scrypt hash.

A key reads ``ptk_<key_id>_<secret>``: ``key_id`` (12 hex digits) finds the
row (a key whose id names no row is refused without computing any hash), and
``secret`` (32 random bytes, URL-safe base64) is checked against
``scrypt(secret, salt)`` with a per-key 16-byte salt (RFC 7914; Python's
``hashlib.scrypt``) and compared in constant time with
:func:`hmac.compare_digest`.  The secret carries 256 bits of entropy, so the
KDF is defence in depth against a leaked database, not the main barrier; its
cost (n = 2**14, r = 8, p = 1, about 16 MiB and a few tens of ms) follows the
RFC 7914 interactive-login example.

Every key belongs to an owner (the key's name unless another is given): the sites it
creates are that owner's and it may write only to them; an administrator's key
(``admin=True``) may write everywhere.
"""

from __future__ import annotations

import hashlib
import hmac
import secrets
from dataclasses import dataclass
from datetime import datetime

import sqlalchemy as sa
from sqlalchemy.orm import Session

from ptype.store.models import ApiKey

PREFIX = "ptk"
SCRYPT_N, SCRYPT_R, SCRYPT_P = 2 ** 14, 8, 1
KDF_NAME = f"scrypt:n={SCRYPT_N},r={SCRYPT_R},p={SCRYPT_P}"
#: Longest key id and secret a presented key may have (ours: 12 and 43 characters).
KEY_ID_MAX_LENGTH = 32
SECRET_MAX_LENGTH = 128


def _parse_kdf(kdf: str) -> tuple[int, int, int]:
    name, _, params = kdf.partition(":")
    if name != "scrypt":
        raise ValueError(f"unsupported key-derivation function {kdf!r}")
    values = dict(part.split("=") for part in params.split(","))
    return int(values["n"]), int(values["r"]), int(values["p"])


def hash_secret(secret: str, salt: bytes, kdf: str = KDF_NAME) -> bytes:
    """The scrypt hash (RFC 7914) of ``secret`` with ``salt`` and the parameters named by
    ``kdf``, 32 bytes."""
    n, r, p = _parse_kdf(kdf)
    return hashlib.scrypt(secret.encode("utf-8"), salt=salt, n=n, r=r, p=p,
                          maxmem=256 * 1024 * 1024, dklen=32)


@dataclass(frozen=True)
class KeyInfo:
    """What may be shown about a key: id, name, times; never the secret."""

    key_id: str
    name: str
    created_at: datetime
    revoked_at: datetime | None
    owner: str = ""
    admin: bool = False

    def to_dict(self) -> dict:
        """JSON-ready form with the status (active or revoked)."""
        from ptype.clock import iso
        return {"key_id": self.key_id, "name": self.name, "owner": self.owner,
                "admin": self.admin, "created_at": iso(self.created_at),
                "revoked_at": iso(self.revoked_at),
                "status": "revoked" if self.revoked_at else "active"}


def _info(row: ApiKey) -> KeyInfo:
    return KeyInfo(row.key_id, row.name, row.created_at, row.revoked_at, row.owner,
                   bool(row.is_admin))


def _label(value: str | None, field: str) -> str:
    """A key name or owner: one line of 1 to 200 characters, stripped."""
    from ptype.store.text import first_bad_line_character
    text = (value or "").strip()
    if not text:
        raise ValueError(f"{field}: expected a non-empty {field}")
    if len(text) > 200:
        raise ValueError(f"{field}: {len(text)} characters; at most 200")
    bad = first_bad_line_character(text)
    if bad is not None:
        raise ValueError(f"{field}: holds the character U+{ord(bad):04X}; control characters "
                         "and line breaks are not allowed")
    return text


def create_key(session: Session, name: str, now: datetime, *, owner: str | None = None,
               admin: bool = False) -> tuple[str, KeyInfo]:
    """Store a new key and return ``(full_key, info)``; the full key is never stored.

    ``owner`` defaults to ``name``; ``admin`` makes it an administrator's key.
    """
    name = _label(name, "name")
    owner = _label(owner, "owner") if owner is not None else name
    key_id = secrets.token_hex(6)
    secret = secrets.token_urlsafe(32)
    salt = secrets.token_bytes(16)
    row = ApiKey(key_id=key_id, name=name, salt_hex=salt.hex(),
                 hash_hex=hash_secret(secret, salt).hex(), kdf=KDF_NAME, created_at=now,
                 owner=owner, is_admin=bool(admin))
    session.add(row)
    session.flush()
    return f"{PREFIX}_{key_id}_{secret}", _info(row)


def list_keys(session: Session) -> list[KeyInfo]:
    """Every key, oldest first."""
    return [_info(r) for r in session.scalars(sa.select(ApiKey).order_by(ApiKey.id))]


def revoke_key(session: Session, key_id: str, now: datetime) -> KeyInfo | None:
    """Revoke by key id (or by the full key); None when no such key exists."""
    if key_id.startswith(PREFIX + "_"):
        key_id = key_id.split("_")[1]
    row = session.scalars(sa.select(ApiKey).where(ApiKey.key_id == key_id)).first()
    if row is None:
        return None
    if row.revoked_at is None:
        row.revoked_at = now
    return _info(row)


def verify_key(session: Session, presented: str) -> tuple[str, KeyInfo | None]:
    """Check a presented key: returns ``("ok"|"unknown"|"revoked", info)``."""
    parts = presented.strip().split("_", 2)
    if len(parts) != 3 or parts[0] != PREFIX or not parts[1] or not parts[2]:
        return "unknown", None
    if len(parts[1]) > KEY_ID_MAX_LENGTH or len(parts[2]) > SECRET_MAX_LENGTH:
        return "unknown", None
    row = session.scalars(sa.select(ApiKey).where(ApiKey.key_id == parts[1])).first()
    if row is None:
        # No scrypt for a key id that names no key: an unknown key costs one indexed
        # lookup, so guessing keys cannot load the server.  (That a key id exists says
        # nothing about its 256-bit secret.)
        return "unknown", None
    digest = hash_secret(parts[2], bytes.fromhex(row.salt_hex), row.kdf)
    if not hmac.compare_digest(digest, bytes.fromhex(row.hash_hex)):
        return "unknown", None
    if row.revoked_at is not None:
        return "revoked", _info(row)
    return "ok", _info(row)
