"""Diffusion and water-intrusion integrity tests through the CLI: a module type's flow limits,
`test integrity --method diffusion|water-intrusion` from a measured flow or a pressure decay,
the verdict, the hold on a failure, and refusals that write nothing.

The limits below (12 mL/min and 0.30 mL/min at 2.5 bar) are invented demo values, not any
product's.
"""

from __future__ import annotations

import pytest

from tests.world import TYPE_OPTIONS, Result, World

pytestmark = pytest.mark.sqlite_only

# TYPE_OPTIONS name HF-750's bubble point; a flow-limited type states its own test pressures.
FLOW_LIMITS = [
    "--diffusion-max-flow", "12 mL/min", "--diffusion-test-pressure", "2.5 bar",
    "--intrusion-max-flow", "0.30 mL/min", "--intrusion-test-pressure", "2.5 bar",
]  # fmt: skip
ATM_BAR = 1.01325  # standard atmosphere, 101325 Pa (ISO 2533), in bar


def _flow_type(world: World, serial: str = "QMB-0900") -> None:
    """A module type with both flow limits, and a module of it with its baseline done."""
    world.ok(world.as_user("eng.ray", "module-type", "add", "HF-750-F", *TYPE_OPTIONS,
                           *FLOW_LIMITS))  # fmt: skip
    world.ok(world.as_user("op.kim", "module", "add", serial, "--type", "HF-750-F"))
    world.ok(world.baseline(serial))


def _flow(world: World, serial: str, method: str, *more: str) -> Result:
    return world.as_user("op.kim", "test", "integrity", serial, "--method", method, *more)


def test_the_type_shows_its_flow_limits_as_typed(world: World) -> None:
    _flow_type(world)
    shown = world.ok(world.cli("module-type", "show", "HF-750-F", "--json")).json()
    limits = shown["site_limits"]
    assert limits["diffusion_max_flow"]["entered"] == "12 mL/min"
    assert limits["diffusion_test_pressure"]["entered"] == "2.5 bar"
    assert limits["intrusion_max_flow"]["value"] == pytest.approx(0.30)
    assert limits["intrusion_max_flow"]["unit"] == "mL/min"


def test_measured_diffusion_flow_passes_and_reports_flow_limit_and_pressure(
    world: World,
) -> None:
    _flow_type(world)
    out = world.ok(_flow(world, "QMB-0900", "diffusion", "--flow", "8 mL/min",
                         "--test-pressure", "2.5 bar"))  # fmt: skip
    # As typed, with the SI value beside (the house style of a typed quantity).
    assert "(diffusion): 8 mL/min (1.33333e-07 m³/s) at 2.5 bar (250000 Pa)" in out.stdout
    assert "limit 12.00 mL/min — pass" in out.stdout
    assert world.status("QMB-0900") == "available"


def test_json_carries_flow_limit_pressure_and_verdict(world: World) -> None:
    _flow_type(world)
    body = world.ok(_flow(world, "QMB-0900", "water-intrusion", "--flow", "0.5 mL/min",
                          "--test-pressure", "2.5 bar", "--json")).json()  # fmt: skip
    rec = body["record"]
    assert rec["kind"] == "water_intrusion"
    assert rec["intrusion_flow"] == {"value": pytest.approx(0.5), "unit": "mL/min",
                                     "entered": "0.5 mL/min"}  # fmt: skip
    assert rec["limit_value"] == {"value": pytest.approx(0.30), "unit": "mL/min"}
    assert rec["test_pressure"]["value"] == pytest.approx(2.5)
    assert rec["passed"] is False  # 0.5 > 0.30 mL/min
    assert body["status_note"].endswith("on hold")


def test_diffusion_from_decay_is_the_epa_conversion(world: World) -> None:
    _flow_type(world)
    out = world.ok(_flow(world, "QMB-0900", "diffusion", "--start", "2.5 bar", "--end",
                         "2.45 bar", "--hold-time", "5 min", "--upstream-volume", "120 mL",
                         "--json"))  # fmt: skip
    rec = out.json()["record"]
    # EPA 815-R-06-009 (Membrane Filtration Guidance Manual, 2005), ch. 4: Q = V·(dP/dt)/P_atm.
    # By hand: 120 mL × (0.05 bar / 5 min) / 1.01325 bar = 1.18431 mL/min.
    assert rec["gas_flow"]["unit"] == "mL/min"
    assert rec["gas_flow"]["value"] == pytest.approx(120 * (0.05 / 5) / ATM_BAR, rel=1e-9)
    assert rec["passed"] is True and "EPA 815-R-06-009" in rec["method"]
    assert world.status("QMB-0900") == "available"


def test_intrusion_from_decay_is_boyles_law(world: World) -> None:
    _flow_type(world)
    out = world.ok(_flow(world, "QMB-0900", "water-intrusion", "--start", "2.5 bar", "--end",
                         "2.495 bar", "--hold-time", "10 min", "--upstream-volume", "500 mL",
                         "--json"))  # fmt: skip
    rec = out.json()["record"]
    # Boyle's law (p·V constant at constant temperature): the gas volume grows by
    # V·(dP/dt)/p_abs, p_abs = 2.5 bar gauge + 1.01325 bar. By hand: 500 mL × 0.0005 bar/min
    # / 3.51325 bar = 0.0711592 mL/min.
    assert rec["intrusion_flow"]["value"] == pytest.approx(
        500 * (0.005 / 10) / (2.5 + ATM_BAR), rel=1e-9
    )
    assert rec["passed"] is True


