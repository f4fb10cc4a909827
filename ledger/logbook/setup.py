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
    key: str | None = None  # what init did about the site key, in words (never the key)


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
    """Whether the database has any user; plain SQL, so it works on an older schema too."""
    from sqlalchemy import inspect, text

    with engine.connect() as conn:
        if not inspect(conn).has_table("user_account"):
            return False
        return conn.execute(text("SELECT 1 FROM user_account LIMIT 1")).first() is not None


def initialize(
    engine: Engine, admin_login: str | None, admin_name: str | None, password: str | None
) -> InitResult:
    """Bring the schema to this software's revision; create the first admin if none exists."""
    before, after = upgrade(engine)
    keyed = ensure_keyed(engine)
    if has_users(engine):
        if not admin_login:
            return InitResult(before, after, None, key=keyed)
        if not usable_admins(engine):
            raise InputError(
                "this database has users but no active, unlocked administrator, and init "
                f"never adds one to an existing database; {RECOVERY_HINT}",
                field="admin",
                value=admin_login,
                expected="no --admin on an existing database",
            )
        return InitResult(
            before, after, None, note="the database has users already; --admin was not used",
            key=keyed,
        )  # fmt: skip
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
    return InitResult(before, after, admin_login, key=keyed)


UPGRADE_KEY_REASON = "the audit chain is keyed with the site key (upgrade to schema 0008)"


def ensure_keyed(engine: Engine) -> str | None:
    """Key the audit chain if it is not yet: with the configured site key, created when none
    exists. A chain with events (a database from before keying) is verified, then re-linked
    under the key by an audited ``rekey`` event that records its old head. Returns what was
    done, or None when the chain was keyed already."""
    from ledger.store import audit, sitekey
    from ledger.store.tables import AuditHead

    url = engine.url.render_as_string(hide_password=False)
    with transaction(engine) as session:
        head = session.get(AuditHead, 1)
        if head is None or head.key_id is not None:
            return None
        key = sitekey.load(url)
        made = key is None
        if key is None:
            key = sitekey.create(url)
        if head.seq == 0:
            audit.key_new_chain(session, key)
        else:
            audit.rekey(session, key, "fluxledger", UPGRADE_KEY_REASON, old=None)
    how = "created" if made else "found"
    return f"audit chain keyed with the site key {how} at {key.source} (key ID {key.key_id})"
