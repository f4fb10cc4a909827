"""`fluxledger calc ...` through the CLI runner: values, JSON shape, and bad input."""

from __future__ import annotations

import math
from collections.abc import Callable
from pathlib import Path
from typing import Any

import pint
import pytest

from tests.cli.conftest import Outcome
from tests.reference.test_water_reference import HANDBOOK_MPAS

Run = Callable[..., Outcome]
STOCK = pint.UnitRegistry()


def quantities(obj: Any) -> list[dict[str, Any]]:
    """Every {"value", "unit"} object inside a JSON report."""
    found: list[dict[str, Any]] = []
    if isinstance(obj, dict):
        if set(obj) == {"value", "unit"}:
            return [obj]
        for v in obj.values():
            found += quantities(v)
    elif isinstance(obj, list):
        for v in obj:
            found += quantities(v)
    return found


def ok_json(cli: Run, *args: str) -> dict[str, Any]:
    out = cli(*args, "--json")
    assert out.exception is None, out.exception
    assert out.code == 0, out.stderr
    data = out.json()
    for q in quantities(data):
        STOCK.Quantity(1.0, q["unit"])  # DEVELOPERS.md: a unit string that pint parses
        assert isinstance(q["value"], float | int)
    return data


def in_unit(q: dict[str, Any], unit: str) -> float:
    return float(STOCK.Quantity(q["value"], q["unit"]).to(unit).magnitude)


def test_viscosity(cli: Run) -> None:
    data = ok_json(cli, "calc", "viscosity", "--temperature", "25 degC")
    # DEVELOPERS.md handbook value: 0.8900 mPa·s at 25 °C.
    assert in_unit(data["results"]["viscosity"], "mPa*s") == pytest.approx(0.8900, rel=1e-3)
    assert in_unit(data["inputs"]["temperature"], "K") == pytest.approx(298.15)


def test_viscosity_human_output(cli: Run) -> None:
    out = cli("calc", "viscosity", "--temperature", "68 degF")
    assert out.code == 0
    assert "1.002 mPa·s" in out.stdout


def test_nwp_single_point(cli: Run) -> None:
    # Worked by hand: 250 mL/min, 0.1 m², TMP = (11 + 9)/2 − 0 = 10 psi at 20 °C:
    # J = 150 LMH, NWP = 150 / 0.689476 bar = 217.56 LMH/bar.
    data = ok_json(
        cli, "calc", "nwp", "--permeate-flow", "250 mL/min", "--area", "0.1 m^2",
        "--feed", "11 psi", "--retentate", "9 psi", "--permeate", "0 psi",
        "--temperature", "20 degC", "--baseline", "250 LMH/bar",
    )  # fmt: skip
    res = data["results"]
    assert in_unit(res["tmp"], "psi") == pytest.approx(10.0)
    assert in_unit(res["flux"], "L/m^2/h") == pytest.approx(150.0)
    assert in_unit(res["nwp"], "L/m^2/h/bar") == pytest.approx(217.56, rel=1e-4)
    assert in_unit(res["recovery"], "percent") == pytest.approx(217.56 / 250 * 100, rel=1e-4)


def test_nwp_temperature_correction_matches_iapws(cli: Run) -> None:
    import iapws

    data = ok_json(
        cli, "calc", "nwp", "--permeate-flow", "250 mL/min", "--area", "0.1 m^2",
        "--feed", "11 psi", "--retentate", "9 psi", "--temperature", "12 degC",
    )  # fmt: skip
    # Source: `iapws` package viscosities at 0.101325 MPa.
    ratio = iapws.IAPWS95(T=285.15, P=0.101325).mu / iapws.IAPWS95(T=293.15, P=0.101325).mu
    assert data["results"]["correction_factor"] == pytest.approx(ratio, rel=1e-3)


def test_nwp_exponential_needs_u(cli: Run) -> None:
    args = ["calc", "nwp", "--permeate-flow", "250 mL/min", "--area", "0.1 m^2", "--feed",
            "11 psi", "--retentate", "9 psi", "--temperature", "12 degC",
            "--correction", "exponential"]  # fmt: skip
    out = cli(*args)
    assert out.code == 2 and "--u-constant" in out.stderr
    data = ok_json(cli, *args, "--u-constant", "2640 K")
    assert data["inputs"]["correction"] == "exponential"


