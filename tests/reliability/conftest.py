"""Fixtures of the reliability tests: worlds with work in progress, built once per worker and
backend and copied per test (tests/world.py), and a runner of CLI commands in child
processes that can be killed (tests/reliability/procs.py)."""

from __future__ import annotations

from collections.abc import Iterator
from pathlib import Path

import pytest

from tests.records import flow
from tests.reliability import procs
from tests.world import World, Worlds

WRITER_MODULES = [f"QMW-{i:04d}" for i in range(1, 9)]


def _ready_by_service(w: World, serials: list[str]) -> None:
    """Register and commission ``serials`` through the services (baseline + integrity)."""
    from ledger.logbook.modules import add_module
    from ledger.store.engine import transaction

    engine = w.engine()
    for serial in serials:
        with transaction(engine) as s:
            add_module(s, procs._actor(s, "op.kim"), serial, "HF-750")
        for kind in ("water:baseline", "integrity"):
            with transaction(engine) as s:
                procs.write_one(s, kind, serial)
    engine.dispose()


def fleet(w: World, folder: Path) -> None:
    """Runs 1 and 2 in review on QMB-0142 (a second QA user for approval) and eight further
    modules available, one per concurrent writer."""
    flow.reviewed(w, folder)
    w.ok(w.water("QMB-0142", "post-use", "90 mL/min"))
    w.ok(w.clean("QMB-0142"))
    w.ok(w.water("QMB-0142", "post-clean", "165 mL/min"))
    w.ok(w.integrity("QMB-0142"))
    flow.to_review(w, folder, run=2, lot="QB117-26-021", ready=False)
    _ready_by_service(w, WRITER_MODULES)


def started(w: World, folder: Path) -> None:
    """Run 1 planned, approved and started on QMB-0142, its skid log written into ``folder``
    as skid-1.csv (not imported)."""
    from datetime import UTC, datetime, timedelta

    from ledger.cli.demo_log import write_log
    from tests.cli.test_runs import INPUTS

    w.ready()
    w.ok(w.water("QMB-0142", "pre-use", "168 mL/min"))
    w.ok(w.as_user("eng.ray", "run", "plan", "QB-MR-LNP-101", "--module", "QMB-0142",
                   "--product", "QB-117", "--lot", "QB117-26-020", *INPUTS))  # fmt: skip
    w.ok(w.as_user("qa.lin", "run", "approve-plan", "1"))
    w.ok(w.as_user("op.kim", "run", "start", "1"))
    w.wide_log_tolerance()
    write_log(folder / "skid-1.csv", datetime.now(UTC) - timedelta(hours=2))


@pytest.fixture
def fleet_world(backend: str, worlds: Worlds, tmp_path: Path) -> Iterator[World]:
    """Runs 1 and 2 in review, modules QMW-0001..0008 available (SQLite, and PostgreSQL)."""
    with worlds.copy(backend, tmp_path, fleet) as w:
        yield w


@pytest.fixture
def started_world(worlds: Worlds, tmp_path: Path) -> Iterator[World]:
    """SQLite: run 1 started, skid-1.csv in tmp_path."""
    with worlds.copy("sqlite", tmp_path, started) as w:
        yield w


@pytest.fixture
def review_world(worlds: Worlds, tmp_path: Path) -> Iterator[World]:
    """SQLite: run 1 in review with a second QA user; skid-1.csv in tmp_path."""
    with worlds.copy("sqlite", tmp_path, flow.reviewed) as w:
        yield w
