"""API keys: creation, hashing, revocation and the request check (401/403).

A key is a random secret (``frk_`` followed by 43 URL-safe characters, 256 bits from
:func:`secrets.token_urlsafe`) shown once, when it is created. The database stores only
``HMAC-SHA256(pepper, secret)`` as hexadecimal: the pepper is the server secret
``FIELDRATE_API_KEY_PEPPER`` (empty by default, which makes it a plain keyed SHA-256 of a
256-bit random secret; set a pepper so that a copy of the database alone cannot be used
to test guessed keys). Changing the pepper invalidates every stored key. A fast hash is
enough because the secrets are random and long, unlike passwords.

Scopes form a ladder:

=========  ==========================================================================
scope      grants
=========  ==========================================================================
read       reading substances, studies, runs, models, predictions and the audit trail
ingest     read, plus registering studies and posting, correcting (superseding) and
           withdrawing runs
admin      ingest, plus registering substances and managing API keys
=========  ==========================================================================

A request names its key in ``Authorization: Bearer <key>`` or ``X-API-Key: <key>``.
A missing, unknown, malformed or revoked key is a 401; a valid key without the scope the
operation needs is a 403. Both carry the same message, so a caller learns nothing beyond
the status code. When the setting ``anonymous_read`` is on, a request *without* any key
may read; a request that presents a bad key is still refused.

Each process remembers the keys it has verified (by hash) for ``key_cache_ttl_s`` seconds
(setting ``FIELDRATE_KEY_CACHE_TTL_S``, 2 s by default, 0 turns it off), so a busy client
does not cost a database lookup per request. A revocation made in the same process takes
effect at once; in *another* process (another worker, the command line) a revoked key may
still work for at most ``key_cache_ttl_s`` seconds. Unknown keys are never remembered, so a
new key works at once everywhere.
"""

from __future__ import annotations

import hashlib
import hmac
import secrets
import threading
import time
import weakref
from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass
from typing import Annotated, Optional

from fastapi import Depends, Request
from fastapi.security import APIKeyHeader, HTTPAuthorizationCredentials, HTTPBearer
from sqlalchemy import event, select
from sqlalchemy.orm import Session

from service.errors import UNAVAILABLE_BODY, Conflict, NotFound, ServiceError
from service.models import ApiKey, utcnow

__all__ = [
    "SCOPES",
    "KEY_PREFIX",
    "DENIED_MESSAGE",
    "NotAuthenticated",
    "NotPermitted",
    "AuthenticatedKey",
    "parse_scopes",
    "expand_scopes",
    "generate_secret",
    "hash_secret",
    "credential_from_headers",
    "create_api_key",
    "issue_key",
    "list_api_keys",
    "revoke_api_key",
    "authenticate",
    "forget_verified_keys",
    "principal_for_request",
    "KeyCheckMiddleware",
    "install_key_check",
    "send_unavailable",
    "require_scope",
]

#: the scopes a key can hold, from least to most powerful
SCOPES: tuple[str, ...] = ("read", "ingest", "admin")

#: what each scope grants (the ladder described in the module docstring)
_GRANTS: dict[str, frozenset[str]] = {
    "read": frozenset({"read"}),
    "ingest": frozenset({"read", "ingest"}),
    "admin": frozenset({"read", "ingest", "admin"}),
}

#: every generated secret starts with this, so a leaked key is easy to recognise
KEY_PREFIX = "frk_"

#: presented credentials longer than this are refused without hashing [characters]
_MAX_CREDENTIAL_CHARS = 512

#: the one message of every 401 and 403: it never says which part was wrong
DENIED_MESSAGE = (
    "not authorised: this operation needs a valid API key with a sufficient scope, sent as "
    "'Authorization: Bearer <key>' or 'X-API-Key: <key>'"
)

#: the label the audit trail records for anonymous readers
ANONYMOUS_LABEL = "anonymous"


