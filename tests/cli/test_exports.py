"""`fluxledger export` (json, csv, xlsx) and `fluxledger load-export` as a user runs them.

Spreadsheets are read back with pandas (csv) and python-calamine through pandas (xlsx), not
with our own code, and their numbers are compared with a plain SQLAlchemy select of the
database; the JSON copy is checked by `fluxledger audit verify` on it.
"""

from __future__ import annotations

import json
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pandas as pd
import pytest
from sqlalchemy import select

from ledger.store.tables import Cleaning, ModuleType, WaterFluxTest
from tests.world import PASSWORDS, Result, World, Worlds, invoke

pytestmark = pytest.mark.sqlite_only

ADMIN_STDIN = PASSWORDS["sysadm"] + "\n"


@pytest.fixture
def cleaned(worlds: Worlds, tmp_path: Path) -> Iterator[World]:
    """The base world (built once) with a module commissioned, used and cleaned."""
    with worlds.copy("sqlite", tmp_path) as w:
        w.ready()
        w.ok(w.cycle())
        yield w


def _export(w: World, kind: str, out: Path, *more: str, user: str = "sysadm") -> Result:
    return w.cli("export", "--format", kind, "--out", str(out), "--user", user,
                 "--password-stdin", *more, input=PASSWORDS[user] + "\n")  # fmt: skip


def _column(w: World, column: Any) -> list[float]:
    engine = w.engine()
    with engine.connect() as conn:
        values = [float(v) for v in conn.scalars(select(column).order_by(column.table.c.id))]
    engine.dispose()
    return values


def test_json_export_loads_into_a_new_database_that_verifies(
    cleaned: World, tmp_path: Path
) -> None:
    out = tmp_path / "logbook.json"
    done = cleaned.ok(_export(cleaned, "json", out, "--json")).json()
    assert done["export"]["format"] == "json" and done["export"]["rows"] > 0
    copy = f"sqlite:///{tmp_path}/copy.db"
    loaded = invoke(["load-export", str(out), "--db", copy, "--user", "sysadm",
                     "--password-stdin", "--json"], input=ADMIN_STDIN)  # fmt: skip
    assert loaded.code == 0, loaded.stderr
    shown = loaded.json()["loaded"]
    assert shown["rows"] == done["export"]["rows"]
    checked = invoke(["audit", "verify", "--db", copy, "--json"])
    assert checked.code == 0, checked.stdout + checked.stderr
    assert checked.json()["checked"]["events"] == shown["import_event"]
    # The copy is a working logbook: its users sign in and its modules go on.
    w = World(copy)
    assert w.status() == "available"
    w.ok(w.water("QMB-0142", "pre-use", "168 mL/min"))
    assert invoke(["audit", "verify", "--db", copy]).code == 0


def test_csv_headings_carry_units_and_values_are_the_stored_si(
    cleaned: World, tmp_path: Path
) -> None:
    out = tmp_path / "tables"
    cleaned.ok(_export(cleaned, "csv", out, user="qa.lin"))
    water = pd.read_csv(out / "water_flux_test.csv")
    for heading in ("nwp [m/(s·Pa)]", "tmp [Pa]", "flux [m/s]", "temperature [K]",
                    "recovery [fraction]", "resistance [1/m]"):  # fmt: skip
        assert heading in water.columns, list(water.columns)
    assert list(water["nwp [m/(s·Pa)]"]) == _column(cleaned, WaterFluxTest.nwp_m_s_pa)
    types = pd.read_csv(out / "module_type.csv")
    assert list(types["area [m²]"]) == _column(cleaned, ModuleType.area_m2)
    cleanings = pd.read_csv(out / "cleaning.csv")
    assert list(cleanings["contact_time [s]"]) == _column(cleaned, Cleaning.contact_time_s)
    users = pd.read_csv(out / "user_account.csv")
    assert set(users["password_hash"]) == {"(not shown)"}
    events = pd.read_csv(out / "audit_event.csv")
    assert len(events) > 0 and "record_hash" in events.columns


