"""Database tables (SQLAlchemy 2 typed models).

Measurements are immutable: a run is a *lineage* (``run_uid``) of *versions*. A
correction inserts a new version that supersedes the previous one (with a mandatory
reason); a retraction marks the current version withdrawn (with a reason). Measurement
columns are never updated and rows are never deleted; only the lifecycle columns
(``status``, ``valid_to``, ``withdrawn_reason``) of the version being replaced change.
Every create, supersede and withdraw writes an :class:`AuditEvent` in the same
transaction. Schema changes go through Alembic only (``migrations/``).
"""

from __future__ import annotations

import datetime as dt
from typing import Optional

from sqlalchemy import (
    Boolean,
    Date,
    DateTime,
    Float,
    ForeignKey,
    Index,
    Integer,
    MetaData,
    String,
    Text,
    UniqueConstraint,
    text,
)
from sqlalchemy.orm import DeclarativeBase, Mapped, mapped_column, relationship
from sqlalchemy.types import TypeDecorator

__all__ = [
    "Base",
    "UTCDateTime",
    "utcnow",
    "Substance",
    "Study",
    "Run",
    "Observation",
    "FitCache",
    "ApiKey",
    "IdempotencyRecord",
    "AuditEvent",
]

NAMING_CONVENTION = {
    "ix": "ix_%(column_0_label)s",
    "uq": "uq_%(table_name)s_%(column_0_name)s",
    "ck": "ck_%(table_name)s_%(constraint_name)s",
    "fk": "fk_%(table_name)s_%(column_0_name)s_%(referred_table_name)s",
    "pk": "pk_%(table_name)s",
}


def utcnow() -> dt.datetime:
    """The current time, timezone-aware UTC."""
    return dt.datetime.now(dt.timezone.utc)


class UTCDateTime(TypeDecorator):
    """A timestamp stored as UTC and always returned timezone-aware (UTC)."""

    impl = DateTime(timezone=True)
    cache_ok = True

    def process_bind_param(self, value, dialect):
        if value is None:
            return None
        if value.tzinfo is None:
            raise ValueError(f"naive datetime {value!r}: timestamps must carry a time zone")
        value = value.astimezone(dt.timezone.utc)
        if dialect.name == "sqlite":
            return value.replace(tzinfo=None)
        return value

    def process_result_value(self, value, dialect):
        if value is None:
            return None
        if value.tzinfo is None:
            return value.replace(tzinfo=dt.timezone.utc)
        return value.astimezone(dt.timezone.utc)


class Base(DeclarativeBase):
    metadata = MetaData(naming_convention=NAMING_CONVENTION)


class Substance(Base):
    __tablename__ = "substance"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    name: Mapped[str] = mapped_column(String(200), unique=True)
    cas_rn: Mapped[Optional[str]] = mapped_column(String(20), unique=True)
    smiles: Mapped[Optional[str]] = mapped_column(String(2000))
    substance_class: Mapped[Optional[str]] = mapped_column(String(200))
    notes: Mapped[Optional[str]] = mapped_column(Text)
    created_at: Mapped[dt.datetime] = mapped_column(UTCDateTime(), default=utcnow)
    created_by: Mapped[str] = mapped_column(String(200))

    studies: Mapped[list["Study"]] = relationship(back_populates="substance")


class Study(Base):
    __tablename__ = "study"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    substance_id: Mapped[int] = mapped_column(ForeignKey("substance.id"), index=True)
    laboratory: Mapped[str] = mapped_column(String(300))
    test_guideline: Mapped[Optional[str]] = mapped_column(String(300))
    glp: Mapped[bool] = mapped_column(Boolean, default=False)
    reference: Mapped[Optional[str]] = mapped_column(String(1000))
    start_date: Mapped[Optional[dt.date]] = mapped_column(Date)
    end_date: Mapped[Optional[dt.date]] = mapped_column(Date)
    notes: Mapped[Optional[str]] = mapped_column(Text)
    created_at: Mapped[dt.datetime] = mapped_column(UTCDateTime(), default=utcnow)
    created_by: Mapped[str] = mapped_column(String(200))

    substance: Mapped[Substance] = relationship(back_populates="studies")


