"""The whole module lifecycle through the CLI (on SQLite: the database is not the subject)."""

from __future__ import annotations

import pytest

from tests.world import SAMPLES, World

# Not about the database itself: SQLite only (tests/store covers PostgreSQL).
pytestmark = pytest.mark.sqlite_only


def test_commissioning_needs_baseline_and_integrity(world: World) -> None:
    world.add_module()
    assert world.status() == "commissioning"
    out = world.ok(world.baseline())
    assert "NWP" in out.stdout and "integrity test is next" in out.stdout
    assert world.status() == "commissioning"
    out = world.ok(world.integrity())
    assert "pass" in out.stdout
    assert world.status() == "available"


def test_full_cycle_back_to_available(world: World) -> None:
    world.ready()
    fit = world.cli("fitness", "QMB-0142", "--product", "QB-117", "--json")
    assert fit.code == 0 and fit.json()["verdict"] == "FIT"
    world.ok(
        world.as_user(
            "op.kim", "use", "start", "QMB-0142", "--product", "QB-117", "--lot", "QB117-26-014"
        )
    )
    assert world.status() == "in_use"
    assert world.cli("fitness", "QMB-0142").code == 1  # in use: not fit for another run
    world.ok(world.as_user("op.kim", "use", "end", "QMB-0142"))
    assert world.status() == "awaiting_cleaning"
    world.ok(world.water("QMB-0142", "post-use", "90 mL/min"))
    world.ok(world.clean())
    assert world.status() == "cleaned"
    out = world.ok(world.water("QMB-0142", "post-clean", "165 mL/min"))
    assert "97.1 % of baseline" in out.stdout and "pass" in out.stdout  # 165/170
    assert world.status() == "available"
    shown = world.cli("module", "show", "QMB-0142", "--json").json()
    assert shown["module"]["dedicated_product"] == "QB-117"
    assert shown["module"]["cycles"] == "1 of 3"
    assert shown["module"]["last_recovery"]["value"] == pytest.approx(100 * 165 / 170)
    assert shown["module"]["baseline_nwp"]["unit"] == "L/(m^2*h*bar)"
    kinds = [row["record"].split()[0] for row in shown["history"]]
    assert kinds == ["water-test", "integrity-test", "use", "water-test", "cleaning",
                     "water-test"]  # fmt: skip


def test_low_recovery_holds_until_signed_retest(world: World) -> None:
    world.ready()
    out = world.ok(world.cycle(recovery_flow="120 mL/min"))  # 120/170 = 70.6 % < 80 %
    assert "70.6 % of baseline" in out.stdout and "fail" in out.stdout
    assert world.status() == "on_hold"
    verdict = world.cli("fitness", "QMB-0142", "--json")
    assert verdict.code == 1
    reasons = {r["check"]: r for r in verdict.json()["reasons"]}
    assert reasons["status"]["outcome"] == "fail" and "on hold" in reasons["status"]["reason"]
    assert reasons["recovery"]["outcome"] == "fail"
    # Nothing but a disposition moves it.
    refused = world.clean()
    assert refused.code == 3 and "on hold" in refused.stderr and "disposition" in refused.stderr
    # An operator cannot sign it; a manual "return" is refused for a failed check.
    assert (
        world.as_user(
            "op.kim", "module", "release", "QMB-0142", "--decision", "retest", "--reason", "x"
        ).code
        == 3
    )
    back = world.as_user(
        "eng.ray", "module", "release", "QMB-0142", "--decision", "return", "--reason", "looks fine"
    )
    assert back.code == 3 and "retest or retire" in back.stderr
    world.ok(
        world.as_user(
            "eng.ray",
            "module",
            "release",
            "QMB-0142",
            "--decision",
            "retest",
            "--reason",
            "re-clean at 45 degC",
        )
    )
    assert world.status() == "awaiting_retest"
    world.ok(world.clean())
    out = world.ok(world.water("QMB-0142", "post-clean", "160 mL/min"))
    assert "passing integrity test is needed" in out.stdout
    assert world.status() == "awaiting_retest"
    world.ok(world.integrity())
    assert world.status() == "available"