def test_xlsx_has_a_sheet_per_table_with_units(cleaned: World, tmp_path: Path) -> None:
    out = tmp_path / "logbook.xlsx"
    cleaned.ok(_export(cleaned, "xlsx", out, user="eng.ray"))
    sheets = pd.read_excel(out, sheet_name=None, engine="calamine")
    assert {"module", "water_flux_test", "cleaning", "run", "audit_event"} <= set(sheets)
    water = sheets["water_flux_test"]
    assert list(water["nwp [m/(s·Pa)]"]) == _column(cleaned, WaterFluxTest.nwp_m_s_pa)
    assert list(sheets["cleaning"]["temperature [K]"]) == _column(cleaned, Cleaning.temperature_k)
    assert set(sheets["user_account"]["password_hash"]) == {"(not shown)"}


def test_an_existing_output_needs_overwrite(cleaned: World, tmp_path: Path) -> None:
    for kind, out in (("json", tmp_path / "a.json"), ("xlsx", tmp_path / "a.xlsx")):
        out.write_bytes(b"a user's own file")
        r = _export(cleaned, kind, out)
        assert r.code == 2 and r.exception is None, r.stderr
        assert "--out" in r.stderr and "--overwrite" in r.stderr
        assert out.read_bytes() == b"a user's own file"
        cleaned.ok(_export(cleaned, kind, out, "--overwrite"))
        assert out.read_bytes() != b"a user's own file"
    folder = tmp_path / "tables"
    folder.mkdir()
    (folder / "notes.txt").write_text("mine")
    r = _export(cleaned, "csv", folder)
    assert r.code == 2 and "--out" in r.stderr
    r = _export(cleaned, "csv", folder, "--overwrite")  # not a folder of an earlier export
    assert r.code == 2 and "notes.txt" in r.stderr
    assert [p.name for p in folder.iterdir()] == ["notes.txt"]
    assert sorted(p.name for p in tmp_path.iterdir() if p.name.startswith(".")) == []


def test_refusals_exit_2_name_the_field_and_write_nothing(cleaned: World, tmp_path: Path) -> None:
    out = tmp_path / "logbook.json"
    r = _export(cleaned, "yaml", out)
    assert r.code == 2 and "--format" in r.stderr and not out.exists()
    r = _export(cleaned, "json", out, user="op.kim")  # the full copy is an administrator's
    assert r.code == 3 and not out.exists()
    cleaned.ok(_export(cleaned, "json", out))

    def load(path: Path, db: str) -> Result:
        return invoke(["load-export", str(path), "--db", db, "--user", "sysadm",
                       "--password-stdin"], input=ADMIN_STDIN)  # fmt: skip

    # Into the database it came from (not empty): refused, nothing written.
    before = cleaned.snapshot()
    r = load(out, cleaned.url)
    assert r.code == 2 and "--db" in r.stderr and "not empty" in r.stderr
    assert cleaned.snapshot() == before
    document = json.loads(out.read_text("utf-8"))
    cases = {
        "bad.json": b'{"format": "fluxledger-logbook", ',
        "format.json": json.dumps({**document, "format": "another-tool"}).encode(),
        "revision.json": json.dumps({**document, "schema_revision": "0001"}).encode(),
    }
    for name, data in cases.items():
        bad = tmp_path / name
        bad.write_bytes(data)
        target = tmp_path / f"{name}.db"
        r = load(bad, f"sqlite:///{target}")
        assert r.code == 2 and r.exception is None, (name, r.stderr)
        assert "FILE" in r.stderr and "nothing was written" in r.stderr
        assert not target.exists(), name
    r = load(tmp_path / "format.json", f"sqlite:///{tmp_path}/x.db")
    assert "another-tool" in r.stderr
    r = load(tmp_path / "missing.json", f"sqlite:///{tmp_path}/y.db")
    assert r.code == 2 and "FILE" in r.stderr
