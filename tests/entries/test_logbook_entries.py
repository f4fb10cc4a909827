"""Entries of the logbook: one points reader for `calc nwp` and `test water`, the
combinations each entry allows, and its SI values.

Unit factors: 1 psi = 6 894.757 Pa, 1 mL/min = 1e-6/60 m³/s (NIST SP 811, appendix B).
TMP = (P_feed + P_retentate)/2 − P_permeate (the usual definition for a hollow fiber).
"""

from __future__ import annotations

from pathlib import Path

import pytest

from ledger.entries import care, integrity, modules, runs, uses, water
from ledger.errors import InputError

PSI = 6894.757293168
ML_MIN = 1e-6 / 60


def _points(tmp_path: Path, text: str) -> str:
    path = tmp_path / "points.csv"
    path.write_text(text, encoding="utf-8")
    return str(path)


PRESSURES = "feed [psi],retentate [psi],permeate_flow [mL/min]\n10,8,100\n14,12,140\n"


def test_one_reader_serves_the_calculator_and_the_logbook(tmp_path: Path) -> None:
    path = _points(tmp_path, PRESSURES)
    calc = water.nwp_calc({"area": "0.1 m^2", "points_file": path, "temperature": "20 degC"})
    logged = water.water_test(
        {"serial": "QMB-0142", "stage": "baseline", "points_file": path, "temperature": "20 degC"}
    )
    assert calc.points is not None
    assert [r.tmp for r in calc.points.readings] == pytest.approx([9 * PSI, 13 * PSI])
    assert [r.permeate_flow for r in calc.points.readings] == pytest.approx(
        [100 * ML_MIN, 140 * ML_MIN]
    )
    assert [p.feed_pa for p in logged.points] == pytest.approx([10 * PSI, 14 * PSI])
    assert [p.flow_m3_s for p in logged.points] == pytest.approx([100 * ML_MIN, 140 * ML_MIN])
    assert logged.temperature_k == pytest.approx(293.15)


def test_volume_over_time_columns_are_accepted_by_both(tmp_path: Path) -> None:
    path = _points(
        tmp_path, "feed [psi],retentate [psi],volume [mL],time [min]\n10,8,200,2\n14,12,280,2\n"
    )
    calc = water.nwp_calc({"area": "0.1 m^2", "points_file": path, "temperature": "20 degC"})
    assert calc.points is not None
    assert calc.points.readings[0].permeate_flow == pytest.approx(100 * ML_MIN)
    logged = water.water_test(
        {"serial": "Q", "stage": "baseline", "points_file": path, "temperature": "20 degC"}
    )
    assert logged.points[0].volume_m3 == pytest.approx(200e-6)
    assert logged.points[0].time_s == pytest.approx(120.0)


def test_a_tmp_column_serves_the_calculator_but_not_the_record(tmp_path: Path) -> None:
    path = _points(tmp_path, "tmp [psi],permeate_flow [mL/min]\n9,100\n13,140\n")
    calc = water.nwp_calc({"area": "0.1 m^2", "points_file": path, "temperature": "20 degC"})
    assert calc.points is not None and calc.points.readings[1].tmp == pytest.approx(13 * PSI)
    with pytest.raises(InputError) as err:
        water.water_test({"serial": "Q", "stage": "baseline", "points_file": path,
                          "temperature": "20 degC"})  # fmt: skip
    assert err.value.field == "points_file"


def test_temperatures_more_than_1_k_apart_are_not_one_test(tmp_path: Path) -> None:
    path = _points(
        tmp_path,
        "feed [psi],retentate [psi],permeate_flow [mL/min],temperature [degC]\n"
        "10,8,100,20.0\n14,12,140,21.5\n",
    )
    with pytest.raises(InputError) as err:
        water.water_test({"serial": "Q", "stage": "baseline", "points_file": path})
    assert err.value.field == "temperature"
    ok = _points(
        tmp_path,
        "feed [psi],retentate [psi],permeate_flow [mL/min],temperature [degC]\n"
        "10,8,100,20.0\n14,12,140,21.0\n",
    )
    e = water.water_test({"serial": "Q", "stage": "baseline", "points_file": ok})
    assert e.temperature_k == pytest.approx(273.15 + 20.5)  # the mean of the points


def test_single_point_options_beside_a_points_file_are_refused(tmp_path: Path) -> None:
    path = _points(tmp_path, PRESSURES)
    with pytest.raises(InputError) as err:
        water.water_test({"serial": "Q", "stage": "baseline", "points_file": path,
                          "flow": "100 mL/min"})  # fmt: skip
    assert err.value.field == "flow"


def test_a_single_point_needs_its_pressures_and_temperature() -> None:
    with pytest.raises(InputError) as err:
        water.water_test({"serial": "Q", "stage": "baseline", "feed": "3 psi", "flow": "1 mL/min"})
    assert err.value.field == "retentate"
    e = water.water_test(
        {"serial": "Q", "stage": "baseline", "feed": "3.2 psi", "retentate": "2.8 psi",
         "flow": "170 mL/min", "temperature": "20 degC"}
    )  # fmt: skip
    assert e.points[0].feed_pa == pytest.approx(3.2 * PSI)
    assert e.points[0].permeate_pa == 0.0


