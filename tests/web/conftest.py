"""A web workspace on a world of its own, driven through Starlette's test client (httpx), and
the same workspace served by uvicorn for Debian's Chromium driven by Playwright."""

from __future__ import annotations

import os
import re
import shutil
import socket
import threading
import time
from collections.abc import Iterator
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import pytest
from starlette.testclient import TestClient

from tests.world import World, Worlds

CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
NO_CHROMIUM = "no Chromium found (apt-get install -y chromium): browser tests skipped"


@dataclass
class Clock:
    """A clock the test moves by hand (seconds since the epoch)."""

    now: float = 1_800_000_000.0

    def __call__(self) -> float:
        return self.now


@dataclass
class Site:
    world: World
    client: TestClient
    clock: Clock = field(default_factory=Clock)

    def csrf(self, path: str = "/sign-in") -> str:
        page = self.client.get(path)
        found = re.search(r'name="csrf" value="([^"]+)"', page.text)
        assert found, page.text
        return found.group(1)

    def sign_in(self, login: str, password: str) -> object:
        return self.client.post(
            "/sign-in",
            data={"csrf": self.csrf(), "login": login, "password": password, "next": "/fleet"},
            follow_redirects=False,
        )


@pytest.fixture
def site(sqlite_world: World) -> Iterator[Site]:
    from ledger.web.app import create_app

    clock = Clock()
    app = create_app(sqlite_world.url, clock=clock)
    with TestClient(app, base_url="http://testserver") as client:
        yield Site(sqlite_world, client, clock)


@pytest.fixture
def browser_world(worlds: Worlds, tmp_path: Path) -> Iterator[World]:
    """The world of a browser flow: on PostgreSQL when a server is given (CI), else SQLite.

    The flows run once, on the site's database where there is one, not on both."""
    if CHROMIUM is None:
        pytest.skip(NO_CHROMIUM)
    backend = "postgresql" if os.environ.get("FLUXLEDGER_TEST_POSTGRES_URL") else "sqlite"
    with worlds.copy(backend, tmp_path) as w:
        yield w


@pytest.fixture
def served(browser_world: World) -> Iterator[tuple[str, World]]:
    """The workspace on ``browser_world``, served by uvicorn on a free local port."""
    import uvicorn

    from ledger.web.app import create_app

    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    server = uvicorn.Server(
        uvicorn.Config(create_app(browser_world.url), host="127.0.0.1", port=port,
                       log_level="warning")
    )  # fmt: skip
    thread = threading.Thread(target=server.run, daemon=True)
    thread.start()
    deadline = time.monotonic() + 10
    while not server.started and time.monotonic() < deadline:
        time.sleep(0.05)
    try:
        yield f"http://127.0.0.1:{port}", browser_world
    finally:
        server.should_exit = True
        thread.join(5)


@pytest.fixture
def chromium() -> Iterator[Any]:
    """A headless Debian Chromium (Playwright's ``Browser``)."""
    if CHROMIUM is None:
        pytest.skip(NO_CHROMIUM)
    from playwright.sync_api import sync_playwright

    with sync_playwright() as p:
        browser = p.chromium.launch(executable_path=CHROMIUM, args=["--no-sandbox"])
        try:
            yield browser
        finally:
            browser.close()


def sign_in_page(page: Any, base: str, login: str, password: str, target: str = "/fleet") -> None:
    """Sign ``login`` in through the form of the sign-in page, then open ``target``."""
    page.goto(base + "/sign-in?next=" + target)
    page.fill("#login", login)
    page.fill("#password", password)
    page.click("button.primary")
    page.wait_for_url(base + target)
