"""One request of a page: who is signed in, the CSRF token, the form, the answer.

The session lives in one signed cookie (``itsdangerous``) keyed from the site key, so every
worker of a site reads it: the user's ID, a random CSRF token of this session and the time
of the last request. A request after the site's idle time signs the user out. Nothing in
the cookie is secret; the signature stops it being forged or altered.
"""

from __future__ import annotations

import hmac
import logging
import secrets
from collections.abc import Awaitable, Callable, Mapping
from dataclasses import dataclass, field
from typing import Any, TypeVar

from itsdangerous import BadSignature, URLSafeSerializer
from starlette.concurrency import run_in_threadpool
from starlette.datastructures import UploadFile
from starlette.requests import Request
from starlette.responses import HTMLResponse, JSONResponse, RedirectResponse, Response

from ledger.errors import InputError, LedgerError, RefusedError

T = TypeVar("T")
COOKIE = "fluxledger_session"
LOG = logging.getLogger("ledger.web")
MAX_FIELDS = 400  # a water-flux table of many points, not more
MAX_FIELD_CHARS = 10_000


class SignInNeeded(Exception):
    """The page needs a signed-in user (answered by a redirect to the sign-in page)."""


@dataclass
class Visit:
    """A request with its session: ``login`` is None when nobody is signed in."""

    request: Request
    login: str | None = None
    csrf: str = ""
    expired: bool = False
    role: str | None = None
    full_name: str | None = None
    _form: dict[str, str] | None = None
    _files: dict[str, UploadFile] = field(default_factory=dict)
    _clear: bool = False

    # -- the app's services ---------------------------------------------------------------------
    @property
    def app(self) -> Any:
        return self.request.app.state.workspace

    def wants_json(self) -> bool:
        return self.request.query_params.get("format") == "json"

    # -- session --------------------------------------------------------------------------------
    def sign_in(self, login: str) -> None:
        """Start a new session for ``login`` (a fresh CSRF token: no fixation)."""
        self.login = login
        self.csrf = secrets.token_urlsafe(32)

    def sign_out(self) -> None:
        self.login = None
        self.role = None
        self.csrf = secrets.token_urlsafe(32)

    def require_user(self) -> str:
        if self.login is None:
            raise SignInNeeded
        return self.login

    # -- forms ----------------------------------------------------------------------------------
    async def form(self) -> dict[str, str]:
        """The posted fields as text, after the CSRF check (RefusedError without the token
        of this session). Files are kept aside (``file``)."""
        if self._form is not None:
            return self._form
        try:
            data = await self.request.form(
                max_files=2, max_fields=MAX_FIELDS, max_part_size=MAX_FIELD_CHARS * 4
            )
        except Exception as exc:  # multipart errors: malformed or over the limits
            raise InputError(
                "the form could not be read", field="form", value=type(exc).__name__,
                expected=f"at most {MAX_FIELDS} fields and one or two files",
            ) from None  # fmt: skip
        fields: dict[str, str] = {}
        for key, value in data.multi_items():
            if isinstance(value, UploadFile):
                self._files[key] = value
                continue
            if len(value) > MAX_FIELD_CHARS:
                raise InputError(
                    f"{key}: {len(value)} characters is too long", field=key,
                    value=f"{len(value)} characters", expected=f"at most {MAX_FIELD_CHARS}",
                )  # fmt: skip
            fields[key] = value
        token = fields.pop("csrf", "")
        if not (self.csrf and hmac.compare_digest(token.encode(), self.csrf.encode())):
            raise RefusedError(
                "this form is out of date or was not sent from this session; open the page "
                "again and resend it",
                field="csrf",
                value="(missing)" if not token else "(not this session's)",
            )
        self._form = fields
        return fields

    def file(self, name: str) -> UploadFile | None:
        return self._files.get(name)

    # -- the database, off the event loop --------------------------------------------------------
    async def read(self, work: Callable[[Any], T]) -> T:
        from ledger.logbook.workspace import read_ledger

        return await run_in_threadpool(read_ledger, self.app.engine, work)

    async def write(self, work: Callable[[Any, Any], T]) -> T:
        from ledger.logbook.workspace import as_signed_in

        login = self.require_user()
        return await run_in_threadpool(as_signed_in, self.app.engine, login, work, writes=True)

    async def as_user(self, work: Callable[[Any, Any], T]) -> T:
        """Read as the signed-in user (their account checked again, e.g. for a role)."""
        from ledger.logbook.workspace import as_signed_in

        login = self.require_user()
        return await run_in_threadpool(as_signed_in, self.app.engine, login, work, writes=False)

    # -- answers --------------------------------------------------------------------------------
    def page(self, template: str, status: int = 200, **context: Any) -> HTMLResponse:
        html = self.app.pages.get_template(template).render(visit=self, **context)
        return HTMLResponse(html, status_code=status)

    def json(self, data: Any, status: int = 200) -> JSONResponse:
        return JSONResponse(data, status_code=status)

    def redirect(self, url: str) -> RedirectResponse:
        return RedirectResponse(url, status_code=303)


