"""Versioned schema migrations.

A ``schema_version`` table records every migration applied (version, name,
time).  :data:`MIGRATIONS` is an ordered list of ``(version, name, function)``;
:func:`migrate` applies the missing ones in order, each in the same
transaction as its ``schema_version`` row, so a crash leaves the schema at a
known version.  Concurrent starters (several gunicorn workers, several hosts
on one PostgreSQL database) are serialised: SQLite by ``BEGIN IMMEDIATE`` (the
write lock), PostgreSQL by a transaction-scoped advisory lock.

Why not Alembic: the schema is small, migrations must run unattended at
service start from several processes at once, and the project ships no
separate migration tool or configuration; a table plus ordered functions does
this in one page, with the same portable SQLAlchemy DDL.  Each migration
declares its own tables (a frozen copy), so later changes to
:mod:`ptype.store.models` never rewrite history.
"""

from __future__ import annotations

from collections.abc import Callable
from datetime import UTC, datetime

import sqlalchemy as sa
from sqlalchemy.engine import Connection

_LOCK_KEY = 0x70747970  # PostgreSQL advisory-lock key ("ptyp")


def _v1_initial(conn: Connection) -> None:
    md = sa.MetaData()
    dt = sa.DateTime
    sa.Table("api_keys", md,
             sa.Column("id", sa.Integer, primary_key=True),
             sa.Column("key_id", sa.String(32), nullable=False, unique=True),
             sa.Column("name", sa.String(200), nullable=False),
             sa.Column("salt_hex", sa.String(64), nullable=False),
             sa.Column("hash_hex", sa.String(128), nullable=False),
             sa.Column("kdf", sa.String(64), nullable=False),
             sa.Column("created_at", dt, nullable=False),
             sa.Column("revoked_at", dt, nullable=True))
    sa.Table("sites", md,
             sa.Column("id", sa.Integer, primary_key=True),
             sa.Column("code", sa.String(100), nullable=True, unique=True),
             sa.Column("name", sa.String(200), nullable=False),
             sa.Column("latitude", sa.Float, nullable=False),
             sa.Column("longitude", sa.Float, nullable=False),
             sa.Column("elevation_m", sa.Float, nullable=True),
             sa.Column("thresholds", sa.JSON, nullable=False),
             sa.Column("created_at", dt, nullable=False))
    sa.Table("profiles", md,
             sa.Column("id", sa.Integer, primary_key=True),
             sa.Column("site_id", sa.Integer, sa.ForeignKey("sites.id", ondelete="CASCADE"),
                       nullable=False),
             sa.Column("source", sa.String(200), nullable=False),
             sa.Column("valid_time", dt, nullable=False),
             sa.Column("issued_time", dt, nullable=False),
             sa.Column("document", sa.JSON, nullable=False),
             sa.Column("received_at", dt, nullable=False),
             sa.UniqueConstraint("site_id", "source", "valid_time",
                                 name="uq_profiles_site_source_valid"),
             sa.Index("ix_profiles_site_issued", "site_id", "issued_time"))
    sa.Table("observations", md,
             sa.Column("id", sa.Integer, primary_key=True),
             sa.Column("site_id", sa.Integer, sa.ForeignKey("sites.id", ondelete="CASCADE"),
                       nullable=False),
             sa.Column("time", dt, nullable=False),
             sa.Column("air_temperature_c", sa.Float),
             sa.Column("dewpoint_c", sa.Float),
             sa.Column("road_surface_temperature_c", sa.Float),
             sa.Column("precipitation_rate_mm_h", sa.Float),
             sa.Column("wind_speed_m_s", sa.Float),
             sa.Column("present_weather", sa.String(40)),
             sa.Column("received_at", dt, nullable=False),
             sa.UniqueConstraint("site_id", "time", name="uq_observations_site_time"))
    sa.Table("alerts", md,
             sa.Column("id", sa.String(64), primary_key=True),
             sa.Column("site_id", sa.Integer, sa.ForeignKey("sites.id", ondelete="CASCADE"),
                       nullable=False),
             sa.Column("event", sa.String(40), nullable=False),
             sa.Column("status", sa.String(16), nullable=False),
             sa.Column("severity", sa.String(16), nullable=False),
             sa.Column("certainty", sa.String(16), nullable=False),
             sa.Column("urgency", sa.String(16), nullable=False),
             sa.Column("onset", dt, nullable=False),
             sa.Column("expires", dt, nullable=False),
             sa.Column("details", sa.JSON, nullable=False),
             sa.Column("version", sa.Integer, nullable=False),
             sa.Column("created_at", dt, nullable=False),
             sa.Column("updated_at", dt, nullable=False),
             sa.Column("ended_at", dt, nullable=True),
             sa.Index("ix_alerts_site_event_status", "site_id", "event", "status"))
    sa.Table("alert_messages", md,
             sa.Column("id", sa.Integer, primary_key=True),
             sa.Column("alert_id", sa.String(64), sa.ForeignKey("alerts.id", ondelete="CASCADE"),
                       nullable=False),
             sa.Column("seq", sa.Integer, nullable=False),
             sa.Column("identifier", sa.String(128), nullable=False, unique=True),
             sa.Column("msg_type", sa.String(16), nullable=False),
             sa.Column("sent", dt, nullable=False),
             sa.Column("snapshot", sa.JSON, nullable=False),
             sa.UniqueConstraint("alert_id", "seq", name="uq_alert_messages_seq"))
    md.create_all(conn)