def test_nwp_points_file(cli: Run, tmp_path: Path) -> None:
    p = tmp_path / "pts.csv"
    # Points on a straight line of 200 LMH/bar at 20 °C (0.1 m² -> 1 LMH = 1.6667 mL/min).
    p.write_text(
        "permeate_flow [mL/min],tmp [bar],temperature [degC]\n"
        + "\n".join(f"{200 * t * 1000 / 600:.6f},{t},20" for t in (0.2, 0.4, 0.6, 0.8))
    )
    data = ok_json(cli, "calc", "nwp", "--area", "0.1 m^2", "--points-file", str(p))
    assert in_unit(data["results"]["nwp"], "L/m^2/h/bar") == pytest.approx(200.0, rel=1e-6)
    assert data["results"]["r_squared"] == pytest.approx(1.0)
    assert len(data["points"]) == 4


def test_shear_target(cli: Run) -> None:
    data = ok_json(
        cli, "calc", "shear", "--fibers", "120", "--lumen-id", "0.5 mm",
        "--target-shear", "4000 1/s", "--length", "30 cm",
    )  # fmt: skip
    # Worked by hand: Q = N·γ·π·D³/32 = 120 · 4000 · π · (0.5e-3)³ / 32 = 5.890e-6 m³/s.
    assert in_unit(data["results"]["feed_flow"], "m^3/s") == pytest.approx(5.890486e-6, rel=1e-6)
    assert data["results"]["laminar"] is True


def test_shear_turbulent_note(cli: Run) -> None:
    data = ok_json(cli, "calc", "shear", "--fibers", "1", "--lumen-id", "2 mm",
                   "--feed-flow", "300 mL/min")  # fmt: skip
    assert data["results"]["laminar"] is False
    assert any("2100" in n for n in data["notes"])


def test_diafiltration(cli: Run) -> None:
    data = ok_json(cli, "calc", "diafiltration", "--removal", "99.9 %", "--volume", "0.5 L")
    assert data["results"]["diavolumes"] == pytest.approx(6.9078, rel=1e-4)
    assert in_unit(data["results"]["buffer_volume"], "L") == pytest.approx(3.4539, rel=1e-4)
    back = ok_json(cli, "calc", "diafiltration", "--diavolumes", "3", "--sieving", "0.5")
    assert in_unit(back["results"]["remaining"], "") == pytest.approx(0.22313, rel=1e-4)


def test_concentration(cli: Run) -> None:
    data = ok_json(
        cli, "calc", "concentration", "--initial-volume", "2 L", "--final-volume", "250 mL",
        "--rejection", "99.5 %", "--initial-concentration", "0.1 g/L", "--area", "565 cm^2",
    )  # fmt: skip
    res = data["results"]
    assert res["factor"] == pytest.approx(8.0)
    assert res["concentration_ratio"] == pytest.approx(8**0.995)
    assert in_unit(res["yield"], "percent") == pytest.approx(100 * 8**-0.005)
    assert in_unit(res["volume_loading"], "L/m^2") == pytest.approx(2 / 0.0565)


BAD = [
    (["calc", "viscosity", "--temperature", "20"], "--temperature", "no unit"),
    (["calc", "viscosity", "--temperature", "20 psi"], "--temperature", "expected a temperature"),
    (["calc", "viscosity", "--temperature", "150 degC"], "--temperature", "273.15 K to 373.15 K"),
    (["calc", "viscosity", "--temperature", "nan degC"], "--temperature", "finite"),
    (
        ["calc", "nwp", "--area", "0.1 m^2", "--permeate-flow", "2 L/min", "--feed", "2 L/min",
         "--retentate", "1 psi", "--temperature", "20 degC"],
        "--feed", "expected a pressure",
    ),
    (
        ["calc", "nwp", "--area", "0.1 m^2", "--permeate-flow", "-2 L/min", "--feed", "2 psi",
         "--retentate", "1 psi", "--temperature", "20 degC"],
        "--permeate-flow", "negative",
    ),
    (
        ["calc", "nwp", "--area", "0.1 m^2", "--permeate-flow", "2 L/min", "--feed", "1 psi",
         "--retentate", "1 psi", "--permeate", "3 psi", "--temperature", "20 degC"],
        "--feed", "positive TMP",
    ),
    (["calc", "nwp", "--area", "0.1 m^2", "--feed", "1 psi"], "--permeate-flow", "missing"),
    (["calc", "shear", "--fibers", "10", "--lumen-id", "0.5 mm"], "--feed-flow", "exactly one"),
    (["calc", "shear", "--fibers", "0", "--lumen-id", "0.5 mm", "--feed-flow", "1 L/min"],
     "--fibers", "whole number"),
    (["calc", "shear", "--fibers", "10", "--lumen-id", "0.5 L", "--feed-flow", "1 L/min"],
     "--lumen-id", "expected a length"),
    (["calc", "diafiltration", "--removal", "100 %"], "--removal", "below 100 %"),
    (["calc", "diafiltration", "--removal", "99 %", "--sieving", "0"], "--sieving", "never"),
    (["calc", "diafiltration", "--removal", "abc"], "--removal", "not a number"),
    (["calc", "concentration", "--factor", "0.5"], "--factor", "below 1"),
    (["calc", "concentration", "--initial-volume", "1 L", "--final-volume", "2 L"],
     "--final-volume", "exceeds"),
    (["calc", "concentration", "--factor", "2", "--rejection", "150 %"], "--rejection", "0 to 1"),
]  # fmt: skip


