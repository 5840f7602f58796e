"""Storage operations: every read and write of the tables goes through these functions.

All functions take the session and keyword-only arguments and never commit: the caller
(one request, one transaction) commits or rolls back, so a failure leaves nothing behind.
Runs are immutable: a correction inserts a new version, a retraction changes only the
lifecycle columns of the current version. Each create, supersede and withdraw writes an
:class:`~service.models.AuditEvent` in the same transaction.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import uuid
from collections.abc import Sequence
from typing import Any, Optional

from sqlalchemy import func, insert, or_, select
from sqlalchemy.exc import IntegrityError
from sqlalchemy.orm import Session, selectinload

from service.errors import Conflict, ItemErrors, NotFound, TooLarge
from service.models import (
    AuditEvent,
    FitCache,
    Observation,
    Run,
    Study,
    Substance,
    utcnow,
)
from service.schemas import (
    RunCreate,
    RunData,
    RunSupersede,
    StudyCreate,
    SubstanceCreate,
)

__all__ = [
    "record_audit",
    "create_substance",
    "get_substance",
    "list_substances",
    "create_study",
    "get_study",
    "list_studies",
    "natural_key",
    "create_run",
    "create_runs_batch",
    "supersede_run",
    "withdraw_run",
    "get_run",
    "list_run_versions",
    "list_runs",
    "current_runs",
    "runs_as_of",
    "data_version",
    "data_version_of",
    "get_cached_fit",
    "cached_fit_ref",
    "store_fit",
    "list_audit_events",
]


# --------------------------------------------------------------------------- pages
def _page(session: Session, stmt: Any, order_by: Any, *, limit: int, offset: int) -> tuple[list[Any], int]:
    """One page of ``stmt`` in ``order_by`` order and the number of rows matching in all."""
    total = session.scalar(select(func.count()).select_from(stmt.subquery())) or 0
    rows = session.scalars(stmt.order_by(order_by).limit(limit).offset(offset)).all()
    return list(rows), int(total)


# --------------------------------------------------------------------------- audit
def record_audit(
    session: Session,
    *,
    actor: str,
    entity: str,
    entity_id: str | int,
    action: str,
    version: Optional[int] = None,
    reason: Optional[str] = None,
    substance_id: Optional[int] = None,
) -> AuditEvent:
    """Add one audit event (who, when in UTC, what, why) to the current transaction."""
    event = AuditEvent(
        at=utcnow(),
        actor=actor,
        entity=entity,
        entity_id=str(entity_id),
        version=version,
        action=action,
        reason=reason,
        substance_id=substance_id,
    )
    session.add(event)
    return event


def list_audit_events(
    session: Session,
    *,
    substance_id: Optional[int] = None,
    entity: Optional[str] = None,
    entity_id: Optional[str] = None,
    action: Optional[str] = None,
    since: Optional[dt.datetime] = None,
    until: Optional[dt.datetime] = None,
    limit: int = 100,
    offset: int = 0,
) -> tuple[list[AuditEvent], int]:
    """Audit events, oldest first, optionally filtered (``since`` <= at < ``until``, UTC-aware)."""
    stmt = select(AuditEvent)
    if action is not None:
        stmt = stmt.where(AuditEvent.action == action)
    if since is not None:
        stmt = stmt.where(AuditEvent.at >= since)
    if until is not None:
        stmt = stmt.where(AuditEvent.at < until)
    if substance_id is not None:
        stmt = stmt.where(AuditEvent.substance_id == substance_id)
    if entity is not None:
        stmt = stmt.where(AuditEvent.entity == entity)
    if entity_id is not None:
        stmt = stmt.where(AuditEvent.entity_id == entity_id)
    return _page(session, stmt, AuditEvent.id, limit=limit, offset=offset)


# --------------------------------------------------------------------------- substances
def create_substance(session: Session, *, data: SubstanceCreate, actor: str) -> Substance:
    """Store a new substance; a duplicate name or CAS RN is a :class:`Conflict`."""
    existing = session.scalar(select(Substance).where(Substance.name == data.name))
    if existing is not None:
        raise Conflict(f"a substance named {data.name!r} already exists (id {existing.id})")
    if data.cas_rn is not None:
        existing = session.scalar(select(Substance).where(Substance.cas_rn == data.cas_rn))
        if existing is not None:
            raise Conflict(
                f"CAS RN {data.cas_rn} is already registered for {existing.name!r} (id {existing.id})"
            )
    substance = Substance(**data.model_dump(), created_at=utcnow(), created_by=actor)
    session.add(substance)
    session.flush()
    record_audit(
        session, actor=actor, entity="substance", entity_id=substance.id, action="create",
        substance_id=substance.id,
    )
    return substance


def get_substance(session: Session, *, substance_id: int) -> Substance:
    substance = session.get(Substance, substance_id)
    if substance is None:
        raise NotFound(f"no substance with id {substance_id}")
    return substance


def list_substances(
    session: Session, *, limit: int, offset: int, name_contains: Optional[str] = None
) -> tuple[list[Substance], int]:
    stmt = select(Substance)
    if name_contains:
        stmt = stmt.where(func.lower(Substance.name).contains(name_contains.lower()))
    return _page(session, stmt, Substance.id, limit=limit, offset=offset)


# --------------------------------------------------------------------------- studies
def create_study(session: Session, *, data: StudyCreate, actor: str) -> Study:
    get_substance(session, substance_id=data.substance_id)
    study = Study(**data.model_dump(), created_at=utcnow(), created_by=actor)
    session.add(study)
    session.flush()
    record_audit(
        session, actor=actor, entity="study", entity_id=study.id, action="create",
        substance_id=study.substance_id,
    )
    return study


def get_study(session: Session, *, study_id: int) -> Study:
    study = session.get(Study, study_id)
    if study is None:
        raise NotFound(f"no study with id {study_id}")
    return study


def list_studies(
    session: Session, *, limit: int, offset: int, substance_id: Optional[int] = None
) -> tuple[list[Study], int]:
    stmt = select(Study)
    if substance_id is not None:
        stmt = stmt.where(Study.substance_id == substance_id)
    return _page(session, stmt, Study.id, limit=limit, offset=offset)


# --------------------------------------------------------------------------- runs
def natural_key(temperature_K: float, pH: float, replicate_label: str) -> str:
    """Identity of a run within a study: temperature (0.01 K), pH (0.01), replicate label."""
    return f"T={temperature_K:.2f}K|pH={pH:.2f}|rep={replicate_label.strip()}"


def _check_points(data: RunData, max_points: int, loc: list[Any]) -> None:
    if data.series is not None and len(data.series.time) > max_points:
        raise TooLarge(
            f"the series has {len(data.series.time)} points; at most {max_points} are "
            "accepted per series",
            loc=loc + ["series", "time"],
        )


def _version_values(
    *,
    data: RunData,
    study: Study,
    run_uid: str,
    version: int,
    actor: str,
    now: dt.datetime,
    supersedes_id: Optional[int] = None,
    reason: Optional[str] = None,
) -> tuple[dict[str, Any], list[dict[str, Any]]]:
    """Column values of a new run version and of its observations (without ``run_id``)."""
    t_K = data.temperature_K_si
    values: dict[str, Any] = dict(
        run_uid=run_uid,
        version=version,
        status="current",
        study_id=study.id,
        substance_id=study.substance_id,
        natural_key=natural_key(t_K, data.pH, data.replicate_label),
        supersedes_id=supersedes_id,
        reason=reason,
        temperature_K=t_K,
        pH=float(data.pH),
        buffer=data.buffer,
        ionic_strength_M=data.ionic_strength_M,
        cosolvent_percent_v_v=data.cosolvent_percent_v_v,
        sterile=data.sterile,
        dark=data.dark,
        replicate_label=data.replicate_label.strip(),
        series_model=data.series_model,
        notes=data.notes,
        created_at=now,
        created_by=actor,
        kind=None, time_unit_sent=None, concentration_unit_sent=None, concentration_unit=None,
        loq=None, k_per_s=None, dt50_s=None, se_ln_k=None, rate_unit_sent=None,
    )
    observations: list[dict[str, Any]] = []
    if data.series is not None:
        s = data.series
        values.update(
            kind="series", time_unit_sent=s.time_unit, concentration_unit_sent=s.concentration_unit,
            concentration_unit=s.canonical_unit, loq=s.loq_canonical,
        )
        below = s.below_loq or [False] * len(s.time)
        observations = [
            {"position": i, "time_s": float(t), "concentration": float(c), "below_loq": bool(b)}
            for i, (t, c, b) in enumerate(zip(s.time_s, s.concentration_canonical, below))
        ]
    else:
        r = data.rate
        assert r is not None  # guaranteed by RunData validation
        values.update(
            kind="rate", k_per_s=r.k_per_s, dt50_s=r.dt50_s, se_ln_k=r.se_ln_k,
            rate_unit_sent=r.k_unit if r.k is not None else r.dt50_unit,
        )
    return values, observations


def _new_version(
    *,
    data: RunData,
    study: Study,
    run_uid: str,
    version: int,
    actor: str,
    supersedes: Optional[Run] = None,
    reason: Optional[str] = None,
) -> Run:
    values, observations = _version_values(
        data=data, study=study, run_uid=run_uid, version=version, actor=actor, now=utcnow(),
        supersedes_id=supersedes.id if supersedes is not None else None, reason=reason,
    )
    run = Run(**values)
    run.observations = [Observation(**o) for o in observations]
    return run


def _duplicate(session: Session, *, study_id: int, key: str, exclude_uid: Optional[str] = None) -> Optional[Run]:
    stmt = select(Run).where(
        Run.study_id == study_id, Run.natural_key == key, Run.status == "current"
    )
    if exclude_uid is not None:
        stmt = stmt.where(Run.run_uid != exclude_uid)
    return session.scalar(stmt)


def _duplicate_message(key: str, other: Run) -> str:
    return (
        f"study {other.study_id} already has a current run at the same conditions ({key}): "
        f"run {other.run_uid} version {other.version}. Supersede that run to correct it, or "
        "give this replicate a different replicate_label"
    )


def _flush_or_conflict(session: Session) -> None:
    try:
        session.flush()
    except IntegrityError as exc:
        raise Conflict(
            "a run with the same study, temperature, pH and replicate label was stored at the "
            "same moment; nothing was stored"
        ) from exc


def create_run(session: Session, *, data: RunCreate, actor: str, max_points: int) -> Run:
    """Store a new run (version 1 of a new lineage)."""
    _check_points(data, max_points, ["body"])
    study = get_study(session, study_id=data.study_id)
    key = natural_key(data.temperature_K_si, data.pH, data.replicate_label)
    other = _duplicate(session, study_id=study.id, key=key)
    if other is not None:
        raise Conflict(_duplicate_message(key, other))
    run = _new_version(data=data, study=study, run_uid=str(uuid.uuid4()), version=1, actor=actor)
    session.add(run)
    _flush_or_conflict(session)
    record_audit(
        session, actor=actor, entity="run", entity_id=run.run_uid, version=1, action="create",
        substance_id=run.substance_id,
    )
    return run


def create_runs_batch(
    session: Session, *, runs: Sequence[RunCreate], actor: str, max_points: int
) -> list[Run]:
    """Store many runs at once, all or nothing.

    Every item is checked before anything is written; problems are reported together,
    each with its index (``["body", "runs", i, ...]``): unknown studies and oversized
    series as 422, duplicates (against stored runs or within the batch) as 409.
    """
    problems: list[dict[str, Any]] = []
    conflicts: list[dict[str, Any]] = []
    studies: dict[int, Study] = {}
    seen: dict[tuple[int, str], int] = {}
    keys: list[Optional[str]] = []
    for i, data in enumerate(runs):
        loc = ["body", "runs", i]
        keys.append(None)
        if data.series is not None and len(data.series.time) > max_points:
            problems.append({
                "loc": loc + ["series", "time"],
                "msg": f"runs.{i}: the series has {len(data.series.time)} points; at most "
                f"{max_points} are accepted per series",
                "type": "too_many_points",
            })
        if data.study_id not in studies:
            study = session.get(Study, data.study_id)
            if study is None:
                problems.append({
                    "loc": loc + ["study_id"],
                    "msg": f"runs.{i}.study_id: no study with id {data.study_id}",
                    "type": "not_found",
                })
                continue
            studies[data.study_id] = study
        key = natural_key(data.temperature_K_si, data.pH, data.replicate_label)
        if (data.study_id, key) in seen:
            conflicts.append({
                "loc": loc,
                "msg": f"runs.{i}: duplicates runs.{seen[(data.study_id, key)]} of this batch "
                f"(study {data.study_id}, {key})",
                "type": "duplicate_run",
            })
            continue
        seen[(data.study_id, key)] = i
        keys[i] = key
    stored = _current_with_keys(session, seen)
    for i, key in enumerate(keys):
        other = stored.get((runs[i].study_id, key)) if key is not None else None
        if other is not None:
            conflicts.append({
                "loc": ["body", "runs", i], "msg": f"runs.{i}: " + _duplicate_message(key, other),
                "type": "duplicate_run",
            })
    if problems:
        raise ItemErrors(problems + sorted(conflicts, key=lambda c: c["loc"][2]), status_code=422)
    if conflicts:
        raise ItemErrors(sorted(conflicts, key=lambda c: c["loc"][2]), status_code=409)
    if not runs:
        return []
    # bulk inserts (one statement per table, executed as multi-row inserts), all in the
    # caller's transaction
    now = utcnow()
    run_rows, obs_rows = [], []
    for data in runs:
        values, observations = _version_values(
            data=data, study=studies[data.study_id], run_uid=str(uuid.uuid4()), version=1,
            actor=actor, now=now,
        )
        run_rows.append(values)
        obs_rows.append(observations)
    try:
        ids = session.scalars(
            insert(Run).returning(Run.id, sort_by_parameter_order=True), run_rows
        ).all()
        flat = [
            {**o, "run_id": run_id}
            for run_id, observations in zip(ids, obs_rows)
            for o in observations
        ]
        if flat:
            session.execute(insert(Observation), flat)
    except IntegrityError as exc:
        raise Conflict(
            "a run with the same study, temperature, pH and replicate label was stored at the "
            "same moment; nothing was stored"
        ) from exc
    session.execute(insert(AuditEvent), [
        {"at": now, "actor": actor, "entity": "run", "entity_id": r["run_uid"], "version": 1,
         "action": "create", "reason": "batch", "substance_id": r["substance_id"]}
        for r in run_rows
    ])
    created = session.scalars(
        select(Run).where(Run.id.in_(ids)).options(selectinload(Run.observations)).order_by(Run.id)
    ).all()
    by_id = {r.id: r for r in created}
    return [by_id[i] for i in ids]


def _current_with_keys(
    session: Session, wanted: dict[tuple[int, str], int]
) -> dict[tuple[int, str], Run]:
    """The current runs holding any of the (study id, natural key) pairs (chunked queries)."""
    by_study: dict[int, list[str]] = {}
    for study_id, key in wanted:
        by_study.setdefault(study_id, []).append(key)
    found: dict[tuple[int, str], Run] = {}
    for study_id, study_keys in by_study.items():
        for start in range(0, len(study_keys), 500):
            chunk = study_keys[start:start + 500]
            for run in session.scalars(
                select(Run).where(
                    Run.study_id == study_id, Run.status == "current", Run.natural_key.in_(chunk)
                )
            ):
                found[(study_id, run.natural_key)] = run
    return found


def _latest_version(session: Session, *, run_uid: str) -> Run:
    run = session.scalar(
        select(Run).where(Run.run_uid == run_uid).order_by(Run.version.desc()).limit(1)
    )
    if run is None:
        raise NotFound(f"no run with id {run_uid}")
    return run


def supersede_run(
    session: Session, *, run_uid: str, data: RunSupersede, actor: str, max_points: int
) -> Run:
    """Replace the current version of a run by a corrected one (reason required).

    The run keeps its study; only the current version can be superseded (a withdrawn run
    is a :class:`Conflict`).
    """
    _check_points(data, max_points, ["body"])
    old = _latest_version(session, run_uid=run_uid)
    if old.status != "current":
        raise Conflict(
            f"run {run_uid} is {old.status} (version {old.version}); only a current run can "
            "be superseded"
        )
    study = get_study(session, study_id=old.study_id)
    key = natural_key(data.temperature_K_si, data.pH, data.replicate_label)
    other = _duplicate(session, study_id=study.id, key=key, exclude_uid=run_uid)
    if other is not None:
        raise Conflict(_duplicate_message(key, other))
    now = utcnow()
    old.status = "superseded"
    old.valid_to = now
    _flush_or_conflict(session)
    new = _new_version(
        data=data, study=study, run_uid=run_uid, version=old.version + 1, actor=actor,
        supersedes=old, reason=data.reason,
    )
    new.created_at = now
    session.add(new)
    _flush_or_conflict(session)
    record_audit(
        session, actor=actor, entity="run", entity_id=run_uid, version=new.version,
        action="supersede", reason=data.reason, substance_id=new.substance_id,
    )
    return new


def withdraw_run(session: Session, *, run_uid: str, reason: str, actor: str) -> Run:
    """Mark the current version of a run withdrawn (reason required); fits stop using it."""
    run = _latest_version(session, run_uid=run_uid)
    if run.status != "current":
        raise Conflict(
            f"run {run_uid} is already {run.status} (version {run.version}); nothing changed"
        )
    run.status = "withdrawn"
    run.valid_to = utcnow()
    run.withdrawn_reason = reason
    _flush_or_conflict(session)
    record_audit(
        session, actor=actor, entity="run", entity_id=run_uid, version=run.version,
        action="withdraw", reason=reason, substance_id=run.substance_id,
    )
    return run


def get_run(session: Session, *, run_uid: str, version: Optional[int] = None) -> Run:
    """The newest version of a run (or the given version)."""
    if version is None:
        run = _latest_version(session, run_uid=run_uid)
    else:
        run = session.scalar(select(Run).where(Run.run_uid == run_uid, Run.version == version))
        if run is None:
            _latest_version(session, run_uid=run_uid)
            raise NotFound(f"run {run_uid} has no version {version}")
    return run


def list_run_versions(session: Session, *, run_uid: str) -> list[Run]:
    rows = session.scalars(
        select(Run)
        .where(Run.run_uid == run_uid)
        .options(selectinload(Run.observations))
        .order_by(Run.version)
    ).all()
    if not rows:
        raise NotFound(f"no run with id {run_uid}")
    return list(rows)


def list_runs(
    session: Session,
    *,
    limit: int,
    offset: int,
    substance_id: Optional[int] = None,
    study_id: Optional[int] = None,
    status: Optional[str] = "current",
    temperature_min_K: Optional[float] = None,
    temperature_max_K: Optional[float] = None,
    pH_min: Optional[float] = None,
    pH_max: Optional[float] = None,
) -> tuple[list[Run], int]:
    """Run versions matching the filters (by default the current ones), oldest first."""
    stmt = select(Run)
    if substance_id is not None:
        stmt = stmt.where(Run.substance_id == substance_id)
    if study_id is not None:
        stmt = stmt.where(Run.study_id == study_id)
    if status is not None:
        stmt = stmt.where(Run.status == status)
    if temperature_min_K is not None:
        stmt = stmt.where(Run.temperature_K >= temperature_min_K)
    if temperature_max_K is not None:
        stmt = stmt.where(Run.temperature_K <= temperature_max_K)
    if pH_min is not None:
        stmt = stmt.where(Run.pH >= pH_min)
    if pH_max is not None:
        stmt = stmt.where(Run.pH <= pH_max)
    return _page(session, stmt.options(selectinload(Run.observations)), Run.id,
                 limit=limit, offset=offset)


def current_runs(session: Session, *, substance_id: int) -> list[Run]:
    """The current versions of all runs of a substance, with observations, in id order."""
    rows = session.scalars(
        select(Run)
        .where(Run.substance_id == substance_id, Run.status == "current")
        .options(selectinload(Run.observations))
        .order_by(Run.id)
    ).all()
    return list(rows)


def runs_as_of(session: Session, *, substance_id: int, as_of: dt.datetime) -> list[Run]:
    """The run versions of a substance that were current at ``as_of`` (UTC-aware), in id order.

    A version was current at ``as_of`` if it was stored at or before it and was not yet
    superseded or withdrawn (``valid_to`` empty or later). Rows are never deleted and
    their measurements never change, so this is exactly the data a fit used then.
    """
    rows = session.scalars(
        select(Run)
        .where(
            Run.substance_id == substance_id,
            Run.created_at <= as_of,
            or_(Run.valid_to.is_(None), Run.valid_to > as_of),
        )
        .options(selectinload(Run.observations))
        .order_by(Run.id)
    ).all()
    return list(rows)


def data_version(session: Session, *, substance_id: int) -> str:
    """A fingerprint of the current run versions of a substance.

    Version rows are never changed in their measurements, so the set of current version
    ids identifies the data exactly: any new, superseded or withdrawn run changes it.
    """
    ids = session.scalars(
        select(Run.id)
        .where(Run.substance_id == substance_id, Run.status == "current")
        .order_by(Run.id)
    ).all()
    return data_version_of(substance_id=substance_id, run_version_ids=ids)


def data_version_of(*, substance_id: int, run_version_ids: Sequence[int]) -> str:
    """The data version for a known set of current run version ids."""
    ids = sorted(int(i) for i in run_version_ids)
    text = f"substance={substance_id};runs=" + ",".join(str(i) for i in ids)
    return hashlib.sha256(text.encode()).hexdigest()[:32]


# --------------------------------------------------------------------------- fit cache
def get_cached_fit(
    session: Session, *, substance_id: int, data_version: str, options_key: str
) -> Optional[FitCache]:
    return session.scalar(
        select(FitCache).where(
            FitCache.substance_id == substance_id,
            FitCache.data_version == data_version,
            FitCache.options_key == options_key,
        )
    )


def cached_fit_ref(
    session: Session, *, substance_id: int, data_version: str, options_key: str
) -> Optional[tuple[int, dt.datetime]]:
    """Id and time of the stored fit for this key, without reading the fit itself."""
    row = session.execute(
        select(FitCache.id, FitCache.created_at).where(
            FitCache.substance_id == substance_id,
            FitCache.data_version == data_version,
            FitCache.options_key == options_key,
        )
    ).first()
    return None if row is None else (int(row[0]), row[1])


def store_fit(
    session: Session,
    *,
    substance_id: int,
    data_version: str,
    options_key: str,
    fit_json: str,
    diagnostics_json: str,
) -> FitCache:
    """Store a fit in the cache; if another request stored the same fit first, keep that one."""
    entry = FitCache(
        substance_id=substance_id,
        data_version=data_version,
        options_key=options_key,
        fit_json=fit_json,
        diagnostics_json=diagnostics_json,
        created_at=utcnow(),
    )
    try:
        with session.begin_nested():
            session.add(entry)
    except IntegrityError:
        existing = get_cached_fit(
            session, substance_id=substance_id, data_version=data_version, options_key=options_key
        )
        if existing is not None:
            return existing
        raise
    return entry
