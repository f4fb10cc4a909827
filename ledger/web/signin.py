"""Signing in and out: the same accounts, passwords and lockout as the CLI."""

from __future__ import annotations

from urllib.parse import urlsplit

from starlette.concurrency import run_in_threadpool
from starlette.responses import Response
from starlette.routing import Route

from ledger.errors import LedgerError
from ledger.web.visit import Visit, endpoint, field_errors


def _safe_next(target: str | None) -> str:
    """Only a path on this site (no scheme, host or protocol-relative URL)."""
    if not target:
        return "/fleet"
    parts = urlsplit(target)
    if parts.scheme or parts.netloc or not target.startswith("/") or target.startswith("//"):
        return "/fleet"
    return target


@endpoint
async def sign_in_page(v: Visit) -> Response:
    """The sign-in form (with a note when the idle time signed the user out)."""
    return v.page(
        "signin.html",
        next=_safe_next(v.request.query_params.get("next")),
        idle=v.request.query_params.get("idle") == "1",
        errors={},
        login="",
    )


@endpoint
async def sign_in(v: Visit) -> Response:
    """Check the user ID and password (a wrong one counts toward lockout) and start a session."""
    from ledger.logbook.workspace import sign_in as check

    form = await v.form()
    login, password = form.get("login", "").strip(), form.get("password", "")
    target = _safe_next(form.get("next"))
    try:
        user = await run_in_threadpool(check, v.app.engine, login, password)
    except LedgerError as err:
        if v.wants_json():
            return v.json({"error": str(err), "field": err.field}, 403)
        # Beside the field it names: the account is the user-ID box, a password the other.
        name = {"user": "login", "password": "password"}.get(err.field or "", "_")
        errors = {name: field_errors(err)[err.field or "_"]}
        return v.page("signin.html", 403, next=target, idle=False, errors=errors, login=login)
    v.sign_in(user.login)
    v.role, v.full_name = user.role, user.full_name
    if v.wants_json():
        return v.json({"signed_in": user.login, "password_temporary": user.password_temporary})
    # Someone else set this password: nothing can be written until the user chooses their own.
    return v.redirect("/password?temporary=1" if user.password_temporary else target)


@endpoint
async def password_page(v: Visit) -> Response:
    """GET /password: the form to choose one's own password."""
    v.require_user()
    temporary = v.request.query_params.get("temporary") == "1"
    return v.page("password.html", errors={}, temporary=temporary, done=False)


@endpoint
async def change_password(v: Visit) -> Response:
    """POST /password: the current password again, the new one twice."""
    from ledger.logbook.workspace import change_password_signed_in

    login = v.require_user()
    form = await v.form()
    current, new, again = (form.get(k, "") for k in ("current", "new", "again"))
    errors: dict[str, str] = {}
    if new != again:
        errors["again"] = "the two new passwords differ; type the same one twice"
    else:
        try:
            await run_in_threadpool(change_password_signed_in, v.app.engine, login, current, new)
        except LedgerError as err:
            name = "new" if err.field == "new" else "current"
            errors[name] = str(err)
    if errors:
        if v.wants_json():
            field, message = next(iter(errors.items()))
            return v.json({"error": message, "field": field}, 400)
        return v.page("password.html", 400, errors=errors, temporary=False, done=False)
    if v.wants_json():
        return v.json({"changed": login})
    return v.page("password.html", errors={}, temporary=False, done=True)


@endpoint
async def sign_out(v: Visit) -> Response:
    """End the session (a POST with this session's CSRF token)."""
    await v.form()
    v.sign_out()
    return v.redirect("/sign-in")


@endpoint
async def home(v: Visit) -> Response:
    v.require_user()
    return v.redirect("/fleet")


@endpoint
async def alive(v: Visit) -> Response:
    """A bare route for health checks and as the benchmark's baseline: no database, no page."""
    return Response("ok", media_type="text/plain")


routes = [
    Route("/", home),
    Route("/alive", alive),
    Route("/sign-in", sign_in_page, methods=["GET"]),
    Route("/sign-in", sign_in, methods=["POST"]),
    Route("/sign-out", sign_out, methods=["POST"]),
    Route("/password", password_page, methods=["GET"]),
    Route("/password", change_password, methods=["POST"]),
]
