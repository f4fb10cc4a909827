"""Review by exception: everything a reviewer must look at in a run's record, in one summary.

Each topic lists its findings in words, or nothing (printed "none"): failed or missing checks,
deviations and their state, overrides (of fitness, of product), late entries, voids and
corrections, calibration and phase warnings from the skid-log import, and where the log and
the run's times disagree (within the tolerance the import accepted). The record opens with it
and ``record review RUN`` prints the same.
"""

from __future__ import annotations

from collections.abc import Sequence
from datetime import UTC, datetime, tzinfo
from typing import Any

from sqlmodel import Session, select

from ledger.records import context as c
from ledger.rules.localtime import local_text
from ledger.store.tables import (
    ModuleUse,
    QcResult,
    RecordRevision,
    Run,
    SkidLogFile,
    StepEntry,
)

TOPICS = (
    "failed or missing checks",
    "deviations",
    "overrides",
    "late entries",
    "voids and corrections",
    "calibration and import warnings",
    "log against run times",
)


def _at(at: datetime | None, zone: tzinfo) -> str:
    return local_text(at, zone) if at else "?"


def _before(rec: Any, as_of: datetime | None) -> bool:
    return as_of is None or rec.created_at <= as_of


def _voided_by(rec: Any, as_of: datetime | None) -> bool:
    v = getattr(rec, "voided_at", None)
    return v is not None and (as_of is None or v <= as_of)


def _span(seconds: float) -> str:
    seconds = abs(seconds)
    return f"{seconds:.0f} s" if seconds < 120 else f"{seconds / 60:.1f} min"


def gather(
    session: Session,
    run: Run,
    as_of: datetime | None,
    checks: Sequence[c.CheckRow],
    deviations: Sequence[c.DeviationRow],
    log: SkidLogFile | None,
    zone: tzinfo = UTC,
) -> tuple[c.ReviewTopic, ...]:
    """The review topics of ``run`` as its record shows them at ``as_of``, times in
    ``zone`` (the record's site zone) with their offset."""
    found: dict[str, list[str]] = {t: [] for t in TOPICS}
    for k in checks:
        if k.verdict in ("FAIL", "MISSING"):
            link = ""
            if k.deviation is not None:
                state = "closed" if k.deviation_closed else "OPEN"
                link = f" (deviation {k.deviation}, {state})"
            found["failed or missing checks"].append(
                f"{k.title}: {k.verdict}, actual {k.actual} against {k.planned}{link}"
            )
    for d in deviations:
        state = f"closed by {d.closed_by} at {d.closed_at}" if d.closed_by else "OPEN"
        found["deviations"].append(
            f"deviation {d.number} ({d.classification or 'not classified'}): {d.description} "
            f"— {state}"
        )
    if run.override_reason:
        found["overrides"].append(f"planned on a module that was not fit: {run.override_reason}")
    product = (run.plan or {}).get("product_override_reason")
    if product:
        found["overrides"].append(f"a template of another product used: {product}")
    _late(session, run, as_of, found["late entries"], zone)
    _voids(session, run, as_of, found["voids and corrections"], zone)
    if log is not None:
        found["calibration and import warnings"] += list((log.actuals or {}).get("warnings") or [])
        _log_times(run, log, found["log against run times"], zone)
    return tuple(c.ReviewTopic(t, tuple(found[t])) for t in TOPICS)


def _late(session: Session, run: Run, as_of: datetime | None, out: list[str], zone: tzinfo) -> None:
    if run.planned_at is not None and run.planned_at < run.created_at:
        out.append(f"plan entered at {_at(run.created_at, zone)} for {_at(run.planned_at, zone)}")
    if run.use_id is not None:
        use = session.get(ModuleUse, run.use_id)
        if use is not None and use.late:
            out.append(
                f"start entered at {_at(use.created_at, zone)} for {_at(use.activity_at, zone)}"
            )
    for q in session.exec(select(QcResult).where(QcResult.run_id == run.id)):
        if getattr(q, "late", False) and _before(q, as_of):
            out.append(f"QC {q.attribute} entered late at {_at(q.created_at, zone)}")
    for s in session.exec(select(StepEntry).where(StepEntry.run_id == run.id)):
        if s.late and _before(s, as_of) and not _voided_by(s, as_of):
            out.append(f"step {s.step} {s.meaning} by {s.login}: done at {_at(s.done_at, zone)}, "
                       f"entered at {_at(s.created_at, zone)}")  # fmt: skip


def _voids(
    session: Session, run: Run, as_of: datetime | None, out: list[str], zone: tzinfo
) -> None:
    for log in session.exec(select(SkidLogFile).where(SkidLogFile.run_id == run.id)):
        if _voided_by(log, as_of):
            out.append(f"skid log {log.file_name} voided by {log.voided_by} at "
                       f"{_at(log.voided_at, zone)}: {log.void_reason}")  # fmt: skip
    for q in session.exec(select(QcResult).where(QcResult.run_id == run.id)):
        if _voided_by(q, as_of):
            out.append(f"QC {q.attribute} {q.text} voided by {q.voided_by}: {q.void_reason}")
    for s in session.exec(select(StepEntry).where(StepEntry.run_id == run.id)):
        if _voided_by(s, as_of):
            out.append(f"step {s.step} {s.meaning} by {s.login} voided by {s.voided_by}: "
                       f"{s.void_reason}")  # fmt: skip
    for rev in session.exec(select(RecordRevision).where(RecordRevision.run_id == run.id)):
        if rev.superseded_at is not None and (as_of is None or rev.superseded_at <= as_of):
            out.append(f"revision {rev.number} superseded at {_at(rev.superseded_at, zone)}: "
                       f"{rev.superseded_reason or ''}".rstrip(": "))  # fmt: skip


def _log_times(run: Run, log: SkidLogFile, out: list[str], zone: tzinfo) -> None:
    actuals = log.actuals or {}
    try:
        start = datetime.fromisoformat(str(actuals["start"]))
        end = datetime.fromisoformat(str(actuals["end"]))
    except (KeyError, TypeError, ValueError):
        return
    if run.started_at is not None and start < run.started_at:
        out.append(f"the log starts {_span((run.started_at - start).total_seconds())} before "
                   f"the run's start ({_at(start, zone)} against "
                   f"{_at(run.started_at, zone)})")  # fmt: skip
    if run.finished_at is not None and end > run.finished_at:
        out.append(f"the log ends {_span((end - run.finished_at).total_seconds())} after the "
                   f"run's finish ({_at(end, zone)} against "
                   f"{_at(run.finished_at, zone)})")  # fmt: skip


def lines(topics: Sequence[c.ReviewTopic]) -> list[str]:
    """The summary as plain lines: each topic, then its findings or "none"."""
    out = []
    for t in topics:
        out.append(f"{t.topic}: {'none' if not t.findings else len(t.findings)}")
        out += [f"  - {f}" for f in t.findings]
    return out
