"""The template-version rules (ledger.rules.versions): which version is in force at a time,
the status each shows, who may approve and from when. The rules are the project's own
(issue 15 item 3), not a computation from a published source."""

from __future__ import annotations

from dataclasses import dataclass
from datetime import UTC, datetime, timedelta

from hypothesis import given
from hypothesis import strategies as st

from ledger.rules import versions as rules

T0 = datetime(2026, 6, 1, 8, 0, tzinfo=UTC)
H = timedelta(hours=1)


@dataclass(frozen=True)
class V:
    version: str
    state: str
    effective_from: datetime | None = None
    retired_at: datetime | None = None


OLD = V("1", "approved", T0)
NEW = V("2", "approved", T0 + 10 * H)
DRAFT = V("3", "draft")


def test_the_version_in_force_is_the_latest_effective_one() -> None:
    versions = [OLD, NEW, DRAFT]
    assert rules.in_force(versions, T0 - H) is None
    assert rules.in_force(versions, T0) is OLD  # from its effective time on, inclusive
    assert rules.in_force(versions, T0 + 10 * H - timedelta(seconds=1)) is OLD
    assert rules.in_force(versions, T0 + 10 * H) is NEW


def test_a_draft_is_never_in_force() -> None:
    assert rules.in_force([DRAFT], T0 + 100 * H) is None
    assert rules.status_at(DRAFT, [OLD, DRAFT], T0 + 100 * H) == "draft"


def test_a_retired_version_counts_until_its_retirement() -> None:
    retired = V("2", "retired", T0 + 10 * H, retired_at=T0 + 20 * H)
    versions = [OLD, retired]
    assert rules.in_force(versions, T0 + 15 * H) is retired
    assert rules.in_force(versions, T0 + 20 * H) is OLD  # the older one is in force again
    assert rules.status_at(retired, versions, T0 + 20 * H) == "retired"
    assert rules.status_at(retired, versions, T0 + 15 * H) == "effective"


def test_statuses_along_the_clock() -> None:
    versions = [OLD, NEW]
    assert rules.status_at(NEW, versions, T0 + H) == "approved"  # waiting for its time
    assert rules.status_at(OLD, versions, T0 + H) == "effective"
    assert rules.status_at(NEW, versions, T0 + 10 * H) == "effective"
    assert rules.status_at(OLD, versions, T0 + 10 * H) == "superseded"


def test_only_qa_other_than_the_author_approves() -> None:
    assert rules.approval_refusal("qa.lin", "qa", "eng.ray") is None
    assert "needs the role qa" in (rules.approval_refusal("eng.max", "engineer", "eng.ray") or "")
    assert "needs the role qa" in (rules.approval_refusal("op.kim", "operator", "eng.ray") or "")
    assert "wrote this version" in (rules.approval_refusal("QA.Lin", "qa", "qa.lin") or "")


def test_an_effective_time_in_the_past_needs_a_late_reason() -> None:
    now = T0
    assert rules.effective_refusal(now + H, now, None) is None
    assert rules.effective_refusal(now - rules.PAST_TOLERANCE, now, None) is None
    late = now - rules.PAST_TOLERANCE - timedelta(seconds=1)
    assert "--late-reason" in (rules.effective_refusal(late, now, None) or "")
    assert rules.effective_refusal(late, now, "paper approval of 1 June") is None


def test_an_approval_never_reaches_back_past_a_recorded_run() -> None:
    assert rules.overlap_refusal(T0, [T0 - H], []) is None
    assert "already planned" in (rules.overlap_refusal(T0, [T0 - H, T0 + H], []) or "")
    assert "already planned" in (rules.overlap_refusal(T0, [T0], []) or "")
    assert "already takes effect" in (rules.overlap_refusal(T0, [], [T0]) or "")


_offsets = st.integers(min_value=0, max_value=1000)
_version = st.builds(
    lambda i, state, eff, retire: (i, state, eff, retire),
    st.integers(),
    st.sampled_from(["draft", "approved", "retired"]),
    _offsets,
    st.one_of(st.none(), _offsets),
)


@given(st.lists(_version, max_size=8, unique_by=lambda x: x[2]), _offsets)
def test_in_force_is_the_approved_version_with_the_latest_effective_time(
    raw: list[tuple[int, str, int, int | None]], at_h: int
) -> None:
    """The law: in_force(t) is, of the approved versions effective at or before t and not
    retired by t, the one with the greatest effective_from (effective times distinct, as the
    service keeps them)."""
    versions = [
        V(str(n), state, None if state == "draft" else T0 + eff * H,
          None if state != "retired" else T0 + (retire if retire is not None else eff) * H)
        for n, (_, state, eff, retire) in enumerate(raw)
    ]  # fmt: skip
    at = T0 + at_h * H
    eligible = [
        v for v in versions
        if v.effective_from is not None and v.effective_from <= at
        and (v.retired_at is None or v.retired_at > at)
    ]  # fmt: skip
    found = rules.in_force(versions, at)
    if not eligible:
        assert found is None
    else:
        assert found is max(eligible, key=lambda v: v.effective_from or T0)
        assert found is not None and all(
            rules.status_at(v, versions, at) == ("effective" if v is found else "superseded")
            for v in eligible
        )
