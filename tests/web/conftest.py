"""A web workspace on a world of its own, driven through Starlette's test client (httpx)."""

from __future__ import annotations

import re
from collections.abc import Iterator
from dataclasses import dataclass, field

import pytest
from starlette.testclient import TestClient

from tests.world import World


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
