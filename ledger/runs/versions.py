"""Versions of master-record templates: the template kind of ``ledger.logbook.documents``
(submit, approve, retire, history, in force), and the question runs ask: which version a plan
may use.
"""

from __future__ import annotations

from datetime import datetime
from pathlib import Path

from sqlmodel import Session, select

from ledger.errors import RefusedError
from ledger.logbook import documents
from ledger.logbook.auth import require_role
from ledger.logbook.required import required
from ledger.rules import versions as rules
from ledger.runs import template as templates
from ledger.store.tables import Run, TemplateVersion, UserAccount

TEMPLATES = documents.Kind(
    name="template",
    word="template",
    submit_command="fluxledger template submit FILE",
    approve_command="fluxledger template approve",
    history_command="fluxledger template history ID",
    list_command="fluxledger template list",
)
VersionLine = documents.VersionLine


def versions_of(session: Session, template_id: str) -> list[TemplateVersion]:
    """Every version of the template, oldest first."""
    return documents.versions_of(session, TEMPLATES, template_id)


def submit(
    session: Session, actor: UserAccount, raw: bytes, source: str
) -> tuple[TemplateVersion, bool]:
    """Submit a template file's bytes as a draft version (an engineer). The file must load as
    a template; its ID and version are read from it. The same ID and version with other
    bytes is refused; the same bytes again write nothing. Returns (the version, created now)."""
    require_role(actor, documents.AUTHORS, "submit template versions")
    tmpl = templates.parse(raw, source)  # TemplateError naming the file, line and key
    doc = documents.Document(tmpl.id, tmpl.version, tmpl.sha256, tmpl.text, tmpl.title)
    return documents.submit(session, actor, TEMPLATES, doc, source)


def approve(
    session: Session,
    actor: UserAccount,
    template_id: str,
    version: str,
    effective_from: datetime | None,
    late_reason: str | None = None,
) -> TemplateVersion:
    """Approve a draft version (QA, never its author) to take effect from ``effective_from``
    (aware UTC; None: now). A time more than ``rules.PAST_TOLERANCE`` before now needs
    ``late_reason``, and no time may reach back past a run already planned on the template."""
    planned = [
        r.planned_at or r.created_at
        for r in session.exec(select(Run).where(Run.template_id == template_id))
    ]
    return documents.approve(session, actor, TEMPLATES, template_id, version, effective_from,
                             late_reason, used_at=planned)  # fmt: skip


def retire(
    session: Session, actor: UserAccount, template_id: str, version: str, reason: str
) -> TemplateVersion:
    """Retire a version (QA, with a reason): from now on no run is planned on it."""
    return documents.retire(session, actor, TEMPLATES, template_id, version, reason)


def history(session: Session, template_id: str, at: datetime | None = None) -> list[VersionLine]:
    """Every version of the template, oldest first, with its status at ``at`` (now)."""
    return documents.history(session, TEMPLATES, template_id, at)


def catalogue(session: Session, at: datetime | None = None) -> list[VersionLine]:
    """Every version of every template, by template ID then submission, with its status."""
    return documents.catalogue(session, TEMPLATES, at)


def in_force(session: Session, template_id: str, at: datetime) -> TemplateVersion:
    """The version of the template in force at ``at``; RefusedError naming the versions and
    their status when none is."""
    return documents.in_force(session, TEMPLATES, template_id, at)


def _get(session: Session, template_id: str, version: str) -> TemplateVersion:
    return documents.get(session, TEMPLATES, template_id, version)


def _states(found: list[TemplateVersion], at: datetime) -> str:
    return documents.states_text(TEMPLATES, found, at)


def _status_text(v: TemplateVersion, found: list[TemplateVersion], at: datetime) -> str:
    return documents.status_text(v, found, at)


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