def test_integrity_failure_holds_and_retire_ends(world: World) -> None:
    world.ready()
    out = world.ok(world.integrity(end="13 psi"))  # 2 psi in 5 min = 0.4 psi/min > 0.05
    assert "FAIL" in out.stdout and "on hold" in out.stdout
    assert world.status() == "on_hold"
    world.ok(
        world.as_user(
            "qa.lin",
            "module",
            "release",
            "QMB-0142",
            "--decision",
            "retire",
            "--reason",
            "failed integrity; fiber breach suspected",
        )
    )
    assert world.status() == "retired"
    refused = world.baseline()
    assert refused.code == 3 and "retired" in refused.stderr
    refused = world.integrity()
    assert refused.code == 3 and "retired" in refused.stderr


def test_points_file_and_readings_file(world: World) -> None:
    world.add_module()
    out = world.ok(world.as_user(
        "op.kim", "test", "water", "QMB-0142", "--stage", "baseline", "--points-file",
        str(SAMPLES / "qmb0142_baseline_points.csv"),
    ))  # fmt: skip
    assert "r²" in out.stdout
    out = world.ok(world.as_user(
        "op.kim", "test", "integrity", "QMB-0142", "--readings",
        str(SAMPLES / "qmb0142_decay_readings.csv"), "--upstream-volume", "120 mL",
    ))  # fmt: skip
    assert "gas flow" in out.stdout and "pass" in out.stdout
    assert world.status() == "available"


def test_storage_and_product_dedication(world: World) -> None:
    world.ready()
    world.ok(world.cycle())
    world.ok(world.as_user("op.kim", "care", "store", "QMB-0142", "--solution", "20 % ethanol"))
    other = world.cli("fitness", "QMB-0142", "--product", "QB-205", "--json")
    assert other.code == 1
    reasons = {r["check"]: r for r in other.json()["reasons"]}
    assert reasons["product"]["outcome"] == "fail"
    assert reasons["storage"]["outcome"] == "ok" and "20 % ethanol" in reasons["storage"]["reason"]
    refused = world.as_user(
        "op.kim", "use", "start", "QMB-0142", "--product", "QB-205", "--lot", "QB205-26-001"
    )
    assert refused.code == 3 and "NOT FIT" in refused.stderr and "dedicated" in refused.stderr
    # The override is an engineer's or QA's, with a reason.
    refused = world.as_user(
        "op.kim",
        "use",
        "start",
        "QMB-0142",
        "--product",
        "QB-205",
        "--lot",
        "QB205-26-001",
        "--override-reason",
        "cleaning validated",
    )
    assert refused.code == 3
    world.ok(
        world.as_user(
            "eng.ray",
            "use",
            "start",
            "QMB-0142",
            "--product",
            "QB-205",
            "--lot",
            "QB205-26-001",
            "--override-reason",
            "carry-over study CV-26-09 covers QB-205",
        )
    )
    assert world.status() == "in_use"


def test_reuse_limit_makes_module_not_fit(world: World) -> None:
    world.ready()
    for n in range(3):  # the type's validated limit is 3 cycles
        world.ok(world.cycle(lot=f"QB117-26-0{n + 20}"))
    verdict = world.cli("fitness", "QMB-0142", "--json")
    assert verdict.code == 1
    reasons = {r["check"]: r for r in verdict.json()["reasons"]}
    assert reasons["cycles"] == {
        "check": "cycles",
        "outcome": "fail",
        "reason": "3 of 3 validated cycles used: the validated reuse limit is reached",
        "value": 3,
        "limit": 3,
    }
    refused = world.as_user(
        "op.kim", "use", "start", "QMB-0142", "--product", "QB-117", "--lot", "QB117-26-099"
    )
    assert refused.code == 3 and "validated reuse limit" in refused.stderr


