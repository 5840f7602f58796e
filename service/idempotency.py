"""Idempotent POSTs: a retried request with the same ``Idempotency-Key`` creates nothing new.

A laboratory system that times out does not know whether its POST was stored; it repeats
the request with the same ``Idempotency-Key`` header. The service then answers

* same key, same request (method, path, query and JSON body): the status and body of the
  original response, with the header ``Idempotent-Replayed: true``; nothing is stored;
* same key, different request: 409, nothing is stored;
* a key first seen: the request is processed normally and its response remembered for
  ``idempotency_ttl_s`` seconds (setting ``FIELDRATE_IDEMPOTENCY_TTL_S``, default 24 h).

Keys belong to the API key that sent them (``key_owner`` is the stored hash of that API
key), so two clients can never see each other's responses.

How it stays correct when a retry races the original or the server dies mid-request:
the record of a key is inserted *inside the request's own write transaction*, first thing
after the transaction begins (a session ``after_begin`` hook on the application's session
factory). The unique constraint on ``(key_owner, key)`` then decides: the second of two
concurrent requests cannot insert its record until the first transaction ends (SQLite
serialises writers with ``BEGIN IMMEDIATE``; PostgreSQL makes the second insert wait for
the first transaction), and fails if the first committed. The data and the record are
committed together or not at all, so after a crash a retry either finds the record (and
the data) or finds neither and stores the data once. Requests that store nothing (a
validation error, a 404) roll back their record with everything else and are not
remembered. The response is written into the record right after the commit, before it is
sent to the client; a retry arriving in between waits for it.
"""

from __future__ import annotations

import asyncio
import datetime as dt
import hashlib
import json
import logging
import time
from contextvars import ContextVar
from dataclasses import dataclass
from typing import Any, Optional

from fastapi import FastAPI
from fastapi.routing import APIRoute
from sqlalchemy import delete, insert, select, update
from sqlalchemy.exc import IntegrityError, OperationalError
from sqlalchemy.orm import Session, sessionmaker
from starlette.concurrency import run_in_threadpool
from starlette.datastructures import Headers

from service.db import WRITE_OPTION
from service.models import IdempotencyRecord, utcnow
from service.security import SCOPE_KEY, send_unavailable

__all__ = [
    "HEADER",
    "REPLAYED_HEADER",
    "MAX_KEY_CHARS",
    "request_fingerprint",
    "install_session_hooks",
    "IdempotencyMiddleware",
    "document_idempotency",
    "purge_expired",
    "redact_in_record",
    "install_idempotency",
    "stores_data",
]

log = logging.getLogger("fieldrate.service.idempotency")

#: request header naming the idempotency key (case-insensitive)
HEADER = "Idempotency-Key"
#: response header set on a replayed response
REPLAYED_HEADER = "Idempotent-Replayed"
#: longest accepted key [characters]; keys are visible ASCII (no spaces)
MAX_KEY_CHARS = 200

#: ``response_status`` of a record whose transaction committed but whose response is not
#: yet written (it is being sent, or the server stopped in between)
_PENDING_STATUS = 0
#: how long a retry waits for the original request to write its response [s]
_WAIT_FOR_ORIGINAL_S = 30.0
#: how often expired records are purged at most, per process [s]
_PURGE_INTERVAL_S = 300.0

_current: ContextVar[Optional["_Claim"]] = ContextVar("fieldrate_idempotency_claim", default=None)
_last_purge = 0.0


@dataclass
class _Claim:
    """The idempotency key of the request being processed and what became of its record."""

    owner: str
    key: str
    request_hash: str
    record_id: Optional[int] = None
    inserted: bool = False
    committed: bool = False
    lost_race: bool = False
    redact: tuple[tuple[str, str], ...] = ()


@dataclass(frozen=True)
class _Stored:
    record_id: int
    request_hash: str
    status: int
    body: str
    created_at: dt.datetime