class NotAuthenticated(ServiceError):
    """No usable key (missing, unknown, malformed or revoked): HTTP 401."""

    status_code = 401
    code = "not_authorised"
    headers = {"WWW-Authenticate": 'Bearer realm="fieldrate"'}

    def __init__(self) -> None:
        super().__init__(DENIED_MESSAGE)


class NotPermitted(ServiceError):
    """A valid key without the scope the operation needs: HTTP 403."""

    status_code = 403
    code = "not_authorised"

    def __init__(self) -> None:
        super().__init__(DENIED_MESSAGE)


@dataclass(frozen=True)
class AuthenticatedKey:
    """A key that was presented and found valid."""

    key_id: int
    label: str
    scopes: frozenset[str]
    key_hash: str


# --------------------------------------------------------------------------- scopes
def parse_scopes(scopes: str | Iterable[str]) -> tuple[str, ...]:
    """Normalise scopes given as ``"read ingest"``, ``"read,ingest"`` or a list.

    Returns the distinct scopes in ladder order.

    Raises
    ------
    kinetics.errors.InputError
        If a scope is unknown or none is given; the message lists the valid scopes.
    """
    from kinetics.errors import InputError

    if isinstance(scopes, str):
        items = scopes.replace(",", " ").split()
    else:
        items = [str(s).strip() for s in scopes]
    items = [s for s in items if s]
    unknown = [s for s in items if s not in SCOPES]
    if unknown:
        raise InputError(
            f"unknown scope(s) {', '.join(repr(s) for s in unknown)}; valid scopes are "
            f"{', '.join(SCOPES)}"
        )
    if not items:
        raise InputError(f"give at least one scope: {', '.join(SCOPES)}")
    return tuple(s for s in SCOPES if s in items)


def expand_scopes(scopes: str | Iterable[str]) -> frozenset[str]:
    """Everything the given scopes grant (``admin`` grants ``ingest`` and ``read`` too).

    A stored scope string with an unknown entry grants nothing for that entry.
    """
    items = scopes.replace(",", " ").split() if isinstance(scopes, str) else list(scopes)
    granted: set[str] = set()
    for item in items:
        granted |= _GRANTS.get(item, frozenset())
    return frozenset(granted)


# --------------------------------------------------------------------------- secrets
def generate_secret() -> str:
    """A new random API key: ``frk_`` + 43 URL-safe characters (256 bits)."""
    return KEY_PREFIX + secrets.token_urlsafe(32)


def hash_secret(secret: str, pepper: str = "") -> str:
    """The stored form of a key: hexadecimal ``HMAC-SHA256(pepper, secret)`` (64 characters)."""
    return hmac.new(pepper.encode("utf-8"), secret.encode("utf-8"), hashlib.sha256).hexdigest()


def credential_from_headers(headers: Mapping[str, str]) -> Optional[str]:
    """The key a request presents, or None if it presents none.

    ``Authorization: Bearer <key>`` wins over ``X-API-Key``. ``headers`` is any
    case-insensitive mapping (Starlette ``Headers``). An ``Authorization`` header of
    another scheme counts as presenting a (bad) credential, returned as is so that it
    fails the lookup instead of falling back to anonymous access.
    """
    auth = headers.get("authorization")
    if auth is not None:
        scheme, _, value = auth.strip().partition(" ")
        if scheme.lower() == "bearer" and value.strip():
            return value.strip()
        return auth
    key = headers.get("x-api-key")
    if key is not None:
        return key.strip()
    return None


