"""The calculator entries: typed fields in, SI values out; bad input names its field.

Unit factors (exact by definition unless a digit count is given), from NIST SP 811 (2008),
Appendix B: 1 psi = 6894.757293168 Pa (lbf = 0.45359237 kg x 9.80665 m/s^2 over a square inch
of 0.0254 m), 1 atm = 101325 Pa, 1 bar = 1e5 Pa, 1 L = 1e-3 m^3, 1 US gallon =
3.785411784e-3 m^3, 1 ft = 0.3048 m, 1 in = 0.0254 m, 1 lb = 0.45359237 kg, 1 dyn = 1e-5 N,
T/K = t/degC + 273.15 and T/K = (t/degF + 459.67)/1.8 (SP 811 4.2.1.1 and B.8).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from pathlib import Path

import pytest

from ledger.entries import calc, calc_integrity
from ledger.errors import InputError

PSI = 6894.757293168  # Pa, NIST SP 811
GALLON = 3.785411784e-3  # m^3, US liquid gallon, NIST SP 811
FOOT = 0.3048  # m, NIST SP 811
INCH = 0.0254  # m, NIST SP 811
POUND = 0.45359237  # kg, avoirdupois pound, NIST SP 811
DAY = 86400.0  # s


def field_of(parse: Callable[[dict[str, object]], object], raw: dict[str, object]) -> str | None:
    """The field named by the InputError that ``parse(raw)`` raises."""
    with pytest.raises(InputError) as err:
        parse(raw)
    return err.value.field


# calc viscosity -------------------------------------------------------------------------------


def test_viscosity_temperature_in_kelvin() -> None:
    # 68 degF: (68 + 459.67)/1.8 = 293.15 K (NIST SP 811 B.8).
    assert calc.viscosity({"temperature": "68 degF"}).temperature == pytest.approx(293.15)


@pytest.mark.parametrize("text", ["20", "20 psi", "nan degC", None])
def test_viscosity_refuses(text: str | None) -> None:
    assert field_of(calc.viscosity, {"temperature": text}) == "temperature"


# calc shear -----------------------------------------------------------------------------------


def test_shear_in_si() -> None:
    e = calc.shear(
        {"fibers": "120", "lumen_id": "0.02 in", "feed_flow": "0.5 gal/min", "length": "1 ft"}
    )
    assert e.fibers == 120 and isinstance(e.fibers, int)
    assert e.lumen_id == pytest.approx(0.02 * INCH, rel=1e-12)
    assert e.feed_flow == pytest.approx(0.5 * GALLON / 60, rel=1e-12)
    assert e.length == pytest.approx(FOOT, rel=1e-12)
    assert e.target_shear is None
    assert e.temperature == pytest.approx(293.15)  # the default, 20 degC


def test_shear_blank_field_takes_the_default() -> None:
    # A web form sends an empty text for a field left out.
    e = calc.shear({"fibers": 10, "lumen_id": "1 mm", "target_shear": "4000 1/s",
                    "temperature": " "})  # fmt: skip
    assert e.temperature == pytest.approx(293.15)
    assert e.target_shear == 4000.0 and e.feed_flow is None


@pytest.mark.parametrize(
    ("raw", "field"),
    [
        ({}, "feed_flow"),  # neither
        ({"feed_flow": "1 L/min", "target_shear": "4000 1/s"}, "feed_flow"),  # both
        ({"feed_flow": "1 L/min", "length": "nan"}, "length"),
        ({"feed_flow": "1 L/min", "fibers": "1.5"}, "fibers"),
        ({"feed_flow": "1 L/min", "lumen_id": "-1 mm"}, "lumen_id"),
        ({"feed_flow": "1 L/min", "lumen_id": "0.5 L"}, "lumen_id"),
        ({"feed_flow": "2 psi"}, "feed_flow"),
    ],
)
def test_shear_refuses(raw: dict[str, object], field: str) -> None:
    assert field_of(calc.shear, {"fibers": "10", "lumen_id": "0.5 mm", **raw}) == field


# calc diafiltration ---------------------------------------------------------------------------


def test_diafiltration_in_si() -> None:
    e = calc.diafiltration({"removal": "99.9 %", "volume": "500 mL", "dilution_factor": "2"})
    assert e.removal == pytest.approx(0.999)
    assert e.diavolumes is None
    assert e.sieving == 1.0  # the default: the species passes freely
    assert e.volume == pytest.approx(500e-6)
    assert e.dilution_factor == 2.0


def test_diafiltration_diavolumes_and_bare_sieving() -> None:
    e = calc.diafiltration({"diavolumes": "3", "sieving": "0.5"})
    assert (e.diavolumes, e.sieving, e.removal) == (3.0, 0.5, None)


@pytest.mark.parametrize(
    ("raw", "field"),
    [
        ({}, "removal"),
        ({"removal": "99 %", "diavolumes": "3"}, "removal"),
        ({"diavolumes": "nan"}, "diavolumes"),
        ({"diavolumes": "3 L"}, "diavolumes"),  # a bare number takes no unit
        ({"removal": "abc"}, "removal"),
        ({"removal": "99 %", "dilution_factor": "inf"}, "dilution_factor"),
        ({"removal": "99 %", "volume": "2 psi"}, "volume"),
    ],
)
def test_diafiltration_refuses(raw: dict[str, object], field: str) -> None:
    assert field_of(calc.diafiltration, raw) == field


# calc concentration ---------------------------------------------------------------------------


def test_concentration_in_si() -> None:
    e = calc.concentration(
        {"factor": "4", "initial_volume": "1 gal", "rejection": "99.5 %",
         "initial_concentration": "0.5 mg/mL", "area": "1 ft^2"}
    )  # fmt: skip
    assert e.factor == 4.0
    assert e.initial_volume == pytest.approx(GALLON, rel=1e-12)
    assert e.final_volume is None
    assert e.rejection == pytest.approx(0.995)
    assert e.initial_concentration == pytest.approx(0.5)  # 1 mg/mL = 1 kg/m^3
    assert e.area == pytest.approx(FOOT**2, rel=1e-12)


def test_concentration_from_two_volumes() -> None:
    e = calc.concentration({"initial_volume": "2 L", "final_volume": "250 mL"})
    assert e.factor is None
    assert (e.initial_volume, e.final_volume) == pytest.approx((2e-3, 250e-6))
    assert e.rejection == 1.0  # the default: fully retained


@pytest.mark.parametrize(
    ("raw", "field"),
    [
        ({}, "factor"),
        ({"initial_volume": "1 L"}, "final_volume"),
        ({"final_volume": "1 L"}, "initial_volume"),
        ({"factor": "2", "initial_volume": "1 L", "final_volume": "0.5 L"}, "factor"),
        ({"factor": "inf"}, "factor"),
        ({"factor": "2", "area": "1 L"}, "area"),
        ({"factor": "2", "initial_concentration": "0 g/L"}, "initial_concentration"),
    ],
)
def test_concentration_refuses(raw: dict[str, object], field: str) -> None:
    assert field_of(calc.concentration, raw) == field


# calc optimum ---------------------------------------------------------------------------------


def _gel_file(tmp_path: Path) -> Path:
    p = tmp_path / "gel.csv"
    p.write_text("# scouting\nconcentration [mg/mL],flux [GFD]\n1,40\n4,20\n")
    return p


def test_optimum_reads_points_in_si(tmp_path: Path) -> None:
    e = calc.optimum(
        {"points_file": _gel_file(tmp_path), "product_mass": "0.05 lb", "diavolumes": "7",
         "area": "0.5 m^2", "at_concentration": "5 g/L"}
    )  # fmt: skip
    assert e.points.lines == [3, 4]
    assert e.points.columns["concentration"] == pytest.approx([1.0, 4.0])  # mg/mL = kg/m^3
    gfd = GALLON / (FOOT**2 * DAY)  # 1 gal/(ft^2 day) in m/s
    assert e.points.columns["flux"] == pytest.approx([40 * gfd, 20 * gfd], rel=1e-12)
    assert e.product_mass == pytest.approx(0.05 * POUND, rel=1e-12)
    assert (e.diavolumes, e.area) == (7.0, 0.5)
    assert e.at_concentration == pytest.approx(5.0)  # 1 g/L = 1 kg/m^3


@pytest.mark.parametrize(
    ("raw", "field"),
    [
        ({"product_mass": "2 g"}, "diavolumes"),
        ({"diavolumes": "7", "area": "1 m^2"}, "product_mass"),
        ({"product_mass": "2 mL", "diavolumes": "7", "area": "1 m^2"}, "product_mass"),
        ({"at_concentration": "nan g/L"}, "at_concentration"),  # refused though unused
        ({"points_file": None}, "points_file"),
    ],
)
def test_optimum_refuses(tmp_path: Path, raw: dict[str, object], field: str) -> None:
    assert field_of(calc.optimum, {"points_file": _gel_file(tmp_path), **raw}) == field


def test_optimum_missing_file_names_it(tmp_path: Path) -> None:
    with pytest.raises(InputError, match="no such file") as err:
        calc.optimum({"points_file": str(tmp_path / "nope.csv")})
    assert "nope.csv" in str(err.value)


# calc lifetime --------------------------------------------------------------------------------


def _life_file(tmp_path: Path) -> Path:
    p = tmp_path / "life.csv"
    p.write_text("cycle,recovery [%]\n1,99\n2,97.5\n3,96\n4,95\n5,93.5\n")
    return p


def test_lifetime_in_si(tmp_path: Path) -> None:
    e = calc.lifetime({"points_file": _life_file(tmp_path), "limit": "80 %",
                       "baseline_cycles": "3"})  # fmt: skip
    assert e.limit == pytest.approx(0.80)
    assert e.model == "linear"  # the default
    assert e.baseline_cycles == 3
    assert e.points.columns["cycle"] == [1.0, 2.0, 3.0, 4.0, 5.0]
    assert e.points.columns["recovery"] == pytest.approx([0.99, 0.975, 0.96, 0.95, 0.935])


@pytest.mark.parametrize(
    ("raw", "field"),
    [
        ({"limit": "80"}, "limit"),  # a recovery limit needs its % sign
        ({"limit": "0 %"}, "limit"),
        ({"limit": None}, "limit"),
        ({"model": "quadratic"}, "model"),
        ({"baseline_cycles": "1"}, "baseline_cycles"),
        ({"baseline_cycles": "6"}, "baseline_cycles"),  # the file has 5 points
        ({"baseline_cycles": "2.5"}, "baseline_cycles"),
    ],
)
def test_lifetime_refuses(tmp_path: Path, raw: dict[str, object], field: str) -> None:
    base: dict[str, object] = {"points_file": _life_file(tmp_path), "limit": "80 %"}
    assert field_of(calc.lifetime, {**base, **raw}) == field


# calc decay -----------------------------------------------------------------------------------


def _readings(tmp_path: Path) -> Path:
    p = tmp_path / "decay.csv"
    p.write_text("time [min],pressure [psi]\n0,15\n5,14.75\n")
    return p


def test_decay_rate_and_gas_flow_limit_in_si() -> None:
    e = calc_integrity.decay({"volume": "45 mL", "rate": "0.05 psi/min", "limit": "2 mL/min"})
    assert e.volume == pytest.approx(45e-6)
    assert e.rate == pytest.approx(0.05 * PSI / 60, rel=1e-12)
    assert e.rate_unit == "psi/min"  # shown as typed
    assert e.limit == pytest.approx(2e-6 / 60)  # 1 mL = 1e-6 m^3
    assert (e.limit_kind, e.limit_unit) == ("gas_flow", "mL/min")
    assert e.atmosphere == 101325.0  # the default, 1 atm
    assert e.vcf == 1.0 and e.alcr is None and e.readings is None
    assert e.temperature == pytest.approx(293.15)


def test_decay_readings_with_a_rate_limit(tmp_path: Path) -> None:
    e = calc_integrity.decay(
        {"volume": "0.1 L", "readings_file": _readings(tmp_path), "limit": "0.1 psi/min",
         "atmosphere": "1013 mbar", "test_pressure": "15 psi", "operating_tmp": "5 psi",
         "filtrate_flow": "1 L/min", "vcf": "2"}
    )  # fmt: skip
    assert e.rate is None and e.readings is not None
    assert e.readings.columns["time"] == [0.0, 300.0]
    assert e.readings.columns["pressure"] == pytest.approx([15 * PSI, 14.75 * PSI], rel=1e-12)
    assert e.limit == pytest.approx(0.1 * PSI / 60, rel=1e-12)
    assert e.limit_kind == "pressure_rate"
    assert e.rate_unit == "psi/min"  # no --rate: the limit's unit
    assert e.atmosphere == pytest.approx(101300.0)
    assert e.alcr is not None
    assert e.alcr.test_pressure == pytest.approx(15 * PSI, rel=1e-12)
    assert e.alcr.operating_tmp == pytest.approx(5 * PSI, rel=1e-12)
    assert e.alcr.back_pressure == 0.0  # the default
    assert e.filtrate_flow == pytest.approx(1e-3 / 60)
    assert e.vcf == 2.0


def test_decay_rate_unit_defaults_to_mbar_per_min(tmp_path: Path) -> None:
    e = calc_integrity.decay({"volume": "45 mL", "readings_file": str(_readings(tmp_path)),
                              "limit": "3 mL/min"})  # fmt: skip
    assert e.rate_unit == "mbar/min"


@pytest.mark.parametrize(
    ("raw", "field", "says"),
    [
        ({}, "rate", "exactly one"),
        ({"readings_file": "x.csv", "rate": "0.1 psi/min"}, "rate", "exactly one"),
        ({"limit": "3 psi"}, "limit", "neither"),
        ({"limit": "nan psi/min"}, "limit", "neither"),
        ({"test_pressure": "15 psi"}, "operating_tmp", "together"),
        ({"operating_tmp": "5 psi"}, "test_pressure", "together"),
        # refused though no LRV is computed
        ({"vcf": "nan"}, "vcf", "finite"),
        ({"filtrate_flow": "abc"}, "filtrate_flow", "not a number"),
        ({"temperature": "nan degC"}, "temperature", "finite"),
        ({"volume": "-45 mL"}, "volume", "greater than zero"),
        ({"volume": None}, "volume", "needs --volume"),
        ({"atmosphere": "0 bar"}, "atmosphere", "greater than zero"),
        ({"rate": "0.1 psi"}, "rate", "pressure rate"),
    ],
)
def test_decay_refuses(raw: dict[str, object], field: str, says: str) -> None:
    base: dict[str, object] = {"volume": "45 mL"}
    if "readings_file" not in raw and field != "rate":
        base["rate"] = "0.1 psi/min"
    with pytest.raises(InputError) as err:
        calc_integrity.decay({**base, **raw})
    assert err.value.field == field
    assert says in str(err.value)


def test_decay_error_messages_name_the_option() -> None:
    with pytest.raises(InputError, match=r"^--vcf: 'nan'"):
        calc_integrity.decay({"volume": "45 mL", "rate": "0.1 psi/min", "vcf": "nan"})


# calc bubble-point ----------------------------------------------------------------------------


def test_bubble_point_from_a_pore_size() -> None:
    e = calc_integrity.bubble_point(
        {"pore_size": "0.2 um", "surface_tension": "22.3 dyn/cm", "contact_angle": "30"}
    )
    assert e.pore_size == pytest.approx(0.2e-6)
    assert e.pressure is None
    assert e.surface_tension == pytest.approx(22.3e-3)  # dyn/cm = 1e-5 N / 1e-2 m
    assert e.contact_angle == pytest.approx(math.pi / 6)
    assert e.contact_angle_deg == 30.0
    assert e.temperature == pytest.approx(293.15)


def test_bubble_point_from_a_pressure() -> None:
    e = calc_integrity.bubble_point({"pressure": "50 psi", "temperature": "25 degC"})
    assert e.pressure == pytest.approx(50 * PSI, rel=1e-12)
    assert e.surface_tension is None  # water at the temperature
    assert e.contact_angle == 0.0 and e.contact_angle_deg == 0.0
    assert e.temperature == pytest.approx(298.15)


@pytest.mark.parametrize(
    ("raw", "field"),
    [
        ({}, "pore_size"),
        ({"pore_size": "0.2 um", "pressure": "50 psi"}, "pore_size"),
        ({"pore_size": "0.2 psi"}, "pore_size"),
        ({"pore_size": "0.2 um", "contact_angle": "nan"}, "contact_angle"),
        ({"pore_size": "0.2 um", "contact_angle": "10 deg"}, "contact_angle"),
        ({"pore_size": "0.2 um", "surface_tension": "-3 mN/m"}, "surface_tension"),
    ],
)
def test_bubble_point_refuses(raw: dict[str, object], field: str) -> None:
    assert field_of(calc_integrity.bubble_point, raw) == field
