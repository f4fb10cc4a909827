"""Shared test set-up. In CI, hypothesis runs derandomized so a run is repeatable."""

from __future__ import annotations

import os
import uuid
from collections.abc import Iterator
from pathlib import Path

import pytest
from hypothesis import settings

settings.register_profile("ci", derandomize=True, deadline=None, print_blob=True)
settings.register_profile("dev", deadline=None, print_blob=True)
settings.register_profile("stress", max_examples=2000, deadline=None, print_blob=True)
settings.load_profile(
    os.environ.get("FLUXLEDGER_HYPOTHESIS_PROFILE") or ("ci" if os.environ.get("CI") else "dev")
)


# --- Databases -------------------------------------------------------------------------------

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


@pytest.fixture(params=["sqlite", pytest.param("postgresql", marks=pytest.mark.postgres)])
def db_url(request: pytest.FixtureRequest, tmp_path: Path) -> Iterator[str]:
    """A URL of a fresh, empty database: an SQLite file, or a new PostgreSQL schema."""
    if request.param == "sqlite":
        yield f"sqlite:///{tmp_path}/ledger.db"
        return
    base = os.environ.get(POSTGRES_ENV)
    if not base:
        pytest.skip(NO_POSTGRES)
    yield from _postgres_schema_url(base)


@pytest.fixture
def world(db_url: str) -> object:
    """A fresh logbook (SQLite, and PostgreSQL in CI) with users and a module type."""
    from tests.world import build

    return build(db_url)
