"""Who is acting: argon2 password hashes, lockout after repeated failures, role checks (§7)."""

from __future__ import annotations

from sqlalchemy import Engine
from sqlmodel import Session, select

from ledger.errors import RefusedError
from ledger.logbook.passwords import MIN_PASSWORD as MIN_PASSWORD  # re-exported
from ledger.logbook.passwords import check_password
from ledger.store.audit import Journal
from ledger.store.engine import transaction
from ledger.store.tables import Setting, UserAccount

LOCKOUT_KEY = "lockout_after_failures"
READS_KEY = "reads_need_login"  # "on" or "off"; absent: on for PostgreSQL, off for SQLite
DEFAULT_LOCKOUT = 5

# Who may do what. An administrator manages users and settings and signs no production record.
RECORDERS = frozenset({"operator", "engineer", "qa"})
DECIDERS = frozenset({"engineer", "qa"})
ADMINS = frozenset({"admin"})


def _hasher() -> object:
    from argon2 import PasswordHasher

    return PasswordHasher()


def hash_password(password: str) -> str:
    """A salted argon2id hash (argon2-cffi defaults, RFC 9106 low-memory profile)."""
    check_password(password)
    return _hasher().hash(password)  # type: ignore[attr-defined]


def _matches(stored: str, password: str) -> bool:
    from argon2.exceptions import InvalidHashError, VerificationError

    try:
        return bool(_hasher().verify(stored, password))  # type: ignore[attr-defined]
    except (VerificationError, InvalidHashError):
        return False


def lockout_threshold(session: Session) -> int:
    row = session.get(Setting, LOCKOUT_KEY)
    return int(row.value) if row is not None else DEFAULT_LOCKOUT


def reads_need_login(session: Session) -> bool:
    """Whether this site's read commands need a signed-in user."""
    row = session.get(Setting, READS_KEY)
    if row is not None:
        return row.value == "on"
    return session.get_bind().dialect.name == "postgresql"


def find_user(session: Session, login: str) -> UserAccount | None:
    return session.exec(select(UserAccount).where(UserAccount.login == login)).first()


def authenticate(engine: Engine, login: str, password: str) -> UserAccount:
    """The active, unlocked user whose password this is, or RefusedError (exit 3).

    A wrong password is counted and audited in its own transaction (so it survives the
    refusal); reaching the site's threshold locks the account until an administrator resets
    its password.
    """
    with transaction(engine) as session:
        user = find_user(session, login)
        if user is None:
            raise RefusedError(
                f"no user {login!r}", field="user", value=login, expected="a registered user ID"
            )
        if not user.active:
            raise RefusedError(f"user {login!r} is disabled", field="user", value=login)
        if user.locked:
            raise RefusedError(
                f"user {login!r} is locked after repeated wrong passwords; an administrator "
                "must reset the password (fluxledger user passwd)",
                field="user",
                value=login,
            )
        if _matches(user.password_hash, password):
            if user.failed_logins:
                Journal(session, login).change(
                    user, {"failed_logins": 0}, reason="signed in with the right password"
                )
            return user
        failures = user.failed_logins + 1
        changes: dict[str, object] = {"failed_logins": failures}
        limit = lockout_threshold(session)
        if failures >= limit:
            changes["locked"] = True
        Journal(session, login).change(
            user,
            changes,
            reason=f"wrong password ({failures} of {limit} allowed)",
            action="sign_in_failed",
        )
    raise RefusedError(
        f"wrong password for {login!r}"
        + (
            " — the account is now locked"
            if failures >= limit
            else f" ({limit - failures} attempts left)"
        ),
        field="password",
        value="(hidden)",
    )


def own_password_command(login: str) -> str:
    """The command with which ``login`` chooses their own password (to quote in messages)."""
    return f"fluxledger user passwd {login} --user {login}"


def require_own_password(user: UserAccount) -> None:
    """Refuse (exit 3) a user whose password someone else set (``password_temporary``).

    An administrator who sets or resets a password knows it; until its owner has chosen
    their own, nothing they write or sign may carry the owner's name. Only the owner's own
    password change is exempt (``ledger.logbook.workspace.change_own_password``).
    """
    if user.password_temporary:
        raise RefusedError(
            f"the password of {user.login} was set by someone else and is temporary: change "
            f"it first with `{own_password_command(user.login)}`, then record or sign",
            field="user",
            value=user.login,
        )


def require_role(user: UserAccount, allowed: frozenset[str], action: str) -> None:
    """Refuse (exit 3) unless the user's role is one of ``allowed``."""
    if user.role not in allowed:
        roles = " or ".join(sorted(allowed))
        raise RefusedError(
            f"{user.login} ({user.role}) may not {action}; that needs the role {roles}",
            field="user",
            value=user.login,
        )