# --------------------------------------------------------------------------- storage
def create_api_key(
    session: Session,
    *,
    label: str,
    scopes: str | Iterable[str],
    actor: str,
    pepper: str = "",
) -> tuple[ApiKey, str]:
    """Create a key; returns the stored row and the secret (the only time it is known).

    The caller commits. The creation is recorded in the audit trail.

    Raises
    ------
    kinetics.errors.InputError
        If the label is blank or a scope is unknown.
    """
    from kinetics.errors import InputError

    from service.crud import record_audit

    clean_label = (label or "").strip()
    if not clean_label:
        raise InputError("a key needs a label saying who uses it, e.g. 'LIMS building 2'")
    if clean_label.lower() == ANONYMOUS_LABEL:
        raise InputError(
            f"the label {clean_label!r} is reserved for readers without a key; choose another"
        )
    if len(clean_label) > 200:
        raise InputError(f"the label has {len(clean_label)} characters; at most 200 are allowed")
    granted = parse_scopes(scopes)
    secret = generate_secret()
    row = ApiKey(
        label=clean_label,
        key_hash=hash_secret(secret, pepper),
        scopes=" ".join(granted),
        created_at=utcnow(),
    )
    session.add(row)
    session.flush()
    record_audit(
        session, actor=actor, entity="api_key", entity_id=row.id, action="create",
        reason=f"label {clean_label!r}, scopes {' '.join(granted)}",
    )
    return row, secret


def issue_key(
    factory, *, label: str, scopes: str | Iterable[str], actor: str, pepper: str = ""
) -> tuple[int, str]:
    """Create a key in a transaction of its own; returns ``(key id, secret)``.

    ``factory`` is a session factory (``app.state.session_factory``).
    """
    from service.db import session_scope

    with session_scope(factory, write=True) as session:
        row, secret = create_api_key(
            session, label=label, scopes=scopes, actor=actor, pepper=pepper
        )
        return row.id, secret


def list_api_keys(session: Session, *, include_revoked: bool = True) -> list[ApiKey]:
    """All keys (never their secrets), oldest first."""
    stmt = select(ApiKey).order_by(ApiKey.id)
    if not include_revoked:
        stmt = stmt.where(ApiKey.revoked_at.is_(None))
    return list(session.scalars(stmt).all())


def revoke_api_key(
    session: Session, *, key_id: int, actor: str, reason: Optional[str] = None
) -> ApiKey:
    """Revoke a key (it stays listed, with its revocation time). The caller commits.

    Raises
    ------
    service.errors.NotFound
        If no key has this id.
    service.errors.Conflict
        If the key is already revoked.
    """
    from service.crud import record_audit

    row = session.get(ApiKey, key_id)
    if row is None:
        raise NotFound(f"no API key with id {key_id}")
    if row.revoked_at is not None:
        raise Conflict(
            f"API key {key_id} ({row.label!r}) was already revoked at "
            f"{row.revoked_at.isoformat()}; nothing changed"
        )
    row.revoked_at = utcnow()
    session.flush()
    # forget verified keys now and again once the revocation is committed, so that a
    # lookup racing with the commit cannot keep the key alive in this process
    forget_verified_keys()
    event.listen(session, "after_commit", lambda _s: forget_verified_keys(), once=True)
    record_audit(
        session, actor=actor, entity="api_key", entity_id=row.id, action="revoke",
        reason=reason or f"label {row.label!r}",
    )
    return row


def authenticate(session: Session, secret: str, *, pepper: str = "") -> Optional[AuthenticatedKey]:
    """The valid (not revoked) key matching ``secret``, or None."""
    if not secret or len(secret) > _MAX_CREDENTIAL_CHARS:
        return None
    digest = hash_secret(secret, pepper)
    row = session.scalar(
        select(ApiKey).where(ApiKey.key_hash == digest, ApiKey.revoked_at.is_(None))
    )
    if row is None:
        return None
    return AuthenticatedKey(
        key_id=row.id, label=row.label, scopes=expand_scopes(row.scopes), key_hash=digest
    )


# --------------------------------------------------------------------------- verified keys
#: verified keys remembered per database, at most this many (the oldest go first)
VERIFIED_KEYS_PER_DATABASE = 1024


