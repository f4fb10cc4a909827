"""Records and their computations through the CLI: both ways of giving a flow, both integrity
methods, holds and dispositions, password prompts, --json output, concurrent writers."""

from __future__ import annotations

import json
import threading

import pytest
from typer.testing import CliRunner

from ledger.cli.main import app
from tests.world import PASSWORDS, World


@pytest.mark.sqlite_only
def test_volume_over_time_equals_the_same_flow(world: World) -> None:
    world.add_module("QMB-0142")
    world.add_module("QMB-0143")
    by_flow = world.as_user(
        "op.kim",
        "test",
        "water",
        "QMB-0142",
        "--stage",
        "baseline",
        "--feed",
        "3.2 psi",
        "--retentate",
        "2.8 psi",
        "--flow",
        "150 mL/min",
        "--temperature",
        "20 degC",
        "--json",
    )
    by_volume = world.as_user(
        "op.kim",
        "test",
        "water",
        "QMB-0143",
        "--stage",
        "baseline",
        "--feed",
        "3.2 psi",
        "--retentate",
        "2.8 psi",
        "--volume",
        "300 mL",
        "--time",
        "2 min",
        "--temperature",
        "20 degC",
        "--json",
    )
    a, b = world.ok(by_flow).json()["record"], world.ok(by_volume).json()["record"]
    assert a["nwp"]["value"] == pytest.approx(b["nwp"]["value"], rel=1e-12)
    assert b["points"][0]["volume"] == {"value": pytest.approx(0.3), "unit": "L"}
    assert a["method"].startswith("single point")
    both = world.as_user(
        "op.kim",
        "test",
        "water",
        "QMB-0142",
        "--stage",
        "baseline",
        "--feed",
        "3.2 psi",
        "--retentate",
        "2.8 psi",
        "--flow",
        "150 mL/min",
        "--volume",
        "300 mL",
        "--time",
        "2 min",
        "--temperature",
        "20 degC",
    )
    assert both.code == 3 or (both.code == 2 and "not both" in both.stderr)


@pytest.mark.sqlite_only
def test_bubble_point_pass_and_fail(world: World) -> None:
    world.add_module()
    world.ok(world.baseline())
    low = world.as_user(
        "op.kim", "test", "integrity", "QMB-0142", "--bubble-point", "35 psi", "--json"
    )
    body = world.ok(low).json()
    assert body["record"]["passed"] is False  # the type's minimum is 40 psi
    assert body["record"]["limit_value"]["unit"] == "psi"
    assert body["record"]["limit_value"]["value"] == pytest.approx(40.0)
    assert world.status() == "on_hold"


@pytest.mark.sqlite_only
def test_decay_json_reports_rate_gas_flow_and_limit(world: World) -> None:
    world.add_module()
    world.ok(world.baseline())
    out = world.ok(
        world.integrity("QMB-0142", "14.95 psi", "--upstream-volume", "120 mL", "--json")
    )
    rec = out.json()["record"]
    assert rec["decay_rate"]["unit"] == "mbar/min"
    # (15 − 14.95) psi over 5 min = 0.01 psi/min = 0.6895 mbar/min (1 psi = 68.948 mbar).
    assert rec["decay_rate"]["value"] == pytest.approx(0.01 * 68.9476, rel=1e-4)
    # Q = V·(dP/dt)/P_atm = 120 mL × 0.01 psi/min / 14.696 psi (EPA 815-R-06-009, ch. 4).
    assert rec["gas_flow"]["value"] == pytest.approx(120 * 0.01 / 14.6959, rel=1e-4)
    assert rec["passed"] is True and out.json()["status_note"].endswith("available")


