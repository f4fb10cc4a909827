"""Versions of master-record templates: which version is in force at a time, the status a
version shows at a time, who may approve one and from when an approval may take effect.

Pure: plain values in (anything with the attributes of :class:`VersionFacts`), answers out.
A version takes effect from its ``effective_from`` once approved and stays in force until a
later approved version takes effect or it is retired; "effective" is read off the clock,
never stored.
"""

from __future__ import annotations

from collections.abc import Iterable
from datetime import datetime, timedelta
from typing import Protocol, TypeVar

APPROVER_ROLE = "qa"
AUTHOR_ROLE = "engineer"

# An approval may take effect from a time this far before it is entered without a reason:
# the minutes between reading the clock, typing the command and re-entering the password
# (common practice for a hand-typed "from now"). Earlier needs a late-entry reason.
PAST_TOLERANCE = timedelta(minutes=5)


class VersionFacts(Protocol):
    """What the rules read of a version (the store's TemplateVersion has these columns)."""

    @property
    def version(self) -> str: ...
    @property
    def state(self) -> str: ...  # draft, approved, retired
    @property
    def effective_from(self) -> datetime | None: ...
    @property
    def retired_at(self) -> datetime | None: ...


V = TypeVar("V", bound=VersionFacts)


def counts_at(v: VersionFacts, at: datetime) -> bool:
    """True when ``v`` was approved to take effect at or before ``at`` and not retired by then."""
    if v.effective_from is None or v.state not in ("approved", "retired"):
        return False  # a draft, or a version retired before it was ever approved
    if v.retired_at is not None and v.retired_at <= at:
        return False
    return v.effective_from <= at


def in_force(versions: Iterable[V], at: datetime) -> V | None:
    """The version in force at ``at``: of the approved versions effective at or before ``at``
    and not retired by then, the one with the latest ``effective_from``; None when none is."""
    best: V | None = None
    for v in versions:
        if counts_at(v, at) and (best is None or v.effective_from > best.effective_from):  # type: ignore[operator]
            best = v
    return best


def status_at(v: VersionFacts, versions: Iterable[VersionFacts], at: datetime) -> str:
    """What ``v`` is at ``at``: draft, approved (waiting for its effective time), effective
    (in force), superseded (a later version took effect) or retired."""
    if v.state == "draft":
        return "draft"
    if v.retired_at is not None and v.retired_at <= at:
        return "retired"
    if v.effective_from is None or v.effective_from > at:
        return "approved"
    current = in_force(versions, at)
    return "effective" if current is not None and current.version == v.version else "superseded"


def approval_refusal(approver: str, role: str, author: str) -> str | None:
    """Why ``approver`` (of ``role``) may not approve a version written by ``author``; None
    when they may: QA only, and never the author (two different people)."""
    if role != APPROVER_ROLE:
        return f"{approver} ({role}) may not approve template versions; that needs the role qa"
    if approver.casefold() == author.casefold():
        return f"{approver} wrote this version and may not approve it; another person of QA does"
    return None


def effective_refusal(
    effective_from: datetime, now: datetime, late_reason: str | None
) -> str | None:
    """Why an approval may not take effect from ``effective_from`` at ``now``; None when it
    may. Up to :data:`PAST_TOLERANCE` before now is accepted as "now"; earlier is a late entry
    and needs a reason."""
    if effective_from < now - PAST_TOLERANCE and not late_reason:
        return (
            f"--effective-from {effective_from.isoformat()} is more than "
            f"{int(PAST_TOLERANCE.total_seconds() // 60)} min before now ({now.isoformat()}); "
            "an approval entered late needs --late-reason"
        )
    return None


def overlap_refusal(
    effective_from: datetime, planned: Iterable[datetime], taken: Iterable[datetime]
) -> str | None:
    """Why a version may not take effect from ``effective_from``, given the plan times of the
    runs already recorded on the template (``planned``) and the effective times of its other
    approved versions (``taken``); None when it may. A run already recorded keeps the version
    that was in force when it was planned, so history never changes after the fact; two
    versions taking effect at the same instant would leave the one in force undecided."""
    later = sorted(t for t in planned if t >= effective_from)
    if later:
        return (
            f"a run of this template was already planned at {later[-1].isoformat()}, after "
            f"{effective_from.isoformat()}: the version in force for it cannot change"
        )
    if any(t == effective_from for t in taken):
        when = effective_from.isoformat()
        return f"another version of this template already takes effect at {when}"
    return None