class _VerifiedKeys:
    """Thread-safe map: key hash -> (valid key, monotonic expiry time [s])."""

    def __init__(self) -> None:
        self._items: dict[str, tuple[AuthenticatedKey, float]] = {}
        self._lock = threading.Lock()

    def get(self, digest: str) -> Optional[AuthenticatedKey]:
        item = self._items.get(digest)
        if item is None:
            return None
        if item[1] <= time.monotonic():
            with self._lock:
                self._items.pop(digest, None)
            return None
        return item[0]

    def put(self, key: AuthenticatedKey, ttl_s: float, epoch: int) -> None:
        with self._lock:
            if epoch != _epoch[0]:  # a revocation happened while the key was looked up
                return
            if len(self._items) >= VERIFIED_KEYS_PER_DATABASE:
                self._items.pop(next(iter(self._items)))
            self._items[key.key_hash] = (key, time.monotonic() + ttl_s)

    def clear(self) -> None:
        with self._lock:
            self._items.clear()


_VERIFIED: "weakref.WeakKeyDictionary[object, _VerifiedKeys]" = weakref.WeakKeyDictionary()
_VERIFIED_LOCK = threading.Lock()
#: bumped by every revocation in this process; a lookup begun before it is not remembered
_epoch = [0]


def _verified_keys(factory) -> _VerifiedKeys:
    cache = _VERIFIED.get(factory)
    if cache is None:
        with _VERIFIED_LOCK:
            cache = _VERIFIED.get(factory)
            if cache is None:
                cache = _VERIFIED[factory] = _VerifiedKeys()
    return cache


def forget_verified_keys() -> None:
    """Drop every remembered verified key of this process (called on revocation)."""
    with _VERIFIED_LOCK:
        _epoch[0] += 1
        caches = list(_VERIFIED.values())
    for cache in caches:
        cache.clear()


def _remembered(factory, secret: str, pepper: str, ttl_s: float) -> Optional[KeyCheck]:
    """The check of ``secret`` from the verified keys, or None when it must be looked up."""
    if ttl_s <= 0 or not secret or len(secret) > _MAX_CREDENTIAL_CHARS:
        return None
    key = _verified_keys(factory).get(hash_secret(secret, pepper))
    return None if key is None else KeyCheck(presented=True, key=key)


# --------------------------------------------------------------------------- middleware
#: key of the ASGI scope entry where :class:`KeyCheckMiddleware` leaves its result
SCOPE_KEY = "fieldrate.api_key"


@dataclass(frozen=True)
class KeyCheck:
    """What the request presented: ``presented`` False (no key), else the valid key or None."""

    presented: bool
    key: Optional[AuthenticatedKey]


def _check_with_factory(factory, secret: str, pepper: str, ttl_s: float = 0.0) -> KeyCheck:
    epoch = _epoch[0]
    with factory() as session:
        key = authenticate(session, secret, pepper=pepper)
    if key is not None and ttl_s > 0:
        _verified_keys(factory).put(key, ttl_s, epoch)
    return KeyCheck(presented=True, key=key)


class KeyCheckMiddleware:
    """Look the presented API key up once per request, before any handler runs.

    The result goes into the ASGI scope (:data:`SCOPE_KEY`), where
    :func:`principal_for_request` and the idempotency middleware read it. Doing it here,
    in a short session of its own, means no handler ever needs a second database
    connection while it holds a write transaction. A key verified within the last
    ``key_cache_ttl_s`` seconds is taken from memory, without leaving the event loop.
    """

    def __init__(self, app):
        self.app = app

    async def __call__(self, scope, receive, send):
        if scope["type"] == "http":
            from starlette.concurrency import run_in_threadpool
            from starlette.datastructures import Headers

            from sqlalchemy.exc import OperationalError

            secret = credential_from_headers(Headers(scope=scope))
            if secret is None:
                scope[SCOPE_KEY] = KeyCheck(presented=False, key=None)
            else:
                app = scope["app"]
                factory = app.state.session_factory
                settings = app.state.settings
                pepper, ttl_s = settings.api_key_pepper, settings.key_cache_ttl_s
                check = _remembered(factory, secret, pepper, ttl_s)
                if check is None:
                    try:
                        check = await run_in_threadpool(
                            _check_with_factory, factory, secret, pepper, ttl_s
                        )
                    except OperationalError:
                        await send_unavailable(send)
                        return
                scope[SCOPE_KEY] = check
        await self.app(scope, receive, send)


