"""A module type's acceptance limits under change control.

A module type is registered with its geometry and its first limits (``module-type add``).
A later change of limits is a controlled document (``ledger.logbook.documents``, kind
``type_limits``, its ID the type's code): an engineer submits a file naming the limits that
change, QA approves it (not its author) from a stated time, and from then it is in force; a
retired version no longer is. Records judged against limits (water-flux and integrity tests)
name the version they were judged under (``limits_version_id``; None: as registered).

A limits file::

    [limits]
    type = "QM-HF750-S"
    version = "2"
    reason = "Recovery minimum raised after the 2026 revalidation"
    recovery_min = "85 %"
    decay_limit = "0.04 psi/min"

The keys are the options of ``module-type add`` with ``_`` for ``-``. What is stored is not
that file but the whole set of limits it leads to — the version in force when it is
submitted, with the file's changes — as canonical JSON, so each version stands on its own and
its SHA-256 binds every limit. Geometry is not a limit and does not change.
"""

from __future__ import annotations

import hashlib
import json
from dataclasses import dataclass, fields, replace
from datetime import datetime
from typing import Any

from sqlmodel import Session, col, select

from ledger.canonical import canonical
from ledger.errors import InputError
from ledger.logbook import documents
from ledger.store.tables import (
    IntegrityTest,
    Module,
    ModuleType,
    TemplateVersion,
    UserAccount,
    WaterFluxTest,
)

LIMITS = documents.Kind(
    name="type_limits",
    word="module-type limits",
    submit_command="fluxledger module-type limits submit FILE",
    approve_command="fluxledger module-type limits approve",
    history_command="fluxledger module-type limits history TYPE",
    list_command="fluxledger module-type limits list",
)
# File key -> (column of module_type, unit kind of ledger.units, or "integer").
LIMIT_FIELDS: dict[str, tuple[str, str]] = {
    "recovery_min": ("recovery_min", "fraction"),
    "recovery_alert": ("recovery_alert", "fraction"),
    "damage_ratio": ("damage_ratio", "fraction"),
    "preuse_band": ("preuse_band", "fraction"),
    "decay_limit": ("decay_limit_pa_s", "pressure_rate"),
    "test_pressure": ("integrity_test_pressure_pa", "pressure"),
    "bubble_point_min": ("bubble_point_min_pa", "pressure"),
    "reuse_limit": ("reuse_limit_cycles", "integer"),
    "storage_limit": ("storage_limit_s", "time"),
    "max_loading": ("max_volume_loading_m", "areal_volume"),
    "max_mass_loading": ("max_mass_loading_kg_m2", "areal_mass"),
    "clean_hold": ("clean_hold_s", "time"),
    "diffusion_max_flow": ("diffusion_max_flow_m3_s", "gas_flow"),
    "diffusion_test_pressure": ("diffusion_test_pressure_pa", "pressure"),
    "intrusion_max_flow": ("intrusion_max_flow_m3_s", "flow"),
    "intrusion_test_pressure": ("intrusion_test_pressure_pa", "pressure"),
}
COLUMNS = tuple(c for c, _ in LIMIT_FIELDS.values())
EXPECTED = "a TOML limits file: [limits] type, version, reason and the limits that change"
AS_REGISTERED = "as registered"


@dataclass(frozen=True)
class Limits:
    """One version of a type's limits: the stored document and what it holds."""

    type_code: str
    version: str
    based_on: str
    reason: str
    changed: tuple[str, ...]
    values: dict[str, Any]  # column -> SI value (None: no such limit)
    entered: dict[str, str]  # file key -> text as typed


def _bad(source: str, key: str, message: str, expected: str) -> InputError:
    return InputError(f"{source}: {key}: {message}", field="limits", value=source,
                      expected=expected, source=source)  # fmt: skip


