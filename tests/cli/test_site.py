"""`fluxledger site set | show`, and times shown in the site's zone across a daylight-saving
change: the batch-record context and `audit show` of a run that starts before 01:00 UTC on
2026-03-29 (clocks in Europe/Berlin go from 02:00 to 03:00) and finishes after it.

The reference is independent of ledger.rules.localtime: each shown time is parsed back and
must be the stored UTC instant, with the offset of the EU rule (+01:00 before 01:00 UTC,
+02:00 after), which must also be what ``datetime.astimezone`` gives.
"""

from __future__ import annotations

import re
from collections.abc import Iterator
from datetime import UTC, datetime, timedelta
from pathlib import Path
from typing import Any, cast
from zoneinfo import ZoneInfo

import pytest
from freezegun import freeze_time
from freezegun.api import FrozenDateTimeFactory
from sqlmodel import col, select

from tests.cli.test_runs import INPUTS, MAPPING
from tests.records.flow import GOOD_QC
from tests.world import World

BERLIN = ZoneInfo("Europe/Berlin")
CHANGE = datetime(2026, 3, 29, 1, 0, tzinfo=UTC)  # 02:00 CET -> 03:00 CEST
BACK = datetime(2026, 10, 25, 1, 0, tzinfo=UTC)  # 03:00 CEST -> 02:00 CET
ISO = re.compile(r"\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d(?:\.\d+)?[+-]\d\d:\d\d")
SET = ["site", "set", "--name", "Halden Fill Hall", "--time-zone", "Europe/Berlin"]

pytestmark = pytest.mark.sqlite_only


def _offset_by_rule(at: datetime) -> timedelta:
    # the test world's users were added at the real date, which may lie after BACK
    return timedelta(hours=2) if CHANGE <= at < BACK else timedelta(hours=1)


def _check_shown(text: str, stored: datetime) -> timedelta:
    """``text`` is the stored instant (to the second) in Berlin time with the rule's offset;
    its offset."""
    shown = datetime.fromisoformat(text)
    assert shown == stored.replace(microsecond=0) or shown == stored, (text, stored)
    offset = shown.utcoffset()
    assert offset == _offset_by_rule(stored) == stored.astimezone(BERLIN).utcoffset(), text
    return offset


def test_site_show_before_anything_is_set(sqlite_world: World) -> None:
    body = sqlite_world.ok(sqlite_world.cli("site", "show", "--json")).json()
    assert body["site"] == {"name": None, "time_zone": None}
    assert "UTC" in " ".join(body["notes"])


def test_site_set_by_the_administrator_is_shown_and_audited(sqlite_world: World) -> None:
    w = sqlite_world
    done = w.ok(w.as_user("sysadm", *SET, "--reason", "site commissioning", "--json")).json()
    assert done["site"] == {"name": "Halden Fill Hall", "time_zone": "Europe/Berlin"}
    text = w.ok(w.cli("site", "show")).stdout
    assert "Halden Fill Hall" in text and "Europe/Berlin" in text
    events = w.ok(w.cli("audit", "show", "--entity", "setting", "--json")).json()["events"]
    mine = [e for e in events if e["entity_id"] in ("site.name", "site.timezone")]
    assert [(e["action"], e["actor"], e["reason"]) for e in mine] == [
        ("create", "sysadm", "site commissioning")
    ] * 2
    # A later change is allowed, with old -> new and its reason in the trail.
    w.ok(w.as_user("sysadm", "site", "set", "--name", "Halden Fill Hall", "--time-zone",
                   "Europe/Oslo", "--reason", "zone was typed wrong"))  # fmt: skip
    events = w.ok(w.cli("audit", "show", "--entity", "setting", "--json")).json()["events"]
    (change,) = [e for e in events if e["action"] == "change"]
    assert (change["entity_id"], change["old_value"], change["new_value"]) == (
        "site.timezone",
        '"Europe/Berlin"',
        '"Europe/Oslo"',
    )
    assert change["reason"] == "zone was typed wrong"


@pytest.mark.parametrize("login", ["op.kim", "eng.ray", "qa.lin"])
def test_only_an_administrator_sets_the_site(sqlite_world: World, login: str) -> None:
    before = sqlite_world.snapshot()
    refused = sqlite_world.as_user(login, *SET, "--reason", "site commissioning")
    assert refused.code == 3 and "error:" in refused.stderr and not refused.stdout
    assert sqlite_world.snapshot() == before


