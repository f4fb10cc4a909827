"""The latest valid (not voided) records of a module: what its status rules and verdict need.

Each lookup is one indexed query on (module_id, activity_at), newest first.
"""

from __future__ import annotations

from datetime import datetime
from typing import TypeVar

from sqlalchemy import func
from sqlmodel import Session, select

from ledger.store.tables import (
    Activity,
    Cleaning,
    IntegrityTest,
    ModuleUse,
    Storage,
    WaterFluxTest,
)

A = TypeVar("A", bound=Activity)


def latest(
    session: Session,
    cls: type[A],
    module_id: int,
    *,
    after: datetime | None = None,
    stage: str | None = None,
) -> A | None:
    """Newest valid record of ``cls`` for the module (optionally of a stage, after a time)."""
    statement = select(cls).where(cls.module_id == module_id, cls.voided_at.is_(None))  # type: ignore[union-attr]
    if stage is not None:
        statement = statement.where(WaterFluxTest.stage == stage)
    if after is not None:
        statement = statement.where(cls.activity_at > after)
    statement = statement.order_by(cls.activity_at.desc(), cls.id.desc()).limit(1)  # type: ignore[attr-defined]
    return session.exec(statement).first()


def water(
    session: Session, module_id: int, stage: str | None = None, after: datetime | None = None
) -> WaterFluxTest | None:
    return latest(session, WaterFluxTest, module_id, stage=stage, after=after)


def integrity(
    session: Session, module_id: int, after: datetime | None = None
) -> IntegrityTest | None:
    return latest(session, IntegrityTest, module_id, after=after)


def cleaning(session: Session, module_id: int) -> Cleaning | None:
    return latest(session, Cleaning, module_id)


def storage(session: Session, module_id: int) -> Storage | None:
    return latest(session, Storage, module_id)


def use(session: Session, module_id: int) -> ModuleUse | None:
    return latest(session, ModuleUse, module_id)


def cycles(session: Session, module_id: int) -> int:
    """Uses recorded for the module (voided ones do not count)."""
    statement = (
        select(func.count())
        .select_from(ModuleUse)
        .where(
            ModuleUse.module_id == module_id,
            ModuleUse.voided_at.is_(None),  # type: ignore[union-attr]
        )
    )
    return int(session.exec(statement).one())