def field_errors(err: LedgerError) -> dict[str, str]:
    """The message of an error keyed by the form field it names (``_`` for the whole form)."""
    name = err.field or "_"
    return {name: str(err)}


# -- the cookie -------------------------------------------------------------------------------


def _serializer(secret: bytes) -> URLSafeSerializer:
    return URLSafeSerializer(secret, salt="session")


def open_visit(request: Request) -> Visit:
    """The visit of a request, from its cookie (a bad or stale cookie: nobody signed in)."""
    ws = request.app.state.workspace
    v = Visit(request)
    raw = request.cookies.get(COOKIE)
    data: Mapping[str, Any] = {}
    if raw:
        try:
            loaded = _serializer(ws.secret).loads(raw)
            data = loaded if isinstance(loaded, dict) else {}
        except BadSignature:
            data = {}
    now = ws.clock()
    csrf = data.get("csrf")
    v.csrf = csrf if isinstance(csrf, str) and csrf else secrets.token_urlsafe(32)
    login = data.get("login")
    seen = data.get("seen")
    if isinstance(login, str) and isinstance(seen, (int, float)):
        if now - seen > ws.idle_seconds:
            v.expired = True
            v.sign_out()
        else:
            v.login = login
            role = data.get("role")
            v.role = role if isinstance(role, str) else None
            name = data.get("name")
            v.full_name = name if isinstance(name, str) else None
    return v


def close_visit(v: Visit, response: Response) -> Response:
    """Write the session back (its last-seen time refreshed) onto the response."""
    ws = v.request.app.state.workspace
    payload: dict[str, Any] = {"csrf": v.csrf}
    if v.login is not None:
        payload.update(login=v.login, seen=ws.clock(), role=v.role, name=v.full_name)
    response.set_cookie(
        COOKIE,
        _serializer(ws.secret).dumps(payload),
        httponly=True,
        samesite="strict",
        secure=v.request.url.scheme == "https",
        path="/",
    )
    return response


Handler = Callable[[Visit], Awaitable[Response]]


def endpoint(handler: Handler) -> Callable[[Request], Awaitable[Response]]:
    """A page handler with its session opened and closed, and every user error answered as
    a page (or JSON) that says what happened: never a traceback, never SQL."""

    async def run(request: Request) -> Response:
        v = open_visit(request)
        try:
            response = await handler(v)
        except SignInNeeded:
            target = request.url.path
            response = v.redirect(f"/sign-in?next={target}" + ("&idle=1" if v.expired else ""))
        except LedgerError as err:
            status = 403 if isinstance(err, RefusedError) else 400
            if v.wants_json():
                response = v.json({"error": str(err), "field": err.field}, status)
            else:
                response = v.page("refused.html", status, error=str(err), field=err.field)
        except Exception:
            LOG.exception("page %s failed", request.url.path)
            response = v.page("failed.html", 500)
        return close_visit(v, response)

    run.__name__ = handler.__name__
    run.__doc__ = handler.__doc__
    return run