class Run(Base):
    """One version of one incubation run.

    ``run_uid`` names the lineage; ``version`` counts from 1. Exactly one version of a
    lineage is ``current`` unless the run was withdrawn. ``natural_key`` (temperature,
    pH and replicate label) must be unique among the current runs of a study.
    Either ``kind == "series"`` (observations attached) or ``kind == "rate"``
    (``k_per_s`` or ``dt50_s`` as reported by the laboratory).
    """

    __tablename__ = "run"
    __table_args__ = (
        UniqueConstraint("run_uid", "version", name="uq_run_run_uid_version"),
        Index(
            "uq_run_current_natural_key",
            "study_id",
            "natural_key",
            unique=True,
            sqlite_where=text("status = 'current'"),
            postgresql_where=text("status = 'current'"),
        ),
        Index("ix_run_substance_status", "substance_id", "status"),
    )

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    run_uid: Mapped[str] = mapped_column(String(36), index=True)
    version: Mapped[int] = mapped_column(Integer)
    status: Mapped[str] = mapped_column(String(16))
    study_id: Mapped[int] = mapped_column(ForeignKey("study.id"), index=True)
    substance_id: Mapped[int] = mapped_column(ForeignKey("substance.id"))
    natural_key: Mapped[str] = mapped_column(String(400))
    supersedes_id: Mapped[Optional[int]] = mapped_column(ForeignKey("run.id"))
    reason: Mapped[Optional[str]] = mapped_column(Text)

    temperature_K: Mapped[float] = mapped_column(Float)
    pH: Mapped[float] = mapped_column(Float)
    buffer: Mapped[Optional[str]] = mapped_column(String(300))
    ionic_strength_M: Mapped[Optional[float]] = mapped_column(Float)
    cosolvent_percent_v_v: Mapped[Optional[float]] = mapped_column(Float)
    sterile: Mapped[bool] = mapped_column(Boolean, default=True)
    dark: Mapped[bool] = mapped_column(Boolean, default=True)
    replicate_label: Mapped[str] = mapped_column(String(100), default="")
    series_model: Mapped[Optional[str]] = mapped_column(String(16))
    notes: Mapped[Optional[str]] = mapped_column(Text)

    kind: Mapped[str] = mapped_column(String(16))
    time_unit_sent: Mapped[Optional[str]] = mapped_column(String(16))
    concentration_unit_sent: Mapped[Optional[str]] = mapped_column(String(32))
    concentration_unit: Mapped[Optional[str]] = mapped_column(String(32))
    loq: Mapped[Optional[float]] = mapped_column(Float)
    k_per_s: Mapped[Optional[float]] = mapped_column(Float)
    dt50_s: Mapped[Optional[float]] = mapped_column(Float)
    se_ln_k: Mapped[Optional[float]] = mapped_column(Float)
    rate_unit_sent: Mapped[Optional[str]] = mapped_column(String(16))

    created_at: Mapped[dt.datetime] = mapped_column(UTCDateTime(), default=utcnow)
    created_by: Mapped[str] = mapped_column(String(200))
    valid_to: Mapped[Optional[dt.datetime]] = mapped_column(UTCDateTime())
    withdrawn_reason: Mapped[Optional[str]] = mapped_column(Text)

    study: Mapped[Study] = relationship()
    observations: Mapped[list["Observation"]] = relationship(
        back_populates="run", order_by="Observation.position"
    )


class Observation(Base):
    """One measured point of a run version: time [s], concentration (canonical unit)."""

    __tablename__ = "observation"
    __table_args__ = (UniqueConstraint("run_id", "position", name="uq_observation_run_id_position"),)

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    run_id: Mapped[int] = mapped_column(ForeignKey("run.id"), index=True)
    position: Mapped[int] = mapped_column(Integer)
    time_s: Mapped[float] = mapped_column(Float)
    concentration: Mapped[float] = mapped_column(Float)
    below_loq: Mapped[bool] = mapped_column(Boolean, default=False)

    run: Mapped[Run] = relationship(back_populates="observations")


class FitCache(Base):
    """A stored surface fit for one substance, one data version and one set of fit options."""

    __tablename__ = "fit_cache"
    __table_args__ = (
        UniqueConstraint(
            "substance_id", "data_version", "options_key", name="uq_fit_cache_key"
        ),
    )

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    substance_id: Mapped[int] = mapped_column(ForeignKey("substance.id"), index=True)
    data_version: Mapped[str] = mapped_column(String(64))
    options_key: Mapped[str] = mapped_column(String(500))
    fit_json: Mapped[str] = mapped_column(Text)
    diagnostics_json: Mapped[str] = mapped_column(Text)
    created_at: Mapped[dt.datetime] = mapped_column(UTCDateTime(), default=utcnow)


class ApiKey(Base):
    """An API key: only its hash is stored; ``scopes`` is a space-separated list."""

    __tablename__ = "api_key"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    label: Mapped[str] = mapped_column(String(200))
    key_hash: Mapped[str] = mapped_column(String(128), unique=True)
    scopes: Mapped[str] = mapped_column(String(200))
    created_at: Mapped[dt.datetime] = mapped_column(UTCDateTime(), default=utcnow)
    revoked_at: Mapped[Optional[dt.datetime]] = mapped_column(UTCDateTime())


class IdempotencyRecord(Base):
    """The remembered response to one Idempotency-Key of one key owner."""

    __tablename__ = "idempotency_record"
    __table_args__ = (UniqueConstraint("key_owner", "key", name="uq_idempotency_owner_key"),)

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    key: Mapped[str] = mapped_column(String(200))
    key_owner: Mapped[str] = mapped_column(String(200))
    request_hash: Mapped[str] = mapped_column(String(128))
    response_status: Mapped[int] = mapped_column(Integer)
    response_body: Mapped[str] = mapped_column(Text)
    created_at: Mapped[dt.datetime] = mapped_column(UTCDateTime(), default=utcnow, index=True)


class AuditEvent(Base):
    """Who did what to which record, when (UTC) and why."""

    __tablename__ = "audit_event"
    __table_args__ = (Index("ix_audit_event_substance_at", "substance_id", "at"),)

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    at: Mapped[dt.datetime] = mapped_column(UTCDateTime(), default=utcnow, index=True)
    actor: Mapped[str] = mapped_column(String(200))
    entity: Mapped[str] = mapped_column(String(50))
    entity_id: Mapped[str] = mapped_column(String(64))
    version: Mapped[Optional[int]] = mapped_column(Integer)
    action: Mapped[str] = mapped_column(String(50))
    reason: Mapped[Optional[str]] = mapped_column(Text)
    substance_id: Mapped[Optional[int]] = mapped_column(Integer)
