"""Create or upgrade a database; on a new one, create the first administrator."""

from __future__ import annotations

from dataclasses import dataclass

from sqlalchemy import Engine
from sqlmodel import select

from ledger.errors import InputError
from ledger.logbook.users import create_first_admin
from ledger.store.engine import transaction
from ledger.store.schema import upgrade
from ledger.store.tables import UserAccount


@dataclass(frozen=True)
class InitResult:
    before: str | None
    after: str
    admin: str | None  # login of the administrator created now, if any
    note: str | None = None  # why --admin was not used, on a database that has users


RECOVERY_HINT = (
    "to restore an administrator, someone with access to the database host runs "
    "`fluxledger user recover-admin ID --db ...`"
)


def usable_admins(engine: Engine) -> list[str]:
    """Logins of the active, unlocked administrators."""
    with transaction(engine) as session:
        rows = session.exec(
            select(UserAccount).where(
                UserAccount.role == "admin",
                UserAccount.active == True,  # noqa: E712 - SQL expression
                UserAccount.locked == False,  # noqa: E712
            )
        )
        return [u.login for u in rows]


def has_users(engine: Engine) -> bool:
    with transaction(engine) as session:
        return session.exec(select(UserAccount).limit(1)).first() is not None


def initialize(
    engine: Engine, admin_login: str | None, admin_name: str | None, password: str | None
) -> InitResult:
    """Bring the schema to this software's revision; create the first admin if none exists."""
    before, after = upgrade(engine)
    if has_users(engine):
        if not admin_login:
            return InitResult(before, after, None)
        if not usable_admins(engine):
            raise InputError(
                "this database has users but no active, unlocked administrator, and init "
                f"never adds one to an existing database; {RECOVERY_HINT}",
                field="admin",
                value=admin_login,
                expected="no --admin on an existing database",
            )
        return InitResult(
            before, after, None, note="the database has users already; --admin was not used"
        )
    if not admin_login or password is None:
        raise InputError(
            "this database has no users yet: give --admin ID (and --name) for its first "
            "administrator",
            field="admin",
            value=admin_login,
            expected="the user ID of the first administrator",
        )
    with transaction(engine) as session:
        create_first_admin(session, admin_login, admin_name or admin_login, password)
    return InitResult(before, after, admin_login)
