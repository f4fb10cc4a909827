"""User accounts for the administrator: the list, adding a user with a temporary password,
changing a role, setting a temporary password (which also unlocks) and disabling: the
services of ``fluxledger user ...``, each write one audited transaction.

No page or JSON carries a password or its hash: an account is shown through ``Account``."""

from __future__ import annotations

from typing import TYPE_CHECKING, Any
from urllib.parse import quote

from starlette.responses import Response
from starlette.routing import Route

from ledger.errors import InputError, LedgerError, RefusedError
from ledger.web.show import plain
from ledger.web.visit import Visit, endpoint, field_errors

if TYPE_CHECKING:
    from ledger.logbook.users import Account

DONE = ("added", "role", "password", "disabled")


def _roles() -> tuple[str, ...]:
    from ledger.logbook.users import ROLES

    return tuple(ROLES)


async def _all(v: Visit) -> list[Account]:
    from ledger.logbook.users import accounts

    rows: list[Account] = await v.as_user(accounts)
    return rows


async def _one(v: Visit, login: str) -> Account:
    from ledger.logbook.users import account_of

    found: Account = await v.as_user(lambda s, a: account_of(s, a, login))
    return found


def _list_page(v: Visit, rows: list[Account], status: int = 200, **form: Any) -> Response:
    return v.page(
        "users.html", status, rows=rows, roles=_roles(),
        errors=form.get("errors", {}), typed=form.get("typed", {}),
    )  # fmt: skip


@endpoint
async def users_page(v: Visit) -> Response:
    """GET /users[?format=json]: every account, and the form to add one."""
    v.require_user()
    rows = await _all(v)
    if v.wants_json():
        return v.json({"users": plain(rows)})
    return _list_page(v, rows)


@endpoint
async def account_page(v: Visit) -> Response:
    """GET /users/{login}[?done=...][&format=json]: one account and its forms."""
    v.require_user()
    login = v.request.path_params["login"]
    row = await _one(v, login)
    if v.wants_json():
        return v.json({"user": plain(row)})
    done = v.request.query_params.get("done")
    return _account_page(v, row, done=done if done in DONE else None)


def _account_page(
    v: Visit, row: Account, status: int = 200, *, done: str | None = None,
    form: str | None = None, errors: dict[str, str] | None = None,
    typed: dict[str, str] | None = None,
) -> Response:  # fmt: skip
    from ledger.logbook.auth import own_password_command

    return v.page(
        "users_account.html", status, u=row, roles=_roles(), done=done, form=form,
        errors=errors or {}, typed=typed or {}, own_command=own_password_command(row.login),
    )  # fmt: skip


def _refusal(err: LedgerError) -> bool:
    """A refusal of the acting user themselves (role, temporary password, signed out):
    answered by the refused page, not beside a field."""
    return isinstance(err, RefusedError) and err.field in ("user", "csrf")


def _status(err: LedgerError) -> int:
    return 403 if isinstance(err, RefusedError) else 400


def _repeat(form: dict[str, str]) -> str:
    """The password typed twice alike (as the CLI asks for it twice)."""
    password = form.get("password", "")
    if password != form.get("password_repeat", ""):
        raise InputError(
            "the two passwords differ", field="password_repeat", value="(hidden)",
            expected="the same password typed twice",
        )  # fmt: skip
    return password


@endpoint
async def add_user(v: Visit) -> Response:
    """POST /users: add an account whose password is temporary (``fluxledger user add``)."""
    from ledger.logbook.users import account
    from ledger.logbook.users import add_user as add

    v.require_user()
    form = await v.form()
    login = form.get("login", "").strip()
    typed = {"login": login, "name": form.get("name", ""), "role": form.get("role", "")}
    try:
        password = _repeat(form)
        created = await v.write(
            lambda s, a: account(add(s, a, login, typed["name"], typed["role"], password))
        )
    except LedgerError as err:
        if _refusal(err):
            raise
        if v.wants_json():
            return v.json({"error": str(err), "field": err.field}, _status(err))
        return _list_page(v, await _all(v), _status(err), errors=field_errors(err), typed=typed)
    if v.wants_json():
        return v.json({"user": plain(created)})
    return v.redirect(f"/users/{quote(created.login)}?done=added#done")


async def _change(v: Visit, form_name: str, done: str, work: Any) -> Response:
    """Run ``work(session, actor, form)`` on the account of the path; errors beside the field
    of the form ``form_name``, nothing written."""
    from ledger.logbook.users import account

    v.require_user()
    login = v.request.path_params["login"]
    form = await v.form()
    typed = {k: x for k, x in form.items() if not k.startswith("password")}
    try:
        changed = await v.write(lambda s, a: account(work(s, a, login, form)))
    except LedgerError as err:
        if _refusal(err):
            raise
        if v.wants_json():
            return v.json({"error": str(err), "field": err.field}, _status(err))
        errors = field_errors(err)
        if err.field == "login":  # the account itself (own role, already disabled)
            errors = {"_": str(err)}
        row = await _one(v, login)
        return _account_page(v, row, _status(err), form=form_name, errors=errors, typed=typed)
    if v.wants_json():
        return v.json({"user": plain(changed)})
    return v.redirect(f"/users/{quote(changed.login)}?done={done}#done")


@endpoint
async def change_role(v: Visit) -> Response:
    """POST /users/{login}/role: role and reason (``fluxledger user role``)."""
    from ledger.logbook.users import set_role

    return await _change(
        v, "role", "role",
        lambda s, a, login, f: set_role(s, a, login, f.get("role", ""), f.get("reason", "")),
    )  # fmt: skip


@endpoint
async def reset_password(v: Visit) -> Response:
    """POST /users/{login}/password: a temporary password, which also unlocks the account
    (``fluxledger user passwd LOGIN`` by an administrator)."""
    from ledger.logbook.users import set_password

    def work(s: Any, a: Any, login: str, f: dict[str, str]) -> Any:
        if login == a.login:
            # The CLI changes one's own password only with the current one (change_own_password).
            raise InputError(
                "your own password is changed with your current one, not set here",
                field="password", value="(hidden)",
                expected=f"the page Your password (/password) or `fluxledger user passwd {login}`",
            )  # fmt: skip
        return set_password(s, a, login, _repeat(f))

    return await _change(v, "password", "password", work)


@endpoint
async def disable(v: Visit) -> Response:
    """POST /users/{login}/disable: disable the account, with a reason (``user disable``)."""
    from ledger.logbook.users import disable_user

    return await _change(
        v, "disable", "disabled",
        lambda s, a, login, f: disable_user(s, a, login, f.get("reason", "")),
    )  # fmt: skip


routes = [
    Route("/users", users_page, methods=["GET"]),
    Route("/users", add_user, methods=["POST"]),
    Route("/users/{login}", account_page, methods=["GET"]),
    Route("/users/{login}/role", change_role, methods=["POST"]),
    Route("/users/{login}/password", reset_password, methods=["POST"]),
    Route("/users/{login}/disable", disable, methods=["POST"]),
]
