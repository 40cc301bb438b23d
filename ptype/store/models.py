"""SQLAlchemy 2 ORM models of the store.

Times are stored as naive UTC ``DateTime`` columns (portable between SQLite and
PostgreSQL) and handed back as aware UTC datetimes by :class:`UTCDateTime`.
The tables themselves are created by the versioned migrations in
:mod:`ptype.store.migrations`, never by ``create_all``; these classes describe
the latest schema.
"""

from __future__ import annotations

from datetime import UTC, datetime
from typing import Any

import sqlalchemy as sa
from sqlalchemy.orm import DeclarativeBase, Mapped, mapped_column, relationship


class UTCDateTime(sa.types.TypeDecorator):
    """Aware UTC datetimes in, aware UTC datetimes out; stored naive UTC."""

    impl = sa.DateTime
    cache_ok = True

    def process_bind_param(self, value: datetime | None, dialect: sa.Dialect) -> datetime | None:
        """To the database: naive UTC (a naive input is taken as UTC)."""
        if value is None:
            return None
        if value.tzinfo is None:
            value = value.replace(tzinfo=UTC)
        return value.astimezone(UTC).replace(tzinfo=None)

    def process_result_value(self, value: datetime | None,
                             dialect: sa.Dialect) -> datetime | None:
        """From the database: aware UTC."""
        if value is None:
            return None
        return value.replace(tzinfo=UTC)


class Base(DeclarativeBase):
    """The declarative base of every table."""


#: The owner of the sites no key created (the demo) and of those that existed before owners.
ADMIN_OWNER = "admin"


class ApiKey(Base):
    """An API key: only a per-key salt and the scrypt hash of the secret are kept.

    A key belongs to an ``owner``: the sites it creates are that owner's, and it may write
    only to them, unless it is an administrator's key (``is_admin``), which may write
    everywhere.
    """

    __tablename__ = "api_keys"
    id: Mapped[int] = mapped_column(primary_key=True)
    key_id: Mapped[str] = mapped_column(sa.String(32), unique=True)
    name: Mapped[str] = mapped_column(sa.String(200))
    salt_hex: Mapped[str] = mapped_column(sa.String(64))
    hash_hex: Mapped[str] = mapped_column(sa.String(128))
    kdf: Mapped[str] = mapped_column(sa.String(64))
    created_at: Mapped[datetime] = mapped_column(UTCDateTime)
    revoked_at: Mapped[datetime | None] = mapped_column(UTCDateTime, nullable=True)
    owner: Mapped[str] = mapped_column(sa.String(200))
    is_admin: Mapped[bool] = mapped_column(sa.Boolean, default=False)


class Site(Base):
    """A road-weather site: name, position, its own alert thresholds and its owner."""

    __tablename__ = "sites"
    id: Mapped[int] = mapped_column(primary_key=True)
    code: Mapped[str | None] = mapped_column(sa.String(100), unique=True, nullable=True)
    name: Mapped[str] = mapped_column(sa.String(200))
    latitude: Mapped[float] = mapped_column(sa.Float)
    longitude: Mapped[float] = mapped_column(sa.Float)
    elevation_m: Mapped[float | None] = mapped_column(sa.Float, nullable=True)
    thresholds: Mapped[dict[str, Any]] = mapped_column(sa.JSON, default=dict)
    created_at: Mapped[datetime] = mapped_column(UTCDateTime)
    owner: Mapped[str] = mapped_column(sa.String(200), default=ADMIN_OWNER, index=True)

    profiles: Mapped[list[ProfileRecord]] = relationship(back_populates="site",
                                                           cascade="all, delete-orphan")


class ProfileRecord(Base):
    """One forecast profile of a site; (site, source, valid_time) is unique."""

    __tablename__ = "profiles"
    __table_args__ = (sa.UniqueConstraint("site_id", "source", "valid_time",
                                          name="uq_profiles_site_source_valid"),
                      sa.Index("ix_profiles_site_issued", "site_id", "issued_time"))
    id: Mapped[int] = mapped_column(primary_key=True)
    site_id: Mapped[int] = mapped_column(sa.ForeignKey("sites.id", ondelete="CASCADE"))
    source: Mapped[str] = mapped_column(sa.String(200))
    valid_time: Mapped[datetime] = mapped_column(UTCDateTime)
    issued_time: Mapped[datetime] = mapped_column(UTCDateTime)
    document: Mapped[dict[str, Any]] = mapped_column(sa.JSON)
    received_at: Mapped[datetime] = mapped_column(UTCDateTime)

    site: Mapped[Site] = relationship(back_populates="profiles")


