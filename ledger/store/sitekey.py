"""The site key: a secret kept outside the database that keys the audit chain (HMAC-SHA-256).

Where the key is, first match wins:

1. ``$FLUXLEDGER_KEY``: the key itself, 64 hexadecimal digits (for a service whose secrets
   come from its environment);
2. ``$FLUXLEDGER_KEY_FILE``: the path of a key file;
3. for an SQLite database only, ``<database file>.key`` beside it (handy for one laptop; a
   site should point ``$FLUXLEDGER_KEY_FILE`` at a place the database's users cannot write).

A key file holds the 64 hex digits and one newline, mode 0600. ``init`` creates it when none
exists; nothing ever writes the key into the database or prints it. The database stores only a
key ID (an HMAC of a fixed label under the key), which tells "wrong key" from "tampered".
"""

from __future__ import annotations

import hashlib
import hmac
import os
import secrets
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from ledger.errors import InputError

ENV_KEY = "FLUXLEDGER_KEY"
ENV_KEY_FILE = "FLUXLEDGER_KEY_FILE"
KEY_BYTES = 32
FILE_MODE = 0o600
_ID_LABEL = b"fluxledger site key id"
_EXPECTED = "64 hexadecimal digits (a 256-bit key)"


@dataclass(frozen=True)
class SiteKey:
    """A loaded site key and where it came from (``source`` names a path or variable, never
    the key)."""

    secret: bytes = field(repr=False)
    source: str

    @property
    def key_id(self) -> str:
        """A public fingerprint of the key: 16 hex digits."""
        return hmac.new(self.secret, _ID_LABEL, hashlib.sha256).hexdigest()[:16]

    def mac(self, payload: bytes) -> str:
        """HMAC-SHA-256 of ``payload`` under the key, as 64 hex digits."""
        return hmac.new(self.secret, payload, hashlib.sha256).hexdigest()


def _parse(text: str, source: str, field_name: str) -> SiteKey:
    digits = text.strip()
    try:
        secret = bytes.fromhex(digits)
    except ValueError:
        secret = b""
    if len(secret) != KEY_BYTES:
        raise InputError(
            f"{source} does not hold a site key: expected {_EXPECTED}",
            field=field_name,
            value=source,
            expected=_EXPECTED,
        )
    return SiteKey(secret, source)


def key_file_path(url: str) -> Path | None:
    """The key file for the database at ``url``: $FLUXLEDGER_KEY_FILE, else beside an SQLite
    file; None for a server database with no key file configured."""
    given = os.environ.get(ENV_KEY_FILE)
    if given:
        return Path(given).expanduser()
    from ledger.store.engine import sqlite_path

    db = sqlite_path(url)
    if db is None:
        return None
    return db.with_name(db.name + ".key")


def load(url: str) -> SiteKey | None:
    """The site key for ``url``, or None when none is configured or the file does not exist."""
    value = os.environ.get(ENV_KEY)
    if value:
        return _parse(value, f"${ENV_KEY}", "key")
    path = key_file_path(url)
    if path is None or not path.exists():
        return None
    try:
        text = path.read_text("ascii", errors="replace")
    except OSError as exc:
        raise InputError(
            f"cannot read the site key file {path}: {exc.strerror}",
            field="key",
            value=str(path),
            expected="a readable key file",
        ) from None
    return _parse(text, f"key file {path}", "key")


def require(url: str) -> SiteKey:
    """The site key for ``url``; InputError saying where it was looked for when missing."""
    key = load(url)
    if key is not None:
        return key
    path = key_file_path(url)
    where = f"no key file at {path}" if path else "no key file configured"
    raise InputError(
        f"the site key of this database is not available ({where}); set ${ENV_KEY_FILE} to "
        f"the key file's path or ${ENV_KEY} to the key",
        field="key",
        value=str(path) if path else None,
        expected="the site key the database was created with",
    )


def pending_path(path: Path) -> Path:
    """Where a rotation writes the next key until the re-keyed chain is committed."""
    return path.with_name(path.name + ".new")


def create(url: str, *, pending: bool = False) -> SiteKey:
    """Make a new random key and write it to the key file (mode 0600), or with ``pending`` to
    the file beside it that a rotation installs after its commit. Refuses when the file exists
    (a key is never overwritten)."""
    path = key_file_path(url)
    if path is None:
        raise InputError(
            f"a PostgreSQL database needs a site key file: set ${ENV_KEY_FILE} to where init "
            f"should create it (or ${ENV_KEY} to an existing key)",
            field="key",
            expected=f"${ENV_KEY_FILE}",
        )
    if pending:
        path = pending_path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    secret = secrets.token_bytes(KEY_BYTES)
    try:
        fd = os.open(path, os.O_WRONLY | os.O_CREAT | os.O_EXCL, FILE_MODE)
    except FileExistsError:
        raise InputError(
            f"the key file {path} exists already; a site key is never overwritten",
            field="key",
            value=str(path),
            expected="a path where no file exists",
        ) from None
    with os.fdopen(fd, "w", encoding="ascii") as f:
        f.write(secret.hex() + "\n")
    os.chmod(path, FILE_MODE)
    return SiteKey(secret, f"key file {path}")


def install_pending(url: str, old: SiteKey) -> Path:
    """After a rotation's commit: keep the old key file as ``<file>.retired-<old key id>``
    (never deleted) and move the pending key into its place. Returns the kept file."""
    path = key_file_path(url)
    assert path is not None
    kept = path.with_name(f"{path.name}.retired-{old.key_id}")
    os.replace(path, kept)
    os.replace(pending_path(path), path)
    return kept


def url_of(session: Any) -> str:
    """The URL (password included, for lookup only: never shown) of a session's database."""
    bind = session.get_bind()
    engine = getattr(bind, "engine", bind)  # a session bound to a Connection
    return str(engine.url.render_as_string(hide_password=False))