@pytest.mark.parametrize(("args", "option", "says"), BAD)
def test_bad_input_exits_2_naming_the_option(
    cli: Run, args: list[str], option: str, says: str
) -> None:
    out = cli(*args)
    assert out.exception is None, f"traceback: {out.exception!r}"
    assert out.code == 2
    assert out.stdout == ""
    assert out.stderr.startswith("error: ")
    assert option in out.stderr
    assert says in out.stderr
    assert "Traceback" not in out.stderr


def test_points_file_errors_name_file_and_line(cli: Run, tmp_path: Path) -> None:
    p = tmp_path / "pts.csv"
    p.write_text("permeate_flow [mL/min],tmp [bar]\n10,0.2\n20,zero\n")
    out = cli("calc", "nwp", "--area", "0.1 m^2", "--temperature", "20 degC",
              "--points-file", str(p))  # fmt: skip
    assert out.code == 2
    assert f"{p}:3:" in out.stderr and "'tmp'" in out.stderr


def test_usage_errors_exit_2(cli: Run) -> None:
    out = cli("calc", "viscosity")
    assert out.code == 2
    assert "--temperature" in out.stderr


def _decay_file(tmp_path: Path, rate_psi_per_min: float) -> Path:
    p = tmp_path / "decay.csv"
    rows = [f"{t},{15.0 - rate_psi_per_min * t}" for t in range(6)]
    p.write_text("time [min],pressure [psi]\n" + "\n".join(rows) + "\n")
    return p


def test_decay_from_readings_pass_and_gas_flow(cli: Run, tmp_path: Path) -> None:
    p = _decay_file(tmp_path, 0.05)
    data = ok_json(cli, "calc", "decay", "--volume", "45 mL", "--readings-file", str(p),
                   "--limit", "0.1 psi/min")  # fmt: skip
    assert data["verdict"] == "PASS"
    assert in_unit(data["results"]["decay_rate"], "psi/min") == pytest.approx(0.05, rel=1e-9)
    # Independent: ideal gas, isothermal. Moles lost per second n' = V·dP/dt/(R·T); at
    # 1 atm that is a volume flow n'·R·T/P_atm = V·(dP/dt)/P_atm (the T cancels).
    dpdt = 0.05 * 6894.757293168 / 60
    expected = 45e-6 * dpdt / 101325.0
    assert in_unit(data["results"]["gas_flow"], "m^3/s") == pytest.approx(expected, rel=1e-9)


def test_decay_fail_exits_1(cli: Run, tmp_path: Path) -> None:
    p = _decay_file(tmp_path, 0.3)
    out = cli("calc", "decay", "--volume", "45 mL", "--readings-file", str(p),
              "--limit", "0.1 psi/min")  # fmt: skip
    assert out.code == 1
    assert "Verdict: FAIL" in out.stdout


def test_decay_gas_flow_limit_and_lrv(cli: Run) -> None:
    data = ok_json(
        cli, "calc", "decay", "--volume", "100 mL", "--rate", "0.2 psi/min",
        "--limit", "2 mL/min", "--test-pressure", "15 psi", "--operating-tmp", "5 psi",
        "--filtrate-flow", "1 L/min",
    )  # fmt: skip
    res = data["results"]
    gas = in_unit(res["gas_flow"], "m^3/s")
    # LRV = log10(Qp·ALCR/(VCF·Q_air)) (USEPA MFGM), recomputed here from the printed ALCR.
    assert res["lrv"] == pytest.approx(math.log10((1e-3 / 60) * res["alcr"] / gas), rel=1e-9)
    # By hand: 0.2 psi/min = 22.98 Pa/s; 1e-4 m³ · 22.98 / 101325 = 1.361 mL/min <= 2 mL/min.
    assert gas * 6e7 == pytest.approx(1.3610, rel=1e-4)
    assert data["verdict"] == "PASS"


