"""Template-version entries: a file to submit (``template submit``), an approval with the
time it takes effect from (``template approve``) and a retirement (``template retire``).
IDs, versions and reasons stay texts (the service applies the identifier and text rules)."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from datetime import datetime

from ledger.entries.fields import Field, Spec

SUBMIT = Spec("template submit", (Field("file", required=True),))


@dataclass(frozen=True)
class SubmitEntry:
    raw: bytes  # the file's bytes exactly as read: their SHA-256 is the version's hash
    source: str  # the path as given, named in every error


def submit(raw: Mapping[str, object]) -> SubmitEntry:
    """Read the template file to submit (at most ``tomlfile.MAX_BYTES``)."""
    from ledger import tomlfile
    from ledger.userfiles import read_user_file

    v = SUBMIT.parse(raw)
    path = str(v["file"])
    return SubmitEntry(read_user_file(path, "file", tomlfile.MAX_BYTES), path)


APPROVE = Spec(
    "template approve",
    (
        Field("template", required=True),
        Field("version", required=True),
        Field("effective_from", required=True),
        Field("late_reason"),
    ),
)


EFFECTIVE = Spec("template approve", (Field("effective_from", "datetime"),))


@dataclass(frozen=True)
class ApproveEntry:
    template: str
    version: str
    effective_from: datetime | None  # aware UTC; None: "now", the time of the approval
    late_reason: str | None


def approve(raw: Mapping[str, object]) -> ApproveEntry:
    """Check an approval: which version, and the time (with its offset, or ``now``) it takes
    effect from."""
    v = APPROVE.parse(raw)
    text = str(v["effective_from"]).strip()
    when = (
        None
        if text.lower() == "now"
        else EFFECTIVE.parse({"effective_from": text})["effective_from"]
    )
    return ApproveEntry(
        str(v["template"]).strip(), str(v["version"]).strip(), when, v["late_reason"],
    )  # fmt: skip


RETIRE = Spec(
    "template retire",
    (Field("template", required=True), Field("version", required=True),
     Field("reason", required=True)),
)  # fmt: skip


@dataclass(frozen=True)
class RetireEntry:
    template: str
    version: str
    reason: str


def retire(raw: Mapping[str, object]) -> RetireEntry:
    """Check a retirement: which version, and why."""
    v = RETIRE.parse(raw)
    return RetireEntry(str(v["template"]).strip(), str(v["version"]).strip(), v["reason"])
