"""Open the logbook for one command: the database at its schema, the acting user, one
transaction. Front ends call these with the database they were given and get a session to
pass to a service; they never open a database themselves."""

from __future__ import annotations

from collections.abc import Callable
from typing import TYPE_CHECKING, Any, TypeVar

if TYPE_CHECKING:
    from sqlalchemy import Engine
    from sqlmodel import Session

    from ledger.store.tables import UserAccount

T = TypeVar("T")


def open_ledger(db: str | None, *, create: bool = False) -> Engine:
    """The engine of an existing database at the current schema revision (``create``: any)."""
    from ledger.store.engine import connect, resolve_url
    from ledger.store.schema import require_current

    engine = connect(resolve_url(db), create=create)
    if not create:
        require_current(engine)
    return engine


def write(
    db: str | None,
    login: str,
    password: Callable[[], str],
    work: Callable[[Session, UserAccount], T],
) -> T:
    """Authenticate ``login`` (its own small transaction, so a failed password stays counted),
    then run ``work`` as one transaction: all of it is written, or nothing.

    This is the one place where every record, signature and setting gets its actor, so the
    rule lives here: a user whose password someone else set (temporary) is refused (exit 3)
    until they change it with ``change_own_password``."""
    from ledger.logbook.auth import require_own_password

    return _as(db, login, password, work, check=require_own_password)


def change_own_password(
    db: str | None,
    login: str,
    password: Callable[[], str],
    new_password: Callable[[], str],
) -> UserAccount:
    """``login`` chooses their own password (clearing ``password_temporary``): the only write
    allowed to a user whose password is temporary, who signs in with that one."""
    from ledger.logbook.users import set_password

    return _as(db, login, password, lambda s, a: set_password(s, a, a.login, new_password()))


def _as(
    db: str | None,
    login: str,
    password: Callable[[], str],
    work: Callable[[Session, UserAccount], T],
    check: Callable[[UserAccount], None] | None = None,
) -> T:
    from ledger.logbook.auth import authenticate
    from ledger.store.engine import transaction

    engine = open_ledger(db)
    actor = authenticate(engine, login, password())
    if check is not None:
        check(actor)
    with transaction(engine) as session:
        return work(session, actor)


def sign_in(engine: Engine, login: str, password: str) -> UserAccount:
    """The user whose ID and password these are (a failed attempt counts toward lockout).

    It does not refuse a temporary password: a write goes through ``write``, which does."""
    from ledger.logbook.auth import authenticate

    return authenticate(engine, login, password)


def read(
    db: str | None,
    work: Callable[[Session], T],
    login: str | None = None,
    password: Callable[[], str] | None = None,
) -> T:
    """Run ``work`` on a session of the database (read-only by convention).

    Every read command comes here, so the site's rule lives here: when reads need a
    signed-in user (the ``reads_need_login`` setting), ``login`` and its password are required
    and checked like a write's; a given ``login`` is always checked."""
    from ledger.errors import RefusedError
    from ledger.logbook.auth import authenticate, reads_need_login
    from ledger.store.engine import transaction

    engine = open_ledger(db)
    if login is None:
        with transaction(engine) as session:
            needed = reads_need_login(session)
        if needed:
            raise RefusedError(
                "this site lets only signed-in users read the logbook: give --user ID, or set "
                "FLUXLEDGER_USER=ID for commands without --user (the password is asked for; "
                "--password-stdin reads it in scripts)",
                field="user",
                value="(none)",
            )
    else:
        authenticate(engine, login, password() if password is not None else "")
    with transaction(engine) as session:
        return work(session)


def authenticated_read(
    db: str | None, login: str, password: Callable[[], str], work: Callable[[Session, Any], T]
) -> T:
    """``read`` as an authenticated user (for reads that a site restricts). Reads stay open to
    a user whose password is temporary."""
    return _as(db, login, password, work)


