"""`fluxledger backup DEST`: a consistent copy of an SQLite logbook, even while it is in use."""

from __future__ import annotations

from pathlib import Path

import typer

from ledger.cli.common import JSON_OPTION, guarded
from ledger.cli.session import DB_OPTION


@guarded
def backup(
    file: Path = typer.Argument(
        ..., metavar="DEST", help="The backup file to write (its folder must exist)."
    ),
    overwrite: bool = typer.Option(
        False, "--overwrite", help="Replace DEST if it exists (otherwise it is refused)."
    ),
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Copy an SQLite database with SQLite's online backup (writers may keep working) to DEST,
    mode 0600, written under a temporary name and renamed; print the copy's audit-chain head.

    The site key is not in the database: back it up separately. To restore, copy the backup
    file into place while nothing uses the database. PostgreSQL: use pg_dump / pg_restore.
    """
    from ledger.cli.output import Report
    from ledger.logbook.backups import backup as make_backup

    done = make_backup(db, file, overwrite=overwrite)
    report = Report("backup")
    s = report.section("Backup")
    s.add("file", str(done.path))
    s.add("pages", done.pages)
    s.add("head_seq", done.head_seq, "chain head event")
    s.add("head_hash", done.head_hash, "chain head hash")
    s.add("key_id", done.key_id or "(not keyed)", "site key ID")
    n = report.section("Site key")
    n.add(
        "site_key",
        f"not in the database and not in this backup: keep a copy of the site key "
        f"({done.key_location}) separately; without it the copy's chain cannot be verified",
        "site key",
    )
    report.print(as_json)