def test_damage_suspicion_requires_integrity(world: World) -> None:
    world.ready()
    out = world.ok(world.cycle(recovery_flow="230 mL/min"))  # 135 % of baseline
    assert "damage suspected" in out.stdout
    assert world.status() == "cleaned"
    world.ok(world.integrity())
    assert world.status() == "available"
    verdict = world.cli("fitness", "QMB-0142", "--json").json()
    damage = next(r for r in verdict["reasons"] if r["check"] == "damage")
    assert damage["outcome"] == "alert" and "integrity test passed after it" in damage["reason"]


def test_out_of_order_actions_say_what_comes_first(world: World) -> None:
    world.add_module()
    refused = world.as_user(
        "op.kim", "use", "start", "QMB-0142", "--product", "QB-117", "--lot", "L1"
    )
    assert refused.code == 3
    assert "commissioning" in refused.stderr and "baseline water-flux test" in refused.stderr
    world.ok(world.baseline())
    world.ok(world.integrity())
    refused = world.water("QMB-0142", "post-clean", "160 mL/min")
    assert refused.code == 3 and "available" in refused.stderr
    refused = world.as_user("op.kim", "use", "end", "QMB-0142")
    assert refused.code == 3


def test_late_entry_is_flagged(world: World) -> None:
    world.add_module()
    out = world.ok(world.as_user(
        "op.kim", "test", "water", "QMB-0142", "--stage", "baseline", "--feed", "3.2 psi",
        "--retentate", "2.8 psi", "--flow", "170 mL/min", "--temperature", "20 degC",
        "--activity-time", "2026-11-30T14:05:00+01:00",
    ))  # fmt: skip
    assert "late entry" in out.stdout
    events = world.cli("audit", "show", "--entity", "water_flux_test", "--json").json()
    import json

    created = json.loads(events["events"][0]["new_value"])
    assert created["late"] is True
    assert created["activity_at"] == "2026-11-30T13:05:00.000000+00:00"


def test_void_keeps_the_record_and_drops_it_from_rules(world: World) -> None:
    world.ready()
    world.ok(world.as_user("op.kim", "care", "store", "QMB-0142", "--solution", "20 % ethanol"))
    refused = world.as_user("op.kim", "void", "storage", "1", "--reason", "wrong module")
    assert refused.code == 3  # operators do not void
    world.ok(
        world.as_user("eng.ray", "void", "storage", "1", "--reason", "entered on wrong module")
    )
    shown = world.cli("module", "show", "QMB-0142", "--json").json()
    storage = [r for r in shown["history"] if r["record"] == "storage 1"]
    assert storage and "VOID: entered on wrong module" in storage[0]["result"]
    verdict = world.cli("fitness", "QMB-0142", "--json").json()
    assert next(r for r in verdict["reasons"] if r["check"] == "storage")["outcome"] == "info"
    again = world.as_user("eng.ray", "void", "storage", "1", "--reason", "twice")
    assert again.code == 3 and "already void" in again.stderr


def test_module_and_type_listing(world: World) -> None:
    world.ready("QMB-0142")
    world.add_module("QMB-0143")
    listed = world.cli("module", "list", "--json").json()["modules"]
    assert [(m["serial"], m["status"]) for m in listed] == [
        ("QMB-0142", "available"),
        ("QMB-0143", "commissioning"),
    ]
    only = world.cli("module", "list", "--status", "commissioning", "--json").json()["modules"]
    assert [m["serial"] for m in only] == ["QMB-0143"]
    shown = world.cli("module-type", "show", "HF-750", "--json").json()
    limits = shown["site_limits"]
    assert limits["recovery_min"] == {"value": 80.0, "unit": "percent"}
    assert limits["reuse_limit"] == 3
    assert abs(limits["test_pressure"]["value"] - 15.0) < 1e-9
    assert "validated procedures" in shown["notes"][0]
