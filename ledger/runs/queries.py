"""Read-only questions about runs, for the front ends (they never query the database)."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from sqlmodel import Session, select

from ledger.runs import service
from ledger.runs.plan import Plan
from ledger.store.tables import Module, Run


@dataclass(frozen=True)
class RunView:
    """A run with its plan and the serial of its module."""

    run: Run
    plan: Plan
    module_serial: str | None


def run_view(session: Session, run_id: int) -> RunView:
    """The run ``run_id`` (an InputError when there is none), its plan and its module."""
    run = service.get_run(session, run_id)
    module = session.get(Module, run.module_id)
    return RunView(run, service.run_plan(run), module.serial if module else None)


def runs_newest_first(session: Session) -> list[tuple[Run, str]]:
    """Every run that is not void, with its module's serial, newest first."""
    rows: Any = session.exec(
        select(Run, Module.serial)
        .join(Module)
        .where(Run.voided_at.is_(None))  # type: ignore[union-attr]
        .order_by(Run.id.desc())  # type: ignore[union-attr]
    ).all()
    return [(r, serial) for r, serial in rows]
