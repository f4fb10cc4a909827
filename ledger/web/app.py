"""The ASGI app of ``fluxledger serve``: the pages, their static files and the guards that
every answer passes through (security headers, a body-size limit)."""

from __future__ import annotations

import time
from collections.abc import Callable
from dataclasses import dataclass
from importlib import import_module
from pathlib import Path
from typing import Any

from starlette.applications import Starlette
from starlette.routing import BaseRoute, Mount
from starlette.staticfiles import StaticFiles
from starlette.types import ASGIApp, Message, Receive, Scope, Send

HERE = Path(__file__).resolve().parent
# Modules of ledger.web that hold pages; each has ``routes``.
PAGES = ("signin", "fleet", "modules", "module_forms", "runs", "review", "audit", "users")
MAX_BODY_BYTES = 20 * 1024 * 1024  # a 24 h, 1 Hz skid log of ten channels is ~8 MB
CSP = (
    "default-src 'self'; script-src 'self'; style-src 'self'; img-src 'self' data:; "
    "form-action 'self'; frame-ancestors 'none'; base-uri 'none'; object-src 'none'"
)
HEADERS = [
    (b"content-security-policy", CSP.encode()),
    (b"x-content-type-options", b"nosniff"),
    (b"referrer-policy", b"same-origin"),
    (b"x-frame-options", b"DENY"),
    (b"cache-control", b"no-store"),
]


@dataclass
class Workspace:
    """What every page shares: the database, the cookie key, the idle time, the pages."""

    engine: Any
    secret: bytes
    idle_seconds: float
    clock: Callable[[], float]
    pages: Any
    max_body: int = MAX_BODY_BYTES


class Guards:
    """Security headers on every answer; a request body over the limit refused with 413,
    whether it announces its length or streams it."""

    def __init__(self, app: ASGIApp, max_body: int) -> None:
        self.app = app
        self.max_body = max_body

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        headers = dict(scope.get("headers") or [])
        try:
            declared = int(headers.get(b"content-length", b"0"))
        except ValueError:
            declared = self.max_body + 1
        if declared > self.max_body:
            await _too_large(send)
            return
        seen = 0
        started = False

        async def limited() -> Message:
            nonlocal seen
            message = await receive()
            if message["type"] == "http.request":
                seen += len(message.get("body", b""))
                if seen > self.max_body:
                    raise BodyTooLarge
            return message

        async def with_headers(message: Message) -> None:
            nonlocal started
            if message["type"] == "http.response.start":
                started = True
                names = {k.lower() for k, _ in message.get("headers", [])}
                extra = [(k, v) for k, v in HEADERS if k not in names]
                message = {**message, "headers": [*message.get("headers", []), *extra]}
            await send(message)

        try:
            await self.app(scope, limited, with_headers)
        except BodyTooLarge:
            if not started:
                await _too_large(send)


class BodyTooLarge(Exception):
    pass


async def _too_large(send: Send) -> None:
    body = b"The upload is larger than this workspace accepts (20 MB)."
    await send(
        {
            "type": "http.response.start",
            "status": 413,
            "headers": [(b"content-type", b"text/plain; charset=utf-8"), *HEADERS],
        }
    )
    await send({"type": "http.response.body", "body": body})


def page_templates() -> Any:
    """The Jinja2 environment of the pages (autoescaped)."""
    from jinja2 import Environment, FileSystemLoader, StrictUndefined, select_autoescape

    from ledger.web import show

    env = Environment(
        loader=FileSystemLoader(HERE / "html"),
        autoescape=select_autoescape(["html"]),
        undefined=StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
    )
    env.filters.update(show.FILTERS)
    return env


def create_app(
    db: str | None,
    *,
    idle_minutes: float | None = None,
    clock: Callable[[], float] = time.time,
) -> ASGIApp:
    """The workspace on the database ``db`` (a path or SQLAlchemy URL; None: the default)."""
    from ledger.logbook.workspace import idle_minutes as site_idle
    from ledger.logbook.workspace import open_ledger, session_secret

    engine = open_ledger(db)
    minutes = idle_minutes if idle_minutes is not None else site_idle(engine)
    ws = Workspace(engine, session_secret(engine), minutes * 60.0, clock, page_templates())
    routes: list[BaseRoute] = [
        Mount("/static", StaticFiles(directory=HERE / "static"), name="static")
    ]
    for name in PAGES:
        routes.extend(import_module(f"ledger.web.{name}").routes)
    app = Starlette(routes=routes)
    app.state.workspace = ws
    return Guards(app, ws.max_body)


def from_environment() -> ASGIApp:
    """The app on ``$FLUXLEDGER_DATABASE_URL`` (or the default database): what each uvicorn
    worker builds when ``fluxledger serve`` runs several."""
    return create_app(None)
