"""Exports of the whole logbook (JSON, CSV, xlsx) and loading a JSON export into a new database.

JSON is the full copy: every row of every table as stored (ids, record hashes, the audit
chain, password hashes), so it is an administrator's export and is written mode 0600. CSV (a
folder of one ``<table>.csv`` per table) and xlsx (one worksheet per table) are for reading:
headings carry SI units ("nwp [m/(s·Pa)]") and redacted columns (password hashes, a
template's source) read "(not shown)". Only a JSON export can be loaded back.

Loading (``load_export``) refuses a database holding any row, writes every row of the export
in one transaction, checks the loading user's password against the accounts just loaded, and
appends one ``import`` event to the chain it loaded, so `fluxledger audit verify` passes on
the copy exactly when it passed on the original and the file was not altered.
"""

from __future__ import annotations

import contextlib
import hashlib
import os
import shutil
import tempfile
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

from ledger.errors import InputError

if TYPE_CHECKING:
    from sqlmodel import Session

    from ledger.store.tables import UserAccount

FORMATS = ("json", "csv", "xlsx")
FILE_MODE = 0o600  # a JSON export holds names and password hashes, as the database does
MAX_EXPORT_BYTES = 2 << 30  # 2 GiB: a JSON export is read whole into memory to be checked
FULL_COPY_ROLES = frozenset({"admin"})
IMPORT_ENTITY = "logbook"


@dataclass(frozen=True)
class Exported:
    """A finished export: where, which format, and the rows written per table."""

    path: Path
    kind: str
    rows: dict[str, int]


@dataclass(frozen=True)
class Imported:
    """A finished load: the export's header, rows per table and the import event's number."""

    path: Path
    sha256: str
    exported_at: str
    rows: dict[str, int]
    event_seq: int


def _refuse(field: str, value: Any, message: str, expected: str) -> InputError:
    return InputError(message, field=field, value=value, expected=expected)


def check_format(kind: str) -> str:
    """``kind`` as one of FORMATS, else InputError naming --format."""
    if kind not in FORMATS:
        raise _refuse("format", kind, f"--format {kind!r}: not an export format; nothing was "
                      "written", "json, csv or xlsx")  # fmt: skip
    return kind


def _check_out(kind: str, out: Path, overwrite: bool) -> None:
    shown = str(out)
    if not out.parent.is_dir():
        raise _refuse("out", shown, f"--out {shown}: the folder {out.parent} does not exist; "
                      "nothing was written", "a path in an existing folder")  # fmt: skip
    if kind == "csv":
        if out.exists() and not out.is_dir():
            raise _refuse("out", shown, f"--out {shown}: a CSV export is a folder and this is "
                          "a file; nothing was written", "a folder path")  # fmt: skip
        if out.is_dir() and not overwrite:
            raise _refuse("out", shown, f"--out {shown}: the folder exists; nothing was "
                          "written", "a folder not yet there, or --overwrite")  # fmt: skip
        if out.is_dir():
            from ledger.store.export import tables

            ours = {f"{t.name}.csv" for t in tables()}
            others = sorted(p.name for p in out.iterdir() if p.name not in ours)
            if others:
                listed = ", ".join(others[:3])
                raise _refuse("out", shown, f"--out {shown}: --overwrite replaces a CSV export, "
                              f"and this folder holds other files ({listed}); nothing was "
                              "written", "a folder of an earlier CSV export")  # fmt: skip
        return
    if out.is_dir():
        raise _refuse("out", shown, f"--out {shown}: it is a folder; nothing was written",
                      "a file path")  # fmt: skip
    if out.exists() and not overwrite:
        raise _refuse("out", shown, f"--out {shown}: the file exists; nothing was written",
                      "a file name not yet taken, or --overwrite to replace it")  # fmt: skip


def _temp_file(out: Path) -> Path:
    fd, name = tempfile.mkstemp(prefix=f".{out.name}.", suffix=".tmp", dir=out.parent)
    os.close(fd)
    os.chmod(name, FILE_MODE)
    return Path(name)


