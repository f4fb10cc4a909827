"""User accounts: add, change password, change role, disable, list; the site's account
settings (lockout threshold, whether reads need a signed-in user), admin only.

Nobody changes their own role, and granting a deciding role (engineer, qa) is recorded with
the login of the administrator who granted it. A password set by anyone other than its owner
(``user add``, an administrator's reset) is temporary (``password_temporary``, audited): its
owner must choose their own before recording or signing anything (ledger.logbook.workspace).
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from datetime import datetime

from sqlmodel import Session, select

from ledger.errors import InputError, RefusedError
from ledger.logbook.auth import (
    ADMINS,
    DECIDERS,
    LOCKOUT_KEY,
    READS_KEY,
    find_user,
    hash_password,
    require_role,
)
from ledger.logbook.required import new_identifier, required
from ledger.rules.names import shown
from ledger.store.audit import Journal
from ledger.store.tables import ROLES, Setting, UserAccount

_LOGIN = re.compile(r"^[a-z][a-z0-9._-]{1,63}$")


def check_login(login: str) -> str:
    """``login`` if it is a valid user ID (an identifier of the strict form below)."""
    login = required("login", login, "a user ID, e.g. op.kim", kind="identifier")
    if not _LOGIN.fullmatch(login):
        raise InputError(
            f"user ID {shown(login)} is not allowed",
            field="login",
            value=shown(login),
            expected="2-64 characters: lower-case letters, digits, '.', '_' or '-', "
            "starting with a letter",
        )
    return login


def check_role(role: str) -> str:
    if role not in ROLES:
        raise InputError(
            f"role {shown(role)} is unknown",
            field="role",
            value=shown(role),
            expected="one of " + ", ".join(ROLES),
        )
    return role


def create_first_admin(session: Session, login: str, full_name: str, password: str) -> UserAccount:
    """The administrator that init creates when the database has no user yet.

    The person running init types their own password, so it is not temporary."""
    login = check_login(login)
    name = full_name.strip() or login
    user = UserAccount(
        login=login,
        full_name=required("name", name, "the person's printed name"),
        role="admin",
        password_hash=hash_password(password),
        password_temporary=False,
    )
    return Journal(session, login).create(user, reason="first administrator, created by init")


def add_user(
    session: Session, actor: UserAccount, login: str, full_name: str, role: str, password: str
) -> UserAccount:
    """An administrator adds an account; the password they chose for it is temporary."""
    require_role(actor, ADMINS, "add users")
    login = check_login(login)
    check_role(role)
    full_name = required("name", full_name, "the person's printed name")

    def taken(found: str) -> InputError:
        return InputError(
            f"user ID {shown(login)} exists (or existed): IDs are never reused",
            field="login",
            value=login,
            expected="a new user ID",
        )

    user = UserAccount(
        login=login,
        full_name=full_name,
        role=role,
        password_hash=hash_password(password),
        password_temporary=True,
    )
    granted = _grant_reason(role, actor)
    temporary = _temporary_reason(login, actor)
    # Two administrators adding the same ID at once: the second insert breaks the unique
    # constraint (PostgreSQL) and gets the same answer as a lookup would have given.
    with new_identifier(session, UserAccount.login, login, taken):
        return Journal(session, actor.login).create(
            user, reason=f"{granted}; {temporary}" if granted else temporary
        )


def _temporary_reason(login: str, actor: UserAccount) -> str:
    """The audit reason of a password someone other than its owner set."""
    return f"password set by {actor.login} is temporary until {login} changes it"


def _grant_reason(role: str, actor: UserAccount) -> str | None:
    """The audit reason naming who granted a deciding role (None for other roles)."""
    if role in DECIDERS:
        return f"role {role} granted by {actor.login}"
    return None


def set_role(
    session: Session, actor: UserAccount, login: str, role: str, reason: str
) -> UserAccount:
    """An administrator changes someone else's role (audited, naming the grantor)."""
    require_role(actor, ADMINS, "change roles")
    check_role(role)
    user = _target(session, login)
    if user.login == actor.login:
        raise RefusedError(
            "nobody can change their own role; another administrator must do it",
            field="login",
            value=login,
        )
    if user.role == role:
        raise RefusedError(f"user {shown(login)} already has the role {role}", field="role",
                           value=role)  # fmt: skip
    reason = required("reason", reason, "why the role changes", kind="text")
    granted = _grant_reason(role, actor)
    Journal(session, actor.login).change(
        user,
        {"role": role},
        reason=f"{granted}: {reason}" if granted else reason,
        action="role_change",
    )
    return user


