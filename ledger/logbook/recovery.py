"""Break-glass recovery: restore an administrator's access for someone with access to the
file system of the database host.

Proof of host access is a one-time code that the first step writes into a file beside the
database (``<database file>.recover``, mode 0600; for a server database, in the working
directory as ``fluxledger.recover``) and that the operator then types back. The code is
valid for ``CODE_LIFETIME`` seconds and once. The account is unlocked, re-enabled and given a
new password, and the audit trail gets a ``break_glass`` event naming the OS user.
"""

from __future__ import annotations

import getpass
import hmac
import os
import secrets
import time
from pathlib import Path

from sqlalchemy import Engine

from ledger.errors import InputError, RefusedError
from ledger.logbook.auth import find_user, hash_password
from ledger.rules.names import shown
from ledger.store.audit import Journal
from ledger.store.engine import sqlite_path, transaction
from ledger.store.tables import UserAccount

CODE_LIFETIME = 900.0  # seconds a written code stays valid
RECOVERY_REASON = "break-glass recovery by host access"


def code_file(engine: Engine) -> Path:
    """Where the one-time code of this database is written."""
    path = sqlite_path(engine.url.render_as_string(hide_password=True))
    if path is None:
        return Path.cwd() / "fluxledger.recover"
    return path.with_name(path.name + ".recover")


def os_user() -> str:
    """The operating-system user running this process (for the audit event)."""
    try:
        return getpass.getuser()[:40]
    except (KeyError, OSError):
        return f"uid {os.getuid()}" if hasattr(os, "getuid") else "unknown"


def pending_code(engine: Engine) -> bool:
    """True when a code written less than CODE_LIFETIME ago waits to be typed back."""
    path = code_file(engine)
    try:
        return time.time() - path.stat().st_mtime < CODE_LIFETIME
    except OSError:
        return False


def write_code(engine: Engine) -> Path:
    """Write a fresh one-time code (owner read/write only); return the file's path."""
    path = code_file(engine)
    path.unlink(missing_ok=True)
    fd = os.open(path, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
    with os.fdopen(fd, "w", encoding="ascii") as f:
        f.write(secrets.token_hex(8) + "\n")
    return path


def _admin(engine: Engine, login: str) -> None:
    with transaction(engine) as session:
        user = find_user(session, login)
        if user is None or user.role != "admin":
            raise InputError(
                f"no administrator {shown(login)}",
                field="login",
                value=shown(login),
                expected="the user ID of an existing administrator account",
            )


def recover_admin(engine: Engine, login: str, code: str, password: str) -> UserAccount:
    """Check the typed ``code`` against the file, then unlock, re-enable and reset ``login``.

    The new password is not temporary: the person with access to the database host chooses
    it for the account they are restoring, as its owner would, and no other account ever
    knew it. (A password an administrator sets for someone else is temporary; see
    ``ledger.logbook.users.set_password``.)
    """
    _admin(engine, login)
    path = code_file(engine)
    if not pending_code(engine):
        raise RefusedError(
            f"no valid recovery code at {path}; run the command again to write one",
            field="code",
            value="(hidden)",
        )
    stored = path.read_text(encoding="ascii", errors="replace").strip()
    if not hmac.compare_digest(stored.encode(), code.strip().encode()):
        path.unlink(missing_ok=True)
        raise RefusedError(
            f"the code does not match the one in {path}; it is void now, run the command "
            "again for a new one",
            field="code",
            value="(hidden)",
        )
    path.unlink(missing_ok=True)
    new_hash = hash_password(password)
    who = os_user()
    with transaction(engine) as session:
        user = find_user(session, login)
        assert user is not None
        Journal(session, f"host:{who}").change(
            user,
            {
                "password_hash": new_hash,
                "failed_logins": 0,
                "locked": False,
                "active": True,
                "password_temporary": False,
            },
            reason=f"{RECOVERY_REASON} (OS user {who})",
            action="break_glass",
        )
        return user