def export_logbook(
    session: Session, actor: UserAccount, kind: str, out: Path, *, overwrite: bool = False
) -> Exported:
    """Write the whole logbook as ``kind`` (json, csv or xlsx) to ``out``, read in the
    session's one transaction (a consistent snapshot). Values are SI, units in the headings.

    InputError (nothing written): an unknown format, a missing folder, an ``out`` that exists
    without ``overwrite``; RefusedError: a JSON export (the full copy) by a non-administrator.
    The file is written under a temporary name and renamed into place."""
    from ledger.logbook.auth import require_role
    from ledger.store import export
    from ledger.store.types import utc_now

    check_format(kind)
    if kind == "json":
        require_role(actor, FULL_COPY_ROLES, "export the full logbook (it holds password hashes)")
    _check_out(kind, out, overwrite)
    conn = session.connection()
    if kind == "csv":
        return _export_csv(conn, out)
    tmp = _temp_file(out)
    try:
        with open(tmp, "wb") as f:
            if kind == "json":
                document = export.dump(conn, utc_now(), _head_key_id(conn))
                f.write(export.to_json(document))
                rows = {t["name"]: len(t["rows"]) for t in document["tables"]}
            else:
                rows = export.write_xlsx(conn, f)
            f.flush()
            os.fsync(f.fileno())
        os.replace(tmp, out)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            tmp.unlink()
        raise
    return Exported(out, kind, rows)


def _head_key_id(conn: Any) -> str | None:
    from sqlalchemy import text

    value = conn.execute(text("SELECT key_id FROM audit_head WHERE id = 1")).scalar()
    return None if value is None else str(value)


def _export_csv(conn: Any, out: Path) -> Exported:
    from ledger.store import export

    tmp = Path(tempfile.mkdtemp(prefix=f".{out.name}.", suffix=".tmp", dir=out.parent))
    rows: dict[str, int] = {}
    try:
        for table in export.tables():
            path = tmp / f"{table.name}.csv"
            with open(path, "w", encoding="utf-8", newline="") as f:
                rows[table.name] = export.write_csv(conn, table, f)
        if out.exists():  # --overwrite of an earlier CSV export (checked to hold only ours)
            old = out.with_name(f".{out.name}.old-{os.getpid()}")
            os.replace(out, old)
            os.replace(tmp, out)
            shutil.rmtree(old)
        else:
            os.replace(tmp, out)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    return Exported(out, "csv", rows)


def read_export(path: Path) -> tuple[bytes, Any]:
    """The bytes of the export at ``path`` and its checked rows (``store.export.Loaded``).

    InputError naming ``file``: missing, unreadable, too large, not JSON, another format, a
    value that does not fit its column."""
    from ledger.store import export

    shown = str(path)
    try:
        size = path.stat().st_size
        if size > MAX_EXPORT_BYTES:
            raise _refuse("file", shown, f"FILE {shown}: {size} bytes is larger than an export "
                          "this command reads; nothing was written",
                          f"at most {MAX_EXPORT_BYTES} bytes")  # fmt: skip
        data = path.read_bytes()
    except IsADirectoryError:
        raise _refuse("file", shown, f"FILE {shown}: it is a folder (a CSV export cannot be "
                      "loaded); nothing was written", "a JSON export file") from None  # fmt: skip
    except OSError as exc:
        raise _refuse("file", shown, f"FILE {shown}: cannot read it ({exc.strerror}); nothing "
                      "was written", "a readable JSON export file") from None  # fmt: skip
    try:
        loaded = export.load(export.parse_document(data))
    except InputError as exc:
        raise InputError(f"FILE {shown}: {exc.message}", field="file", value=exc.value,
                         expected=exc.expected) from None  # fmt: skip
    return data, loaded