def test_failed_diffusion_holds_the_module_like_a_failed_decay(world: World) -> None:
    _flow_type(world)
    out = world.ok(_flow(world, "QMB-0900", "diffusion", "--flow", "15 mL/min",
                         "--test-pressure", "2.5 bar"))  # fmt: skip
    assert "FAIL" in out.stdout and "on hold" in out.stdout
    assert world.status("QMB-0900") == "on_hold"
    history = world.cli("module", "show", "QMB-0900", "--json").json()["history"]
    tested = next(r for r in history if r["record"].startswith("integrity-test"))
    assert (tested["what"], tested["result"]) == ("diffusion", "FAIL")
    assert tested["value"]["entered"] == "15 mL/min"
    assert [r["record"].split()[0] for r in history][-1] == "hold"
    refused = world.clean("QMB-0900")
    assert refused.code == 3 and "on hold" in refused.stderr


def test_a_type_without_the_limit_is_exit_2_naming_it(world: World) -> None:
    world.add_module()  # HF-750: no flow limits
    world.ok(world.baseline())
    before = world.snapshot()
    out = _flow(world, "QMB-0142", "water-intrusion", "--flow", "0.1 mL/min",
                "--test-pressure", "2.5 bar")  # fmt: skip
    assert out.code == 2 and "intrusion_max_flow" in out.stderr and "HF-750" in out.stderr
    assert "Traceback" not in out.stderr
    assert world.snapshot() == before


@pytest.mark.parametrize(
    ("options", "named"),
    [
        (["--flow", "8 psi", "--test-pressure", "2.5 bar"], "--flow"),
        (["--flow", "8 mL/min", "--test-pressure", "2.5 mL"], "--test-pressure"),
        (["--flow", "8 mL/min"], "--test-pressure"),
        (["--flow", "8 mL/min", "--test-pressure", "2.0 bar"], "2.5 bar"),  # not the limit's
        (["--start", "2.5 bar", "--end", "2.45 bar", "--hold-time", "5 min"], "--upstream-volume"),
        (["--flow", "8 mL/min", "--test-pressure", "2.5 bar", "--start", "2.5 bar"], "--start"),
        (["--flow", "8 mL/min", "--test-pressure", "2.5 bar", "--bubble-point", "3 bar"],
         "--bubble-point"),
    ],
)  # fmt: skip
def test_bad_flow_entries_are_exit_2_and_write_nothing(
    world: World, options: list[str], named: str
) -> None:
    _flow_type(world)
    before = world.snapshot()
    out = _flow(world, "QMB-0900", "diffusion", *options)
    assert out.code == 2, (out.stdout, out.stderr)
    assert named in out.stderr and "Traceback" not in out.stderr
    assert world.snapshot() == before


def test_unknown_method_and_flow_without_a_flow_method_are_refused(world: World) -> None:
    _flow_type(world)
    before = world.snapshot()
    out = _flow(world, "QMB-0900", "forward-flux", "--flow", "8 mL/min")
    assert out.code == 2 and "--method" in out.stderr and "water-intrusion" in out.stderr
    out = world.as_user("op.kim", "test", "integrity", "QMB-0900", "--flow", "8 mL/min")
    assert out.code == 2 and "--flow" in out.stderr
    assert world.snapshot() == before


@pytest.mark.parametrize(
    "options",
    [["--diffusion-max-flow", "12 bar", "--diffusion-test-pressure", "2.5 bar"],
     ["--diffusion-max-flow", "12 mL/min"],
     ["--intrusion-test-pressure", "2.5 bar"],
     ["--intrusion-max-flow", "-1 mL/min", "--intrusion-test-pressure", "2.5 bar"]],
)  # fmt: skip
def test_bad_type_limits_are_exit_2_and_write_nothing(world: World, options: list[str]) -> None:
    before = world.snapshot()
    out = world.as_user("eng.ray", "module-type", "add", "HF-750-X", *TYPE_OPTIONS, *options)
    assert out.code == 2, (out.stdout, out.stderr)
    assert "diffusion" in out.stderr or "intrusion" in out.stderr
    assert "Traceback" not in out.stderr
    assert world.snapshot() == before


def test_existing_decay_and_bubble_point_are_unchanged_by_method(world: World) -> None:
    world.add_module()
    world.ok(world.baseline())
    out = world.ok(world.integrity("QMB-0142", "14.95 psi", "--method", "pressure-decay"))
    assert "(pressure decay)" in out.stdout and "pass" in out.stdout
    refused = world.as_user("op.kim", "test", "integrity", "QMB-0142", "--method",
                            "bubble-point")  # fmt: skip
    assert refused.code == 2 and "--bubble-point" in refused.stderr