@pytest.mark.parametrize(
    ("args", "named"),
    [
        (["--time-zone", "Europe/Berlinn"], "--time-zone 'Europe/Berlinn'"),
        (["--time-zone", "Central European"], "--time-zone 'Central European'"),
        (["--time-zone", "Europe/Berlin", "--name", " "], "--name"),
    ],
)
def test_bad_input_exits_2_names_the_option_and_writes_nothing(
    sqlite_world: World, args: list[str], named: str
) -> None:
    before = sqlite_world.snapshot()
    given = ["--name", "Halden Fill Hall", *args] if "--name" not in args else args
    bad = sqlite_world.as_user("sysadm", "site", "set", *given, "--reason", "commissioning")
    assert bad.code == 2, (bad.stdout, bad.stderr)
    assert bad.stderr.startswith("error: ") and named in bad.stderr
    assert "Traceback" not in bad.stderr
    if "--time-zone" in named:
        assert "an IANA time zone such as Europe/Berlin" in bad.stderr
    assert sqlite_world.snapshot() == before


@pytest.fixture
def clock() -> Iterator[FrozenDateTimeFactory]:
    # pandas and pyarrow are imported before the clock stops: importing them under a frozen
    # clock crashes the interpreter.
    import pandas  # noqa: F401
    import pyarrow.csv  # noqa: F401

    with freeze_time(datetime(2026, 3, 29, 0, 5, tzinfo=UTC), ignore=["_pytest"]) as frozen:
        yield cast(FrozenDateTimeFactory, frozen)


def _run_across_the_change(w: World, clock: FrozenDateTimeFactory, tmp_path: Path) -> None:
    """Site set, run planned and started before 01:00 UTC, finished four hours later."""
    from ledger.cli.demo_log import write_log

    w.ok(w.as_user("sysadm", *SET, "--reason", "site commissioning"))
    w.ready()
    w.ok(w.water("QMB-0142", "pre-use", "168 mL/min"))
    clock.tick(timedelta(minutes=5))
    w.ok(w.as_user("eng.ray", "run", "plan", "QB-MR-LNP-101", "--module", "QMB-0142",
                   "--product", "QB-117", "--lot", "QB-26-031", *INPUTS))  # fmt: skip
    w.ok(w.as_user("qa.lin", "run", "approve-plan", "1"))
    clock.tick(timedelta(minutes=5))
    w.ok(w.as_user("op.kim", "run", "start", "1"))
    log = write_log(tmp_path / "skid.csv", datetime.now(UTC) + timedelta(seconds=30))
    clock.tick(timedelta(hours=4))
    w.ok(w.as_user("op.kim", "run", "import", "1", str(log), "--mapping", str(MAPPING)))
    w.ok(w.as_user("op.kim", "run", "qc", "1", *(x for q in GOOD_QC for x in ("--result", q))))
    w.ok(w.as_user("op.kim", "run", "finish", "1"))


def _stored(w: World) -> tuple[Any, dict[int, datetime]]:
    from ledger.store.engine import transaction
    from ledger.store.tables import AuditEvent, Run

    with transaction(w.engine()) as s:
        run = s.get(Run, 1)
        events = {e.seq: e.at for e in s.exec(select(AuditEvent).order_by(col(AuditEvent.seq)))}
    return run, events


