"""The planning checks through the CLI: every wrong --input named at once (exit 2), a
template of another product refused (exit 3) unless --product-override-reason says why, and
`module-type add` checking --area against the fibers' inner lumen area (or computing it).
Nothing is written by a refused command; no traceback."""

from __future__ import annotations

import math

import pytest

from ledger.rules.geometry import AREA_TOLERANCE
from tests.cli.test_runs import INPUTS, plan, ready_for_a_run
from tests.world import TYPE_OPTIONS, Result, World

pytestmark = pytest.mark.sqlite_only  # the rules are the subject, not the database


def _clean(result: Result) -> None:
    assert result.exception is None
    assert "Traceback" not in result.stderr + result.stdout


def test_three_wrong_inputs_are_reported_together(world: World) -> None:
    ready_for_a_run(world)
    before = world.snapshot()
    wrong = {"initial_volume=1.2 L": "initial_volume=1.2 bar",
             "df_concentration=2 g/L": "df_concentration=two"}  # fmt: skip
    inputs = [wrong.get(a, a) for a in INPUTS]
    result = world.as_user(
        "eng.ray", "run", "plan", "QB-MR-LNP-101", "--module", "QMB-0142", "--product", "QB-117",
        "--lot", "L-1", *inputs, "--input", "volume=1 L",
    )  # fmt: skip
    assert result.code == 2, result
    _clean(result)
    err = result.stderr
    assert "3 inputs of QB-MR-LNP-101 are missing or wrong" in err
    assert "--input initial_volume: '1.2 bar'" in err
    assert "--input df_concentration: 'two'" in err
    assert "has no input 'volume'" in err
    assert world.snapshot() == before


def test_another_product_is_refused_without_a_reason(world: World) -> None:
    ready_for_a_run(world)
    before = world.snapshot()
    result = world.as_user(
        "eng.ray", "run", "plan", "QB-MR-LNP-101", "--module", "QMB-0142", "--product", "QB-204",
        "--lot", "L-1", *INPUTS,
    )  # fmt: skip
    assert result.code == 3, result
    _clean(result)
    assert "'QB-117'" in result.stderr and "'QB-204'" in result.stderr
    assert "--product-override-reason" in result.stderr
    assert world.snapshot() == before


def test_another_product_with_a_reason_is_planned_and_recorded(world: World) -> None:
    ready_for_a_run(world)
    why = "scale-down comparison of QB-204 on the LNP record"
    result = world.as_user(
        "eng.ray", "run", "plan", "QB-MR-LNP-101", "--module", "QMB-0142", "--product", "QB-204",
        "--lot", "L-1", *INPUTS, "--product-override-reason", why,
    )  # fmt: skip
    world.ok(result)
    assert why in result.stdout
    shown = world.ok(world.cli("run", "show", "1", "--json")).json()
    assert shown["run_1"]["product"] == "QB-204"
    world.ok(world.cli("audit", "verify"))


def test_a_product_reason_for_the_runs_own_product_is_refused(world: World) -> None:
    ready_for_a_run(world)
    result = plan(world, "--product-override-reason", "not needed")
    assert isinstance(result, Result) and result.code == 2
    assert "--product-override-reason" in result.stderr


# The test world's geometry: 120 fibers, 0.5 mm lumen, 30 cm (tests/world.py TYPE_OPTIONS).
LUMEN_M2 = 120 * math.pi * 0.5e-3 * 0.30


def _type(w: World, code: str, area: str | None) -> Result:
    options = list(TYPE_OPTIONS)
    at = options.index("--area")
    del options[at : at + 2]
    if area is not None:
        options += ["--area", area]
    return w.as_user("eng.ray", "module-type", "add", code, *options, "--json")


def _area(w: World, code: str) -> float:
    shown = w.ok(w.cli("module-type", "show", code, "--json")).json()
    area = shown[f"module_type_{code.lower().replace('-', '_')}"]["area"]
    assert area["unit"] == "m^2"
    return float(area["value"])


def test_without_area_the_lumen_area_is_used(world: World) -> None:
    world.ok(_type(world, "HF-NOAREA", None))
    assert _area(world, "HF-NOAREA") == pytest.approx(LUMEN_M2, rel=1e-4)


@pytest.mark.parametrize(
    ("factor", "accepted"),
    [(1 + AREA_TOLERANCE, True), (1 + AREA_TOLERANCE + 1e-4, False),
     (1 - AREA_TOLERANCE, True), (1 - AREA_TOLERANCE - 1e-4, False)],
)  # fmt: skip
def test_area_at_the_tolerance_edges(world: World, factor: float, accepted: bool) -> None:
    area = f"{LUMEN_M2 * factor:.15g} m^2"
    before = world.snapshot()
    result = _type(world, "HF-EDGE", area)
    _clean(result)
    if accepted:
        world.ok(result)
        assert _area(world, "HF-EDGE") == pytest.approx(LUMEN_M2 * factor, rel=1e-4)
    else:
        assert result.code == 2, result
        err = result.stderr
        assert err.startswith("error: --area ")
        assert "inner lumen area 0.05655 m²" in err and "120 fibers × π × 0.5 mm × 30 cm" in err
        assert "more than 15 %" in err and "differs by 15.01 %" in err
        assert world.snapshot() == before


def test_a_unit_slip_in_the_area_is_refused(world: World) -> None:
    result = _type(world, "HF-SLIP", "565 mm^2")  # meant cm²
    assert result.code == 2
    assert "differs by 99 %" in result.stderr


def test_the_help_states_the_tolerance(world: World) -> None:
    shown = world.cli("module-type", "add", "--help")
    assert f"within {AREA_TOLERANCE * 100:g} %" in " ".join(shown.stdout.split())
