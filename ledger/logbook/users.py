"""User accounts: add, change password, disable, list; the lockout policy (admin only)."""

from __future__ import annotations

import re

from sqlmodel import Session, select

from ledger.errors import InputError, RefusedError
from ledger.logbook.auth import (
    ADMINS,
    LOCKOUT_KEY,
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
    """The administrator that init creates when the database has no user yet."""
    login = check_login(login)
    name = full_name.strip() or login
    user = UserAccount(
        login=login,
        full_name=required("name", name, "the person's printed name"),
        role="admin",
        password_hash=hash_password(password),
    )
    return Journal(session, login).create(user, reason="first administrator, created by init")


def add_user(
    session: Session, actor: UserAccount, login: str, full_name: str, role: str, password: str
) -> UserAccount:
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
        login=login, full_name=full_name, role=role, password_hash=hash_password(password)
    )
    # Two administrators adding the same ID at once: the second insert breaks the unique
    # constraint (PostgreSQL) and gets the same answer as a lookup would have given.
    with new_identifier(session, UserAccount.login, login, taken):
        return Journal(session, actor.login).create(user)


def _target(session: Session, login: str) -> UserAccount:
    user = find_user(session, login)
    if user is None:
        raise InputError(
            f"no user {shown(login)}", field="login", value=shown(login),
            expected="a registered user ID",
        )  # fmt: skip
    return user


def set_password(session: Session, actor: UserAccount, login: str, password: str) -> UserAccount:
    """Users change their own password; an administrator resets anyone's (and unlocks it)."""
    if actor.login != login:
        require_role(actor, ADMINS, "reset another user's password")
    user = _target(session, login)
    reason = "password changed by its owner" if actor.login == login else "password reset"
    Journal(session, actor.login).change(
        user,
        {"password_hash": hash_password(password), "failed_logins": 0, "locked": False},
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


def list_users(session: Session) -> list[UserAccount]:
    return list(session.exec(select(UserAccount).order_by(UserAccount.id)))  # type: ignore[arg-type]


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
    reason = required("reason", reason, "why the policy changes", kind="text")
    journal = Journal(session, actor.login)
    row = session.get(Setting, LOCKOUT_KEY)
    if row is None:
        row = Setting(key=LOCKOUT_KEY, value=str(failures))
        return journal.create(row, reason=reason)
    journal.change(row, {"value": str(failures)}, reason=reason)
    return row
