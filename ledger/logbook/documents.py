"""Controlled documents under change control: master-record templates and cleaning-cycle
procedures. An engineer submits a file as a draft, QA (not its author) approves it to take
effect from a stated time, QA retires it; and the question every user of a document asks:
which version is in force at a time.

One table (``template_version``) holds the versions of every kind, told apart by ``kind``.
The kind's own module parses its files (``ledger.runs.versions`` for templates,
``ledger.logbook.cycles`` for cleaning procedures) and hands a :class:`Document` here. Each
write runs inside the caller's one transaction and goes through the audit Journal; the rules
(in force, who approves, from when) are ``ledger.rules.versions``.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass
from datetime import datetime
from pathlib import Path

from sqlmodel import Session, select

from ledger.errors import InputError, RefusedError
from ledger.logbook.auth import require_role
from ledger.logbook.required import optional, required
from ledger.rules import versions as rules
from ledger.store.audit import Journal
from ledger.store.tables import AuditHead, TemplateVersion, UserAccount
from ledger.store.types import utc_now

AUTHORS = frozenset({rules.AUTHOR_ROLE})
APPROVERS = frozenset({rules.APPROVER_ROLE})


@dataclass(frozen=True)
class Kind:
    """A kind of controlled document: its stored name, its name in messages and the commands
    that submit, approve and show it."""

    name: str  # stored in template_version.kind
    word: str  # "template", "cleaning procedure"
    submit_command: str  # "fluxledger template submit FILE"
    approve_command: str  # "fluxledger template approve"
    history_command: str  # "fluxledger template history ID"
    list_command: str  # "fluxledger template list"


@dataclass(frozen=True)
class Document:
    """A parsed file of some kind: its ID, version, the SHA-256 of its bytes, its text and
    title."""

    id: str
    version: str
    sha256: str
    text: str
    title: str


@dataclass(frozen=True)
class VersionLine:
    """One version as history shows it, with its status at ``at``."""

    record: TemplateVersion
    status: str  # draft, approved, effective, superseded, retired


def _lock(session: Session) -> None:
    """The logbook's write lock, so two writers of one document see each other's rows."""
    session.exec(select(AuditHead).where(AuditHead.id == 1).with_for_update()).first()


def versions_of(session: Session, kind: Kind, doc_id: str) -> list[TemplateVersion]:
    """Every version of the document, oldest first."""
    statement = (
        select(TemplateVersion)
        .where(TemplateVersion.template_id == doc_id, TemplateVersion.kind == kind.name)
        .order_by(TemplateVersion.id)  # type: ignore[arg-type]
    )
    return list(session.exec(statement))


def get(session: Session, kind: Kind, doc_id: str, version: str) -> TemplateVersion:
    """The submitted ``version`` of the document; InputError naming the versions there are."""
    found = versions_of(session, kind, doc_id)
    match = next((v for v in found if v.version == version), None)
    if match is None:
        known = ", ".join(v.version for v in found) or "none"
        raise InputError(
            f"{kind.word} {doc_id} has no version {version!r} (submitted: {known})",
            field="version",
            value=version,
            expected=f"a submitted version (see `{kind.history_command}`)",
        )
    return match


def submit(
    session: Session, actor: UserAccount, kind: Kind, doc: Document, source: str
) -> tuple[TemplateVersion, bool]:
    """Submit a parsed file as a draft version (an engineer). The same ID and version with
    other bytes is refused; the same bytes again write nothing. Returns (the version, created
    now)."""
    require_role(actor, AUTHORS, f"submit {kind.word} versions")
    _lock(session)
    taken = session.exec(
        select(TemplateVersion).where(
            TemplateVersion.template_id == doc.id, TemplateVersion.kind != kind.name
        )
    ).first()
    if taken is not None:
        raise RefusedError(
            f"{doc.id} is already the ID of a {taken.kind.replace('_', ' ')}; give the "
            f"{kind.word} an ID of its own",
            field=kind.name,
            value=source,
        )
    for v in versions_of(session, kind, doc.id):
        if v.version != doc.version:
            continue
        if v.sha256 == doc.sha256:
            return v, False
        raise RefusedError(
            f"{kind.word} {doc.id} version {doc.version} is already submitted with other "
            f"content (SHA-256 {v.sha256[:12]}…, {v.state}); change `version` in the file",
            field=kind.name,
            value=source,
        )
    record = TemplateVersion(
        kind=kind.name,
        template_id=doc.id,
        version=doc.version,
        sha256=doc.sha256,
        text=doc.text,
        title=doc.title,
        source=Path(source).name,
        state="draft",
        authored_by=actor.login,
    )
    journal = Journal(session, actor.login)
    return journal.create(record, reason=f"{kind.word} version submitted"), True


def approve(
    session: Session,
    actor: UserAccount,
    kind: Kind,
    doc_id: str,
    version: str,
    effective_from: datetime | None,
    late_reason: str | None = None,
    used_at: Iterable[datetime] = (),
) -> TemplateVersion:
    """Approve a draft version (QA, never its author) to take effect from ``effective_from``
    (aware UTC; None: now, the approval's own time). A time more than
    ``rules.PAST_TOLERANCE`` before now needs ``late_reason``, and no time may reach back past
    a use of the document already made (``used_at``: when each use chose its version)."""
    journal = Journal(session, actor.login)
    effective_from = effective_from or journal.at
    if effective_from.tzinfo is None:
        raise ValueError("effective_from must be timezone-aware")  # a bug, not user input
    late_reason = optional("late_reason", late_reason, "why the approval is entered late")
    _lock(session)
    record = get(session, kind, doc_id, version)
    refusal = rules.approval_refusal(actor.login, actor.role, record.authored_by)
    if refusal:
        raise RefusedError(refusal, field="user", value=actor.login)
    if record.state != "draft":
        raise RefusedError(
            f"{kind.word} {doc_id} version {version} is {record.state}, not a draft: "
            "only a draft is approved",
            field="version",
            value=version,
        )
    refusal = rules.effective_refusal(effective_from, journal.at, late_reason)
    if refusal:
        raise InputError(
            refusal,
            field="effective_from",
            value=effective_from.isoformat(),
            expected="a time at or after now, or --late-reason",
        )
    taken = [
        v.effective_from
        for v in versions_of(session, kind, doc_id)
        if v.effective_from is not None and v.state == "approved"
    ]
    refusal = rules.overlap_refusal(effective_from, list(used_at), taken)
    if refusal:
        raise RefusedError(refusal, field="effective_from", value=effective_from.isoformat())
    journal.change(
        record,
        {
            "state": "approved",
            "approved_by": actor.login,
            "approved_at": journal.at,
            "effective_from": effective_from,
            "late_reason": late_reason,
        },
        reason=f"approved, effective from {effective_from.isoformat()}"
        + (f" (entered late: {late_reason})" if late_reason else ""),
    )
    return record


def retire(
    session: Session, actor: UserAccount, kind: Kind, doc_id: str, version: str, reason: str
) -> TemplateVersion:
    """Retire a version (QA, with a reason): from now on nothing new is made under it."""
    require_role(actor, APPROVERS, f"retire {kind.word} versions")
    reason = required("reason", reason, "why the version is retired", kind="text")
    _lock(session)
    record = get(session, kind, doc_id, version)
    if record.state == "retired":
        raise RefusedError(
            f"{kind.word} {doc_id} version {version} is retired already",
            field="version",
            value=version,
        )
    journal = Journal(session, actor.login)
    journal.change(
        record,
        {"state": "retired", "retired_by": actor.login, "retired_at": journal.at,
         "retire_reason": reason},
        reason=reason,
    )  # fmt: skip
    return record


def history(
    session: Session, kind: Kind, doc_id: str, at: datetime | None = None
) -> list[VersionLine]:
    """Every version of the document, oldest first, with its status at ``at`` (now)."""
    at = at or utc_now()
    found = versions_of(session, kind, doc_id)
    if not found:
        raise InputError(
            f"{kind.word} {doc_id} has no submitted version",
            field=kind.name,
            value=doc_id,
            expected=f"a {kind.word} ID of `{kind.list_command}`",
        )
    return [VersionLine(v, rules.status_at(v, found, at)) for v in found]


def catalogue(session: Session, kind: Kind, at: datetime | None = None) -> list[VersionLine]:
    """Every version of every document of the kind, by ID then submission, with its status."""
    at = at or utc_now()
    every = list(
        session.exec(
            select(TemplateVersion)
            .where(TemplateVersion.kind == kind.name)
            .order_by(TemplateVersion.id)  # type: ignore[arg-type]
        )
    )
    every.sort(key=lambda v: v.template_id)
    by_id: dict[str, list[TemplateVersion]] = {}
    for v in every:
        by_id.setdefault(v.template_id, []).append(v)
    return [VersionLine(v, rules.status_at(v, by_id[v.template_id], at)) for v in every]


def in_force(session: Session, kind: Kind, doc_id: str, at: datetime) -> TemplateVersion:
    """The version of the document in force at ``at``; RefusedError naming the versions and
    their status when none is."""
    found = versions_of(session, kind, doc_id)
    current = rules.in_force(found, at)
    if current is None:
        raise RefusedError(
            f"{kind.word} {doc_id} has no approved version in force at {at.isoformat()}"
            + states_text(kind, found, at),
            field=kind.name,
            value=doc_id,
        )
    return current


def states_text(kind: Kind, found: list[TemplateVersion], at: datetime) -> str:
    """The versions there are and their status at ``at``, for a refusal; how to submit one
    when there is none."""
    if not found:
        return (
            f"; an engineer submits it with `{kind.submit_command}` and QA approves "
            f"it with `{kind.approve_command}`"
        )
    shown = ", ".join(f"v{v.version} {status_text(v, found, at)}" for v in found)
    return f" ({shown})"


def status_text(v: TemplateVersion, found: list[TemplateVersion], at: datetime) -> str:
    """A version's status at ``at`` in words, with the time an approval takes effect."""
    status = rules.status_at(v, found, at)
    if status == "approved" and v.effective_from is not None:
        return f"approved, effective from {v.effective_from.isoformat()}"
    return status