async def send_unavailable(send) -> None:
    """Answer 503 (database busy or unreachable) from an ASGI middleware."""
    import json

    body = json.dumps(UNAVAILABLE_BODY).encode()
    await send({"type": "http.response.start", "status": 503, "headers": [
        (b"content-type", b"application/json"), (b"content-length", str(len(body)).encode()),
        (b"retry-after", b"1"),
    ]})
    await send({"type": "http.response.body", "body": body})


def install_key_check(app) -> None:
    """Add :class:`KeyCheckMiddleware` to ``app`` (outside the idempotency middleware)."""
    app.add_middleware(KeyCheckMiddleware)


# --------------------------------------------------------------------------- FastAPI
# These two only document the accepted headers in the OpenAPI schema ("Authorize" in
# /docs); the credential itself is read by credential_from_headers.
_bearer = HTTPBearer(
    auto_error=False, scheme_name="BearerKey",
    description="An API key sent as 'Authorization: Bearer <key>'.",
)
_x_api_key = APIKeyHeader(
    name="X-API-Key", auto_error=False, scheme_name="ApiKeyHeader",
    description="An API key sent as 'X-API-Key: <key>'.",
)


async def principal_for_request(
    request: Request,
    _bearer_doc: Annotated[Optional[HTTPAuthorizationCredentials], Depends(_bearer)] = None,
    _header_doc: Annotated[Optional[str], Depends(_x_api_key)] = None,
):
    """The calling principal, or a 401 if the request presents a key that is not valid.

    Without any key the principal is anonymous (no scopes, or ``read`` when the setting
    ``anonymous_read`` is on); :func:`require_scope` refuses it where a scope is needed.
    Asynchronous because it normally only reads what :class:`KeyCheckMiddleware` found,
    so it runs on the event loop instead of costing a thread hand-off.
    """
    from service.deps import Principal

    settings = request.app.state.settings
    check = request.scope.get(SCOPE_KEY)
    if check is None:  # the app was built without KeyCheckMiddleware
        from starlette.concurrency import run_in_threadpool

        secret = credential_from_headers(request.headers)
        factory = request.app.state.session_factory
        pepper, ttl_s = settings.api_key_pepper, settings.key_cache_ttl_s
        if secret is None:
            check = KeyCheck(presented=False, key=None)
        else:
            check = _remembered(factory, secret, pepper, ttl_s) or await run_in_threadpool(
                _check_with_factory, factory, secret, pepper, ttl_s
            )
    if not check.presented:
        scopes = frozenset({"read"}) if settings.anonymous_read else frozenset()
        return Principal(label=ANONYMOUS_LABEL, scopes=scopes)
    if check.key is None:
        raise NotAuthenticated()
    return Principal(label=check.key.label, scopes=check.key.scopes)


def require_scope(scope: str) -> Callable[..., object]:
    """A dependency returning the principal if it holds ``scope``; else 401 or 403.

    An anonymous caller without the scope gets 401 (it has no key to be refused), a
    keyed caller without it 403.
    """
    if scope not in SCOPES:
        raise ValueError(f"unknown scope {scope!r}; valid scopes are {', '.join(SCOPES)}")

    async def _dependency(principal=Depends(principal_for_request)):
        if scope in principal.scopes:
            return principal
        if principal.label == ANONYMOUS_LABEL:
            raise NotAuthenticated()
        raise NotPermitted()

    return _dependency
