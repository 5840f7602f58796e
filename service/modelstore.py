"""The fitted surface of a stored substance, from the fit cache or freshly fitted.

A cache entry is keyed by substance, data version (the set of current run versions) and
fit options; a new, superseded or withdrawn run changes the data version, so the next
request misses and refits. Fresh fits are stored and then read back from their JSON form,
so the first answer and every later cached answer carry identical numbers.

Each process also keeps the most recently used restored fits in memory (per database),
keyed by the stored fit's row id and time as well as substance, data version and options.
Every request still reads the current run version ids and the ids of the most recent
stored fits for these options (one small indexed query), so a new, superseded or withdrawn
run, or another process's refit, is seen at once; only the JSON parsing and the rebuilding
of the fit are saved.
"""

from __future__ import annotations

import datetime as dt
import json
import threading
import weakref
from collections import OrderedDict
from dataclasses import dataclass

from sqlalchemy import Connection, Integer, String, text
from sqlalchemy.orm import Session, sessionmaker

from kinetics.surface import SurfaceFit
from service import crud
from service.db import session_scope
from service.fitting import FitResult, compute_fit, options_key, run_input_from_model
from service.models import FitCache, Run, UTCDateTime
from service.schemas import FitOptions

__all__ = ["StoredModel", "load_model"]


@dataclass(frozen=True)
class StoredModel:
    result: FitResult
    substance_id: int
    substance_name: str
    data_version: str
    fitted_at: dt.datetime
    cached: bool
    as_of: dt.datetime | None = None

    def meta(self) -> dict:
        return {
            "substance_id": self.substance_id,
            "substance_name": self.substance_name,
            "data_version": self.data_version,
            "fitted_at": self.fitted_at.isoformat().replace("+00:00", "Z"),
            "cached": self.cached,
            "as_of": self.as_of.isoformat().replace("+00:00", "Z") if self.as_of else None,
        }


def _restore(fit_json: str, diagnostics_json: str) -> FitResult:
    return FitResult(
        surface=SurfaceFit.from_dict(json.loads(fit_json)), runs=json.loads(diagnostics_json)
    )


#: restored fits kept in memory per database
RESTORED_FITS_PER_DATABASE = 64


class _RestoredFits:
    """A thread-safe least-recently-used map: cache key -> (substance name, FitResult)."""

    def __init__(self, maxsize: int) -> None:
        self.maxsize = maxsize
        self._items: OrderedDict[tuple, tuple[str, FitResult]] = OrderedDict()
        self._lock = threading.Lock()

    def get(self, key: tuple) -> tuple[str, FitResult] | None:
        with self._lock:
            value = self._items.get(key)
            if value is not None:
                self._items.move_to_end(key)
            return value

    def put(self, key: tuple, value: tuple[str, FitResult]) -> None:
        with self._lock:
            self._items[key] = value
            self._items.move_to_end(key)
            while len(self._items) > self.maxsize:
                self._items.popitem(last=False)


_RESTORED: "weakref.WeakKeyDictionary[sessionmaker, _RestoredFits]" = weakref.WeakKeyDictionary()
_RESTORED_LOCK = threading.Lock()


def _restored_fits(factory: sessionmaker[Session]) -> _RestoredFits:
    with _RESTORED_LOCK:
        cache = _RESTORED.get(factory)
        if cache is None:
            cache = _RESTORED[factory] = _RestoredFits(RESTORED_FITS_PER_DATABASE)
        return cache


#: stored fits of a substance and options looked at beside the run ids (most recent first)
RECENT_FITS_CHECKED = 4

# Written out once as text: building the equivalent expression (and its cache key) on
# every request costs several times more than running it.
_CURRENT_VERSION_AND_FITS = text(
    f"SELECT 1 AS is_fit, recent.id AS row_id, recent.created_at AS created_at, "
    f"recent.data_version AS data_version FROM ("
    f"SELECT id, created_at, data_version FROM {FitCache.__tablename__} "
    f"WHERE substance_id = :substance_id AND options_key = :options_key "
    f"ORDER BY id DESC LIMIT {RECENT_FITS_CHECKED}) AS recent "
    f"UNION ALL "
    f"SELECT 0, id, NULL, NULL FROM {Run.__tablename__} "
    f"WHERE substance_id = :substance_id AND status = 'current'"
).columns(is_fit=Integer(), row_id=Integer(), created_at=UTCDateTime(), data_version=String())


def _current_version_and_fit(
    session: Session | Connection, *, substance_id: int, options_key: str
) -> tuple[str, tuple[int, dt.datetime] | None]:
    """Data version of the current runs and ``(id, time)`` of the stored fit for it, if any.

    ``session`` is a session or a plain connection. One round trip: the current run version ids and the few most recent stored fits for
    these options, in one ``UNION ALL``. Only when the matching fit is older than those
    does a second query look it up.
    """
    run_ids: list[int] = []
    fits: list[tuple[int, dt.datetime, str]] = []
    rows = session.execute(
        _CURRENT_VERSION_AND_FITS,
        {"substance_id": int(substance_id), "options_key": options_key},
    )
    for is_fit, row_id, created_at, data_version in rows:
        if int(is_fit):
            fits.append((int(row_id), created_at, data_version))
        else:
            run_ids.append(int(row_id))
    version = crud.data_version_of(substance_id=substance_id, run_version_ids=run_ids)
    for fit_id, created_at, data_version in fits:
        if data_version == version:
            return version, (fit_id, created_at)
    if len(fits) < RECENT_FITS_CHECKED:
        return version, None  # every stored fit for these options was looked at
    return version, crud.cached_fit_ref(
        session, substance_id=substance_id, data_version=version, options_key=options_key
    )


