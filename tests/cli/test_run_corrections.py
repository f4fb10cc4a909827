"""A run record a reviewer can trust, through the CLI: a wrong skid log voided and another
imported, a run aborted, a log outside its run or in the future refused (nothing written),
a run that cannot start before it was planned."""

from __future__ import annotations

from datetime import UTC, datetime, timedelta
from pathlib import Path

import pytest

from tests.cli.test_runs import MAPPING, plan, ready_for_a_run
from tests.world import World

pytestmark = pytest.mark.sqlite_only


def _started(world: World) -> None:
    ready_for_a_run(world)
    world.ok(plan(world))
    world.ok(world.as_user("op.kim", "run", "start", "1"))


def _log(tmp_path: Path, name: str, start: datetime, seed: int = 117) -> Path:
    from ledger.cli.demo_log import write_log

    return write_log(tmp_path / name, start, seed=seed)


def test_a_voided_log_is_replaced_and_stays_in_the_history(world: World, tmp_path: Path) -> None:
    _started(world)
    world.wide_log_tolerance()
    first = _log(tmp_path, "first.csv", datetime.now(UTC) - timedelta(hours=2))
    world.ok(world.as_user("op.kim", "run", "import", "1", str(first), "--mapping", str(MAPPING)))
    second = _log(tmp_path, "second.csv", datetime.now(UTC) - timedelta(hours=2), seed=118)
    refused = world.as_user("op.kim", "run", "import", "1", str(second), "--mapping", str(MAPPING))
    assert refused.code == 3 and "fluxledger void skid-log 1" in refused.stderr
    # an operator may not void; an engineer may, with a reason
    assert world.as_user("op.kim", "void", "skid-log", "1", "--reason", "wrong file").code == 3
    world.ok(world.as_user("eng.ray", "void", "skid-log", "1", "--reason", "export of run 0"))
    done = world.ok(
        world.as_user("op.kim", "run", "import", "1", str(second), "--mapping", str(MAPPING))
    )
    assert "imported second.csv" in done.stdout
    events = world.ok(world.cli("audit", "show", "--json")).json()
    voids = [e for e in events["events"] if e.get("action") == "void"]
    assert voids and voids[-1]["entity"] == "skid_log_file"


def test_a_log_outside_the_run_or_in_the_future_is_refused(world: World, tmp_path: Path) -> None:
    _started(world)
    before = world.snapshot()
    # the default tolerance is 10 min: a log from two hours before the start is refused
    early = _log(tmp_path, "early.csv", datetime.now(UTC) - timedelta(hours=2))
    out = world.as_user("op.kim", "run", "import", "1", str(early), "--mapping", str(MAPPING))
    assert out.code == 2 and "before the run started" in out.stderr
    # a log that runs on past now (it ends about 50 min after it starts) is in the future
    late = _log(tmp_path, "late.csv", datetime.now(UTC))
    out = world.as_user("op.kim", "run", "import", "1", str(late), "--mapping", str(MAPPING))
    assert out.code == 2 and "in the future" in out.stderr
    assert world.snapshot() == before


def test_an_aborted_run_sends_its_module_to_cleaning(world: World, tmp_path: Path) -> None:
    _started(world)
    assert world.status() == "in_use"
    assert world.as_user("op.kim", "run", "abort", "1", "--reason", "pump fault").code == 3
    done = world.ok(world.as_user("eng.ray", "run", "abort", "1", "--reason", "pump fault",
                                  "--json"))  # fmt: skip
    assert done.json()["status"] == "aborted"
    assert world.status() == "awaiting_cleaning"
    again = world.as_user("eng.ray", "run", "abort", "1", "--reason", "twice")
    assert again.code == 3 and "aborted" in again.stderr
    pdf = tmp_path / "aborted.pdf"
    world.ok(world.as_user("eng.ray", "record", "print", "1", "--out", str(pdf)))
    from pypdf import PdfReader

    text = PdfReader(str(pdf)).pages[0].extract_text()
    assert "ABORTED" in text and "pump fault" in text


def test_a_run_cannot_start_before_it_was_planned(world: World) -> None:
    ready_for_a_run(world)
    world.ok(plan(world))
    earlier = (datetime.now(UTC) - timedelta(minutes=30)).isoformat(timespec="seconds")
    out = world.as_user("op.kim", "run", "start", "1", "--activity-time", earlier)
    assert out.code == 2 and "before it was planned" in out.stderr


def test_a_run_on_a_registered_skid_reads_its_log_through_the_approved_mapping(
    world: World, tmp_path: Path
) -> None:
    world.ok(world.as_user("eng.ray", "skid", "add", "QF-2", "--description", "bench skid"))
    due = ["--calibration-due", "2026-01-31"]  # past: a warning at import
    world.ok(world.as_user("eng.ray", "skid", "instrument", "QF-2", "--tag", "PT-101",
                           "--measures", "feed_pressure", *due))  # fmt: skip
    world.ok(world.as_user("qa.lin", "skid", "mapping", "QF-2", str(MAPPING)))
    ready_for_a_run(world)
    world.ok(plan(world, "--skid", "QF-2"))
    world.ok(world.as_user("op.kim", "run", "start", "1"))
    world.wide_log_tolerance()
    log = _log(tmp_path, "skid.csv", datetime.now(UTC) - timedelta(hours=2))
    other = tmp_path / "other.toml"
    other.write_text(MAPPING.read_text(encoding="utf-8") + "\n# edited\n", encoding="utf-8")
    refused = world.as_user("op.kim", "run", "import", "1", str(log), "--mapping", str(other))
    assert refused.code == 3 and "not skid QF-2's approved mapping" in refused.stderr
    done = world.ok(world.as_user("op.kim", "run", "import", "1", str(log), "--json"))
    warnings = done.json()["warnings"]
    assert any("PT-101" in w and "2026-01-31" in w for w in warnings), warnings
    pdf = tmp_path / "draft.pdf"
    world.ok(world.as_user("eng.ray", "record", "print", "1", "--out", str(pdf)))
    from pypdf import PdfReader

    text = " ".join(PdfReader(str(pdf)).pages[0].extract_text().split())
    assert "skid QF-2 mapping v1" in text and "PT-101" in text


def test_a_run_starts_only_on_a_plan_a_second_person_approved(world: World) -> None:
    ready_for_a_run(world)
    world.ok(plan(world, approve=False))
    refused = world.as_user("op.kim", "run", "start", "1")
    assert refused.code == 3 and "run approve-plan 1" in refused.stderr
    own = world.as_user("eng.ray", "run", "approve-plan", "1")  # eng.ray planned it
    assert own.code == 3 and "second engineer or QA" in own.stderr
    assert world.as_user("op.kim", "run", "approve-plan", "1").code == 3  # an operator
    world.ok(world.as_user("qa.lin", "run", "approve-plan", "1"))
    world.ok(world.as_user("op.kim", "run", "start", "1"))
