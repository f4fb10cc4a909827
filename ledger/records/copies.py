"""Controlled copies of a batch record: every print or sealed file is numbered and audited.

A copy carries its number within the run, its kind (print, sealed, archive), the revision it shows,
that revision's signature state and the meanings it carries. ``register`` writes the
``record_copy`` row through the audit journal, so each copy is an event of ``audit show``.
``check`` compares what a file's stamp claims with the database: a claim the database does not
hold is a problem; a copy printed before later signatures or before a correction is older
than the current state, which is said but is no problem.

States: ``draft`` (revision 0, the live data), ``in review`` (issued, not fully signed),
``approved`` (every meaning of the template signed), ``superseded`` (corrected since).
"""

from __future__ import annotations

import hashlib
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

from sqlmodel import Session, func, select

from ledger.records.assemble import record_id
from ledger.records.service import Issued
from ledger.rules.signing import fully_signed
from ledger.store.audit import Journal
from ledger.store.tables import AuditHead, RecordCopy, RecordRevision, UserAccount

DRAFT, IN_REVIEW, APPROVED, SUPERSEDED = "draft", "in review", "approved", "superseded"
STATES = (DRAFT, IN_REVIEW, APPROVED, SUPERSEDED)
PAST = {"print": "printed", "sealed": "sealed", "archive": "archived"}  # kind -> the audit verb


@dataclass(frozen=True)
class Copy:
    """What one copy shows of itself: its number, state, the revision's meanings signed."""

    number: int
    state: str
    meanings: tuple[str, ...]
    kind: str = "print"

    def band(self, revision: int) -> str | None:
        """The status band every page carries, or None for an approved revision and for a
        draft (which has its own watermark)."""
        if revision == 0 or self.state == APPROVED:
            return None
        return f"revision {revision} — {self.state} — not for release"


def state_of(
    revision: int, required: Sequence[str], meanings: Sequence[str], superseded: bool
) -> str:
    """The state of a revision with ``meanings`` signed of the template's ``required``."""
    if revision == 0:
        return DRAFT
    if superseded:
        return SUPERSEDED
    return APPROVED if fully_signed(required, meanings) else IN_REVIEW


def meanings_of(issued: Issued) -> tuple[str, ...]:
    """The meanings signed on the issued revision (none for a draft), in signing order."""
    ctx = issued.context
    if issued.revision is None:
        return ()
    return tuple(s.meaning for s in ctx.signatures if s.revision == ctx.header.revision)


def next_number(session: Session, run_id: int) -> int:
    """The run's next copy number: 1, 2, ..."""
    top = session.exec(
        select(func.max(RecordCopy.copy_number)).where(RecordCopy.run_id == run_id)
    ).one()
    return int(top or 0) + 1


def new_copy(session: Session, run_id: int, issued: Issued, kind: str) -> Copy:
    """The copy about to be made of ``issued``. The audit head is locked first, so two prints
    at once get different numbers (the second waits for the first's transaction)."""
    session.exec(select(AuditHead).where(AuditHead.id == 1).with_for_update()).first()
    meanings = meanings_of(issued)
    rev = issued.revision
    ctx = issued.context
    state = state_of(
        ctx.header.revision,
        ctx.required_signatures,
        meanings,
        rev is not None and rev.superseded_at is not None,
    )
    return Copy(next_number(session, run_id), state, meanings, kind)


def register(
    session: Session,
    actor: UserAccount,
    run_id: int,
    issued: Issued,
    copy: Copy,
    file_name: str,
    data: bytes,
) -> RecordCopy:
    """Record the copy (its file's SHA-256 of ``data``, the bytes written) as an audited row."""
    rev = issued.revision
    number = issued.context.header.revision
    what = f"revision {number}" if number else "draft"
    return Journal(session, actor.login).create(
        RecordCopy(
            run_id=run_id,
            copy_number=copy.number,
            revision=number,
            revision_sha256=rev.sha256 if rev is not None else None,
            state=copy.state,
            signatures=list(copy.meanings),
            file_name=file_name,
            file_sha256=hashlib.sha256(data).hexdigest(),
            kind=copy.kind,
        ),
        reason=f"{record_id(run_id)} {what} {PAST[copy.kind]} as copy {copy.number} ({copy.state})",
    )


def make_copy(
    session: Session,
    actor: UserAccount,
    run_id: int,
    issued: Issued,
    kind: str,
    *,
    name: Callable[[Copy], str],
    produce: Callable[[Copy], bytes],
) -> tuple[Copy, bytes]:
    """Make one controlled copy of ``issued`` in the caller's transaction: number it, ask
    ``name`` for its file name (which may refuse, e.g. a file that exists), ``produce`` its
    bytes (the PDF, sealed or not) and register it. Returns the copy and its bytes."""
    copy = new_copy(session, run_id, issued, kind)
    file_name = name(copy)
    data = produce(copy)
    register(session, actor, run_id, issued, copy, file_name, data)
    return copy, data


