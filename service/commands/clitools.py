"""Shared pieces of the data commands: error lines, progress bar, tables, database access."""

from __future__ import annotations

import argparse
import functools
import os
import sys
import time
from collections.abc import Callable, Sequence
from typing import IO, Any, Optional

__all__ = [
    "guarded",
    "CommandError",
    "ProgressBar",
    "format_table",
    "add_database_arguments",
    "open_database",
    "API_KEY_ENV",
    "api_key",
]

#: environment variable read for ``--api-key``
API_KEY_ENV = "FIELDRATE_API_KEY"


class CommandError(Exception):
    """A failure the command reports as one line on stderr (exit status 1)."""


def _one_line(text: str) -> str:
    return " ".join(str(text).split())


def guarded(func: Callable[[argparse.Namespace], int]) -> Callable[[argparse.Namespace], int]:
    """Run a command; turn every foreseen failure into one ``error: ...`` line and status 1."""

    @functools.wraps(func)
    def wrapper(args: argparse.Namespace) -> int:
        from pydantic import ValidationError
        from sqlalchemy.exc import OperationalError

        from kinetics.errors import KineticsError
        from service.client import FieldrateError
        from service.errors import ItemErrors, ServiceError

        try:
            return int(func(args) or 0)
        except CommandError as exc:
            message = str(exc)
        except ItemErrors as exc:
            msgs = [str(i.get("msg", i)) for i in exc.items]
            message = msgs[0] if msgs else str(exc)
            if len(msgs) > 1:
                message += f" (and {len(msgs) - 1} more problem(s) of the same request)"
        except (KineticsError, ServiceError, FieldrateError) as exc:
            message = str(exc)
        except ValidationError as exc:
            parts = []
            for e in exc.errors():
                msg = str(e.get("msg", "invalid value")).removeprefix("Value error, ")
                loc = ".".join(str(p) for p in e.get("loc", ()))
                parts.append(f"{loc}: {msg}" if loc else msg)
            message = "; ".join(parts)
        except FileNotFoundError as exc:
            message = f"no such file: {exc.filename}"
        except IsADirectoryError as exc:
            message = f"{exc.filename} is a directory, not a file"
        except PermissionError as exc:
            message = f"permission denied: {exc.filename}"
        except OperationalError as exc:
            message = f"the database cannot be opened or is busy: {_one_line(exc.orig)}"
        except KeyboardInterrupt:
            print("interrupted; nothing more was done", file=sys.stderr)
            return 130
        print(f"error: {_one_line(message)}", file=sys.stderr)
        return 1

    return wrapper


class ProgressBar:
    """A text progress bar on a stream (stderr by default), redrawn at most 10 times a second.

    Parameters
    ----------
    total : int
        Count at completion.
    label : str
        Text before the bar.
    stream : text stream
        Where to draw (default ``sys.stderr``).
    enabled : bool
        Draw nothing when false.
    """

    def __init__(self, total: int, label: str, *, stream: Optional[IO[str]] = None,
                 enabled: bool = True, width: int = 30):
        self.total = max(int(total), 1)
        self.label = label
        self.stream = stream or sys.stderr
        self.enabled = enabled
        self.width = width
        self._last = 0.0
        self._shown = False

    def update(self, done: int, force: bool = False) -> None:
        """Show ``done`` of ``total``."""
        if not self.enabled:
            return
        now = time.monotonic()
        if not force and now - self._last < 0.1:
            return
        self._last = now
        frac = min(max(done / self.total, 0.0), 1.0)
        filled = int(round(frac * self.width))
        bar = "#" * filled + "-" * (self.width - filled)
        self.stream.write(f"\r{self.label} [{bar}] {frac * 100:5.1f} % ({done}/{self.total})")
        self.stream.flush()
        self._shown = True

    def finish(self) -> None:
        """Draw the full bar and end the line."""
        if self.enabled:
            self.update(self.total, force=True)
            self.stream.write("\n")
            self.stream.flush()


def format_table(headers: Sequence[str], rows: Sequence[Sequence[Any]],
                 right: Sequence[bool] | None = None) -> str:
    """Plain-text table with aligned columns (numbers right-aligned by default)."""
    cells = [[str(c) for c in r] for r in rows]
    widths = [len(h) for h in headers]
    for r in cells:
        for i, c in enumerate(r):
            widths[i] = max(widths[i], len(c))
    if right is None:
        right = [all(_numeric(r[i]) for r in cells) and bool(cells) for i in range(len(headers))]

    def line(values: Sequence[str]) -> str:
        out = []
        for i, v in enumerate(values):
            out.append(v.rjust(widths[i]) if right[i] else v.ljust(widths[i]))
        return "  ".join(out).rstrip()

    sep = "  ".join("-" * w for w in widths)
    return "\n".join([line(list(headers)), sep] + [line(r) for r in cells])


def _numeric(text: str) -> bool:
    t = text.replace("\u2212", "-").replace(" – ", "").replace("e", "").replace("E", "")
    t = t.replace(".", "").replace("-", "").replace("+", "").replace(" ", "")
    return t.isdigit() or text in ("-", "–", "")


def add_database_arguments(parser: argparse.ArgumentParser, *, remote: bool = True) -> None:
    """``--database-url`` (local database) and, if ``remote``, ``--url``/``--api-key``."""
    parser.add_argument(
        "--database-url", default=None, metavar="URL",
        help="SQLAlchemy URL of the database (default: FIELDRATE_DATABASE_URL or the "
             "per-user SQLite file that 'fieldrate serve' uses)")
    if remote:
        parser.add_argument(
            "--url", default=None, metavar="SERVICE_URL",
            help="talk to a running service instead of the local database, e.g. "
                 "http://127.0.0.1:8000")
        parser.add_argument(
            "--api-key", default=None, metavar="KEY",
            help=f"API key for --url (default: the {API_KEY_ENV} environment variable)")


def api_key(args: argparse.Namespace) -> Optional[str]:
    """The API key from ``--api-key`` or the environment."""
    return getattr(args, "api_key", None) or os.environ.get(API_KEY_ENV) or None


def open_database(args: argparse.Namespace):
    """(settings, engine, session factory) of the local database, schema brought up to date."""
    from service.config import Settings
    from service.db import make_engine, make_session_factory
    from service.migrate import upgrade_head

    overrides = {"database_url": args.database_url} if args.database_url else {}
    settings = Settings(**overrides)
    upgrade_head(settings.database_url)
    engine = make_engine(settings.database_url, busy_timeout_ms=settings.sqlite_busy_timeout_ms)
    return settings, engine, make_session_factory(engine)
