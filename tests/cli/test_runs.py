"""Runs through the CLI: plan, start, import, QC, deviations, finish, submit; refusals and
bad input (nothing written)."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import pytest

from tests.world import SAMPLES, World

# Not about the database itself: SQLite only (tests/store covers PostgreSQL).
pytestmark = pytest.mark.sqlite_only


INPUTS = [
    "--input", "initial_volume=1.2 L", "--input", "initial_concentration=0.5 g/L",
    "--input", "df_concentration=2 g/L", "--input", "target_concentration=6 g/L",
]  # fmt: skip
MAPPING = SAMPLES / "qf2_skid_mapping.toml"


def plan(w: World, *more: str, user: str = "eng.ray", serial: str = "QMB-0142",
         approve: bool = True) -> object:  # fmt: skip
    """Plan a run; once planned, QA approves its plan (a second person) unless told not to."""
    planned = w.as_user(
        user, "run", "plan", "QB-MR-LNP-101", "--module", serial, "--product", "QB-117",
        "--lot", "QB117-26-020", *INPUTS, *more,
    )  # fmt: skip
    if approve and planned.code == 0:
        if "--json" in more:
            number = next(k for k in planned.json() if k.startswith("run_")).removeprefix("run_")
        else:
            number = planned.stdout.split("planned run ", 1)[1].split(":", 1)[0]
        w.ok(w.as_user("qa.lin", "run", "approve-plan", number))
    return planned


def ready_for_a_run(w: World) -> None:
    w.ready()
    w.ok(w.water("QMB-0142", "pre-use", "168 mL/min"))


def test_plan_prints_every_planned_parameter(world: World) -> None:
    ready_for_a_run(world)
    out = world.ok(plan(world, "--json")).json()
    names = [row["name"] for row in out["plan"]]
    assert "feed_flow" in names and "diavolumes" in names and "duration_diafilter" in names
    feed = next(r for r in out["plan"] if r["name"] == "feed_flow")
    assert feed["planned"]["unit"] == "mL/min"
    assert feed["planned"]["value"] == pytest.approx(353.43, rel=1e-4)
    assert out["run_1"]["template"] == "QB-MR-LNP-101 v7"
    assert len(out["run_1"]["template_sha256"]) == 64
    assert any("validated procedures" in n for n in out["notes"])


def test_planning_needs_an_engineer_and_a_fit_module(world: World) -> None:
    world.add_module()  # commissioning: not fit
    before = world.snapshot()
    refused = plan(world)
    assert refused.code == 3 and "NOT FIT" in refused.stderr
    assert plan(world, user="op.kim").code == 3
    assert world.snapshot() == before
    forced = plan(world, "--override-reason", "engineering run to characterise fouling")
    world.ok(forced)
    shown = world.ok(world.cli("run", "show", "1", "--json")).json()
    assert shown["run_1"]["override_reason"] == "engineering run to characterise fouling"


@pytest.mark.parametrize(
    ("args", "needle"),
    [
        (["--input", "initial_volume=1.2 bar"], "--input initial_volume"),
        (["--input", "volume=1 L"], "has no input 'volume'"),
        (["--input", "initial_volume"], "is not NAME=VALUE"),
        (["--input", "initial_volume=12 L"], "fails its own checks"),
    ],
)
def test_bad_plan_input_writes_nothing(world: World, args: list[str], needle: str) -> None:
    ready_for_a_run(world)
    before = world.snapshot()
    inputs = [a for a in INPUTS]
    # Replace the initial volume (or add a stray input) to make the plan wrong.
    if args[1].startswith("initial_volume"):
        inputs[1] = args[1]
        result = world.as_user(
            "eng.ray", "run", "plan", "QB-MR-LNP-101", "--module", "QMB-0142", "--product",
            "QB-117", "--lot", "L1", *inputs,
        )  # fmt: skip
    else:
        result = plan(world, *args)
    assert result.code in (2, 3), result
    assert needle in result.stderr
    assert "Traceback" not in result.stderr + result.stdout
    assert world.snapshot() == before


def test_out_of_order_steps_exit_3(world: World) -> None:
    ready_for_a_run(world)
    world.ok(plan(world))
    for args in (["run", "finish", "1"], ["run", "submit", "1"],
                 ["run", "qc", "1", "--result", "ph=7.4"]):  # fmt: skip
        result = world.as_user("op.kim", *args)
        assert result.code == 3, (args, result)
        assert "it is planned; next: have the plan approved" in result.stderr


def test_start_requires_a_recent_pre_use_test(world: World) -> None:
    world.ready()
    world.ok(plan(world))
    refused = world.as_user("op.kim", "run", "start", "1")
    assert refused.code == 3
    assert "no pre-use water-flux test" in refused.stderr
    world.ok(world.water("QMB-0142", "pre-use", "168 mL/min"))
    world.ok(world.as_user("op.kim", "run", "start", "1"))
    assert world.status() == "in_use"


def test_qc_results_are_checked_and_corrections_need_a_reason(world: World) -> None:
    ready_for_a_run(world)
    world.ok(plan(world))
    world.ok(world.as_user("op.kim", "run", "start", "1"))
    world.ok(world.as_user("op.kim", "run", "qc", "1", "--result", "particle_size=105 nm",
                           "--result", "ph=7.4"))  # fmt: skip
    checks = {
        c["name"]: c for c in world.cli("run", "checks", "1", "--json").json()["acceptance_checks"]
    }
    assert checks["particle_size"]["verdict"] == "FAIL"
    assert checks["ph"]["verdict"] == "PASS"
    assert checks["pdi"]["verdict"] == "MISSING"
    assert checks["feed_flow"]["verdict"] == "MISSING"
    assert checks["feed_flow"]["note"] == "no skid log imported"
    again = world.as_user("op.kim", "run", "qc", "1", "--result", "particle_size=95 nm")
    assert again.code == 3 and "--correction-reason" in again.stderr
    world.ok(world.as_user("op.kim", "run", "qc", "1", "--result", "particle_size=95 nm",
                           "--correction-reason", "DLS re-run after cuvette change"))  # fmt: skip
    checks = {
        c["name"]: c for c in world.cli("run", "checks", "1", "--json").json()["acceptance_checks"]
    }
    assert checks["particle_size"]["verdict"] == "PASS"
    bad = world.as_user("op.kim", "run", "qc", "1", "--result", "pdi=0.1 nm")
    assert bad.code == 2 and "pdi" in bad.stderr


def test_a_fail_needs_a_deviation_before_review(world: World) -> None:
    ready_for_a_run(world)
    world.ok(plan(world))
    world.ok(world.as_user("op.kim", "run", "start", "1"))
    world.ok(world.as_user("op.kim", "run", "qc", "1", "--result", "ph=8.4"))
    world.ok(world.as_user("op.kim", "run", "finish", "1"))
    assert world.status() == "awaiting_cleaning"
    refused = world.as_user("op.kim", "run", "submit", "1")
    assert refused.code == 3 and "FAIL without a recorded deviation: ph" in refused.stderr
    unknown = world.as_user("op.kim", "run", "deviation", "1", "--check", "pH",
                            "--description", "x")  # fmt: skip
    assert unknown.code == 2 and "has no check 'pH'" in unknown.stderr
    world.ok(world.as_user("op.kim", "run", "deviation", "1", "--check", "ph",
                           "--description", "pH 8.4: buffer lot out of range"))  # fmt: skip
    assert world.as_user("op.kim", "run", "close-deviation", "1", "1", "--closure", "x").code == 3
    # Closing is QA's: an engineer is refused; QA needs a class and an impact assessment.
    engineer = world.as_user("eng.ray", "run", "close-deviation", "1", "1", "--closure", "x")
    assert engineer.code == 3 and "may not close deviations" in engineer.stderr
    bare = world.as_user("qa.lin", "run", "close-deviation", "1", "1", "--closure", "x")
    assert bare.code == 3
    assert "no classification (--class minor | major | critical)" in bare.stderr
    assert "no impact assessment (--impact)" in bare.stderr
    wrong = world.as_user("qa.lin", "run", "close-deviation", "1", "1", "--closure", "x",
                          "--class", "tiny")  # fmt: skip
    assert wrong.code == 2 and "--class 'tiny' is not one of" in wrong.stderr
    closed = world.as_user("qa.lin", "run", "close-deviation", "1", "1", "--closure",
                           "buffer lot rejected; product reprocessed", "--class", "Major",
                           "--impact", "lot reprocessed; no release impact")  # fmt: skip
    world.ok(closed)
    assert "deviation 1 (major) closed by qa.lin" in closed.stdout
    world.ok(world.as_user("op.kim", "run", "submit", "1"))
    shown = world.cli("run", "show", "1", "--json").json()
    assert shown["run_1"]["status"] == "in_review"
    assert shown["deviations"][0]["closure"] == "buffer lot rejected; product reprocessed"
    world.ok(world.cli("audit", "verify"))


def test_templates_are_listed(cli: Any) -> None:
    listed = cli("run", "templates", "--json")
    assert listed.code == 0
    out = listed.json()
    assert {t["id"] for t in out["templates"]} == {"QB-MR-LNP-101", "QB-MR-UFDF-201"}


def test_import_is_idempotent_and_checks_the_plan(world: World, tmp_path: Path) -> None:
    from datetime import UTC, datetime, timedelta

    from ledger.cli.demo_log import write_log

    ready_for_a_run(world)
    world.ok(plan(world))
    world.ok(world.as_user("op.kim", "run", "start", "1"))
    world.wide_log_tolerance()
    log = write_log(tmp_path / "skid.csv", datetime.now(UTC) - timedelta(hours=2))
    first = world.ok(
        world.as_user("op.kim", "run", "import", "1", str(log), "--mapping", str(MAPPING))
    )
    assert "imported skid.csv" in first.stdout
    before = world.snapshot()
    again = world.ok(
        world.as_user("op.kim", "run", "import", "1", str(log), "--mapping", str(MAPPING))
    )
    assert "already imported" in again.stdout
    assert world.snapshot() == before
    other = tmp_path / "other.csv"
    other.write_bytes(log.read_bytes().replace(b"\n", b"\r\n"))
    refused = world.as_user("op.kim", "run", "import", "1", str(other), "--mapping", str(MAPPING))
    assert refused.code == 3 and "void it first" in refused.stderr
    checks = {
        c["name"]: c for c in world.cli("run", "checks", "1", "--json").json()["acceptance_checks"]
    }
    # The demo export has one TMP spike (24 s above 0.45 bar) and otherwise follows the plan.
    assert checks["tmp"]["verdict"] == "FAIL"
    assert "1 excursion(s), longest 24 s" in checks["tmp"]["note"]
    for name in ("feed_flow", "wall_shear", "df_volume", "first_factor", "diavolumes",
                 "final_volume", "permeate_volume", "duration_concentrate",
                 "temperature"):  # fmt: skip
        assert checks[name]["verdict"] == "PASS", checks[name]


def test_a_bad_skid_log_writes_nothing(world: World, tmp_path: Path) -> None:
    from datetime import UTC, datetime, timedelta

    from ledger.cli.demo_log import write_log

    ready_for_a_run(world)
    world.ok(plan(world))
    world.ok(world.as_user("op.kim", "run", "start", "1"))
    world.wide_log_tolerance()
    log = write_log(tmp_path / "skid.csv", datetime.now(UTC) - timedelta(hours=2))
    lines = log.read_text().splitlines()
    cells = lines[41].split(",")
    cells[5] = "n/a"  # the feed-flow column
    lines[41] = ",".join(cells)
    bad = tmp_path / "bad.csv"
    bad.write_text("\n".join(lines) + "\n")
    before = world.snapshot()
    out = world.as_user("op.kim", "run", "import", "1", str(bad), "--mapping", str(MAPPING))
    assert out.code == 2
    assert (
        f"{bad}:42:" in out.stderr
        and "'FIT-101 Feed'" in out.stderr
        and "missing-value mark" in out.stderr
    )
    assert "Traceback" not in out.stderr
    assert world.snapshot() == before


def test_qa_renames_the_deviation_classes_and_only_qa(world: World) -> None:
    shown = world.cli("run", "deviation-classes", "--json").json()
    assert shown["deviation_classes"]["classes"] == "minor, major, critical"
    before = world.snapshot()
    refused = world.as_user("eng.ray", "run", "deviation-classes", "--set", "low,high",
                            "--reason", "site SOP")  # fmt: skip
    assert refused.code == 3 and world.snapshot() == before
    bad = world.as_user("qa.lin", "run", "deviation-classes", "--set", "low,,high",
                        "--reason", "site SOP")  # fmt: skip
    assert bad.code == 2 and "an empty word" in bad.stderr and world.snapshot() == before
    world.ok(world.as_user("qa.lin", "run", "deviation-classes", "--set", "Low,High",
                           "--reason", "site SOP QA-014"))  # fmt: skip
    assert "low, high" in world.cli("run", "deviation-classes").stdout
    events = world.cli("audit", "show", "--entity", "setting", "--json").json()["events"]
    assert any(e["reason"] == "site SOP QA-014" and e["actor"] == "qa.lin" for e in events)