def _value(key: str, raw: object, source: str) -> Any:
    from ledger import units

    _, kind = LIMIT_FIELDS[key]
    if raw == "":
        return None  # an empty text removes an optional limit
    if kind == "integer":
        if not isinstance(raw, int) or isinstance(raw, bool) or not 1 <= raw <= 100_000:
            raise _bad(source, f"limits.{key}", f"{raw!r} is not a whole number",
                       "a whole number from 1 to 100000")  # fmt: skip
        return raw
    if not isinstance(raw, str):
        raise _bad(source, f"limits.{key}", f"{raw!r} is not a quantity",
                   'a quantity with its unit in quotes, e.g. "85 %"')  # fmt: skip
    try:
        return units.parse(raw, kind, field=f"limits.{key}", bare_ratio=False)
    except InputError as err:
        raise _bad(source, f"limits.{key}", err.message, err.expected or kind) from None


def _text(head: dict[str, Any], key: str, source: str, limit: int) -> str:
    value = head.get(key)
    if not isinstance(value, str) or not value.strip() or len(value) > limit:
        raise _bad(source, f"limits.{key}", f"{value!r} is not a text",
                   f"a text of 1 to {limit} characters")  # fmt: skip
    return " ".join(value.split())


def current(
    session: Session, mtype: ModuleType, at: datetime, known_at: datetime | None = None
) -> TemplateVersion | None:
    """The limits version of ``mtype`` in force at ``at``; None: the limits as registered.
    With ``known_at``, only versions approved by then count (what a record issued then saw)."""
    from ledger.rules import versions as rules

    found = documents.versions_of(session, LIMITS, mtype.code)
    if known_at is not None:
        found = [v for v in found if v.approved_at is not None and v.approved_at <= known_at]
    return rules.in_force(found, at)


def stored(row: TemplateVersion) -> Limits:
    """The limits a stored version holds (checked against its SHA-256)."""
    if hashlib.sha256(row.text.encode("utf-8")).hexdigest() != row.sha256:
        raise RuntimeError(f"limits version {row.id} does not match its SHA-256")
    d = json.loads(row.text)
    return Limits(d["type"], d["version"], d["based_on"], d["reason"], tuple(d["changed"]),
                  d["values"], d["entered"])  # fmt: skip


def in_force(
    session: Session, mtype: ModuleType, at: datetime, known_at: datetime | None = None
) -> tuple[ModuleType, TemplateVersion | None]:
    """``mtype`` with the limits in force at ``at`` (a copy, not in the session, when a later
    version applies) and that version (None: as registered); ``known_at`` as for
    :func:`current`."""
    row = current(session, mtype, at, known_at)
    if row is None:
        return mtype, None
    limits = stored(row)
    copy = ModuleType(**{c.name: getattr(mtype, c.name) for c in ModuleType.__table__.columns})  # type: ignore[attr-defined]
    for column, value in limits.values.items():
        setattr(copy, column, value)
    entered = {k: v for k, v in (mtype.entered or {}).items() if k not in LIMIT_FIELDS}
    copy.entered = {**entered, **limits.entered}
    return copy, row


def type_in_force(
    session: Session, code: str, at: datetime | None = None
) -> tuple[ModuleType, TemplateVersion | None]:
    """The module type ``code`` with its limits in force at ``at`` (now) and their version."""
    from ledger.logbook.modules import get_type
    from ledger.store.types import utc_now

    return in_force(session, get_type(session, code), at or utc_now())