#: The owner of what existed before owners (the demo sites among it): an administrator's
#: (the same name as :data:`ptype.store.models.ADMIN_OWNER`, frozen here with the schema).
ADMIN_OWNER = "admin"


def _v2_owners(conn: Connection) -> None:
    """Owners: every key belongs to one (and may be an administrator's), every site too.

    Keys made before owners could write everywhere, so they keep that right (administrator
    keys, each its own owner, named after the key); sites made before belong to
    :data:`ADMIN_OWNER`.  Plain SQL that SQLite and PostgreSQL both run.
    """
    conn.execute(sa.text("ALTER TABLE api_keys ADD COLUMN owner VARCHAR(200) NOT NULL "
                         f"DEFAULT '{ADMIN_OWNER}'"))
    conn.execute(sa.text("ALTER TABLE api_keys ADD COLUMN is_admin BOOLEAN NOT NULL "
                         "DEFAULT FALSE"))
    conn.execute(sa.text("UPDATE api_keys SET owner = name, is_admin = TRUE"))
    conn.execute(sa.text("ALTER TABLE sites ADD COLUMN owner VARCHAR(200) NOT NULL "
                         f"DEFAULT '{ADMIN_OWNER}'"))
    conn.execute(sa.text("CREATE INDEX ix_sites_owner ON sites (owner)"))


def _v3_ingested_files(conn: Connection) -> None:
    """Model-run files taken in by ``ptype ingest``/``watch``/``POST /v1/ingest``: one row per
    file content (its SHA-256), claimed by one process at a time."""
    md = sa.MetaData()
    dt = sa.DateTime
    sa.Table("ingested_files", md,
             sa.Column("id", sa.Integer, primary_key=True),
             sa.Column("file_key", sa.String(64), nullable=False, unique=True),
             sa.Column("name", sa.String(500), nullable=False),
             sa.Column("size_bytes", sa.BigInteger, nullable=False),
             sa.Column("status", sa.String(16), nullable=False),
             sa.Column("claimed_by", sa.String(200), nullable=False),
             sa.Column("claimed_at", dt, nullable=False),
             sa.Column("finished_at", dt, nullable=True),
             sa.Column("reason", sa.Text, nullable=True),
             sa.Column("summary", sa.JSON, nullable=True),
             sa.Index("ix_ingested_files_status", "status"))
    md.create_all(conn)


def _v4_settings(conn: Connection) -> None:
    """Named values of the store itself (the demo's clock)."""
    md = sa.MetaData()
    sa.Table("settings", md,
             sa.Column("name", sa.String(64), primary_key=True),
             sa.Column("value", sa.String(400), nullable=False))
    md.create_all(conn)


#: Ordered migrations: (version, name, function(connection)).  Append only.
MIGRATIONS: list[tuple[int, str, Callable[[Connection], None]]] = [
    (1, "initial schema: keys, sites, profiles, observations, alerts, alert messages", _v1_initial),
    (2, "owners of keys and sites; administrator keys", _v2_owners),
    (3, "ingested model-run files (ptype ingest, watch)", _v3_ingested_files),
    (4, "settings of the store (the demo's clock)", _v4_settings),
]

LATEST_VERSION = MIGRATIONS[-1][0]

_version_table = sa.Table(
    "schema_version", sa.MetaData(),
    sa.Column("version", sa.Integer, primary_key=True, autoincrement=False),
    sa.Column("name", sa.String(200), nullable=False),
    sa.Column("applied_at", sa.DateTime, nullable=False),
)


def current_version(conn: Connection) -> int:
    """Highest applied version, 0 for an empty database."""
    if not sa.inspect(conn).has_table("schema_version"):
        return 0
    value = conn.execute(sa.select(sa.func.max(_version_table.c.version))).scalar()
    return int(value or 0)


def migrate(engine: sa.Engine, until: int | None = None) -> list[int]:
    """Apply the missing migrations in order; returns the versions applied by this call.

    ``until`` stops after that version (a store at an earlier schema, for tests of the
    migrations themselves).
    """
    applied: list[int] = []
    # ptype_write makes the SQLite begin listener take the write lock up front.
    with engine.execution_options(ptype_write=True).begin() as conn:
        if conn.dialect.name == "postgresql":
            conn.execute(sa.text("SELECT pg_advisory_xact_lock(:k)"), {"k": _LOCK_KEY})
        _version_table.create(conn, checkfirst=True)
        have = current_version(conn)
        for version, name, func in MIGRATIONS:
            if version <= have or (until is not None and version > until):
                continue
            func(conn)
            conn.execute(_version_table.insert().values(
                version=version, name=name,
                applied_at=datetime.now(UTC).replace(tzinfo=None, microsecond=0)))
            applied.append(version)
    return applied