# --------------------------------------------------------------------------- fingerprint
def request_fingerprint(method: str, path: str, query: bytes | str, body: bytes) -> str:
    """SHA-256 of the request: method, path, query string and body.

    A JSON body is compared by content (key order and white space do not matter); any
    other body byte for byte.
    """
    try:
        canonical = json.dumps(
            json.loads(body), sort_keys=True, separators=(",", ":"), ensure_ascii=False
        ).encode("utf-8")
    except (ValueError, UnicodeDecodeError, RecursionError):
        canonical = body
    q = query.decode("latin-1") if isinstance(query, bytes) else query
    digest = hashlib.sha256()
    for part in (method.upper().encode(), path.encode("utf-8"), q.encode("latin-1", "replace")):
        digest.update(part)
        digest.update(b"\x00")
    digest.update(canonical)
    return digest.hexdigest()


def redact_in_record(field: str, note: str) -> None:
    """Keep the top-level JSON ``field`` of this request's response out of its record.

    For responses holding a secret (a new API key): a replay shows ``note`` in its place.
    Call it from a handler; without an Idempotency-Key it does nothing.
    """
    claim = _current.get()
    if claim is not None:
        claim.redact = (*claim.redact, (field, note))


def _redacted(text: str, redact: tuple[tuple[str, str], ...]) -> str:
    if not redact:
        return text
    try:
        payload = json.loads(text)
    except ValueError:
        return json.dumps({"detail": "the original response is not kept"})
    if isinstance(payload, dict):
        for field, note in redact:
            if field in payload:
                payload[field] = note
    return json.dumps(payload)


def _validate_key(value: str) -> Optional[str]:
    """None if ``value`` is an acceptable key, else the reason it is not."""
    if not value:
        return "the Idempotency-Key header is empty; send 1 to 200 visible characters"
    if len(value) > MAX_KEY_CHARS:
        return (
            f"the Idempotency-Key has {len(value)} characters; at most {MAX_KEY_CHARS} are "
            "accepted (a UUID is a good key)"
        )
    if any(not 0x21 <= ord(ch) <= 0x7E for ch in value):
        return (
            f"the Idempotency-Key {value[:60]!r} contains spaces or characters outside visible "
            "ASCII; a UUID is a good key"
        )
    return None


# --------------------------------------------------------------------------- session hooks
def _after_begin(session: Session, _transaction: Any, connection: Any) -> None:
    claim = _current.get()
    if claim is None or claim.inserted:
        return
    if not connection.get_execution_options().get(WRITE_OPTION):
        return
    try:
        result = connection.execute(
            insert(IdempotencyRecord).values(
                key=claim.key,
                key_owner=claim.owner,
                request_hash=claim.request_hash,
                response_status=_PENDING_STATUS,
                response_body="",
                created_at=utcnow(),
            )
        )
    except IntegrityError:
        # another request with this key committed first (or is being committed): the
        # middleware answers with its response once it is written
        claim.lost_race = True
        raise
    claim.record_id = int(result.inserted_primary_key[0])
    claim.inserted = True
    session.info["idempotency_claim"] = claim


def _after_commit(session: Session) -> None:
    if session.get_nested_transaction() is not None:
        return  # a savepoint: the record is committed only with the outer transaction
    claim = session.info.pop("idempotency_claim", None)
    if claim is not None:
        claim.committed = True


def _after_rollback(session: Session) -> None:
    if session.get_nested_transaction() is not None:
        return  # a savepoint rolled back; the outer transaction still holds the record
    claim = session.info.pop("idempotency_claim", None)
    if claim is not None and not claim.committed:
        # the record went with the rest of the transaction
        claim.inserted = False
        claim.record_id = None


def install_session_hooks(factory: sessionmaker[Session]) -> None:
    """Make write transactions of ``factory`` carry the current request's key record."""
    from sqlalchemy import event

    if getattr(factory, "_fieldrate_idempotency", False):
        return
    event.listen(factory, "after_begin", _after_begin)
    event.listen(factory, "after_commit", _after_commit)
    event.listen(factory, "after_rollback", _after_rollback)
    factory._fieldrate_idempotency = True  # type: ignore[attr-defined]


# --------------------------------------------------------------------------- storage
def _write_session(factory: sessionmaker[Session]) -> Session:
    session = factory()
    session.connection(execution_options={WRITE_OPTION: True})
    return session