def parse(session: Session, raw: bytes, source: str, at: datetime) -> documents.Document:
    """The document a limits file leads to: the limits in force at ``at`` with the file's
    changes, checked as a whole like a new type's limits."""
    from ledger.logbook.modules import TypeSpec, check_type, get_type
    from ledger.tomlfile import parse_toml_bytes

    data = parse_toml_bytes(raw, source, "limits", EXPECTED)
    head = data.get("limits")
    if not isinstance(head, dict) or set(data) != {"limits"}:
        raise _bad(source, "limits", "the file holds one [limits] table and nothing else",
                   EXPECTED)  # fmt: skip
    unknown = sorted(set(head) - {"type", "version", "reason"} - set(LIMIT_FIELDS))
    if unknown:
        raise _bad(source, f"limits.{unknown[0]}", "is not a limit of a module type",
                   ", ".join(LIMIT_FIELDS))  # fmt: skip
    code = _text(head, "type", source, 64)
    mtype = get_type(session, code)
    version = _text(head, "version", source, 32)
    reason = _text(head, "reason", source, 500)
    changes = {LIMIT_FIELDS[k][0]: _value(k, v, source) for k, v in head.items()
               if k in LIMIT_FIELDS}  # fmt: skip
    if not changes:
        raise _bad(source, "limits", "names no limit to change", ", ".join(LIMIT_FIELDS))
    base, base_row = in_force(session, mtype, at)
    same = [c for c, v in changes.items() if getattr(base, c) == v]
    if len(same) == len(changes):
        raise _bad(source, "limits", "changes nothing: every value is the one in force",
                   "at least one limit that differs from the version in force")  # fmt: skip
    spec_fields = {f.name for f in fields(TypeSpec)}
    spec = TypeSpec(**{c.name: getattr(base, c.name) for c in ModuleType.__table__.columns  # type: ignore[attr-defined]
                       if c.name in spec_fields})  # fmt: skip
    checked = check_type(replace(spec, **changes))
    typed = {k: str(v) for k, v in head.items() if k in LIMIT_FIELDS and v != ""}
    if base_row is not None:
        before = stored(base_row).entered
    else:
        before = {k: t for k, t in (mtype.entered or {}).items() if k in LIMIT_FIELDS}
    entered = {k: t for k, t in before.items() if LIMIT_FIELDS[k][0] not in changes}
    body = {
        "type": mtype.code,
        "version": version,
        "based_on": base_row.version if base_row else AS_REGISTERED,
        "reason": reason,
        "changed": sorted(c for c in changes if c not in same),
        "values": {c: getattr(checked, c) for c in COLUMNS},
        "entered": {**entered, **typed},
    }
    text = canonical(body)
    sha = hashlib.sha256(text.encode("utf-8")).hexdigest()
    return documents.Document(mtype.code, version, sha, text, reason)


def submit(
    session: Session, actor: UserAccount, raw: bytes, source: str
) -> tuple[TemplateVersion, bool]:
    """Submit a limits file as a draft version (an engineer); see documents.submit."""
    from ledger.logbook.auth import require_role
    from ledger.store.types import utc_now

    require_role(actor, documents.AUTHORS, "submit module-type limits")
    doc = parse(session, raw, source, utc_now())
    return documents.submit(session, actor, LIMITS, doc, source)


def _judged_at(session: Session, code: str) -> list[datetime]:
    """When each test judged against this type's limits was done."""
    out: list[datetime] = []
    for table in (WaterFluxTest, IntegrityTest):
        out += session.exec(
            select(table.activity_at)
            .join(Module, col(Module.id) == col(table.module_id))
            .join(ModuleType, col(ModuleType.id) == col(Module.type_id))
            .where(ModuleType.code == code)
        ).all()
    return out


def approve(
    session: Session,
    actor: UserAccount,
    type_code: str,
    version: str,
    effective_from: datetime | None,
    late_reason: str | None = None,
) -> TemplateVersion:
    """Approve a draft (QA, not its author) from ``effective_from``; no time may reach back
    past a test already judged against the type's limits."""
    return documents.approve(session, actor, LIMITS, type_code, version, effective_from,
                             late_reason, used_at=_judged_at(session, type_code))  # fmt: skip


def retire(
    session: Session, actor: UserAccount, type_code: str, version: str, reason: str
) -> TemplateVersion:
    """Retire a version (QA, with a reason): from now the version before it is in force."""
    return documents.retire(session, actor, LIMITS, type_code, version, reason)


def history(
    session: Session, type_code: str, at: datetime | None = None
) -> list[documents.VersionLine]:
    """Every limits version of the type with its status at ``at`` (now)."""
    return documents.history(session, LIMITS, type_code, at)


def catalogue(session: Session, at: datetime | None = None) -> list[documents.VersionLine]:
    """Every limits version of every type with its status."""
    return documents.catalogue(session, LIMITS, at)


def version_word(row: TemplateVersion | None) -> str:
    """How a record names the limits it was judged under."""
    return AS_REGISTERED if row is None else f"version {row.version}"