def from_stamp(stamp: Mapping[str, str]) -> Copy | None:
    """The copy a stamp describes; None when it names no copy number."""
    raw = stamp.get("copy", "")
    if not raw.isdigit():
        return None
    meanings = tuple(m for m in stamp.get("meanings", "").split(",") if m)
    return Copy(int(raw), stamp.get("state", ""), meanings)


@dataclass
class Findings:
    """What ``check`` found: claims the database does not hold (problems), what was
    confirmed (passed), and what is older than the database now (notes)."""

    passed: list[str] = field(default_factory=list)
    problems: list[str] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)


def check(
    session: Session,
    run_id: int,
    rev: RecordRevision | None,
    copy: Copy | None,
    data: bytes,
    required: Sequence[str],
    held: Sequence[str],
) -> Findings:
    """Compare the copy a file claims to be with the database.

    ``rev`` is the revision the file names (None for a draft), ``required`` the template's
    meanings, ``held`` the meanings the database holds for that revision now."""
    out = Findings()
    name = record_id(run_id)
    if copy is None:
        out.problems.append(
            "the file carries no copy number: it is not a registered controlled copy"
        )
        return out
    number = rev.number if rev is not None else 0
    row = session.exec(
        select(RecordCopy).where(RecordCopy.run_id == run_id, RecordCopy.copy_number == copy.number)
    ).first()
    if row is None:
        out.problems.append(f"{name} has no copy {copy.number} registered in this database")
    else:
        if row.file_sha256 != hashlib.sha256(data).hexdigest():
            out.problems.append(
                f"the file is not the one registered as copy {copy.number} (its SHA-256 "
                f"differs from {row.file_sha256[:12]}…, registered as {row.file_name})"
            )
        registered = (row.revision, row.state, tuple(row.signatures))
        if registered != (number, copy.state, copy.meanings):
            out.problems.append(
                f"copy {copy.number} was registered as revision {row.revision}, {row.state}, "
                f"signed {', '.join(row.signatures) or 'by no one'}; the file claims "
                f"revision {number}, {copy.state}, signed {', '.join(copy.meanings) or 'by no one'}"
            )
        if not out.problems:
            out.passed.append(
                f"copy {copy.number} is registered ({row.kind}, {row.created_at:%Y-%m-%d %H:%M} "
                f"UTC by {row.created_by}) with this file's SHA-256"
            )
    extra = [m for m in copy.meanings if m not in held]
    if extra:
        out.problems.append(
            f"the file claims signature(s) {', '.join(extra)} that the database does not hold "
            f"for revision {number}"
        )
    superseded = rev is not None and rev.superseded_at is not None
    own = state_of(number, required, copy.meanings, superseded=False)
    if copy.state not in STATES:
        out.problems.append(f"the file claims the state {copy.state!r}, which is not a state")
    elif copy.state == SUPERSEDED and not superseded:
        out.problems.append(f"the file claims revision {number} is superseded; it is not")
    elif copy.state != SUPERSEDED and copy.state != own:
        out.problems.append(
            f"the file claims the state {copy.state!r}, but the signatures it carries make "
            f"it {own!r}"
        )
    now = state_of(number, required, held, superseded)
    lacks = [m for m in required if m not in copy.meanings]
    out.notes.append(
        f"copy {copy.number}: {copy.state}; signed {', '.join(copy.meanings) or 'by no one'}"
        + (f"; lacks {', '.join(lacks)} of a fully signed record" if number and lacks else "")
    )
    missing = [m for m in held if m not in copy.meanings]
    if not extra and (missing or (superseded and copy.state != SUPERSEDED)):
        why = []
        if missing:
            why.append(f"the database now also holds {', '.join(missing)}")
        if superseded and copy.state != SUPERSEDED:
            why.append(f"revision {number} was superseded since")
        out.notes.append(
            f"copy {copy.number} is older than the current state ({now}): " + "; ".join(why)
        )
    return out


def copy_file_name(ctx: Any, copy: Any, suffix: str = "") -> str:
    """The file name of a copy (``ctx`` a record context, ``copy`` its RecordCopy), the state
    in it: BR-000001-rev1-in-review-copy3.pdf, BR-000001-draft-copy1.pdf."""
    h = ctx.header
    rev = f"rev{h.revision}-{copy.state.replace(' ', '-')}" if h.revision else "draft"
    return f"{h.record_id}-{rev}-copy{copy.number}{suffix}.pdf"