def _target(session: Session, login: str) -> UserAccount:
    user = find_user(session, login)
    if user is None:
        raise InputError(
            f"no user {shown(login)}", field="login", value=shown(login),
            expected="a registered user ID",
        )  # fmt: skip
    return user


def set_password(session: Session, actor: UserAccount, login: str, password: str) -> UserAccount:
    """Users change their own password (which is then no longer temporary); an administrator
    resets anyone's, which unlocks it and makes it temporary: its owner must change it before
    recording or signing anything."""
    own = actor.login == login
    if not own:
        require_role(actor, ADMINS, "reset another user's password")
    user = _target(session, login)
    reason = (
        "password changed by its owner"
        if own
        else f"password reset; {_temporary_reason(login, actor)}"
    )
    Journal(session, actor.login).change(
        user,
        {
            "password_hash": hash_password(password),
            "failed_logins": 0,
            "locked": False,
            "password_temporary": not own,
        },
        reason=reason,
    )
    return user


def disable_user(session: Session, actor: UserAccount, login: str, reason: str) -> UserAccount:
    require_role(actor, ADMINS, "disable users")
    user = _target(session, login)
    if user.login == actor.login:
        raise RefusedError(
            "an administrator cannot disable their own account", field="login", value=login
        )
    if not user.active:
        raise RefusedError(f"user {shown(login)} is already disabled", field="login", value=login)
    reason = required("reason", reason, "why the account is disabled", kind="text")
    Journal(session, actor.login).change(user, {"active": False}, reason=reason)
    return user


def set_reads_need_login(session: Session, actor: UserAccount, state: str, reason: str) -> Setting:
    """Whether every read command needs a signed-in user: ``state`` "on" or "off" (audited)."""
    require_role(actor, ADMINS, "change whether reads need a signed-in user")
    value = state.strip().lower()
    if value not in ("on", "off"):
        raise InputError(
            f"state {shown(state)} is not on or off", field="state", value=shown(state),
            expected="on or off",
        )  # fmt: skip
    return _set(session, actor, READS_KEY, value, reason)


def _set(session: Session, actor: UserAccount, key: str, value: str, reason: str) -> Setting:
    reason = required("reason", reason, "why the setting changes", kind="text")
    journal = Journal(session, actor.login)
    row = session.get(Setting, key)
    if row is None:
        return journal.create(Setting(key=key, value=value), reason=reason)
    journal.change(row, {"value": value}, reason=reason)
    return row


def list_users(session: Session) -> list[UserAccount]:
    return list(session.exec(select(UserAccount).order_by(UserAccount.id)))  # type: ignore[arg-type]


def account_state(user: UserAccount) -> str:
    """How a list names an account's state: active, locked or disabled."""
    return "disabled" if not user.active else "locked" if user.locked else "active"


@dataclass(frozen=True)
class Account:
    """What the administrator's pages show of an account (never its password or hash)."""

    login: str
    name: str
    role: str
    active: bool
    locked: bool
    temporary_password: bool
    failed_sign_ins: int
    created_at: datetime | None
    created_by: str | None
    state: str


def account(user: UserAccount) -> Account:
    return Account(
        login=user.login,
        name=user.full_name,
        role=user.role,
        active=user.active,
        locked=user.locked,
        temporary_password=user.password_temporary,
        failed_sign_ins=user.failed_logins,
        created_at=user.created_at,
        created_by=user.created_by,
        state=account_state(user),
    )


def accounts(session: Session, actor: UserAccount) -> list[Account]:
    """Every account, for an administrator (the account pages are theirs alone)."""
    require_role(actor, ADMINS, "see the user accounts")
    return [account(u) for u in list_users(session)]


def account_of(session: Session, actor: UserAccount, login: str) -> Account:
    """One account, for an administrator (InputError naming ``login`` if there is none)."""
    from ledger.logbook.auth import find_user

    require_role(actor, ADMINS, "see the user accounts")
    user = find_user(session, login)
    if user is None:
        raise InputError(
            f"no user {login!r}", field="login", value=login, expected="a registered user ID"
        )
    return account(user)


def set_lockout(session: Session, actor: UserAccount, failures: int, reason: str) -> Setting:
    """How many wrong passwords in a row lock an account (audited)."""
    require_role(actor, ADMINS, "change the lockout policy")
    if not 1 <= failures <= 100:
        raise InputError(
            f"{failures} is out of range",
            field="max_failures",
            value=failures,
            expected="a whole number from 1 to 100",
        )
    return _set(session, actor, LOCKOUT_KEY, str(failures), reason)
