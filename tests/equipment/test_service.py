"""The skid registry's service: registration under case-insensitive codes, instruments added
and replaced (voided with a reason), mapping versions (v1 -> v2 supersedes; the same text
again writes nothing), the current mapping runs read, and the calibration warnings at their
date edges on a frozen clock. The skid, tags and dates are invented."""

from __future__ import annotations

import hashlib
from collections.abc import Iterator
from datetime import UTC, date, datetime, timedelta
from pathlib import Path

import pytest
from freezegun import freeze_time
from sqlmodel import Session, func, select

from ledger.equipment import service
from ledger.errors import InputError, RefusedError
from ledger.logbook.auth import find_user
from ledger.store.audit import verify
from ledger.store.engine import transaction
from ledger.store.equipment import SkidInstrument
from ledger.store.tables import AuditEvent, UserAccount
from ledger.store.types import utc_now
from tests.world import SAMPLES, World

# The database is not the subject (tests/store covers both backends): SQLite only.
pytestmark = pytest.mark.sqlite_only

MAPPING_TEXT = (SAMPLES / "qf2_skid_mapping.toml").read_text(encoding="utf-8")
DUE = date(2026, 10, 1)


@pytest.fixture
def session(world: World) -> Iterator[Session]:
    """One transaction on a copy of the test world (rolled into the database at the end)."""
    with transaction(world.engine()) as s:
        yield s


def _user(session: Session, login: str) -> UserAccount:
    found = find_user(session, login)
    assert found is not None
    return found


def _events(session: Session) -> int:
    return session.exec(select(func.count()).select_from(AuditEvent)).one()


def _skid(session: Session, code: str = "TFF-SKID-2") -> int:
    made = service.register_skid(session, _user(session, "eng.ray"), code, "bench TFF skid")
    assert made.id is not None
    return made.id


def test_a_skid_is_registered_and_found_ignoring_case(session: Session) -> None:
    _skid(session)
    assert service.get_skid(session, "tff-skid-2").code == "TFF-SKID-2"
    with pytest.raises(InputError, match="already registered") as err:
        service.register_skid(session, _user(session, "qa.lin"), "Tff-Skid-2", "another")
    assert err.value.field == "code"


def test_an_operator_cannot_register_a_skid(session: Session) -> None:
    with pytest.raises(RefusedError):
        service.register_skid(session, _user(session, "op.kim"), "TFF-SKID-9", "bench skid")


@pytest.mark.parametrize(
    "code",
    ["TFF SKID", "TFF-\u200bSKID", "TFF-\u202eSKID", "SKID-\x07", "ТFF-SKID", "x" * 65, ""],
    ids=["space", "zero-width", "bidi", "bell", "mixed-script", "too-long", "empty"],
)
def test_hostile_codes_are_refused_naming_the_field(session: Session, code: str) -> None:
    with pytest.raises(InputError) as err:
        service.register_skid(session, _user(session, "eng.ray"), code, "bench skid")
    assert err.value.field == "code"


def test_an_unknown_skid_names_the_known_ones(session: Session) -> None:
    _skid(session)
    with pytest.raises(InputError, match="TFF-SKID-2") as err:
        service.get_skid(session, "TFF-SKID-7")
    assert err.value.field == "code"


def test_an_instrument_is_replaced_only_with_a_reason(session: Session) -> None:
    _skid(session)
    eng = _user(session, "eng.ray")
    first, replaced = service.set_instrument(
        session, eng, "TFF-SKID-2", "PT-101", "feed_pressure", DUE
    )
    assert replaced is None
    again, replaced = service.set_instrument(
        session, eng, "TFF-SKID-2", "pt-101", "feed_pressure", DUE
    )
    assert again.id == first.id and replaced is None  # the same values change nothing
    later = date(2027, 10, 1)
    with pytest.raises(InputError, match="needs --reason") as err:
        service.set_instrument(session, eng, "TFF-SKID-2", "pt-101", "feed_pressure", later)
    assert err.value.field == "reason"
    new, old = service.set_instrument(
        session, eng, "TFF-SKID-2", "pt-101", "feed_pressure", later, "recalibrated"
    )
    assert old is not None and old.id == first.id and old.void_reason == "recalibrated"
    assert new.tag == "PT-101" and new.calibration_due == later
    skid_id = service.get_skid(session, "TFF-SKID-2").id
    assert [i.id for i in service.instruments(session, skid_id or 0)] == [new.id]
    assert session.get(SkidInstrument, first.id) is not None  # voided, never deleted
    assert verify(session).ok


@pytest.mark.parametrize("measures", ["phase", "pressure", "feed_pressures", ""])
def test_an_instrument_measures_a_mapped_channel(session: Session, measures: str) -> None:
    _skid(session)
    with pytest.raises(InputError) as err:
        service.set_instrument(
            session, _user(session, "eng.ray"), "TFF-SKID-2", "PT-101", measures, DUE
        )
    assert err.value.field == "measures"
    assert "feed_pressure" in str(err.value.expected)


def test_hostile_tags_are_refused(session: Session) -> None:
    _skid(session)
    for tag in ("PT 101", "PT-\n101", "PT\u00ad101", "\ufeffPT-101"):
        with pytest.raises(InputError) as err:
            service.set_instrument(
                session, _user(session, "eng.ray"), "TFF-SKID-2", tag, "feed_pressure", DUE
            )
        assert err.value.field == "tag", tag


