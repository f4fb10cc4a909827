"""Cleaning procedures through the CLI: defining one, checking a cleaning against it, and the
hold that a cleaning outside its ranges puts on the module. The ranges are invented."""

from __future__ import annotations

from collections.abc import Iterator
from pathlib import Path

import pytest

from tests.world import PROCEDURE, World, Worlds

# Not about the database itself: SQLite only (tests/store covers PostgreSQL).
pytestmark = pytest.mark.sqlite_only


def _used(world: World, _folder: Path) -> None:
    """A module after one use, awaiting cleaning, with the procedure defined."""
    world.ok(world.as_user("eng.ray", *PROCEDURE))
    world.ready()
    world.ok(
        world.as_user(
            "op.kim", "use", "start", "QMB-0142", "--product", "QB-117", "--lot", "QB117-26-014"
        )
    )
    world.ok(world.as_user("op.kim", "use", "end", "QMB-0142"))


@pytest.fixture
def used(backend: str, worlds: Worlds, tmp_path: Path) -> Iterator[World]:
    """A copy of the state ``_used`` leaves, built once per worker."""
    with worlds.copy(backend, tmp_path, _used) as w:
        yield w


def test_procedures_are_listed_with_their_ranges(used: World) -> None:
    rows = used.cli("care", "procedure", "list", "--json").json()["procedures"]
    assert [r["code"] for r in rows] == ["CP-NAOH-05"]
    assert rows[0]["concentration"] == "0.45 mol/L (450 mol/m³) – 0.55 mol/L (550 mol/m³)"
    # JSON keeps the value and adds the text as typed (issue 14 item 3)
    assert rows[0]["contact_time_min"] == {"value": 60.0, "unit": "min", "entered": "60 min"}


def test_a_conforming_cleaning_leaves_the_module_cleaned(used: World) -> None:
    out = used.ok(used.clean("QMB-0142", "--procedure", "CP-NAOH-05", "--json"))
    assert out.json()["record"]["deviations"] == []
    assert used.status() == "cleaned"
    verdict = used.cli("fitness", "QMB-0142", "--json").json()
    cleaning = next(r for r in verdict["reasons"] if r["check"] == "cleaning")
    assert cleaning["outcome"] == "ok" and "CP-NAOH-05" in cleaning["reason"]


def test_a_cleaning_outside_its_procedure_holds_the_module(used: World) -> None:
    out = used.as_user(
        "op.kim", "care", "clean", "QMB-0142", "--agent", "sodium hydroxide",
        "--concentration", "0.5 mol/L", "--temperature", "25 degC", "--contact-time", "40 min",
        "--reagent-lot", "NX-2611-03", "--rinse-ph", "7.0", "--rinse-conductivity", "1.2 uS/cm",
        "--procedure", "CP-NAOH-05",
    )  # fmt: skip
    used.ok(out)
    assert "contact time 40 min is shorter than the procedure's 60 min" in out.stdout
    assert used.status() == "on_hold"
    back = used.as_user(
        "eng.ray",
        "module",
        "release",
        "QMB-0142",
        "--decision",
        "return",
        "--reason",
        "close enough",
    )
    assert back.code == 3 and "retest or retire" in back.stderr
    used.ok(
        used.as_user(
            "qa.lin",
            "module",
            "release",
            "QMB-0142",
            "--decision",
            "retest",
            "--reason",
            "repeat the cleaning per CP-NAOH-05",
        )
    )
    used.ok(used.clean("QMB-0142", "--procedure", "CP-NAOH-05"))
    used.ok(used.water("QMB-0142", "post-clean", "165 mL/min"))
    used.ok(used.integrity())
    assert used.status() == "available"


@pytest.mark.parametrize(
    ("args", "message"),
    [(["--procedure", "CP-NONE"], "no cleaning procedure 'CP-NONE'"),
     (["--procedure", "CP-NAOH-05", "--concentration", "2 %"], None)],
)  # fmt: skip
def test_unknown_procedure_or_other_unit_kind(used: World, args: list[str],
                                              message: str | None) -> None:  # fmt: skip
    before = used.snapshot()
    out = used.clean("QMB-0142", *args)
    if message is None:  # a percentage against a molar procedure: recorded, as a departure
        used.ok(out)
        assert "not given in the procedure's kind of unit (mol/L)" in out.stdout
        assert used.status() == "on_hold"
        return
    assert out.code == 2 and message in out.stderr
    assert used.snapshot() == before


@pytest.mark.parametrize(
    ("change", "message"),
    [(["--concentration-max", "0.4 mol/L"], "the concentration range is reversed"),
     (["--concentration-max", "30 g/L"], "different kinds of concentration"),
     (["--temperature-max", "120 degC"], "out of range"),
     (["--rinse-ph-max", "15"], "pH 15 is out of range"),
     (["--contact-time-min", "0 min"], "the minimum contact time must be positive")],
)  # fmt: skip
def test_bad_procedures_are_refused_and_write_nothing(
    world: World, change: list[str], message: str
) -> None:
    args = list(PROCEDURE)
    flag = change[0]
    args[args.index(flag) + 1] = change[1]
    before = world.snapshot()
    out = world.as_user("eng.ray", *args)
    assert out.code == 2 and message in out.stderr, out.stderr
    assert world.snapshot() == before


def test_operators_do_not_define_procedures(world: World) -> None:
    out = world.as_user("op.kim", *PROCEDURE)
    assert out.code == 3 and "may not define cleaning procedures" in out.stderr