def _find(factory: sessionmaker[Session], owner: str, key: str) -> Optional[_Stored]:
    with factory() as session:
        row = session.scalar(
            select(IdempotencyRecord).where(
                IdempotencyRecord.key_owner == owner, IdempotencyRecord.key == key
            )
        )
        if row is None:
            return None
        return _Stored(
            record_id=row.id, request_hash=row.request_hash, status=row.response_status,
            body=row.response_body, created_at=row.created_at,
        )


def _forget(factory: sessionmaker[Session], record_id: int) -> None:
    session = _write_session(factory)
    try:
        session.execute(delete(IdempotencyRecord).where(IdempotencyRecord.id == record_id))
        session.commit()
    finally:
        session.close()


def purge_expired(factory: sessionmaker[Session], ttl_s: float) -> int:
    """Delete records older than ``ttl_s`` [s]; returns how many were deleted."""
    cutoff = utcnow() - dt.timedelta(seconds=float(ttl_s))
    session = _write_session(factory)
    try:
        result = session.execute(
            delete(IdempotencyRecord).where(IdempotencyRecord.created_at < cutoff)
        )
        session.commit()
        return int(result.rowcount or 0)
    finally:
        session.close()


def _maybe_purge(factory: sessionmaker[Session], ttl_s: float) -> None:
    global _last_purge
    now = time.monotonic()
    if now - _last_purge < _PURGE_INTERVAL_S:
        return
    _last_purge = now
    try:
        purge_expired(factory, ttl_s)
    except Exception as exc:  # a busy database only delays the clean-up
        log.warning("could not purge expired idempotency records: %s", exc)


def _lookup(
    factory: sessionmaker[Session], owner: str, key: str, ttl_s: float
) -> Optional[_Stored]:
    """The live record of ``(owner, key)``; an expired one is deleted and ignored."""
    _maybe_purge(factory, ttl_s)
    stored = _find(factory, owner, key)
    if stored is None:
        return None
    if stored.created_at < utcnow() - dt.timedelta(seconds=float(ttl_s)):
        _forget(factory, stored.record_id)
        return None
    return stored


def _store_response(
    factory: sessionmaker[Session], record_id: int, status: int, body: str
) -> None:
    session = _write_session(factory)
    try:
        session.execute(
            update(IdempotencyRecord)
            .where(IdempotencyRecord.id == record_id)
            .values(response_status=status, response_body=body)
        )
        session.commit()
    finally:
        session.close()


# --------------------------------------------------------------------------- middleware
def _json_response(status: int, payload: Any, extra: list[tuple[bytes, bytes]] = ()) -> tuple:
    body = json.dumps(payload).encode("utf-8")
    headers = [
        (b"content-type", b"application/json"),
        (b"content-length", str(len(body)).encode()),
        *extra,
    ]
    return status, headers, body


def _mismatch(key: str) -> tuple:
    return _json_response(409, {
        "error": "idempotency_key_reused",
        "detail": (
            f"the Idempotency-Key {key[:60]!r} was already used for a different request "
            "(another path or body); nothing was stored. Use a new key for a new request"
        ),
    })


def _not_recorded(key: str) -> tuple:
    return _json_response(409, {
        "error": "idempotency_key_in_progress",
        "detail": (
            f"a request with the Idempotency-Key {key[:60]!r} was stored, but its response "
            "has not been recorded (it is still being answered, or the server stopped before "
            "answering). Nothing new was stored; read the data back instead of posting again"
        ),
    })


def _replay(stored: _Stored) -> tuple:
    body = stored.body.encode("utf-8")
    return stored.status, [
        (b"content-type", b"application/json"),
        (b"content-length", str(len(body)).encode()),
        (REPLAYED_HEADER.lower().encode(), b"true"),
    ], body


async def _send(send, response: tuple) -> None:
    status, headers, body = response
    await send({"type": "http.response.start", "status": status, "headers": headers})
    await send({"type": "http.response.body", "body": body})