def _check_as_of(as_of: dt.datetime) -> dt.datetime:
    """``as_of`` in UTC; refuse a time without zone or one in the future."""
    from kinetics.errors import InputError

    if as_of.tzinfo is None or as_of.utcoffset() is None:
        raise InputError(f"as_of {as_of.isoformat()} needs a time zone, e.g. ...Z for UTC")
    as_of = as_of.astimezone(dt.timezone.utc)
    now = dt.datetime.now(dt.timezone.utc)
    if as_of > now:
        raise InputError(
            f"as_of {as_of.isoformat()} is in the future (now {now.isoformat()}); leave it "
            "out for the current model"
        )
    return as_of


def load_model(
    factory: sessionmaker[Session], *, substance_id: int, options: FitOptions,
    as_of: dt.datetime | None = None,
) -> StoredModel:
    """The surface of ``substance_id`` fitted with ``options`` (cached when possible).

    With ``as_of`` (a past, timezone-aware time) the fit uses the run versions that were
    current then, so it is the model (and gives the predictions) a client got at that time.

    Raises
    ------
    service.errors.NotFound
        Unknown substance.
    kinetics.errors.KineticsError
        The current runs cannot support the fit (mapped to 422); ``as_of`` without a time
        zone or in the future (InputError).
    """
    if as_of is not None:
        as_of = _check_as_of(as_of)
    key = options_key(options.model_dump(mode="json"))
    restored = _restored_fits(factory)
    engine = factory.kw.get("bind")
    if as_of is None and engine is not None:
        # the common case, a fit restored in this process, needs no ORM session
        with engine.connect() as conn:
            version, ref = _current_version_and_fit(
                conn, substance_id=substance_id, options_key=key
            )
            conn.rollback()
        if ref is not None:
            hit = restored.get((substance_id, version, key, ref))
            if hit is not None:
                return StoredModel(
                    result=hit[1], substance_id=substance_id, substance_name=hit[0],
                    data_version=version, fitted_at=ref[1], cached=True,
                )
    with factory() as session:
        runs = None
        if as_of is None:
            # ids only: on a cache hit the observations are never loaded
            version, ref = _current_version_and_fit(
                session, substance_id=substance_id, options_key=key
            )
        else:
            runs = crud.runs_as_of(session, substance_id=substance_id, as_of=as_of)
            version = crud.data_version_of(substance_id=substance_id, run_version_ids=[r.id for r in runs])
            ref = crud.cached_fit_ref(
                session, substance_id=substance_id, data_version=version, options_key=key
            )
        if ref is not None:
            hit = restored.get((substance_id, version, key, ref))
            if hit is not None:
                return StoredModel(
                    result=hit[1], substance_id=substance_id, substance_name=hit[0],
                    data_version=version, fitted_at=ref[1], cached=True, as_of=as_of,
                )
        substance = crud.get_substance(session, substance_id=substance_id)
        name = substance.name
        entry = None
        if ref is not None:
            entry = crud.get_cached_fit(
                session, substance_id=substance_id, data_version=version, options_key=key
            )
        if entry is not None:
            result = _restore(entry.fit_json, entry.diagnostics_json)
            restored.put((substance_id, version, key, (entry.id, entry.created_at)), (name, result))
            return StoredModel(
                result=result, substance_id=substance_id, substance_name=name, data_version=version,
                fitted_at=entry.created_at, cached=True, as_of=as_of,
            )
        if runs is None:
            runs = crud.current_runs(session, substance_id=substance_id)
            # the version of exactly the runs fitted (a writer may have committed meanwhile)
            version = crud.data_version_of(substance_id=substance_id, run_version_ids=[r.id for r in runs])
        inputs = [run_input_from_model(r) for r in runs]
        session.rollback()
    result = compute_fit(inputs, **options.kinetics_kwargs())
    fit_json = json.dumps(result.surface.to_dict(), allow_nan=False)
    with session_scope(factory, write=True) as session:
        entry = crud.store_fit(
            session, substance_id=substance_id, data_version=version, options_key=key,
            fit_json=fit_json, diagnostics_json=result.diagnostics_json(),
        )
        fit_json, diagnostics_json, fitted_at = entry.fit_json, entry.diagnostics_json, entry.created_at
        entry_ref = (int(entry.id), entry.created_at)
    result = _restore(fit_json, diagnostics_json)
    restored.put((substance_id, version, key, entry_ref), (name, result))
    return StoredModel(
        result=result, substance_id=substance_id,
        substance_name=name, data_version=version, fitted_at=fitted_at, cached=False,
        as_of=as_of,
    )
