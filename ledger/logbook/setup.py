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


def has_users(engine: Engine) -> bool:
    with transaction(engine) as session:
        return session.exec(select(UserAccount).limit(1)).first() is not None


def initialize(
    engine: Engine, admin_login: str | None, admin_name: str | None, password: str | None
) -> InitResult:
    """Bring the schema to this software's revision; create the first admin if none exists."""
    before, after = upgrade(engine)
    if has_users(engine):
        return InitResult(before, after, None)
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
