"""Entries keep each quantity as it was typed (issue 14 item 3), beside its SI value; the one
formatter (ledger.units.shown) shows a typed value as typed and a computed one without float
artefacts.

Unit factors: 1 M = 1 mol/L = 1000 mol/m³ (SI Brochure, 9th edition, 2019, table 8: the litre
is 1 dm³); 1 psi = 6 894.757 Pa and 1 bar = 100 000 Pa (NIST SP 811, 2008, appendix B.8).
"""

from __future__ import annotations

from pathlib import Path

import pytest

from ledger import units
from ledger.entries import care, integrity, modules, water
from ledger.errors import InputError

MOL_M3_PER_M = 1000.0
PA_PER_PSI = 6894.757
PA_PER_BAR = 1e5

CLEAN = {
    "serial": "QMB-0142",
    "agent": "sodium hydroxide",
    "concentration": "  0.5 M ",
    "temperature": "50 degC",
    "contact_time": "60 min",
    "reagent_lot": "NX-2611-03",
    "rinse_ph": "7.2",
    "note": "routine",
}


def test_a_cleaning_keeps_its_quantities_as_typed() -> None:
    e = care.cleaning(CLEAN)
    assert e.cleaning.concentration == pytest.approx(0.5 * MOL_M3_PER_M, rel=1e-12)
    assert e.cleaning.concentration_unit == "mol/m**3"
    # surrounding whitespace stripped; pH (a bare number) and texts are not quantities
    assert e.cleaning.entered == {
        "concentration": "0.5 M",
        "temperature": "50 degC",
        "contact_time": "60 min",
    }


def test_a_hostile_quantity_is_refused_before_anything_is_kept() -> None:
    with pytest.raises(InputError) as err:
        care.cleaning({**CLEAN, "concentration": "0.5\u200b M"})
    assert err.value.field == "concentration"


def test_a_blank_field_is_not_entered() -> None:
    e = care.cleaning({**CLEAN, "rinse_conductivity": "  "})
    assert e.cleaning.entered is not None and "rinse_conductivity" not in e.cleaning.entered


def test_defaults_are_not_entered_text() -> None:
    # The other limits are left out, as the command line leaves them: defaults fill them in.
    raw = {
        "code": "HF-750", "membrane": "mPES", "pore_rating": "750 kDa",
        "lumen_diameter": "0.5 mm", "fibers": "120", "length": "30 cm",
        "decay_limit": "0.05 psi/min", "test_pressure": "15 psi", "reuse_limit": "3",
        "storage_limit": "30 d", "recovery_min": "85 %",
    }  # fmt: skip
    spec = modules.module_type(raw)
    assert spec.integrity_test_pressure_pa == pytest.approx(15 * PA_PER_PSI, rel=1e-6)
    assert spec.entered == {
        "lumen_diameter": "0.5 mm", "length": "30 cm", "decay_limit": "0.05 psi/min",
        "test_pressure": "15 psi", "storage_limit": "30 d", "recovery_min": "85 %",
    }  # fmt: skip


def test_a_procedure_keeps_its_limits_as_typed() -> None:
    spec = care.procedure({
        "code": "CP-1", "title": "t", "agent": "a", "concentration_min": "0.45 M",
        "concentration_max": "550 mM", "temperature_min": "20 degC",
        "temperature_max": "30 degC", "contact_time_min": "1 h",
    })  # fmt: skip
    assert spec.entered is not None
    assert spec.entered["concentration_max"] == "550 mM"
    assert spec.concentration_max == pytest.approx(550.0, rel=1e-12)  # 1 mM = 1 mol/m³


def test_a_single_point_water_test_keeps_its_pressures_as_typed() -> None:
    e = water.water_test({
        "serial": "Q", "stage": "baseline", "feed": "20 psi", "retentate": "18 psi",
        "flow": "120 mL/min", "temperature": "22 degC",
    })  # fmt: skip
    assert e.points[0].feed_pa == pytest.approx(20 * PA_PER_PSI, rel=1e-6)
    assert e.points[0].permeate_pa == 0.0  # left out: the entry's default
    assert e.entered == {
        "feed": "20 psi", "retentate": "18 psi", "flow": "120 mL/min", "temperature": "22 degC",
    }  # fmt: skip


def test_a_points_file_keeps_only_the_typed_options(tmp_path: Path) -> None:
    path = tmp_path / "points.csv"
    path.write_text("feed [psi],retentate [psi],permeate_flow [mL/min]\n10,8,100\n14,12,140\n")
    e = water.water_test({"serial": "Q", "stage": "baseline", "points_file": str(path),
                          "temperature": "21 degC"})  # fmt: skip
    assert e.entered == {"temperature": "21 degC"}


def test_an_integrity_test_keeps_its_pressures_as_typed() -> None:
    e = integrity.integrity_test(
        {"serial": "Q", "start": "15 psi", "end": "14.9 psi", "hold_time": "5 min"}
    )
    assert e.entered == {"start": "15 psi", "end": "14.9 psi", "hold_time": "5 min"}


# The one formatter ------------------------------------------------------------------------------


def test_a_typed_value_is_shown_as_typed_with_the_si_value_beside() -> None:
    si = units.parse("0.5 M", "molarity", field="--concentration")
    assert units.shown(si, "molarity", entered="0.5 M") == "0.5 M (500 mol/m³)"
    assert units.shown(si, "molarity") == "0.5 mol/L"  # an old row: display unit, no artefact
    # typed in the SI unit itself, or a percentage: nothing beside
    assert units.shown(500.0, "molarity", entered="500 mol/m**3") == "500 mol/m**3"
    assert units.shown(0.8, "fraction", entered="80 %") == "80 %"


def test_a_computed_value_takes_the_unit_typed_then_the_site_then_the_kind() -> None:
    tmp = 3.0 * PA_PER_PSI
    assert units.shown(tmp, "pressure", typed=["psi", "psi"]) == "3 psi"
    assert units.shown(tmp, "pressure", site={"pressure": "psi"}) == "3 psi"
    # two different units typed: none of them is "the" unit, the site's or the kind's applies
    assert units.shown(tmp, "pressure", typed=["psi", "bar"]) == (
        f"{units.significant(tmp / PA_PER_BAR)} bar"
    )
    assert units.display_unit("pressure") == "bar"
    assert units.display_unit("pressure", {"pressure": "kPa"}, ["psi"]) == "psi"


@pytest.mark.parametrize(
    ("x", "text"),
    [(499.99999999999994, "500"), (0.30000000000000004, "0.3"), (2592000.0, "2592000"),
     (1.23e12, "1.23e+12"), (0.000123456789, "0.000123457"), (0.0, "0"), (-0.5, "-0.5")],
)  # fmt: skip
def test_numbers_have_no_float_artefacts(x: float, text: str) -> None:
    assert units.significant(x) == text


def test_a_display_unit_must_be_of_its_kind() -> None:
    assert units.check_display_unit("pressure", " psi ", field="--set pressure") == "psi"
    with pytest.raises(InputError) as err:
        units.check_display_unit("temperature", "psi", field="--set temperature")
    assert err.value.field == "--set temperature" and err.value.value == "psi"
    assert "temperature" in str(err.value.expected)
    with pytest.raises(InputError):
        units.check_display_unit("pressure", "10**10**10", field="--set pressure")
    with pytest.raises(InputError):
        units.check_display_unit("nonsense", "psi", field="--set nonsense")
