"""import_rows: an old logbook sheet's water-flux and pressure-decay rows, written with their
audit events; NWP checked against an independent computation; rejected rows by row number
with nothing written; `audit verify` after the import. Serials and values are invented."""

from __future__ import annotations

from pathlib import Path

import iapws
import pytest
from sqlmodel import Session, select

from ledger.entries.logbook_mapping import load_mapping, read_logbook
from ledger.logbook.auth import find_user
from ledger.logbook.import_logbook import ImportResult, import_rows
from ledger.store.audit import verify
from ledger.store.engine import transaction
from ledger.store.tables import IntegrityTest, ModuleType, WaterFluxTest
from tests.world import World

pytestmark = pytest.mark.sqlite_only

PSI = 6894.757293168361  # Pa, NIST SP 811 (1 lbf/in² = 6.894757293168 kPa)
ML_MIN = 1e-6 / 60  # m³/s
WATER_MAPPING = """
kind = "water_flux"
[columns]
serial = "Module"
activity_time = "Tested"
stage = "Stage"
feed = { column = "Feed", unit = "psi" }
retentate = { column = "Retentate", unit = "psi" }
flow = { column = "Permeate flow", unit = "mL/min" }
temperature = { column = "Water T", unit = "degC" }
note = "Remarks"
"""
HEADER = "Module,Tested,Stage,Feed,Retentate,Permeate flow,Water T,Remarks\n"
ROWS = [
    ("QMB-0142", "2026-03-02T09:00+01:00", "baseline", 3.2, 2.8, 170.0, 18.5),
    ("QMB-0142", "2026-03-09T09:00+01:00", "post-use", 3.2, 2.8, 95.0, 21.0),
    ("QMB-0142", "2026-03-10T09:00+01:00", "post-clean", 3.1, 2.7, 160.0, 24.0),
    ("QMB-0143", "2026-03-02T10:00+01:00", "baseline", 4.0, 3.0, 200.0, 20.0),
]


def _files(tmp_path: Path, rows: list[tuple[object, ...]], extra: str = "") -> tuple[Path, Path]:
    mapping = tmp_path / "mapping.toml"
    mapping.write_text(WATER_MAPPING)
    sheet = tmp_path / "old.csv"
    body = "".join(",".join(str(v) for v in row) + ",from the 2026 binder\n" for row in rows)
    sheet.write_text(HEADER + body + extra)
    return mapping, sheet


def _import(world: World, mapping: Path, sheet: Path, keep_valid: bool = False) -> ImportResult:
    rows = read_logbook(load_mapping(mapping), sheet)
    with transaction(world.engine()) as s:
        actor = find_user(s, "op.kim")
        assert actor is not None
        return import_rows(s, actor, rows, keep_valid=keep_valid)


def _nwp(feed_psi: float, ret_psi: float, flow_ml_min: float, t_c: float, area: float,
         t_ref: float) -> float:  # fmt: skip
    """NWP at t_ref (m/(s·Pa)) by hand: Q/A over the mean-pressure TMP (permeate at 0 gauge),
    times µ(T)/µ(T_ref) with the viscosities of the `iapws` PyPI package (IAPWS-95 at 1 atm)."""
    tmp = (feed_psi + ret_psi) / 2 * PSI
    flux = flow_ml_min * ML_MIN / area
    mu = iapws.IAPWS95(T=t_c + 273.15, P=0.101325).mu
    mu_ref = iapws.IAPWS95(T=t_ref, P=0.101325).mu
    return flux / tmp * mu / mu_ref