def test_mapping_versions_supersede_and_the_same_text_writes_nothing(session: Session) -> None:
    _skid(session)
    eng, qa = _user(session, "eng.ray"), _user(session, "qa.lin")
    v1, created = service.approve_mapping(session, eng, "TFF-SKID-2", MAPPING_TEXT, "m.toml")
    assert created and v1.version == 1 and v1.status == "current" and v1.approved_by == "eng.ray"
    # An independent SHA-256 of the exact bytes (hashlib on the UTF-8 text).
    assert v1.sha256 == hashlib.sha256(MAPPING_TEXT.encode("utf-8")).hexdigest()
    events = _events(session)
    same, created = service.approve_mapping(session, qa, "tff-skid-2", MAPPING_TEXT, "m.toml")
    assert not created and same.id == v1.id
    assert _events(session) == events
    changed = MAPPING_TEXT + "\n# second version: same columns\n"
    v2, created = service.approve_mapping(session, qa, "TFF-SKID-2", changed, "m2.toml")
    assert created and v2.version == 2 and v2.approved_by == "qa.lin"
    assert v1.status == "superseded"
    assert service.current_mapping(session, "TFF-SKID-2") == (changed, 2, v2.sha256)
    # Going back to the first text is a new version (3), not a revival of version 1.
    v3, created = service.approve_mapping(session, eng, "TFF-SKID-2", MAPPING_TEXT, "m.toml")
    assert created and v3.version == 3 and v2.status == "superseded"
    assert verify(session).ok


def test_an_invalid_mapping_is_refused_naming_the_key(session: Session) -> None:
    _skid(session)
    bad = MAPPING_TEXT.replace("[channels]", '[channels]\nfeed_presure = { column = "X" }', 1)
    with pytest.raises(InputError) as err:
        service.approve_mapping(session, _user(session, "eng.ray"), "TFF-SKID-2", bad, "bad.toml")
    assert err.value.field == "channels.feed_presure" and err.value.source == "bad.toml"
    with pytest.raises(RefusedError, match="no approved mapping"):
        service.current_mapping(session, "TFF-SKID-2")


def test_an_operator_cannot_approve_a_mapping(session: Session) -> None:
    _skid(session)
    with pytest.raises(RefusedError):
        service.approve_mapping(
            session, _user(session, "op.kim"), "TFF-SKID-2", MAPPING_TEXT, "m.toml"
        )


@pytest.fixture
def instrumented(session: Session) -> int:
    """A skid with PT-101 (feed pressure, due 2026-10-01) and TT-104 (temperature, due later)."""
    skid_id = _skid(session)
    eng = _user(session, "eng.ray")
    service.set_instrument(session, eng, "TFF-SKID-2", "PT-101", "feed_pressure", DUE)
    service.set_instrument(
        session, eng, "TFF-SKID-2", "TT-104", "temperature", DUE + timedelta(days=30)
    )
    return skid_id


EDGE = datetime(2026, 10, 2, tzinfo=UTC)  # the first instant after the due day (UTC)


@pytest.mark.parametrize(
    ("at", "warned"),
    [(EDGE - timedelta(microseconds=1), False), (EDGE, True),
     (datetime(2026, 10, 1, 23, 30, tzinfo=UTC), False),
     # 2026-10-02 00:30 in Berlin is still 2026-10-01 in UTC: in date
     (datetime.fromisoformat("2026-10-02T00:30:00+02:00"), False)],
    ids=["last-instant-of-due-day", "day-after", "late-on-due-day", "offset-time"],
)  # fmt: skip
def test_calibration_warning_edges(
    session: Session, instrumented: int, at: datetime, warned: bool
) -> None:
    channels = ["feed_pressure", "temperature"]
    with freeze_time(at):  # as a run asks: at the system clock's time
        found = service.calibration_warnings(session, instrumented, utc_now(), channels)
    expected = ["PT-101 (feed_pressure) calibration was due 2026-10-01"] if warned else []
    assert found == expected


def test_calibration_warnings_only_for_mapped_channels(session: Session, instrumented: int) -> None:
    at = datetime(2027, 1, 1, tzinfo=UTC)
    assert service.calibration_warnings(session, instrumented, at, ["temperature"]) == [
        "TT-104 (temperature) calibration was due 2026-10-31"
    ]
    assert service.calibration_warnings(session, instrumented, at, []) == []


def test_a_replaced_instrument_no_longer_warns(session: Session, instrumented: int) -> None:
    at = datetime(2026, 10, 15, tzinfo=UTC)
    assert service.calibration_warnings(session, instrumented, at, ["feed_pressure"])
    service.set_instrument(session, _user(session, "eng.ray"), "TFF-SKID-2", "PT-101",
                           "feed_pressure", date(2027, 10, 1), "recalibrated")  # fmt: skip
    assert service.calibration_warnings(session, instrumented, at, ["feed_pressure"]) == []


def test_list_and_show(session: Session, instrumented: int, tmp_path: Path) -> None:
    service.approve_mapping(session, _user(session, "qa.lin"), "TFF-SKID-2", MAPPING_TEXT, "m")
    _skid(session, "TFF-SKID-1")
    assert [v.skid.code for v in service.list_skids(session)] == ["TFF-SKID-1", "TFF-SKID-2"]
    view = service.show_skid(session, "tff-skid-2")
    assert [i.tag for i in view.instruments] == ["PT-101", "TT-104"]
    assert view.current is not None and view.current.version == 1
