"""Use entries (``use start``, ``use end``) and voiding a wrong record (``void``)."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from datetime import datetime

from ledger.entries.fields import Field, Spec, when

USE_START = Spec(
    "use start",
    (
        Field("serial", required=True),
        Field("product", required=True),
        Field("lot", required=True),
        Field("override_reason"),
        Field("activity_time", "datetime"),
        Field("note"),
    ),
)
USE_END = Spec("use end", (Field("serial", required=True), Field("activity_time", "datetime")))
VOID = Spec(
    "void",
    (
        Field("kind", required=True),
        Field("record_id", "integer", required=True),
        Field("reason", required=True),
    ),
)


@dataclass(frozen=True)
class UseEntry:
    serial: str
    product: str
    lot: str
    override_reason: str | None
    activity_at: datetime | None
    note: str | None


def use_start(raw: Mapping[str, object]) -> UseEntry:
    """Check the start of a use."""
    v = USE_START.parse(raw)
    return UseEntry(v["serial"], v["product"], v["lot"], v["override_reason"], when(v), v["note"])


def use_end(raw: Mapping[str, object]) -> UseEntry:
    """Check the end of a use."""
    v = USE_END.parse(raw)
    return UseEntry(v["serial"], "", "", None, when(v), None)


@dataclass(frozen=True)
class VoidEntry:
    kind: str
    record_id: int
    reason: str


def void(raw: Mapping[str, object]) -> VoidEntry:
    """Check a void: which kind of record, its ID, and why."""
    v = VOID.parse(raw)
    return VoidEntry(v["kind"], v["record_id"], v["reason"])


AUDIT_FILTER = Spec(
    "audit show",
    (
        Field("entity"),
        Field("module"),
        Field("user"),
        Field("since", "datetime"),
        Field("until", "datetime"),
        Field("last", "integer"),
    ),
)


def audit_filter(raw: Mapping[str, object]) -> dict[str, object]:
    """The filters of ``audit show`` as the history service takes them."""
    v = AUDIT_FILTER.parse(raw)
    return {
        "entity": v["entity"],
        "serial": v["module"],
        "user": v["user"],
        "since": v["since"],
        "until": v["until"],
        "limit": v["last"],
    }
