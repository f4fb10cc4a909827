"""The shared audit trail (ledger.logbook.audit_trail) and its typed filters
(ledger.entries.audit_filters): each filter and the paging checked against plain SQL over the
audit_event table, times typed without an offset read in the site's zone, and the chain state
against a row edited behind fluxledger's back."""

from __future__ import annotations

import sqlite3
from datetime import UTC, datetime
from zoneinfo import ZoneInfo

import pytest
from sqlmodel import Session, create_engine

from ledger.entries.audit_filters import trail_query
from ledger.errors import InputError
from ledger.logbook.audit_trail import TrailFilter, chain_state, trail
from tests.world import World

pytestmark = pytest.mark.sqlite_only

INPUTS = [
    "--input", "initial_volume=1.2 L", "--input", "initial_concentration=0.5 g/L",
    "--input", "df_concentration=2 g/L", "--input", "target_concentration=6 g/L",
]  # fmt: skip


def _sql(w: World, query: str, *args: object) -> list[tuple[object, ...]]:
    """Rows of plain SQL on the world's file: the oracle, independent of the service."""
    with sqlite3.connect(w.url.removeprefix("sqlite:///")) as conn:
        return list(conn.execute(query, args))


def _seqs(w: World, f: TrailFilter, **paging: int) -> list[int]:
    with Session(create_engine(w.url)) as s:
        return [e.seq for e in trail(s, f, **paging).events]


def test_each_filter_and_the_paging_match_plain_sql(sqlite_world: World) -> None:
    w = sqlite_world
    w.ready("QMB-0101")
    w.ok(w.water("QMB-0101", "pre-use", "168 mL/min"))
    w.ready("QMB-0202")
    w.ok(w.as_user("eng.ray", "run", "plan", "QB-MR-LNP-101", "--module", "QMB-0101",
                   "--product", "QB-117", "--lot", "QB117-26-020", *INPUTS))  # fmt: skip
    w.ok(w.as_user("qa.lin", "run", "approve-plan", "1"))
    w.ok(w.as_user("op.kim", "run", "deviation", "1", "--description", "feed pump restarted"))
    w.ok(w.as_user("eng.ray", "void", "water-test", "3", "--reason", "typed the wrong flow"))

    newest = [int(r[0]) for r in _sql(w, "SELECT seq FROM audit_event ORDER BY seq DESC")]
    assert _seqs(w, TrailFilter()) == newest
    # The second page of 10 is the 11th to 20th newest; the page knows what remains.
    assert len(newest) > 20
    with Session(create_engine(w.url)) as s:
        second = trail(s, TrailFilter(), limit=10, offset=10)
    assert [e.seq for e in second.events] == newest[10:20]
    assert second.total == len(newest) and second.has_newer and second.has_older

    module_id = _sql(w, "SELECT id FROM module WHERE serial = 'QMB-0202'")[0][0]
    expected = {
        TrailFilter(user="op.kim"): "actor = 'op.kim'",
        TrailFilter(entity="water_flux_test"): "entity = 'water_flux_test'",
        TrailFilter(serial="QMB-0202"): f"module_id = {module_id}",
        TrailFilter(action="void"): "action = 'void'",
        TrailFilter(action="change", user="qa.lin"): "action = 'change' AND actor = 'qa.lin'",
        TrailFilter(run=1): "(entity = 'run' AND entity_id = '1') OR (entity = 'deviation' "
        "AND entity_id IN (SELECT CAST(id AS TEXT) FROM deviation WHERE run_id = 1))",
    }
    for f, where in expected.items():
        rows = _sql(w, f"SELECT seq FROM audit_event WHERE {where} ORDER BY seq DESC")
        assert _seqs(w, f) == [int(r[0]) for r in rows], f
    # The run's events: its plan, QA's approval of it and the deviation, nothing else.
    seqs = ",".join(map(str, _seqs(w, TrailFilter(run=1))))
    run_events = _sql(w, f"SELECT DISTINCT entity FROM audit_event WHERE seq IN ({seqs})")
    assert {r[0] for r in run_events} == {"run", "deviation"}

    # A time window: the stored times of two events bound it (inclusive).
    times = _sql(w, "SELECT at FROM audit_event ORDER BY seq")
    start = datetime.fromisoformat(str(times[10][0])).replace(tzinfo=UTC)
    end = datetime.fromisoformat(str(times[-5][0])).replace(tzinfo=UTC)
    rows = _sql(
        w, "SELECT seq FROM audit_event WHERE at >= ? AND at <= ? ORDER BY seq DESC",
        str(times[10][0]), str(times[-5][0]),
    )  # fmt: skip
    assert _seqs(w, TrailFilter(since=start, until=end)) == [int(r[0]) for r in rows]