def test_bubble_point_round_trip(cli: Run) -> None:
    data = ok_json(cli, "calc", "bubble-point", "--pore-size", "0.2 um")
    p = data["results"]["bubble_point"]
    # Young–Laplace by hand: 4 · 0.07274 N/m / 0.2e-6 m = 1.4547e6 Pa (γ from IAPWS 2014).
    assert in_unit(p, "Pa") == pytest.approx(1.4547e6, rel=1e-3)
    back = ok_json(cli, "calc", "bubble-point", "--pressure", f"{p['value']} {p['unit']}")
    assert in_unit(back["results"]["pore_size"], "um") == pytest.approx(0.2, rel=1e-9)


def test_optimum_against_numerical_minimization(cli: Run, tmp_path: Path) -> None:
    from scipy import optimize

    k_lmh, cg = 25.0, 30.0  # exact synthetic points on J = k·ln(Cg/C)
    p = tmp_path / "gel.csv"
    p.write_text(
        "concentration [g/L],flux [LMH]\n"
        + "\n".join(f"{c},{k_lmh * math.log(cg / c)!r}" for c in (1, 2, 4, 8, 16))
    )
    data = ok_json(cli, "calc", "optimum", "--points-file", str(p))
    # Independent: minimize t ∝ 1/(C·J(C)) numerically (scipy), not by the Cg/e formula.
    best = optimize.minimize_scalar(
        lambda c: 1 / (c * k_lmh * math.log(cg / c)),
        bounds=(0.5, cg * 0.99),
        method="bounded",
        options={"xatol": 1e-9},
    )
    opt = in_unit(data["results"]["optimum_concentration"], "g/L")
    assert opt == pytest.approx(best.x, rel=1e-5)
    assert in_unit(data["results"]["k"], "L/m^2/h") == pytest.approx(k_lmh, rel=1e-9)


def test_lifetime_against_statsmodels(cli: Run, tmp_path: Path) -> None:
    import numpy as np
    import statsmodels.api as sm

    cycles = np.arange(1, 11, dtype=float)
    rec = 100 - 1.2 * cycles + np.array([0.3, -0.2, 0.1, 0.4, -0.5, 0.2, -0.1, 0.3, -0.4, 0.1])
    p = tmp_path / "life.csv"
    p.write_text(
        "cycle,recovery [%]\n"
        + "\n".join(f"{c:g},{float(r)!r}" for c, r in zip(cycles, rec, strict=True))
    )
    data = ok_json(cli, "calc", "lifetime", "--points-file", str(p), "--limit", "80 %")
    crossing = data["results"]["bound_crossing"]
    # Source: statsmodels OLS; one-sided 95 % lower bound = lower end of a 90 % interval.
    model = sm.OLS(rec / 100, sm.add_constant(cycles)).fit()
    pred = model.get_prediction(np.array([[1.0, crossing]])).conf_int(alpha=0.10)
    assert pred[0, 0] == pytest.approx(0.80, abs=1e-6)


def test_lifetime_control_chart_signals(cli: Run, tmp_path: Path) -> None:
    p = tmp_path / "life.csv"
    values = [98, 97, 98.5, 97.5, 98, 97, 90]  # the last point falls far below the baseline
    p.write_text("cycle,recovery [%]\n" + "\n".join(f"{i + 1},{v}" for i, v in enumerate(values)))
    data = ok_json(cli, "calc", "lifetime", "--points-file", str(p), "--limit", "80 %",
                   "--baseline-cycles", "6")  # fmt: skip
    rules = {(s["rule_set"], s["rule"]) for s in data["signals"]}
    assert ("western_electric", 1) in rules and ("nelson", 1) in rules
    assert [
        s["cycles"] for s in data["signals"] if s["rule_set"] == "nelson" and s["rule"] == 1
    ] == [[7]]