def test_rows_are_written_with_nwp_recovery_and_a_verified_chain(
    world: World, tmp_path: Path
) -> None:
    world.add_module("QMB-0142")
    world.add_module("QMB-0143")
    mapping, sheet = _files(tmp_path, ROWS)
    before = world.snapshot()
    result = _import(world, mapping, sheet)
    assert result.written == len(ROWS) and not result.rejected
    after = world.snapshot()
    assert after["water_flux_test"] - before["water_flux_test"] == len(ROWS)
    assert after["audit_event"] - before["audit_event"] == len(ROWS)
    with Session(world.engine()) as s:
        mtype = s.exec(select(ModuleType).where(ModuleType.code == "HF-750")).one()
        tests = s.exec(select(WaterFluxTest).order_by(WaterFluxTest.id)).all()  # type: ignore[arg-type]
        by_time = sorted(tests, key=lambda t: t.activity_at)
        expected_order = sorted(ROWS, key=lambda r: (r[1].replace("+01:00", ""), r[0]))
        for test, row in zip(by_time, expected_order, strict=True):
            nwp = _nwp(row[3], row[4], row[5], row[6], mtype.area_m2,  # type: ignore[arg-type]
                       mtype.reference_temperature_k)  # fmt: skip
            assert test.nwp_m_s_pa == pytest.approx(nwp, rel=1e-5)
            assert test.late is True
            assert test.entered is not None and test.entered["feed"] == f"{row[3]} psi"
        baseline = next(
            t for t in tests if t.stage == "baseline" and t.module_id == tests[0].module_id
        )
        post_clean = next(t for t in tests if t.stage == "post_clean")
        assert post_clean.baseline_test_id == baseline.id
        # recovery = NWP / baseline NWP, both by hand
        by_hand = _nwp(3.1, 2.7, 160.0, 24.0, mtype.area_m2, mtype.reference_temperature_k) / _nwp(
            3.2, 2.8, 170.0, 18.5, mtype.area_m2, mtype.reference_temperature_k
        )
        assert post_clean.recovery == pytest.approx(by_hand, rel=1e-5)
        assert verify(s).ok
    audit = world.cli("audit", "verify")
    assert audit.code == 0, (audit.stdout, audit.stderr)


def test_a_bad_row_is_named_and_nothing_is_written(world: World, tmp_path: Path) -> None:
    world.add_module("QMB-0142")
    world.add_module("QMB-0143")
    bad = [
        *ROWS[:2],
        ("QMB-0142", "2026-03-10T09:00+01:00", "post-clean", "3.1 bar?", 2.7, 160.0, 24.0),
        ("QMB-9999", "2026-03-02T10:00+01:00", "baseline", 4.0, 3.0, 200.0, 20.0),
    ]
    mapping, sheet = _files(tmp_path, bad)
    before = world.snapshot()
    result = _import(world, mapping, sheet)
    assert [(r.row, r.field) for r in result.rejected] == [(4, "feed"), (5, "serial")]
    assert result.written == 0
    assert world.snapshot() == before


def test_skipping_writes_only_the_accepted_rows(world: World, tmp_path: Path) -> None:
    world.add_module("QMB-0142")
    bad = [*ROWS[:1], ("QMB-0142", "2026-03-09T09:00+01:00", "post-use", 3.2, 2.8, 95.0, 150.0)]
    mapping, sheet = _files(tmp_path, bad)
    before = world.snapshot()
    result = _import(world, mapping, sheet, keep_valid=True)
    assert [(r.row, r.field) for r in result.rejected] == [(3, "temperature")]
    after = world.snapshot()
    assert after["water_flux_test"] - before["water_flux_test"] == 1
    assert after["audit_event"] - before["audit_event"] == 1
    with Session(world.engine()) as s:
        assert verify(s).ok


def test_pressure_decay_rows(world: World, tmp_path: Path) -> None:
    world.add_module("QMB-0142")
    mapping = tmp_path / "decay.json"
    mapping.write_text(
        '{"kind": "pressure_decay", "columns": {"serial": "SN", "activity_time": "When",'
        ' "start": {"column": "P0", "unit": "psi"}, "end": {"column": "P1", "unit": "psi"},'
        ' "hold_time": {"column": "Hold", "unit": "min"}}}'
    )
    sheet = tmp_path / "decay.csv"
    sheet.write_text("SN,When,P0,P1,Hold\nQMB-0142,2026-03-02T09:00Z,15,14.95,5\n"
                     "QMB-0142,2026-03-03T09:00Z,15,14.0,5\n")  # fmt: skip
    result = _import(world, mapping, sheet)
    assert result.written == 2
    with Session(world.engine()) as s:
        tests = s.exec(select(IntegrityTest).order_by(IntegrityTest.id)).all()  # type: ignore[arg-type]
        # (start − end) / hold by hand, in Pa/s; limit 0.05 psi/min (tests/world.py TYPE_OPTIONS)
        assert tests[0].decay_rate_pa_s == pytest.approx(0.05 * PSI / 300, rel=1e-9)
        assert tests[1].decay_rate_pa_s == pytest.approx(1.0 * PSI / 300, rel=1e-9)
        assert [t.passed for t in tests] == [True, False]
        assert verify(s).ok
