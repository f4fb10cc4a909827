"""Versions of master-record templates: an engineer submits a file as a draft, QA (not its
author) approves it to take effect from a stated time, QA retires it; and the questions runs
ask: which version is in force at a time, and which one a plan may use.

Each write runs inside the caller's one transaction and goes through the audit Journal; the
rules (in force, who approves, from when) are ``ledger.rules.versions``.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime
from pathlib import Path

from sqlmodel import Session, select

from ledger.errors import InputError, RefusedError
from ledger.logbook.auth import require_role
from ledger.logbook.required import optional, required
from ledger.rules import versions as rules
from ledger.runs import template as templates
from ledger.store.audit import Journal
from ledger.store.tables import AuditHead, Run, TemplateVersion, UserAccount
from ledger.store.types import utc_now

AUTHORS = frozenset({rules.AUTHOR_ROLE})
APPROVERS = frozenset({rules.APPROVER_ROLE})


@dataclass(frozen=True)
class VersionLine:
    """One version of a template as history shows it, with its status at ``at``."""

    record: TemplateVersion
    status: str  # draft, approved, effective, superseded, retired


def _lock(session: Session) -> None:
    """The logbook's write lock, so two writers of one template see each other's rows."""
    session.exec(select(AuditHead).where(AuditHead.id == 1).with_for_update()).first()


def versions_of(session: Session, template_id: str) -> list[TemplateVersion]:
    """Every version of the template, oldest first."""
    statement = (
        select(TemplateVersion)
        .where(TemplateVersion.template_id == template_id)
        .order_by(TemplateVersion.id)  # type: ignore[arg-type]
    )
    return list(session.exec(statement))


def _get(session: Session, template_id: str, version: str) -> TemplateVersion:
    found = next((v for v in versions_of(session, template_id) if v.version == version), None)
    if found is None:
        known = ", ".join(v.version for v in versions_of(session, template_id)) or "none"
        raise InputError(
            f"template {template_id} has no version {version!r} (submitted: {known})",
            field="version",
            value=version,
            expected="a submitted version (see `fluxledger template history ID`)",
        )
    return found


def submit(
    session: Session, actor: UserAccount, raw: bytes, source: str
) -> tuple[TemplateVersion, bool]:
    """Submit a template file's bytes as a draft version (an engineer). The file must load as
    a template; its ID and version are read from it. The same ID and version with other
    bytes is refused; the same bytes again write nothing. Returns (the version, created now)."""
    require_role(actor, AUTHORS, "submit template versions")
    tmpl = templates.parse(raw, source)  # TemplateError naming the file, line and key
    _lock(session)
    for v in versions_of(session, tmpl.id):
        if v.version != tmpl.version:
            continue
        if v.sha256 == tmpl.sha256:
            return v, False
        raise RefusedError(
            f"template {tmpl.id} version {tmpl.version} is already submitted with other "
            f"content (SHA-256 {v.sha256[:12]}…, {v.state}); change `version` in the file",
            field="template",
            value=source,
        )
    record = TemplateVersion(
        template_id=tmpl.id,
        version=tmpl.version,
        sha256=tmpl.sha256,
        text=tmpl.text,
        title=tmpl.title,
        source=Path(source).name,
        state="draft",
        authored_by=actor.login,
    )
    return Journal(session, actor.login).create(record, reason="template version submitted"), True


def approve(
    session: Session,
    actor: UserAccount,
    template_id: str,
    version: str,
    effective_from: datetime | None,
    late_reason: str | None = None,
) -> TemplateVersion:
    """Approve a draft version (QA, never its author) to take effect from ``effective_from``
    (aware UTC; None: now, the approval's own time). A time more than
    ``rules.PAST_TOLERANCE`` before now needs ``late_reason``, and no time may reach back past
    a run already planned on the template."""
    journal = Journal(session, actor.login)
    effective_from = effective_from or journal.at
    if effective_from.tzinfo is None:
        raise ValueError("effective_from must be timezone-aware")  # a bug, not user input
    late_reason = optional("late_reason", late_reason, "why the approval is entered late")
    _lock(session)
    record = _get(session, template_id, version)
    refusal = rules.approval_refusal(actor.login, actor.role, record.authored_by)
    if refusal:
        raise RefusedError(refusal, field="user", value=actor.login)
    if record.state != "draft":
        raise RefusedError(
            f"template {template_id} version {version} is {record.state}, not a draft: "
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
    planned = [
        r.planned_at or r.created_at
        for r in session.exec(select(Run).where(Run.template_id == template_id))
    ]
    taken = [
        v.effective_from
        for v in versions_of(session, template_id)
        if v.effective_from is not None and v.state == "approved"
    ]
    refusal = rules.overlap_refusal(effective_from, planned, taken)
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
    session: Session, actor: UserAccount, template_id: str, version: str, reason: str
) -> TemplateVersion:
    """Retire a version (QA, with a reason): from now on no run is planned on it."""
    require_role(actor, APPROVERS, "retire template versions")
    reason = required("reason", reason, "why the version is retired", kind="text")
    _lock(session)
    record = _get(session, template_id, version)
    if record.state == "retired":
        raise RefusedError(
            f"template {template_id} version {version} is retired already",
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


def history(session: Session, template_id: str, at: datetime | None = None) -> list[VersionLine]:
    """Every version of the template, oldest first, with its status at ``at`` (now)."""
    at = at or utc_now()
    found = versions_of(session, template_id)
    if not found:
        raise InputError(
            f"template {template_id} has no submitted version",
            field="template",
            value=template_id,
            expected="a template ID of `fluxledger template list`",
        )
    return [VersionLine(v, rules.status_at(v, found, at)) for v in found]


def catalogue(session: Session, at: datetime | None = None) -> list[VersionLine]:
    """Every version of every template, by template ID then submission, with its status."""
    at = at or utc_now()
    every = list(session.exec(select(TemplateVersion).order_by(TemplateVersion.id)))  # type: ignore[arg-type]
    every.sort(key=lambda v: v.template_id)
    by_id: dict[str, list[TemplateVersion]] = {}
    for v in every:
        by_id.setdefault(v.template_id, []).append(v)
    return [VersionLine(v, rules.status_at(v, by_id[v.template_id], at)) for v in every]


def in_force(session: Session, template_id: str, at: datetime) -> TemplateVersion:
    """The version of the template in force at ``at``; RefusedError naming the versions and
    their status when none is."""
    found = versions_of(session, template_id)
    current = rules.in_force(found, at)
    if current is None:
        raise RefusedError(
            f"template {template_id} has no approved version in force at {at.isoformat()}"
            + _states(found, at),
            field="template",
            value=template_id,
        )
    return current


def _states(found: list[TemplateVersion], at: datetime) -> str:
    if not found:
        return (
            "; an engineer submits it with `fluxledger template submit FILE` and QA approves "
            "it with `fluxledger template approve`"
        )
    shown = ", ".join(f"v{v.version} {_status_text(v, found, at)}" for v in found)
    return f" ({shown})"


def _status_text(v: TemplateVersion, found: list[TemplateVersion], at: datetime) -> str:
    status = rules.status_at(v, found, at)
    if status == "approved" and v.effective_from is not None:
        return f"approved, effective from {v.effective_from.isoformat()}"
    return status


def for_plan(
    session: Session, ref: str, version: str | None, at: datetime
) -> tuple[TemplateVersion, templates.Template]:
    """The template version a run planned at ``at`` uses, and its parsed template.

    ``ref`` is a template ID or a .toml file; a file must be a submitted version (the same
    SHA-256). The version used is the one in force at ``at``; ``version`` (or the file) may
    only name that one: a draft, a retired version, one not yet effective or one superseded
    is refused, naming its status and the version in force."""
    path = Path(ref)
    if path.suffix == ".toml" and path.exists():
        tmpl = templates.load(path)
        match = next((v for v in versions_of(session, tmpl.id) if v.sha256 == tmpl.sha256), None)
        if match is None:
            raise RefusedError(
                f"{ref} (template {tmpl.id} version {tmpl.version}, SHA-256 "
                f"{tmpl.sha256[:12]}…) is not a submitted template version; an engineer "
                "submits it with `fluxledger template submit` and QA approves it",
                field="template",
                value=ref,
            )
        template_id, version = tmpl.id, match.version
    else:
        template_id = required("template", ref, "a template ID or a .toml file", kind="identifier")
    found = versions_of(session, template_id)
    if not found:
        raise RefusedError(
            f"template {template_id} is not a file and has no submitted version"
            + _states(found, at),
            field="template",
            value=ref,
        )
    current = rules.in_force(found, at)
    if version is not None:
        chosen = _get(session, template_id, version)
        if current is None or chosen.id != current.id:
            now_in_force = (
                f"v{current.version} is in force at {at.isoformat()}"
                if current is not None
                else f"no version is in force at {at.isoformat()}"
            )
            raise RefusedError(
                f"template {template_id} version {version} is "
                f"{_status_text(chosen, found, at)}, not in force for a run planned at "
                f"{at.isoformat()}; {now_in_force}",
                field="template_version",
                value=version,
            )
    if current is None:
        raise RefusedError(
            f"template {template_id} has no approved version in force at {at.isoformat()}"
            + _states(found, at),
            field="template",
            value=ref,
        )
    tmpl = templates.parse(
        current.text.encode("utf-8"), f"{current.template_id} v{current.version}"
    )
    if tmpl.sha256 != current.sha256:
        raise RuntimeError(f"template version {current.id} does not match its SHA-256")
    return current, tmpl
