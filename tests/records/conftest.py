"""Fixtures of the record tests."""

from __future__ import annotations

from pathlib import Path

import pytest

from tests.world import World


@pytest.fixture
def sqlite_world(tmp_path: Path) -> World:
    """A fresh logbook on SQLite only. For tests whose subject does not depend on the
    database; the PostgreSQL runs of the signing and tampering tests cover both."""
    from tests.world import build

    return build(f"sqlite:///{tmp_path}/ledger.db")
