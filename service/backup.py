"""Online backup and restore of the SQLite database (the SQLite backup API).

A backup copies the database page by page through :meth:`sqlite3.Connection.backup`
while the service keeps running: readers and writers are not stopped, and the copy is a
consistent snapshot of one moment (SQLite restarts the copy if a write lands in pages
already copied, so a busy database may take several passes). The copy is written to a
temporary file beside the destination, checked with ``PRAGMA integrity_check`` and only
then renamed into place, so a destination file is always a complete, checked backup.

Restore (documented procedure, also :func:`restore_sqlite`):

1. stop the service (``fieldrate serve`` or the uvicorn processes);
2. ``fieldrate backup restore BACKUP_FILE`` (checks the backup, then copies it over the
   configured database with the same backup API, so the database's own ``-wal`` file is
   reconciled by SQLite itself);
3. start the service; it answers exactly as when the backup was taken.

PostgreSQL databases are backed up with the server's own tools (``pg_dump``); these
functions refuse a non-SQLite URL with that advice.
"""

from __future__ import annotations

import os
import sqlite3
from dataclasses import dataclass
from pathlib import Path

from sqlalchemy.engine import make_url

from kinetics.errors import InputError

__all__ = ["BackupResult", "sqlite_path", "integrity_check", "backup_sqlite", "restore_sqlite"]

#: pages copied per step of the backup API; between steps other connections may write
PAGES_PER_STEP = 256


@dataclass(frozen=True)
class BackupResult:
    """Outcome of a backup or restore.

    Attributes
    ----------
    source, destination : pathlib.Path
        The database files copied from and to.
    size_bytes : int
        Size of the destination file [bytes].
    pages : int
        Database pages copied.
    integrity : str
        Result of ``PRAGMA integrity_check`` on the destination (``"ok"``).
    """

    source: Path
    destination: Path
    size_bytes: int
    pages: int
    integrity: str


def sqlite_path(database_url: str) -> Path:
    """The file of a ``sqlite:///`` URL.

    Raises
    ------
    kinetics.errors.InputError
        If the URL is not a file-backed SQLite database.
    """
    url = make_url(database_url)
    if url.get_backend_name() != "sqlite":
        raise InputError(
            f"online backup covers SQLite databases; {url.get_backend_name()} databases are "
            "backed up with the server's own tools (for PostgreSQL: pg_dump)"
        )
    database = url.database or ""
    if not database or database == ":memory:" or database.startswith("file:"):
        raise InputError(
            f"the SQLite database {database or ':memory:'!r} is not a plain file; nothing to back up"
        )
    return Path(database).expanduser().resolve()


def integrity_check(path: Path | str) -> str:
    """``PRAGMA integrity_check`` of a SQLite file: ``"ok"`` or the problems found."""
    try:
        conn = sqlite3.connect(f"file:{Path(path)}?mode=ro", uri=True)
        try:
            rows = conn.execute("PRAGMA integrity_check").fetchall()
        finally:
            conn.close()
    except sqlite3.DatabaseError as exc:
        return f"not a readable SQLite database ({exc})"
    return "; ".join(str(r[0]) for r in rows)


def _copy(source: Path, destination: Path) -> int:
    """Copy ``source`` into ``destination`` with the backup API; returns pages copied."""
    pages = 0

    def progress(_status: int, remaining: int, total: int) -> None:
        nonlocal pages
        pages = total

    src = sqlite3.connect(str(source), timeout=30.0)
    try:
        dst = sqlite3.connect(str(destination), timeout=30.0)
        try:
            src.backup(dst, pages=PAGES_PER_STEP, progress=progress, sleep=0.005)
            dst.commit()
        finally:
            dst.close()
    finally:
        src.close()
    return pages


def backup_sqlite(database_url: str, destination: Path | str, *, overwrite: bool = False) -> BackupResult:
    """Copy the live SQLite database at ``database_url`` to ``destination``.

    Parameters
    ----------
    database_url : str
        The service's database URL (``sqlite:///...``).
    destination : path
        The backup file to write. Its directory must exist.
    overwrite : bool
        Replace an existing destination file.

    Raises
    ------
    kinetics.errors.InputError
        Not SQLite, the database file does not exist, the destination is the database
        itself, exists (without ``overwrite``) or its directory is missing, or the copy
        fails its integrity check.
    """
    source = sqlite_path(database_url)
    if not source.is_file():
        raise InputError(f"there is no database file at {source}")
    dest = Path(destination).expanduser().resolve()
    if dest == source:
        raise InputError(f"the backup destination {dest} is the database itself")
    if not dest.parent.is_dir():
        raise InputError(f"the directory {dest.parent} of the backup destination does not exist")
    if dest.exists() and not overwrite:
        raise InputError(f"{dest} already exists; choose another name or allow overwriting")
    partial = dest.with_name(f".{dest.name}.partial-{os.getpid()}")
    try:
        partial.unlink(missing_ok=True)
        pages = _copy(source, partial)
        # the copy is in rollback-journal mode and self-contained: no -wal file to carry
        conn = sqlite3.connect(str(partial))
        try:
            conn.execute("PRAGMA journal_mode=DELETE")
        finally:
            conn.close()
        integrity = integrity_check(partial)
        if integrity != "ok":
            raise InputError(f"the backup copy failed its integrity check: {integrity}")
        os.replace(partial, dest)
    finally:
        partial.unlink(missing_ok=True)
    return BackupResult(
        source=source, destination=dest, size_bytes=dest.stat().st_size, pages=pages,
        integrity=integrity,
    )


def restore_sqlite(backup_file: Path | str, database_url: str) -> BackupResult:
    """Replace the SQLite database at ``database_url`` by the content of ``backup_file``.

    Stop the service first. The backup is checked before anything is changed; the copy
    uses the backup API, so the database's own journal files stay consistent.

    Raises
    ------
    kinetics.errors.InputError
        The backup file is missing or fails its integrity check, or the URL is not SQLite.
    """
    target = sqlite_path(database_url)
    source = Path(backup_file).expanduser().resolve()
    if not source.is_file():
        raise InputError(f"there is no backup file at {source}")
    if source == target:
        raise InputError(f"the backup file {source} is the database itself")
    before = integrity_check(source)
    if before != "ok":
        raise InputError(f"the backup {source} fails its integrity check ({before}); nothing changed")
    target.parent.mkdir(parents=True, exist_ok=True)
    pages = _copy(source, target)
    integrity = integrity_check(target)
    if integrity != "ok":
        raise InputError(f"the restored database {target} fails its integrity check: {integrity}")
    return BackupResult(
        source=source, destination=target, size_bytes=target.stat().st_size, pages=pages,
        integrity=integrity,
    )
