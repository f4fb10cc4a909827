"""`backup`: a copy of the logbook for the front ends, and where its site key lives.

The copy itself is ``ledger.store.backup`` (SQLite's online backup API); this layer resolves
the database the front end was given and says where the site key is, because the key is not
in the database and a backup without it cannot be verified or written to.
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path


@dataclass(frozen=True)
class BackupDone:
    """A finished backup: the file, the chain head in it, and where the site key is kept."""

    path: Path
    head_seq: int
    head_hash: str
    key_id: str | None
    pages: int
    key_location: str


def backup(db: str | None, dest: Path, *, overwrite: bool = False) -> BackupDone:
    """Copy the SQLite database ``db`` (--db / $FLUXLEDGER_DATABASE_URL) to ``dest``.

    InputError, nothing written: PostgreSQL (use pg_dump / pg_restore), no database, or a
    ``dest`` that exists without ``overwrite``.
    """
    from ledger.store import sitekey
    from ledger.store.backup import backup as copy
    from ledger.store.engine import check_scheme, resolve_url

    url = check_scheme(resolve_url(db))
    done = copy(url, dest, overwrite=overwrite)
    if os.environ.get(sitekey.ENV_KEY):
        where = f"${sitekey.ENV_KEY} (the environment)"
    else:
        path = sitekey.key_file_path(url)
        where = f"key file {path}" if path is not None else "no key file configured"
    return BackupDone(done.path, done.head_seq, done.head_hash, done.key_id, done.pages, where)
