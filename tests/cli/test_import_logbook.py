"""`fluxledger import-logbook` through typer's CliRunner (tests.world.invoke): accepted count,
"row N: field: reason" for each rejected row with nothing written (exit 2), --skip-rejected
(exit 1), an unusable mapping or sheet (exit 2, no traceback), --json. Values are invented."""

from __future__ import annotations

from pathlib import Path

import pytest
from sqlmodel import Session, select

from ledger.store.tables import WaterFluxTest
from tests.logbook.test_import_logbook import ROWS, _files
from tests.world import Result, World

pytestmark = pytest.mark.sqlite_only


def _run(world: World, sheet: Path, mapping: Path, *more: str) -> Result:
    return world.as_user("op.kim", "import-logbook", str(sheet), "--mapping", str(mapping), *more)


def test_import_prints_the_count_and_audit_verify_passes(world: World, tmp_path: Path) -> None:
    world.add_module("QMB-0142")
    world.add_module("QMB-0143")
    mapping, sheet = _files(tmp_path, ROWS)
    r = world.ok(_run(world, sheet, mapping))
    assert f"{len(ROWS)} accepted, {len(ROWS)} written" in r.stdout
    assert "importing" not in r.stdout  # no progress bar when stdout is not a terminal
    assert world.cli("audit", "verify").code == 0
    shown = world.cli("module", "show", "QMB-0142", "--json")
    assert shown.code == 0


def test_rejected_rows_are_listed_and_nothing_is_written(world: World, tmp_path: Path) -> None:
    world.add_module("QMB-0142")
    world.add_module("QMB-0143")
    rows = [*ROWS[:3], ("QMB-0143", "2026-03-02T10:00", "baseline", 4.0, 3.0, 200.0, 20.0)]
    mapping, sheet = _files(tmp_path, rows, extra="QMB-0142,2027-99-01,baseline,1,1,1,1,x\n")
    before = world.snapshot()
    r = _run(world, sheet, mapping)
    assert r.code == 2
    assert "row 5: activity_time: " in r.stderr and "no UTC offset" in r.stderr
    assert "row 6: activity_time: " in r.stderr
    assert "Traceback" not in r.stderr + r.stdout
    assert world.snapshot() == before
    skipped = _run(world, sheet, mapping, "--skip-rejected", "--json")
    assert skipped.code == 1
    data = skipped.json()
    assert data["written"] == 3 and [x["row"] for x in data["rejected"]] == [5, 6]
    after = world.snapshot()
    assert after["water_flux_test"] - before["water_flux_test"] == 3


@pytest.mark.parametrize(
    ("mapping_text", "sheet_bytes", "named"),
    [
        ('kind = "bubbles"\n[columns]\nserial = "Module"\n', b"Module\n", "kind"),
        ('kind = "water_flux"\n[columns]\nserial = "Module"\n', b"Module\n", "columns"),
        ("kind = ", b"Module\n", "not valid TOML"),
        (None, "Module,Tested\n".encode("utf-16"), "NUL byte"),
        (None, b"Module,Tested\n\xff\xfe\x00", "NUL byte"),
        (None, b"Modul\xe9,Tested\n", "not UTF-8"),
        (None, b"Foo,Bar\n1,2\n", "has no column"),
    ],
)
def test_unusable_mapping_or_sheet_exits_2(
    world: World, tmp_path: Path, mapping_text: str | None, sheet_bytes: bytes, named: str
) -> None:
    mapping, sheet = _files(tmp_path, ROWS)
    if mapping_text is not None:
        mapping.write_text(mapping_text)
    sheet.write_bytes(sheet_bytes)
    before = world.snapshot()
    r = _run(world, sheet, mapping)
    assert r.code == 2, (r.stdout, r.stderr)
    assert named in r.stderr and "Traceback" not in r.stderr
    assert world.snapshot() == before


def test_a_unit_of_the_wrong_kind_in_the_mapping_exits_2(world: World, tmp_path: Path) -> None:
    mapping, sheet = _files(tmp_path, ROWS)
    text = mapping.read_text().replace('unit = "psi" }\nretentate', 'unit = "mL" }\nretentate')
    mapping.write_text(text)
    r = _run(world, sheet, mapping)
    assert r.code == 2 and "columns.feed.unit" in r.stderr


def test_an_imported_row_computes_what_the_typed_command_stores(
    world: World, tmp_path: Path
) -> None:
    """The same readings typed (`test water`, module QMB-0142, through its status machine)
    and imported (QMB-0143): the same SI inputs, TMP, flux, NWP, resistance, recovery and
    verdict, float for float."""
    world.ready("QMB-0142")  # typed baseline: 3.2 / 2.8 psi, 170 mL/min, 20 degC
    world.ok(world.as_user("op.kim", "use", "start", "QMB-0142", "--product", "QB-117",
                           "--lot", "QB117-26-014"))  # fmt: skip
    world.ok(world.as_user("op.kim", "use", "end", "QMB-0142"))
    world.ok(world.water("QMB-0142", "post-use", "95.5 mL/min"))
    world.add_module("QMB-0143")
    rows = [("QMB-0143", "2026-03-02T09:00+01:00", "baseline", 3.2, 2.8, 170.0, 20.0),
            ("QMB-0143", "2026-03-09T09:00+01:00", "post-use", 3.2, 2.8, 95.5, 20.0)]  # fmt: skip
    mapping, sheet = _files(tmp_path, rows)  # type: ignore[arg-type]
    world.ok(_run(world, sheet, mapping))
    assert world.cli("audit", "verify").code == 0
    same = ("stage", "temperature_k", "reference_temperature_k", "points", "tmp_pa",
            "flux_m_s", "nwp_m_s_pa", "resistance_per_m", "recovery", "verdict", "method",
            "intercept_m_s", "r_squared")  # fmt: skip
    with Session(world.engine()) as s:
        tests = s.exec(select(WaterFluxTest).order_by(WaterFluxTest.id)).all()  # type: ignore[arg-type]
        typed = [t for t in tests if t.module_id == tests[0].module_id]
        imported = [t for t in tests if t.module_id != tests[0].module_id]
        assert [t.stage for t in typed] == [t.stage for t in imported] == ["baseline", "post_use"]
        for a, b in zip(typed, imported, strict=True):
            assert {k: getattr(a, k) for k in same} == {k: getattr(b, k) for k in same}
        # same pressures and temperature: recovery is the flow ratio, by hand
        assert imported[1].recovery == pytest.approx(95.5 / 170.0, rel=1e-12)
        assert imported[1].baseline_test_id == imported[0].id
