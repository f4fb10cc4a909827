"""`fluxledger skid ...` through the CLI: register, instruments, mapping approval and its
versions, list and show; bad input exits 2 naming the field with nothing written; a rule's
refusal exits 3. The skid and its tags are invented."""

from __future__ import annotations

from pathlib import Path

import pytest

from tests.world import SAMPLES, World

pytestmark = pytest.mark.sqlite_only  # tests/store covers the database itself

MAPPING = SAMPLES / "qf2_skid_mapping.toml"


def _add(world: World, code: str = "TFF-SKID-2", user: str = "eng.ray") -> None:
    world.ok(world.as_user(user, "skid", "add", code, "--description", "bench TFF skid",
                           "--location", "suite B"))  # fmt: skip


def _instrument(world: World, *more: str) -> object:
    return world.as_user("eng.ray", "skid", "instrument", "TFF-SKID-2", "--tag", "PT-101",
                         "--measures", "feed_pressure", "--calibration-due", "2026-10-01",
                         *more)  # fmt: skip


def test_a_skid_is_registered_listed_and_shown(world: World) -> None:
    _add(world)
    world.ok(_instrument(world))
    world.ok(world.as_user("qa.lin", "skid", "mapping", "TFF-SKID-2", str(MAPPING)))
    rows = world.cli("skid", "list", "--json").json()["skids"]
    assert rows == [{"code": "TFF-SKID-2", "description": "bench TFF skid",
                     "location": "suite B", "instruments": 1, "mapping_version": 1}]  # fmt: skip
    shown = world.cli("skid", "show", "tff-skid-2", "--json").json()
    assert shown["skid"]["code"] == "TFF-SKID-2"
    assert shown["instruments"] == [{"tag": "PT-101", "measures": "feed_pressure",
                                     "calibration_due": "2026-10-01"}]  # fmt: skip
    [mapping] = shown["mappings"]
    assert mapping["version"] == 1 and mapping["status"] == "current"
    assert mapping["approved_by"] == "qa.lin" and mapping["approved_at"].endswith("+00:00")
    human = world.ok(world.cli("skid", "show", "TFF-SKID-2")).stdout
    assert "PT-101" in human and "feed_pressure" in human and "current" in human


def test_mapping_versions_through_the_cli(world: World, tmp_path: Path) -> None:
    _add(world)
    first = world.ok(world.as_user("eng.ray", "skid", "mapping", "TFF-SKID-2", str(MAPPING),
                                   "--json")).json()["mapping"]  # fmt: skip
    assert first["version"] == 1 and first["created"] is True
    before = world.snapshot()
    again = world.ok(world.as_user("qa.lin", "skid", "mapping", "TFF-SKID-2", str(MAPPING)))
    assert "nothing changed" in again.stdout
    assert world.snapshot() == before
    second = tmp_path / "v2.toml"
    second.write_text(MAPPING.read_text(encoding="utf-8") + "\n# version 2\n", encoding="utf-8")
    v2 = world.ok(world.as_user("qa.lin", "skid", "mapping", "TFF-SKID-2", str(second),
                                "--json")).json()["mapping"]  # fmt: skip
    assert v2["version"] == 2 and v2["sha256"] != first["sha256"]
    statuses = [m["status"] for m in world.cli("skid", "show", "TFF-SKID-2", "--json").json()
                ["mappings"]]  # fmt: skip
    assert statuses == ["current", "superseded"]


def test_an_invalid_mapping_exits_2_naming_the_key(world: World, tmp_path: Path) -> None:
    _add(world)
    bad = tmp_path / "bad.toml"
    bad.write_text(MAPPING.read_text(encoding="utf-8").replace("[channels]",
                   '[channels]\nfeed_presure = { column = "X" }', 1), encoding="utf-8")  # fmt: skip
    before = world.snapshot()
    out = world.as_user("eng.ray", "skid", "mapping", "TFF-SKID-2", str(bad))
    assert out.code == 2 and out.exception is None
    assert "channels.feed_presure" in out.stderr and "bad.toml" in out.stderr
    assert world.snapshot() == before


@pytest.mark.parametrize(
    "code", ["TFF SKID", "TFF-\x1b[31mSKID", "TFF-\u200bSKID", "x" * 500],
    ids=["space", "escape", "zero-width", "huge"],
)  # fmt: skip
def test_hostile_codes_exit_2_and_write_nothing(world: World, code: str) -> None:
    before = world.snapshot()
    out = world.as_user("eng.ray", "skid", "add", code, "--description", "bench skid")
    assert out.code == 2 and out.exception is None
    assert "code" in out.stderr and "\x1b" not in out.stderr
    assert world.snapshot() == before


def test_bad_instrument_fields_exit_2(world: World) -> None:
    _add(world)
    before = world.snapshot()
    out = world.as_user("eng.ray", "skid", "instrument", "TFF-SKID-2", "--tag", "PT-101",
                        "--measures", "pressure", "--calibration-due", "2026-10-01")  # fmt: skip
    assert out.code == 2 and "--measures" in out.stderr and "feed_pressure" in out.stderr
    out = world.as_user("eng.ray", "skid", "instrument", "TFF-SKID-2", "--tag", "PT-101",
                        "--measures", "feed_pressure", "--calibration-due", "1 Oct")  # fmt: skip
    assert out.code == 2 and "--calibration-due" in out.stderr and out.exception is None
    assert world.snapshot() == before


def test_replacing_an_instrument_needs_a_reason(world: World) -> None:
    _add(world)
    world.ok(_instrument(world))
    later = ["skid", "instrument", "TFF-SKID-2", "--tag", "pt-101", "--measures",
             "feed_pressure", "--calibration-due", "2027-10-01"]  # fmt: skip
    out = world.as_user("eng.ray", *later)
    assert out.code == 2 and "--reason" in out.stderr
    done = world.ok(world.as_user("eng.ray", *later, "--reason", "recalibrated", "--json")).json()
    assert done["replaced"] == [{"tag": "PT-101", "measures": "feed_pressure",
                                 "calibration_due": "2026-10-01"}]  # fmt: skip
    assert done["instrument"][0]["calibration_due"] == "2027-10-01"
    trail = world.cli("audit", "show", "--json").json()
    assert any(e["action"] == "void" and e["reason"] == "recalibrated"
               for e in trail["events"])  # fmt: skip


def test_an_operator_is_refused_with_exit_3(world: World) -> None:
    out = world.as_user("op.kim", "skid", "add", "TFF-SKID-2", "--description", "bench skid")
    assert out.code == 3 and out.exception is None


def test_an_unknown_skid_exits_2(world: World) -> None:
    out = world.cli("skid", "show", "TFF-SKID-9")
    assert out.code == 2 and "TFF-SKID-9" in out.stderr and out.exception is None
