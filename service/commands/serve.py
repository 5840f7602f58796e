"""``fieldrate serve [--demo] [--host H] [--port P]``: run the HTTP service."""

from __future__ import annotations

import argparse

from service.config import Settings


def _serve(args: argparse.Namespace) -> int:
    import uvicorn

    from service.main import create_app
    from service.migrate import upgrade_head

    overrides = {}
    if args.host is not None:
        overrides["host"] = args.host
    if args.port is not None:
        overrides["port"] = args.port
    settings = Settings(**overrides)
    upgrade_head(settings.database_url)
    if args.demo:
        from service.demo import load_demo

        summary = load_demo(settings)
        print(
            f"demo data (invented): {summary['substances']} substances, {summary['runs']} runs "
            f"({'loaded' if summary['created'] else 'already present'})"
        )
    app = create_app(settings)
    if args.demo:
        from service.security import issue_key

        key_id, secret = issue_key(
            app.state.session_factory, label="demo key (fieldrate serve --demo)", scopes="admin",
            actor="fieldrate serve --demo", pepper=settings.api_key_pepper,
        )
        print(f"demo API key (admin scope, shown only now): {secret}")
        print(
            "  send it as 'Authorization: Bearer <key>' (in /docs: Authorize); revoke it with "
            f"'fieldrate keys revoke {key_id}'"
        )
    shown_host = "127.0.0.1" if settings.host in ("0.0.0.0", "") else settings.host
    base = f"http://{shown_host}:{settings.port}"
    print(f"fieldrate serving {settings.database_url}")
    print(f"open {base}/docs  (API under {base}/v1)", flush=True)
    uvicorn.run(app, host=settings.host, port=settings.port, log_level="info")
    return 0


def register(subparsers: argparse._SubParsersAction) -> None:
    parser = subparsers.add_parser("serve", help="run the HTTP service")
    parser.add_argument("--demo", action="store_true", help="load the invented demo scenario first")
    parser.add_argument("--host", default=None, help="address to bind (default FIELDRATE_HOST or 127.0.0.1)")
    parser.add_argument("--port", type=int, default=None, help="port (default FIELDRATE_PORT or 8000)")
    parser.set_defaults(func=_serve)