def _check_key(url: str, key_id: str | None) -> None:
    from ledger.store import sitekey

    if key_id is None:
        return
    key = sitekey.load(url)
    if key is None or key.key_id != key_id:
        found = "no site key is configured" if key is None else (
            f"the site key from {key.source} has key ID {key.key_id}")  # fmt: skip
        raise _refuse("key", key_id, f"the export's audit chain is under the site key with ID "
                      f"{key_id}, and for the target database {found}: put the original site "
                      "key beside it (<database>.key, $FLUXLEDGER_KEY_FILE or $FLUXLEDGER_KEY); "
                      "nothing was written", f"the site key with ID {key_id}")  # fmt: skip


def _sign_in_loaded(session: Session, login: str, password: str) -> UserAccount:
    """The loaded account ``login``, an active, unlocked administrator whose password this is.
    A wrong password is not counted: the refusal rolls the whole load back."""
    from ledger.errors import RefusedError
    from ledger.logbook.auth import _matches, find_user, require_role

    user = find_user(session, login)
    if user is None or not user.active or user.locked or not _matches(user.password_hash, password):
        raise RefusedError(
            f"{login!r} is not an active, unlocked user of the export with this password; "
            "nothing was written",
            field="user",
            value=login,
            expected="an administrator's user ID and password from the exported logbook",
        )
    require_role(user, FULL_COPY_ROLES, "load an export")
    return user


def load_export(db: str | None, path: Path, who: str, password: Callable[[], str]) -> Imported:
    """Load the JSON export at ``path`` into the empty database ``db`` (--db), as ``who``, an
    administrator of the exported logbook (their password as it was exported).

    Everything is checked before the database is touched; a database without a schema gets
    this software's. Then, in one transaction: refuse a database holding any row
    (InputError, ``db``), insert every row as exported, check ``who``, and append one
    ``import`` event (the file's SHA-256, its export time, rows per table) to the loaded
    chain. InputError / RefusedError: nothing was written."""
    from ledger.canonical import canonical
    from ledger.store import export
    from ledger.store.audit import Journal
    from ledger.store.engine import connect, masked, resolve_url, sqlite_path, transaction
    from ledger.store.schema import REVISION, require_current, stored_revision, upgrade

    data, loaded = read_export(path)
    digest = hashlib.sha256(data).hexdigest()
    url = resolve_url(db)
    _check_key(url, loaded.site_key_id)
    secret = password()
    new_file = sqlite_path(url)
    if new_file is not None and new_file.exists():
        new_file = None  # an existing file is never removed, whatever happens
    engine = connect(url, create=True)
    try:
        if stored_revision(engine) is None:
            upgrade(engine)
        elif stored_revision(engine) != REVISION:
            require_current(engine)
        with transaction(engine) as session:
            conn = session.connection()
            busy = export.holding_rows(conn)
            if busy:
                shown = masked(url)
                raise _refuse("db", shown, f"--db {shown}: the database is not empty (rows in "
                              f"{', '.join(busy[:5])}); an export loads only into a new, empty "
                              "database; nothing was written", "an empty database")  # fmt: skip
            export.insert(conn, loaded)
            actor = _sign_in_loaded(session, who, secret)
            counts = loaded.counts()
            event = Journal(session, actor.login).event(
                "import",
                IMPORT_ENTITY,
                digest,
                new=canonical({"file": path.name, "sha256": digest,
                               "exported_at": loaded.exported_at, "rows": counts}),
                reason=f"loaded from the export {path.name} written at {loaded.exported_at}",
            )  # fmt: skip
            seq = event.seq
    except BaseException:
        engine.dispose()
        if new_file is not None:  # the file this load created: nothing stays written
            for leftover in (new_file, *new_file.parent.glob(new_file.name + "-*")):
                with contextlib.suppress(FileNotFoundError):
                    leftover.unlink()
        raise
    engine.dispose()
    return Imported(path, digest, loaded.exported_at, counts, seq)
