"""Fixtures of the record tests: copies of a run in review or approved, built once per worker.

Signing and tampering tests take the two-backend fixtures (SQLite, and PostgreSQL in CI);
tests whose subject does not depend on the database take the ``_sqlite`` ones.
"""

from __future__ import annotations

from collections.abc import Iterator
from pathlib import Path

import pytest

from tests.records import flow
from tests.world import World, Worlds


@pytest.fixture
def review(backend: str, worlds: Worlds, tmp_path: Path) -> Iterator[World]:
    """Run 1 in review on QMB-0142, with a second QA user; skid-1.csv in tmp_path."""
    with worlds.copy(backend, tmp_path, flow.reviewed) as w:
        yield w


@pytest.fixture
def review_sqlite(worlds: Worlds, tmp_path: Path) -> Iterator[World]:
    with worlds.copy("sqlite", tmp_path, flow.reviewed) as w:
        yield w


@pytest.fixture
def approved(backend: str, worlds: Worlds, tmp_path: Path) -> Iterator[World]:
    """Run 1 signed by all four signers (approved and locked); skid-1.csv in tmp_path."""
    with worlds.copy(backend, tmp_path, flow.approved) as w:
        yield w


@pytest.fixture
def approved_sqlite(worlds: Worlds, tmp_path: Path) -> Iterator[World]:
    with worlds.copy("sqlite", tmp_path, flow.approved) as w:
        yield w