class IdempotencyMiddleware:
    """ASGI middleware giving the storing POSTs replay semantics for ``Idempotency-Key``.

    The storing POSTs are those whose handler takes a write session (see
    :func:`idempotent_operations`); other POSTs (calculations, predictions) ignore the
    header. Only requests with a valid API key take part (the application refuses the
    others with 401), so it must run inside :class:`service.security.KeyCheckMiddleware`.
    A request that ends up writing nothing is not remembered.
    """

    def __init__(self, app):
        self.app = app
        self._patterns: Optional[list[Any]] = None

    def _applies(self, app: FastAPI, path: str) -> bool:
        if self._patterns is None:
            from starlette.routing import compile_path

            self._patterns = [compile_path(p)[0] for p, _m in idempotent_operations(app)]
        return any(pattern.match(path) for pattern in self._patterns)

    async def __call__(self, scope, receive, send):
        answered = False

        async def tracking_send(message):
            nonlocal answered
            if message["type"] == "http.response.start":
                answered = True
            await send(message)

        try:
            await self._handle(scope, receive, tracking_send)
        except OperationalError:
            # the database failed in a look-up of this middleware (the application's own
            # failures are answered by its handlers): nothing was stored
            if not answered:
                await send_unavailable(send)
            else:
                raise

    async def _handle(self, scope, receive, send):
        if scope["type"] != "http" or scope.get("method") != "POST":
            await self.app(scope, receive, send)
            return
        if not self._applies(scope["app"], scope.get("path", "")):
            await self.app(scope, receive, send)
            return
        headers = Headers(scope=scope)
        key = headers.get(HEADER.lower())
        if key is None:
            await self.app(scope, receive, send)
            return
        problem = _validate_key(key)
        if problem is not None:
            await _send(send, _json_response(422, {
                "error": "validation_error",
                "detail": [{"loc": ["header", HEADER], "msg": problem, "type": "value_error"}],
            }))
            return
        check = scope.get(SCOPE_KEY)
        if check is None or check.key is None:
            # no valid API key: the application refuses the request (401) by itself
            await self.app(scope, receive, send)
            return
        app = scope["app"]
        settings = app.state.settings
        factory = app.state.session_factory
        owner = check.key.key_hash
        ttl_s = float(settings.idempotency_ttl_s)

        chunks = []
        while True:
            message = await receive()
            if message["type"] == "http.disconnect":
                return
            chunks.append(message.get("body", b""))
            if not message.get("more_body", False):
                break
        body = b"".join(chunks)
        request_hash = request_fingerprint(
            scope["method"], scope.get("path", ""), scope.get("query_string", b""), body
        )

        stored = await run_in_threadpool(_lookup, factory, owner, key, ttl_s)
        if stored is not None:
            await _send(send, await self._answer_from_record(factory, owner, key, request_hash, stored))
            return

        claim = _Claim(owner=owner, key=key, request_hash=request_hash)
        delivered = False

        async def replay_receive():
            nonlocal delivered
            if not delivered:
                delivered = True
                return {"type": "http.request", "body": body, "more_body": False}
            return await receive()

        start: dict = {}
        parts: list[bytes] = []

        async def buffer_send(message):
            if message["type"] == "http.response.start":
                start.update(message)
            elif message["type"] == "http.response.body":
                parts.append(message.get("body", b""))

        token = _current.set(claim)
        try:
            await self.app(scope, replay_receive, buffer_send)
        finally:
            _current.reset(token)

        if claim.lost_race:
            stored = await run_in_threadpool(_find, factory, owner, key)
            if stored is not None:
                await _send(send, await self._answer_from_record(factory, owner, key, request_hash, stored))
                return
        response_body = b"".join(parts)
        if claim.committed and claim.record_id is not None:
            try:
                text = response_body.decode("utf-8")
            except UnicodeDecodeError:
                text = json.dumps({"detail": "the original response was not text"})
            text = _redacted(text, claim.redact)
            try:
                await run_in_threadpool(
                    _store_response, factory, claim.record_id, int(start.get("status", 200)), text
                )
            except Exception as exc:  # the data is stored; a retry is told so (409)
                log.error("could not record the response of Idempotency-Key %r: %s", key, exc)
        await send({
            "type": "http.response.start",
            "status": start.get("status", 500),
            "headers": start.get("headers", []),
        })
        await send({"type": "http.response.body", "body": response_body})

    async def _answer_from_record(
        self, factory, owner: str, key: str, request_hash: str, stored: _Stored
    ) -> tuple:
        """Replay, 409 for a different request, or wait for an unfinished original."""
        if stored.request_hash != request_hash:
            return _mismatch(key)
        waited = 0.0
        delay = 0.02
        while stored.status == _PENDING_STATUS:
            age_s = (utcnow() - stored.created_at).total_seconds()
            if waited >= _WAIT_FOR_ORIGINAL_S or age_s > _WAIT_FOR_ORIGINAL_S:
                return _not_recorded(key)
            await asyncio.sleep(delay)
            waited += delay
            delay = min(delay * 2, 0.5)
            refreshed = await run_in_threadpool(_find, factory, owner, key)
            if refreshed is None:
                return _not_recorded(key)
            stored = refreshed
        return _replay(stored)