def database_label(engine: Engine) -> str:
    """The database's URL with its password and any secret parameter masked, to show a user."""
    from ledger.store.engine import shown_url

    return shown_url(engine)


def stored_revision(engine: Engine) -> str | None:
    """The schema revision a database holds (None: a new, empty database)."""
    from ledger.store.schema import stored_revision as revision

    return revision(engine)


# A front end that keeps a signed-in user between requests (the web workspace) ----------------

SESSION_LABEL = b"fluxledger web session cookie v1"
IDLE_KEY = "web.idle_minutes"
DEFAULT_IDLE_MINUTES = 15


def session_secret(engine: Engine) -> bytes:
    """The key that signs web session cookies: derived from the site key, so every worker of
    one site derives the same key and a new site key ends every session."""
    from ledger.store.sitekey import require

    url = engine.url.render_as_string(hide_password=False)
    return bytes.fromhex(require(url).mac(SESSION_LABEL))


def idle_minutes(engine: Engine) -> int:
    """The site's idle time (minutes) after which a web session signs its user out."""
    from ledger.store.engine import transaction
    from ledger.store.tables import Setting

    with transaction(engine) as session:
        row = session.get(Setting, IDLE_KEY)
        return int(row.value) if row is not None else DEFAULT_IDLE_MINUTES


def as_signed_in(
    engine: Engine, login: str, work: Callable[[Session, UserAccount], T], *, writes: bool
) -> T:
    """Run ``work`` as one transaction for ``login``, who signed in with their password
    earlier in this session: the account is read again, so a user disabled or locked since
    is refused at once (exit 3); a write also needs the user's own password (not a temporary
    one), as ``write`` does."""
    from ledger.errors import RefusedError
    from ledger.logbook.auth import find_user, require_own_password
    from ledger.store.engine import transaction

    with transaction(engine) as session:
        user = find_user(session, login)
        if user is None or not user.active or user.locked:
            raise RefusedError(
                f"user {login!r} may no longer sign in (disabled or locked)",
                field="user",
                value=login,
            )
        if writes:
            require_own_password(user)
        return work(session, user)


def read_ledger(engine: Engine, work: Callable[[Session], T]) -> T:
    """Run ``work`` on a session of an open database (read-only by convention)."""
    from ledger.store.engine import transaction

    with transaction(engine) as session:
        return work(session)


def sign_with_password(
    engine: Engine, login: str, password: str, work: Callable[[Session, UserAccount], T]
) -> T:
    """Run ``work`` as one transaction for ``login``, signed in earlier, who has just typed
    their password again (a signature needs it every time, 21 CFR 11.200).

    The password is checked as ``ledger.logbook.auth.authenticate`` checks a sign-in, in its
    own small transaction: a wrong one counts toward lockout and stays counted although
    ``work`` never runs. The user's own password is required (not a temporary one), as for
    ``write``."""
    from ledger.logbook.auth import authenticate, require_own_password
    from ledger.store.engine import transaction

    actor = authenticate(engine, login, password)
    require_own_password(actor)
    with transaction(engine) as session:
        return work(session, actor)


def change_password_signed_in(engine: Engine, login: str, current: str, new: str) -> UserAccount:
    """``login``, signed in earlier, chooses their own password: the current one is typed
    again and checked as a sign-in (a wrong one counts toward lockout), then the new one is
    set through the same rule as ``fluxledger user passwd`` (clearing a temporary password)."""
    from ledger.errors import InputError
    from ledger.logbook.auth import authenticate
    from ledger.logbook.passwords import check_password
    from ledger.logbook.users import set_password
    from ledger.store.engine import transaction

    try:  # the new password's rules first, named as the new one (no attempt is counted)
        check_password(new)
    except InputError as err:
        err.field = "new"
        raise
    actor = authenticate(engine, login, current)
    with transaction(engine) as session:
        return set_password(session, actor, actor.login, new)
