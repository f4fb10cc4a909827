"""Activity times: ISO 8601 with an offset, stored as UTC; naive and future times refused."""

from __future__ import annotations

from datetime import UTC, datetime, timedelta, timezone

import pytest
from hypothesis import given
from hypothesis import strategies as st

from ledger.errors import InputError
from ledger.logbook.times import activity_time, parse_time

offsets = st.integers(min_value=-14 * 60, max_value=14 * 60).map(
    lambda m: timezone(timedelta(minutes=m))
)
moments = st.datetimes(
    min_value=datetime(2000, 1, 1), max_value=datetime(2100, 1, 1), timezones=offsets
)


@given(moments)
def test_any_offset_round_trips_to_the_same_instant(moment: datetime) -> None:
    parsed = parse_time(moment.isoformat())
    assert parsed == moment and parsed.tzinfo is UTC


@given(st.datetimes(min_value=datetime(2000, 1, 1), max_value=datetime(2100, 1, 1)))
def test_naive_times_are_refused(moment: datetime) -> None:
    with pytest.raises(InputError, match="no UTC offset"):
        parse_time(moment.isoformat())


@given(st.text(max_size=30))
def test_garbage_is_an_input_error_never_a_crash(text: str) -> None:
    try:
        parsed = parse_time(text)
    except InputError as err:
        assert err.field == "activity_time"
    else:
        assert parsed.tzinfo is UTC


def test_z_suffix_is_utc() -> None:
    assert parse_time("2026-11-30T13:05Z") == datetime(2026, 11, 30, 13, 5, tzinfo=UTC)


def test_late_flag_and_future_refusal() -> None:
    now = datetime(2026, 12, 1, 12, 0, tzinfo=UTC)
    assert activity_time(None, now) == (now, False)
    earlier = now - timedelta(hours=3)
    assert activity_time(earlier, now) == (earlier, True)
    with pytest.raises(InputError, match="in the future"):
        activity_time(now + timedelta(seconds=1), now)