def test_nwp_calc_needs_u_only_for_the_exponential_form() -> None:
    base = {"area": "0.1 m^2", "permeate_flow": "100 mL/min", "feed": "10 psi",
            "retentate": "8 psi", "temperature": "20 degC"}  # fmt: skip
    with pytest.raises(InputError) as err:
        water.nwp_calc({**base, "correction": "exponential"})
    assert err.value.field == "u_constant"
    with pytest.raises(InputError) as err:
        water.nwp_calc({**base, "u_constant": "2640 K"})
    assert err.value.field == "u_constant"
    assert (
        water.nwp_calc({**base, "correction": "exponential", "u_constant": "2640"}).u_constant
        == 2640
    )
    with pytest.raises(InputError) as err:
        water.nwp_calc({**base, "feed": "1 psi", "retentate": "1 psi", "permeate": "2 psi"})
    assert err.value.field == "feed"


def test_integrity_entry_modes(tmp_path: Path) -> None:
    bp = integrity.integrity_test({"serial": "Q", "bubble_point": "52 psi"})
    assert bp.decay is None and bp.bubble_point() == pytest.approx(52 * PSI)
    with pytest.raises(InputError) as err:
        integrity.integrity_test({"serial": "Q", "bubble_point": "52 psi", "start": "15 psi"})
    assert err.value.field == "start"
    path = _points(tmp_path, "time [min],pressure [psi]\n0,15\n5,14.9\n")
    d = integrity.integrity_test({"serial": "Q", "readings": path})
    assert d.decay is not None and d.decay.readings is not None
    assert [t for t, _ in d.decay.readings] == pytest.approx([0, 300])
    assert [p for _, p in d.decay.readings] == pytest.approx([15 * PSI, 14.9 * PSI])
    with pytest.raises(InputError) as err:
        integrity.integrity_test({"serial": "Q", "start": "nan psi", "bubble_point": "50 psi"})
    assert err.value.field == "start"  # parsed although the bubble-point mode ignores it


def test_cleaning_concentration_is_one_of_three_kinds() -> None:
    base = {"serial": "Q", "agent": "sodium hydroxide", "temperature": "25 degC",
            "contact_time": "60 min", "reagent_lot": "NX-1"}  # fmt: skip
    c = care.cleaning({**base, "concentration": "0.5 mol/L"}).cleaning
    assert (c.concentration, c.concentration_unit) == (pytest.approx(500.0), "mol/m**3")
    assert care.cleaning({**base, "concentration": "1 %"}).cleaning.concentration_unit == ""
    with pytest.raises(InputError) as err:
        care.cleaning({**base, "concentration": "5 psi"})
    assert err.value.field == "concentration"
    assert "is not a concentration" in str(err.value)


def test_procedure_limits_must_be_of_one_kind() -> None:
    base = {"code": "CP-1", "title": "t", "agent": "NaOH", "temperature_min": "20 degC",
            "temperature_max": "30 degC", "contact_time_min": "60 min"}  # fmt: skip
    spec = care.procedure({**base, "concentration_min": "0.4 mol/L", "concentration_max": "600 mM"})
    assert (spec.concentration_min, spec.concentration_max) == (
        pytest.approx(400),
        pytest.approx(600),
    )
    with pytest.raises(InputError) as err:
        care.procedure({**base, "concentration_min": "0.4 mol/L", "concentration_max": "2 %"})
    assert err.value.field == "concentration_max"


def test_module_type_defaults_are_the_common_practice_ones() -> None:
    t = modules.module_type(
        {"code": " HF-750 ", "membrane": "mPES", "pore_rating": "750 kDa",
         "lumen_diameter": "0.5 mm", "fibers": "120", "length": "30 cm", "area": "565 cm^2",
         "decay_limit": "0.05 psi/min", "test_pressure": "15 psi", "reuse_limit": "3",
         "storage_limit": "30 d"}
    )  # fmt: skip
    assert t.code == "HF-750"
    assert (t.recovery_min, t.recovery_alert, t.damage_ratio, t.preuse_band) == pytest.approx(
        (0.80, 0.90, 1.20, 0.10)
    )
    assert t.reference_temperature_k == pytest.approx(293.15)
    assert t.storage_limit_s == 30 * 86400


def test_run_entries() -> None:
    assert runs.pairs(["a=1 L", "b = 2 L"], "input") == {"a": "1 L", "b": "2 L"}
    with pytest.raises(InputError) as err:
        runs.pairs(["a=1", "a=2"], "input")
    assert err.value.field == "input"
    (w,) = runs.phase_windows(["uf1=2026-11-30T08:00+01:00/2026-11-30T09:00+01:00"])
    assert (w.end - w.start).total_seconds() == 3600
    with pytest.raises(InputError):
        runs.phase_windows(["uf1=2026-11-30T09:00Z/2026-11-30T08:00Z"])
    number, at = runs.activity({"run": 3, "activity_time": "2026-11-30T08:00Z"})
    assert number == 3 and at is not None and at.hour == 8


def test_void_and_audit_filters() -> None:
    v = uses.void({"kind": "cleaning", "record_id": "4", "reason": "wrong module"})
    assert v.record_id == 4
    f = uses.audit_filter({"module": "QMB-0142", "since": "2026-11-01T00:00Z", "last": "5"})
    assert f["serial"] == "QMB-0142" and f["limit"] == 5
    with pytest.raises(InputError) as err:
        uses.audit_filter({"since": "yesterday"})
    assert err.value.field == "since"