class Observation(Base):
    """A surface observation of a site; (site, time) is unique (a re-post replaces it)."""

    __tablename__ = "observations"
    __table_args__ = (sa.UniqueConstraint("site_id", "time", name="uq_observations_site_time"),)
    id: Mapped[int] = mapped_column(primary_key=True)
    site_id: Mapped[int] = mapped_column(sa.ForeignKey("sites.id", ondelete="CASCADE"))
    time: Mapped[datetime] = mapped_column(UTCDateTime)
    air_temperature_c: Mapped[float | None] = mapped_column(sa.Float, nullable=True)
    dewpoint_c: Mapped[float | None] = mapped_column(sa.Float, nullable=True)
    road_surface_temperature_c: Mapped[float | None] = mapped_column(sa.Float, nullable=True)
    precipitation_rate_mm_h: Mapped[float | None] = mapped_column(sa.Float, nullable=True)
    wind_speed_m_s: Mapped[float | None] = mapped_column(sa.Float, nullable=True)
    present_weather: Mapped[str | None] = mapped_column(sa.String(40), nullable=True)
    received_at: Mapped[datetime] = mapped_column(UTCDateTime)


class Alert(Base):
    """The current state of one alert (a hazard episode at a site)."""

    __tablename__ = "alerts"
    __table_args__ = (sa.Index("ix_alerts_site_event_status", "site_id", "event", "status"),)
    id: Mapped[str] = mapped_column(sa.String(64), primary_key=True)
    site_id: Mapped[int] = mapped_column(sa.ForeignKey("sites.id", ondelete="CASCADE"))
    event: Mapped[str] = mapped_column(sa.String(40))
    status: Mapped[str] = mapped_column(sa.String(16))          # active | cancelled | expired
    severity: Mapped[str] = mapped_column(sa.String(16))
    certainty: Mapped[str] = mapped_column(sa.String(16))
    urgency: Mapped[str] = mapped_column(sa.String(16))
    onset: Mapped[datetime] = mapped_column(UTCDateTime)
    expires: Mapped[datetime] = mapped_column(UTCDateTime)
    details: Mapped[dict[str, Any]] = mapped_column(sa.JSON, default=dict)
    version: Mapped[int] = mapped_column(sa.Integer, default=1)
    created_at: Mapped[datetime] = mapped_column(UTCDateTime)
    updated_at: Mapped[datetime] = mapped_column(UTCDateTime)
    ended_at: Mapped[datetime | None] = mapped_column(UTCDateTime, nullable=True)

    messages: Mapped[list[AlertMessage]] = relationship(
        back_populates="alert", order_by="AlertMessage.seq", cascade="all, delete-orphan")


class AlertMessage(Base):
    """One CAP message sent for an alert (Alert, then Updates, then possibly a Cancel)."""

    __tablename__ = "alert_messages"
    __table_args__ = (sa.UniqueConstraint("alert_id", "seq", name="uq_alert_messages_seq"),)
    id: Mapped[int] = mapped_column(primary_key=True)
    alert_id: Mapped[str] = mapped_column(sa.ForeignKey("alerts.id", ondelete="CASCADE"))
    seq: Mapped[int] = mapped_column(sa.Integer)
    identifier: Mapped[str] = mapped_column(sa.String(128), unique=True)
    msg_type: Mapped[str] = mapped_column(sa.String(16))
    sent: Mapped[datetime] = mapped_column(UTCDateTime)
    snapshot: Mapped[dict[str, Any]] = mapped_column(sa.JSON)

    alert: Mapped[Alert] = relationship(back_populates="messages")


class IngestedFile(Base):
    """A model-run file taken in (by content: SHA-256), and where its ingest stands.

    ``status``: ``claimed`` (a process works on it; ``claimed_by`` host:pid), ``done``,
    ``rejected`` (unreadable; ``reason``).  A claim whose process is gone is taken over."""

    __tablename__ = "ingested_files"
    id: Mapped[int] = mapped_column(primary_key=True)
    file_key: Mapped[str] = mapped_column(sa.String(64), unique=True)
    name: Mapped[str] = mapped_column(sa.String(500))
    size_bytes: Mapped[int] = mapped_column(sa.BigInteger)
    status: Mapped[str] = mapped_column(sa.String(16))
    claimed_by: Mapped[str] = mapped_column(sa.String(200))
    claimed_at: Mapped[datetime] = mapped_column(UTCDateTime)
    finished_at: Mapped[datetime | None] = mapped_column(UTCDateTime, nullable=True)
    reason: Mapped[str | None] = mapped_column(sa.Text, nullable=True)
    summary: Mapped[dict[str, Any] | None] = mapped_column(sa.JSON, nullable=True)


class Setting(Base):
    """A named value that belongs to the store itself (e.g. ``demo_clock``)."""

    __tablename__ = "settings"
    name: Mapped[str] = mapped_column(sa.String(64), primary_key=True)
    value: Mapped[str] = mapped_column(sa.String(400))
