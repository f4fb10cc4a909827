"""Rotating the site key: the whole audit chain re-linked under a new key, as one audited event."""

from __future__ import annotations

import os
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

from sqlmodel import Session

from ledger.errors import RefusedError
from ledger.logbook.auth import require_role
from ledger.logbook.required import required
from ledger.logbook.workspace import open_ledger, write
from ledger.store import audit, sitekey
from ledger.store.tables import UserAccount


@dataclass(frozen=True)
class Rotation:
    """A finished rotation: the ``rekey`` event's number, both key IDs, where the old key was
    kept and where the new one is (paths, never keys)."""

    event_seq: int
    old_key_id: str
    new_key_id: str
    kept: Path
    key_file: Path


def rotate(db: str | None, login: str, password: Callable[[], str], reason: str) -> Rotation:
    """An administrator re-keys the chain. The new key waits beside the key file until the
    re-keyed chain is committed; then the old key file is kept as ``.retired-<key id>``.
    A failure before the commit leaves the database and the key file as they were."""
    reason = required("reason", reason, "why the site key is rotated", kind="text")
    engine = open_ledger(db)
    url = engine.url.render_as_string(hide_password=False)
    old = sitekey.require(url)
    path = sitekey.key_file_path(url)
    if os.environ.get(sitekey.ENV_KEY) or path is None:
        raise RefusedError(
            f"the site key comes from ${sitekey.ENV_KEY}, which fluxledger cannot rotate; set "
            f"${sitekey.ENV_KEY_FILE} to a key file instead",
            field="key",
            value=f"${sitekey.ENV_KEY}",
            expected="a key file",
        )
    new = sitekey.create(url, pending=True)

    def work(session: Session, actor: UserAccount) -> int:
        require_role(actor, frozenset({"admin"}), "rotate the site key")
        return audit.rekey(session, new, actor.login, reason, old).seq

    try:
        seq = write(db, login, password, work)
    except BaseException:
        sitekey.pending_path(path).unlink(missing_ok=True)
        raise
    kept = sitekey.install_pending(url, old)
    return Rotation(seq, old.key_id, new.key_id, kept, path)