BAD_MORE = [
    (["calc", "decay", "--volume", "45 mL"], "--rate", "exactly one"),
    (["calc", "decay", "--volume", "45 psi", "--rate", "0.1 psi/min"], "--volume", "volume"),
    (["calc", "decay", "--volume", "45 mL", "--rate", "0.1 psi"], "--rate", "pressure rate"),
    (["calc", "decay", "--volume", "45 mL", "--rate", "0.1 psi/min", "--limit", "3 psi"],
     "--limit", "neither"),
    (["calc", "decay", "--volume", "45 mL", "--rate", "0.1 psi/min", "--test-pressure", "15 psi"],
     "--operating-tmp", "together"),
    (["calc", "decay", "--volume", "-45 mL", "--rate", "0.1 psi/min"], "--volume", "greater"),
    (["calc", "bubble-point"], "--pore-size", "exactly one"),
    (["calc", "lifetime", "--points-file", "sample_records/qmb0142_recovery_history.csv",
      "--limit", "80"], "--limit", "no unit"),
    (["calc", "lifetime", "--points-file", "sample_records/qmb0142_recovery_history.csv",
      "--limit", "80 %", "--baseline-cycles", "1"], "--baseline-cycles", "outside"),
    (["calc", "optimum", "--points-file", "sample_records/qb117_scouting_flux.csv",
      "--product-mass", "2 g"], "--diavolumes", "together"),
    (["calc", "optimum", "--points-file", "sample_records/qb117_scouting_flux.csv",
      "--product-mass", "2 mL", "--diavolumes", "7", "--area", "1 m^2"], "--product-mass",
     "expected a mass"),
    (["calc", "bubble-point", "--pore-size", "0.2 psi"], "--pore-size", "length"),
    (["calc", "bubble-point", "--pore-size", "0.2 um", "--contact-angle", "95"],
     "--contact-angle", "contact"),
    (["calc", "lifetime", "--points-file", "nope.csv", "--limit", "80 %"], "nope.csv",
     "no such file"),
    (["calc", "optimum", "--points-file", "nope.csv"], "nope.csv", "no such file"),
]  # fmt: skip


@pytest.mark.parametrize(("args", "option", "says"), BAD_MORE)
def test_more_bad_input_exits_2(
    cli: Run, args: list[str], option: str, says: str, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.chdir(Path(__file__).resolve().parents[2])
    out = cli(*args)
    assert out.exception is None, f"traceback: {out.exception!r}"
    assert out.code == 2, out.stderr
    assert option in out.stderr and says in out.stderr
    assert out.stdout == ""


@pytest.mark.parametrize(
    ("command", "text", "says"),
    [
        ("optimum", "concentration [g/L],flux [LMH]\n1,10\n2,20\n4,30\n", "does not fall"),
        ("optimum", "concentration [g/L],flux [LMH]\n1,10\n-2,20\n", "concentration"),
        ("lifetime", "cycle,recovery [%]\n1,99\n2,98\n", "at least 3"),
        ("lifetime", "cycle,recovery\n1,99\n2,98\nx,97\n", "not a number"),
        ("decay", "time [s],pressure [psi]\n0,15\n0,14.9\n", "time"),
        ("decay", "time [s],pressure [psi]\n0,15\n", "at least 2"),
    ],
)
def test_bad_points_files_exit_2(
    cli: Run, tmp_path: Path, command: str, text: str, says: str
) -> None:
    p = tmp_path / "pts.csv"
    p.write_text(text)
    extra = {"optimum": [], "lifetime": ["--limit", "80 %"], "decay": ["--volume", "45 mL"]}
    flag = "--readings-file" if command == "decay" else "--points-file"
    out = cli("calc", command, flag, str(p), *extra[command])
    assert out.exception is None, f"traceback: {out.exception!r}"
    assert out.code == 2, out.stderr
    assert str(p) in out.stderr and says in out.stderr


def test_decay_backwards_time_names_the_file_line(cli: Run, tmp_path: Path) -> None:
    p = tmp_path / "decay.csv"
    p.write_text("# hold test\ntime [s],pressure [psi]\n0,15\n60,14.9\n30,14.8\n")
    out = cli("calc", "decay", "--volume", "45 mL", "--readings-file", str(p))
    assert out.code == 2
    assert out.stderr.startswith(f"error: {p}:5: ")


@pytest.mark.parametrize(("celsius", "mu_mpas"), HANDBOOK_MPAS)
def test_viscosity_command_against_handbook(cli: Run, celsius: float, mu_mpas: float) -> None:
    # Handbook table of water viscosity at 1 atm (sources in tests/reference), within 0.1 %.
    data = ok_json(cli, "calc", "viscosity", "--temperature", f"{celsius} degC")
    assert in_unit(data["results"]["viscosity"], "mPa*s") == pytest.approx(mu_mpas, rel=1e-3)
