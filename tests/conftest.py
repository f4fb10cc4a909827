"""Shared test set-up. In CI, hypothesis runs derandomized so a run is repeatable."""

from __future__ import annotations

import os
import uuid
from collections.abc import Iterator
from pathlib import Path
from typing import TYPE_CHECKING

import pytest
from hypothesis import settings

if TYPE_CHECKING:
    from tests.world import World, Worlds

settings.register_profile("ci", derandomize=True, deadline=None, print_blob=True)
settings.register_profile("dev", deadline=None, print_blob=True)
settings.register_profile("stress", max_examples=2000, deadline=None, print_blob=True)
settings.load_profile(
    os.environ.get("FLUXLEDGER_HYPOTHESIS_PROFILE") or ("ci" if os.environ.get("CI") else "dev")
)


# --- Databases -------------------------------------------------------------------------------

# One site key for every test database (and the CLI processes tests start), so that worlds
# built once can be copied. A fixed test value, not a secret; tests of the key file itself
# remove it (tests/store/test_sitekey.py).
TEST_SITE_KEY = "5e" * 32
os.environ.setdefault("FLUXLEDGER_KEY", TEST_SITE_KEY)

POSTGRES_ENV = "FLUXLEDGER_TEST_POSTGRES_URL"
NO_POSTGRES = f"{POSTGRES_ENV} is not set: the PostgreSQL tests run in CI (.ci/run sets it)"


@pytest.fixture(autouse=True)
def _cheap_password_hashes(request: pytest.FixtureRequest, monkeypatch: pytest.MonkeyPatch) -> None:
    """Tests hash many passwords; argon2 with tiny cost keeps the suite fast.

    The production parameters are checked in tests/logbook/test_auth.py, which asks for the
    real hasher with the ``real_argon2`` marker.
    """
    if request.node.get_closest_marker("real_argon2"):
        return
    from argon2 import PasswordHasher

    import ledger.logbook.auth as auth

    cheap = PasswordHasher(time_cost=1, memory_cost=64, parallelism=1)
    monkeypatch.setattr(auth, "_hasher", lambda: cheap)


def _postgres_schema_url(base: str) -> Iterator[str]:
    from sqlalchemy import create_engine, text

    from ledger.store.engine import resolve_url

    schema = f"fl_{uuid.uuid4().hex[:12]}"
    admin = create_engine(resolve_url(base))
    with admin.begin() as conn:
        conn.execute(text(f"CREATE SCHEMA {schema}"))
    sep = "&" if "?" in base else "?"
    try:
        yield f"{base}{sep}options=-csearch_path%3D{schema}"
    finally:
        with admin.begin() as conn:
            conn.execute(text(f"DROP SCHEMA {schema} CASCADE"))
        admin.dispose()


BACKENDS = ["sqlite", pytest.param("postgresql", marks=pytest.mark.postgres)]


def _postgres_base() -> str:
    base = os.environ.get(POSTGRES_ENV)
    if not base:
        pytest.skip(NO_POSTGRES)
    return base


@pytest.fixture(params=BACKENDS)
def db_url(request: pytest.FixtureRequest, tmp_path: Path) -> Iterator[str]:
    """A URL of a fresh, empty database: an SQLite file, or a new PostgreSQL schema."""
    if request.param == "sqlite":
        yield f"sqlite:///{tmp_path}/ledger.db"
        return
    yield from _postgres_schema_url(_postgres_base())


@pytest.fixture(scope="session")
def worlds(tmp_path_factory: pytest.TempPathFactory) -> Iterator[Worlds]:
    """This worker's built logbooks, each built once and handed out as copies."""
    from tests.world import Worlds

    cache = Worlds(tmp_path_factory, os.environ.get(POSTGRES_ENV))
    try:
        yield cache
    finally:
        cache.close()


# Test files whose tests share a costly module- or session-level build (the demo run; the runs
# in review and approved of the record tests) go to one xdist worker as a unit, so each worker
# does not build them again; every other test is scheduled on its own. (xdist's loadgroup does
# not group on this pytest, whose node ids it cannot rename.)
SHARED_BUILDS = {
    "tests/cli/test_demo.py": "demo",
    "tests/records/test_context.py": "records",
    "tests/records/test_sign_cli.py": "records",
    "tests/records/test_verify.py": "records",
}


@pytest.hookimpl(optionalhook=True)
def pytest_xdist_make_scheduler(config: pytest.Config, log: object) -> object:
    """The default (load) schedule, with the files of SHARED_BUILDS kept together."""
    if config.getvalue("dist") != "load":
        return None
    from xdist.scheduler import LoadScopeScheduling  # type: ignore[import-untyped]

    class SharedBuilds(LoadScopeScheduling):
        def _split_scope(self, nodeid: str) -> str:
            return SHARED_BUILDS.get(nodeid.split("::", 1)[0], nodeid)

    return SharedBuilds(config, log)


def pytest_collection_modifyitems(config: pytest.Config, items: list[pytest.Item]) -> None:
    """Files holding a test marked ``slow`` run first, a shared build's files ahead of the
    others; every file keeps its tests together and in order (a module-scoped build is made
    once). Under xdist, a long test that starts last keeps one worker busy after the other
    has run out of work."""

    def group(item: pytest.Item) -> str:
        path = item.nodeid.split("::", 1)[0]
        return SHARED_BUILDS.get(path, path)

    slow = {group(item) for item in items if item.get_closest_marker("slow")}

    def rank(item: pytest.Item) -> int:
        name = group(item)
        if name not in slow:
            return 2
        return 0 if name in SHARED_BUILDS.values() else 1

    items.sort(key=rank)  # stable: the collection's order within each rank


def pytest_generate_tests(metafunc: pytest.Metafunc) -> None:
    """``backend`` is both databases, or SQLite alone for a test marked ``sqlite_only``."""
    if "backend" in metafunc.fixturenames:
        only = metafunc.definition.get_closest_marker("sqlite_only") is not None
        metafunc.parametrize("backend", ["sqlite"] if only else BACKENDS, indirect=True)


@pytest.fixture
def backend(request: pytest.FixtureRequest) -> str:
    """The database kind of a world test: "sqlite", or "postgresql" in CI."""
    if request.param == "postgresql":
        _postgres_base()
    return str(request.param)


@pytest.fixture
def world(backend: str, worlds: Worlds, tmp_path: Path) -> Iterator[World]:
    """A logbook of its own (SQLite, and PostgreSQL in CI) with users and a module type.

    PostgreSQL is for tests whose subject is the database (storage, audit chain, concurrency,
    migrations, signing and tampering); the others are marked ``sqlite_only``.
    """
    with worlds.copy(backend, tmp_path) as w:
        yield w


@pytest.fixture
def sqlite_world(worlds: Worlds, tmp_path: Path) -> Iterator[World]:
    """A logbook of its own on SQLite, with users and a module type."""
    with worlds.copy("sqlite", tmp_path) as w:
        yield w