def test_unknown_values_are_errors_naming_the_filter(sqlite_world: World) -> None:
    with Session(create_engine(sqlite_world.url)) as s:
        for f, field in (
            (TrailFilter(entity="modul"), "entity"),
            (TrailFilter(serial="NO-SUCH"), "serial"),
            (TrailFilter(action="delete"), "action"),
            (TrailFilter(run=99), "run"),
        ):
            with pytest.raises(InputError) as err:
                trail(s, f)
            assert err.value.field == field


def test_typed_times_are_read_in_the_site_zone() -> None:
    # The EU summer-time rule (Directive 2000/84/EC): on 2026-03-29 Berlin goes from
    # UTC+1 to UTC+2 at 01:00 UTC, so that day starts at 23:00 UTC the day before and ends at
    # 21:59:59.999999 UTC.
    berlin = ZoneInfo("Europe/Berlin")
    day = trail_query({"since": "2026-03-29", "until": "2026-03-29"}, berlin).filter
    assert day.since == datetime(2026, 3, 28, 23, 0, tzinfo=UTC)
    assert day.until == datetime(2026, 3, 29, 21, 59, 59, 999999, tzinfo=UTC)
    local = trail_query({"since": "2026-03-29T12:00"}, berlin).filter
    assert local.since == datetime(2026, 3, 29, 10, 0, tzinfo=UTC)
    offset = trail_query({"since": "2026-03-29T12:00-05:00", "page": "3"}, berlin)
    assert offset.filter.since == datetime(2026, 3, 29, 17, 0, tzinfo=UTC) and offset.page == 3
    blank = trail_query({"user": "", "module": " ", "since": "", "run": ""})
    assert blank.filter == TrailFilter() and blank.page == 1


@pytest.mark.parametrize(
    ("raw", "field", "words"),
    [
        ({"since": "yesterday"}, "since", "not a date"),
        ({"until": "2026-13-01"}, "until", "not a date"),
        ({"since": "2026-12-02", "until": "2026-12-01"}, "until", "before --since"),
        ({"run": "0"}, "run", "1 or more"),
        ({"run": "two"}, "run", "two"),
        ({"page": "-1"}, "page", "1 or more"),
    ],
)
def test_bad_filter_text_names_its_field(raw: dict[str, str], field: str, words: str) -> None:
    with pytest.raises(InputError) as err:
        trail_query(raw)
    assert err.value.field == field and words in str(err.value)


def test_chain_state_names_a_row_changed_outside_fluxledger(sqlite_world: World) -> None:
    w = sqlite_world
    w.add_module("QMB-0101")
    count = int(_sql(w, "SELECT count(*) FROM audit_event")[0][0])
    with Session(create_engine(w.url)) as s:
        state = chain_state(s)
    assert state.intact and state.events == count and not state.problems
    with sqlite3.connect(w.url.removeprefix("sqlite:///")) as conn:
        conn.execute("UPDATE module SET note = 'edited in SQL' WHERE serial = 'QMB-0101'")
    with Session(create_engine(w.url)) as s:
        state = chain_state(s)
    assert not state.intact
    assert [p.table for p in state.problems] == ["module"]
    # The same finding as `fluxledger audit verify`.
    cli = w.cli("audit", "verify", "--json")
    assert cli.code == 1 and state.problems[0].what in cli.stdout
