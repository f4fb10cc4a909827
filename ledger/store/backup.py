"""A consistent copy of an SQLite logbook while it is in use (SQLite's online backup API).

The copy is written to a temporary file in the destination's folder, checked, made a single
file (journal mode DELETE, no -wal beside it), flushed to disk and renamed into place, so the
destination name never holds a half-written copy. Restoring is copying the file back.

A PostgreSQL logbook is refused: its server tools (pg_dump, pg_restore) make consistent
copies of a live database, with its triggers, and this module does not replace them.
The site key is not in the database (ledger.store.sitekey) and so is not in the copy.
"""

from __future__ import annotations

import contextlib
import os
import sqlite3
import tempfile
from dataclasses import dataclass
from pathlib import Path

from ledger.errors import InputError
from ledger.store.engine import BUSY_TIMEOUT_MS, masked, sqlite_path

FILE_MODE = 0o600  # the copy holds names and password hashes, as the database does
PAGES_PER_STEP = 1024  # pages copied per step; writers may commit between steps


@dataclass(frozen=True)
class Backup:
    """What was written: the copy's path and the audit-chain head stored in the copy."""

    path: Path
    head_seq: int
    head_hash: str
    key_id: str | None
    pages: int


def _refuse(field: str, value: str, message: str, expected: str) -> InputError:
    return InputError(message, field=field, value=value, expected=expected)


def _check_dest(source: Path, dest: Path, overwrite: bool) -> None:
    shown = str(dest)
    if not dest.parent.is_dir():
        raise _refuse("file", shown, f"DEST {shown}: the folder {dest.parent} does not exist; "
                      "nothing was written", "a file path in an existing folder")  # fmt: skip
    if dest.is_dir():
        raise _refuse("file", shown, f"DEST {shown}: it is a directory; nothing was written",
                      "a file path, not a directory")  # fmt: skip
    resolved = dest.resolve()
    live = source.resolve()
    if resolved in (live, Path(f"{live}-wal"), Path(f"{live}-shm"), Path(f"{live}-journal")):
        raise _refuse("file", shown, f"DEST {shown}: it is the database itself (or one of its "
                      "files); nothing was written", "a path other than the database")  # fmt: skip
    if dest.exists() and not overwrite:
        raise _refuse("file", shown, f"DEST {shown}: the file exists; nothing was written",
                      "a file name not yet taken, or --overwrite to replace it")  # fmt: skip


def _head(con: sqlite3.Connection, source: Path) -> tuple[int, str, str | None]:
    try:
        row = con.execute("SELECT seq, hash, key_id FROM audit_head WHERE id = 1").fetchone()
    except sqlite3.DatabaseError:
        row = None
    if row is None:
        raise _refuse("db", str(source), f"--db {source}: not a fluxledger database (no audit "
                      "chain head); nothing was written", "a fluxledger database")  # fmt: skip
    return int(row[0]), str(row[1]), row[2]


def _fsync_dir(folder: Path) -> None:
    fd = os.open(folder, os.O_RDONLY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def backup(url: str, dest: Path, *, overwrite: bool = False) -> Backup:
    """Copy the SQLite database at ``url`` to ``dest`` (mode 0600) and return its chain head.

    InputError (nothing written) for a PostgreSQL URL, a missing database, a ``dest`` that
    exists without ``overwrite``, is a folder, is in a missing folder or is the database.
    """
    source = sqlite_path(url)
    if source is None:
        shown = masked(url)
        raise _refuse(
            "db",
            shown,
            f"--db {shown}: `fluxledger backup` copies SQLite databases only; back up a "
            "PostgreSQL logbook with the server's tools: pg_dump --format=custom, and restore "
            "it with pg_restore into a new database (README, 'Backup and restore')",
            "an SQLite database (for PostgreSQL: pg_dump / pg_restore)",
        )
    if not source.is_file():
        raise _refuse("db", str(source), f"--db {source}: no such database file; nothing was "
                      "written", "an existing database file")  # fmt: skip
    _check_dest(source, dest, overwrite)
    fd, tmp_name = tempfile.mkstemp(prefix=f".{dest.name}.", suffix=".tmp", dir=dest.parent)
    os.close(fd)
    tmp = Path(tmp_name)
    try:
        os.chmod(tmp, FILE_MODE)
        src = sqlite3.connect(source, timeout=BUSY_TIMEOUT_MS / 1000)
        try:
            _head(src, source)  # refuse a file that is not a logbook before copying it
            out = sqlite3.connect(tmp)
            try:
                src.backup(out, pages=PAGES_PER_STEP)
                # One self-contained file: no -wal for a copy that is moved or archived.
                out.execute("PRAGMA journal_mode = DELETE")
                check = out.execute("PRAGMA quick_check").fetchone()[0]
                if check != "ok":
                    raise _refuse("file", str(dest), f"the copy failed its check ({check}); "
                                  "nothing was written", "a readable database")  # fmt: skip
                seq, digest, key_id = _head(out, source)
                pages = int(out.execute("PRAGMA page_count").fetchone()[0])
            finally:
                out.close()
        finally:
            src.close()
        with open(tmp, "rb+") as f:
            os.fsync(f.fileno())
        os.replace(tmp, dest)
        _fsync_dir(dest.parent)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            tmp.unlink()
        raise
    return Backup(dest, seq, digest, key_id, pages)