def test_a_run_across_the_spring_change_shows_berlin_time_with_the_right_offsets(
    sqlite_world: World, clock: FrozenDateTimeFactory, tmp_path: Path
) -> None:
    from ledger.records.assemble import assemble
    from ledger.store.engine import transaction

    w = sqlite_world
    _run_across_the_change(w, clock, tmp_path)
    run, stored = _stored(w)
    assert run.started_at < CHANGE < run.finished_at  # the flow really spans the change

    with transaction(w.engine()) as s:
        ctx = assemble(s, 1)
        # the clock froze at 00:05 UTC, the site was set then: a minute before it, not yet
        before_site = assemble(s, 1, as_of=datetime(2026, 3, 29, 0, 4, tzinfo=UTC))
    h = ctx.header
    assert h.site == "Halden Fill Hall"
    assert _check_shown(h.started_at or "", run.started_at) == timedelta(hours=1)
    assert _check_shown(h.finished_at or "", run.finished_at) == timedelta(hours=2)
    assert h.started_at.startswith("2026-03-29T01:")  # type: ignore[union-attr]
    assert h.finished_at.startswith("2026-03-29T06:")  # type: ignore[union-attr]
    # The record's own audit rows: each the stored event time, offsets on both sides.
    offsets = {_check_shown(row.at, stored[row.seq]) for row in ctx.audit}
    assert offsets == {timedelta(hours=1), timedelta(hours=2)}
    # No time in the hashed content is left in UTC or in another offset, except inside the
    # audit rows' old and new values: those quote the stored values (UTC) as they are.
    content = ctx.content()
    for row in content["audit"]:
        for quoted in ("old", "new", "change"):
            row.pop(quoted)
    found = ISO.findall(str(content))
    assert len(found) >= len(ctx.audit) + 3
    assert {t[-6:] for t in found} == {"+01:00", "+02:00"}
    # Assembled as of a time before the site was set (as an old revision is): UTC, no name.
    assert before_site.header.site is None
    assert before_site.header.planned_at.endswith("+00:00")

    # audit show: text and JSON, every event in Berlin time with its offset.
    text = w.ok(w.cli("audit", "show")).stdout
    lines = re.findall(r"^#(\d+)  (\S+)  ", text, flags=re.MULTILINE)
    assert len(lines) == len(stored)
    shown = {_check_shown(at, stored[int(seq)]) for seq, at in lines}
    assert shown == {timedelta(hours=1), timedelta(hours=2)}
    assert all(not at.endswith("+00:00") for _, at in lines)
    events = w.ok(w.cli("audit", "show", "--json")).json()["events"]
    assert {_check_shown(e["at"], stored[e["seq"]]) for e in events} == shown

    # run show: the run's times in Berlin time too.
    head = w.ok(w.cli("run", "show", "1", "--json")).json()["run_1"]
    assert _check_shown(head["started_at"], run.started_at) == timedelta(hours=1)
    assert _check_shown(head["finished_at"], run.finished_at) == timedelta(hours=2)
    assert _check_shown(head["planned_at"], run.created_at) == timedelta(hours=1)


@pytest.mark.parametrize("set_before_issue", [True, False])
def test_a_revision_keeps_the_zone_it_was_issued_in_and_still_verifies(
    worlds: Any, tmp_path: Path, set_before_issue: bool
) -> None:
    """A zone changed after a revision was issued changes neither its stored times nor the
    verification of its content against the database (assembled again as of its issue)."""
    from ledger.records.service import current_revision
    from ledger.records.verify import revision_problems
    from ledger.store.engine import transaction
    from tests.records import flow

    with worlds.copy("sqlite", tmp_path, flow.reviewed) as w:
        if set_before_issue:
            w.ok(w.as_user("sysadm", *SET, "--reason", "site commissioning"))
        w.ok(flow.sign(w, 1, "performed", "op.kim"))  # type: ignore[arg-type]
        w.ok(w.as_user("sysadm", "site", "set", "--name", "Halden Fill Hall", "--time-zone",
                       "America/New_York", "--reason", "zone was set wrong"))  # fmt: skip
        run, _ = _stored(w)
        with transaction(w.engine()) as s:
            rev = current_revision(s, 1)
            assert rev is not None
            problems = revision_problems(s, rev)
        assert problems == []
        header = rev.content["header"]
        started = datetime.fromisoformat(header["started_at"])
        assert started == run.started_at.replace(microsecond=0)
        if set_before_issue:
            assert header["site"] == "Halden Fill Hall"
            assert started.utcoffset() == run.started_at.astimezone(BERLIN).utcoffset()
        else:
            assert header.get("site") is None
            assert started.utcoffset() == timedelta(0)


def test_the_printed_record_names_the_site_in_its_header() -> None:
    import dataclasses
    import io

    from pypdf import PdfReader

    from ledger.records.pdf import render
    from tests.records.sample import sample_context

    ctx = sample_context(log_seconds=600, checks=4, audit_rows=4)

    def first_page(context: Any) -> str:
        pdf = render(context, software_version="9.9.9-test", charts=False)
        return str(PdfReader(io.BytesIO(pdf)).pages[0].extract_text())

    named = dataclasses.replace(
        ctx, header=dataclasses.replace(ctx.header, site="Halden Fill Hall")
    )
    assert "Halden Fill Hall" in first_page(named)
    assert "Halden Fill Hall" not in first_page(ctx)