@pytest.mark.sqlite_only
def test_manual_hold_returns_to_where_it_was(world: World) -> None:
    world.ready()
    world.ok(
        world.as_user(
            "op.kim",
            "module",
            "hold",
            "QMB-0142",
            "--reason",
            "housing scratched; engineer to inspect",
        )
    )
    assert world.status() == "on_hold"
    world.ok(
        world.as_user(
            "eng.ray",
            "module",
            "release",
            "QMB-0142",
            "--decision",
            "return",
            "--reason",
            "cosmetic only",
        )
    )
    assert world.status() == "available"
    events = world.cli("audit", "show", "--entity", "hold", "--json").json()["events"]
    decided = {e["field"]: json.loads(e["new_value"]) for e in events if e["field"]}
    assert decided["decision"] == "return" and decided["decided_by"] == "eng.ray"
    # The disposition's signature means its decision, not "approved" (printed "return to
    # service" by `module release`).
    assert decided["meaning"] == "return"


@pytest.mark.sqlite_only
def test_retire_from_available_and_not_while_in_use(world: World) -> None:
    world.ready()
    world.ok(
        world.as_user(
            "op.kim", "use", "start", "QMB-0142", "--product", "QB-117", "--lot", "QB117-26-014"
        )
    )
    busy = world.as_user("eng.ray", "module", "retire", "QMB-0142", "--reason", "old")
    assert busy.code == 3 and "in use" in busy.stderr
    world.ok(world.as_user("op.kim", "use", "end", "QMB-0142"))
    world.ok(world.as_user("eng.ray", "module", "retire", "QMB-0142", "--reason", "end of life"))
    assert world.status() == "retired"
    verdict = world.cli("fitness", "QMB-0142", "--json").json()
    assert verdict["verdict"] == "NOT FIT"


@pytest.mark.sqlite_only
def test_password_prompt_without_stdin_flag(world: World) -> None:
    result = CliRunner().invoke(
        app,
        ["module", "add", "QMB-0150", "--type", "HF-750", "--user", "op.kim", "--db", world.url],
        input=PASSWORDS["op.kim"] + "\n",
    )
    assert result.exit_code == 0, result.stderr
    assert "Password" in result.stdout and PASSWORDS["op.kim"] not in result.stdout


@pytest.mark.sqlite_only
def test_cleaning_output_carries_the_caustic_caution(world: World) -> None:
    world.ready()
    world.ok(
        world.as_user(
            "op.kim", "use", "start", "QMB-0142", "--product", "QB-117", "--lot", "QB117-26-014"
        )
    )
    world.ok(world.as_user("op.kim", "use", "end", "QMB-0142"))
    out = world.ok(world.clean())
    assert "caustic" in out.stdout
    shown = world.cli("module", "show", "QMB-0142", "--json").json()
    assert any("caustic" in n for n in shown["notes"])
    assert any("validated procedures" in n for n in shown["notes"])


def test_concurrent_writers_keep_one_unbroken_chain(world: World) -> None:
    """Two operators writing at once, each in their own connection: every event lands and the
    chain stays linear (SQLite takes the write lock up front; PostgreSQL locks the chain head
    row). The services are called directly: the CLI runner is not thread-safe."""
    from ledger.logbook.auth import find_user
    from ledger.logbook.care import record_storage
    from ledger.store.engine import transaction

    for serial in ("QMB-0142", "QMB-0143"):
        world.ready(serial)
    before = world.snapshot()["audit_event"]
    errors: list[BaseException] = []
    start = threading.Barrier(2)

    def store(serial: str) -> None:
        engine = world.engine()
        try:
            start.wait()
            for _ in range(5):
                with transaction(engine) as s:
                    actor = find_user(s, "op.kim")
                    assert actor is not None
                    record_storage(s, actor, serial, "20 % ethanol")
        except BaseException as exc:  # reported below
            errors.append(exc)
        finally:
            engine.dispose()

    threads = [threading.Thread(target=store, args=(s,)) for s in ("QMB-0142", "QMB-0143")]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert errors == []
    assert world.snapshot()["audit_event"] == before + 10
    assert world.cli("audit", "verify").code == 0
