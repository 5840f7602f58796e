"""``fieldrate keys create|list|revoke``: manage API keys in the configured database."""

from __future__ import annotations

import argparse
import sys

from service.config import Settings

#: the audit trail's actor for key changes made from the command line
CLI_ACTOR = "command line"


def _session(args: argparse.Namespace):
    from service.db import make_engine, make_session_factory, session_scope
    from service.migrate import upgrade_head

    settings = Settings()
    url = args.database_url or settings.database_url
    upgrade_head(url)
    engine = make_engine(url, busy_timeout_ms=settings.sqlite_busy_timeout_ms)
    return engine, session_scope(make_session_factory(engine), write=True), settings


def _create(args: argparse.Namespace) -> int:
    from kinetics.errors import InputError
    from service.security import create_api_key

    engine, scope, settings = _session(args)
    try:
        with scope as session:
            row, secret = create_api_key(
                session, label=args.label, scopes=args.scopes, actor=CLI_ACTOR,
                pepper=settings.api_key_pepper,
            )
            key_id, label, scopes = row.id, row.label, row.scopes
    except InputError as exc:
        print(f"no key created: {exc}", file=sys.stderr)
        return 1
    finally:
        engine.dispose()
    print(f"created key {key_id} ({label!r}, scopes: {scopes})")
    print(f"API key (shown only now; store it safely): {secret}")
    return 0


def _list(args: argparse.Namespace) -> int:
    from service.security import list_api_keys

    engine, scope, _settings = _session(args)
    try:
        with scope as session:
            rows = [
                (r.id, r.label, r.scopes, r.created_at, r.revoked_at)
                for r in list_api_keys(session, include_revoked=not args.active)
            ]
    finally:
        engine.dispose()
    if not rows:
        print("no API keys")
        return 0
    print(f"{'id':>4}  {'scopes':<18} {'created (UTC)':<20} {'revoked (UTC)':<20} label")
    for key_id, label, scopes, created, revoked in rows:
        revoked_text = revoked.strftime("%Y-%m-%d %H:%M:%S") if revoked else "-"
        print(
            f"{key_id:>4}  {scopes:<18} {created.strftime('%Y-%m-%d %H:%M:%S'):<20} "
            f"{revoked_text:<20} {label}"
        )
    return 0


def _revoke(args: argparse.Namespace) -> int:
    from service.errors import ServiceError
    from service.security import revoke_api_key

    engine, scope, _settings = _session(args)
    try:
        with scope as session:
            row = revoke_api_key(session, key_id=args.key_id, actor=CLI_ACTOR, reason=args.reason)
            label, revoked = row.label, row.revoked_at
    except ServiceError as exc:
        print(f"nothing revoked: {exc.message}", file=sys.stderr)
        return 1
    finally:
        engine.dispose()
    print(f"revoked key {args.key_id} ({label!r}) at {revoked.isoformat()}")
    return 0


def register(subparsers: argparse._SubParsersAction) -> None:
    parser = subparsers.add_parser("keys", help="create, list and revoke API keys")
    sub = parser.add_subparsers(dest="keys_command", metavar="ACTION", required=True)
    url_help = "SQLAlchemy URL (default: FIELDRATE_DATABASE_URL or the per-user SQLite file)"

    create = sub.add_parser("create", help="create a key and print its secret once")
    create.add_argument("--label", required=True, help="who uses the key, e.g. 'LIMS building 2'")
    create.add_argument(
        "--scopes", default="read",
        help="comma-separated: read, ingest, admin (admin includes ingest, ingest includes read)",
    )
    create.add_argument("--database-url", default=None, help=url_help)
    create.set_defaults(func=_create)

    lst = sub.add_parser("list", help="list keys (never their secrets)")
    lst.add_argument("--active", action="store_true", help="hide revoked keys")
    lst.add_argument("--database-url", default=None, help=url_help)
    lst.set_defaults(func=_list)

    revoke = sub.add_parser("revoke", help="revoke a key at once")
    revoke.add_argument("key_id", type=int, help="the id shown by 'fieldrate keys list'")
    revoke.add_argument("--reason", default=None, help="why (recorded in the audit trail)")
    revoke.add_argument("--database-url", default=None, help=url_help)
    revoke.set_defaults(func=_revoke)