# --------------------------------------------------------------------------- OpenAPI
def _api_routes(app: FastAPI) -> list[Any]:
    """The application's API routes, with the path prefixes of included routers applied."""
    try:
        from fastapi.routing import iter_route_contexts
    except ImportError:  # FastAPI before routers were kept as included contexts
        return [r for r in app.routes if isinstance(r, APIRoute)]
    return [c for c in iter_route_contexts(app.routes) if isinstance(c.original_route, APIRoute)]


def stores_data() -> None:
    """Marker dependency for a POST that stores data without taking a ``WriteSession``.

    ``@router.post(..., dependencies=[Depends(stores_data)])`` makes the route honour
    ``Idempotency-Key`` (its own write transaction then carries the key's record).
    """


def _writes(route: Any) -> bool:
    """Whether the route takes a write session or is marked with :func:`stores_data`."""
    from service.deps import get_write_session

    stack = [route.dependant]
    while stack:
        dep = stack.pop()
        if dep.call is get_write_session or dep.call is stores_data:
            return True
        stack.extend(dep.dependencies)
    return False


def idempotent_operations(app: FastAPI) -> list[tuple[str, str]]:
    """``(path, "post")`` of every POST route that writes to the database."""
    return [
        (route.path_format, "post")
        for route in _api_routes(app)
        if "POST" in route.methods and _writes(route)
    ]


IDEMPOTENCY_PARAMETER = {
    "name": HEADER,
    "in": "header",
    "required": False,
    "description": (
        "Any unique string (a UUID is a good choice). Repeating a request with the same key "
        "returns the original response and stores nothing new; reusing a key for a different "
        "request is a 409. Keys are remembered for the configured retention time."
    ),
    "schema": {"type": "string", "minLength": 1, "maxLength": MAX_KEY_CHARS,
               "pattern": "^[!-~]+$"},
}


def document_idempotency(app: FastAPI, schema: dict[str, Any]) -> dict[str, Any]:
    """Add the ``Idempotency-Key`` header and its 409 to the writing POSTs of ``schema``."""
    paths = schema.get("paths", {})
    for path, method in idempotent_operations(app):
        operation = paths.get(path, {}).get(method)
        if operation is None:
            continue
        params = operation.setdefault("parameters", [])
        if not any(p.get("name") == HEADER and p.get("in") == "header" for p in params):
            params.append(dict(IDEMPOTENCY_PARAMETER))
    return schema


def install_idempotency(app: FastAPI) -> None:
    """Wire API-key checks and idempotent POSTs into ``app`` (middleware, session hooks,
    the ``Idempotency-Key`` header in the OpenAPI document).

    Call it after ``app.state.session_factory`` is set and before outer middleware (the
    body size limit) is added.
    """
    from service.security import install_key_check

    install_session_hooks(app.state.session_factory)
    app.add_middleware(IdempotencyMiddleware)
    install_key_check(app)  # outside: the key is known before idempotency is decided
    build_schema = app.openapi

    def openapi() -> dict[str, Any]:
        from service.errors import json_error_media_types

        return json_error_media_types(document_idempotency(app, build_schema()))

    app.openapi = openapi  # type: ignore[method-assign]
