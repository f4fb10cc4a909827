"""Values are shown in the unit they were typed in (the SI value stored beside), values nobody
typed in the site's display unit; no float artefacts in what people read (issue 14 item 3)."""

from __future__ import annotations

import pytest
import sqlalchemy as sa

from tests.world import World

pytestmark = pytest.mark.sqlite_only

# 1 M = 1 mol/L = 1000 mol/m³ (SI Brochure, 9th edition, 2019, table 8: the litre is 1 dm³).
MOL_M3_PER_M = 1000.0
# 1 psi = 6.894757 kPa (NIST SP 811, 2008, appendix B.8).
PA_PER_PSI = 6894.757


def _clean_molar(w: World) -> None:
    w.add_module()
    w.ok(w.baseline())
    w.ok(w.integrity())
    w.ok(
        w.as_user(
            "op.kim", "care", "clean", "QMB-0142", "--agent", "sodium hydroxide",
            "--concentration", "  0.5 M ", "--temperature", "50 degC", "--contact-time",
            "60 min", "--reagent-lot", "NX-2611-03",
        )
    )  # fmt: skip


def _row(w: World, table: str) -> dict[str, object]:
    with w.engine().connect() as conn:
        row = conn.execute(sa.text(f"SELECT * FROM {table} ORDER BY id DESC")).mappings().first()
    assert row is not None
    return dict(row)


def test_a_molar_cleaning_keeps_its_text_and_the_si_value(sqlite_world: World) -> None:
    w = sqlite_world
    _clean_molar(w)
    row = _row(w, "cleaning")
    assert row["concentration"] == pytest.approx(0.5 * MOL_M3_PER_M, rel=1e-12)
    assert row["concentration_unit"] == "mol/m**3"
    import json

    entered = row["entered"] if isinstance(row["entered"], dict) else json.loads(row["entered"])
    # the text as typed, surrounding whitespace stripped; the note and lot are no quantities
    assert entered == {
        "concentration": "0.5 M",
        "temperature": "50 degC",
        "contact_time": "60 min",
    }


def test_the_typed_concentration_is_shown_back_as_typed(
    sqlite_world: World, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setenv("COLUMNS", "240")  # one line per history row
    w = sqlite_world
    _clean_molar(w)
    shown = w.ok(w.cli("module", "show", "QMB-0142")).stdout
    assert "0.5 M (500 mol/m³)" in shown
    assert "50 degC" in shown
    # audit show wraps its lines at 96 characters
    audit = " ".join(w.ok(w.cli("audit", "show", "--entity", "cleaning")).stdout.split())
    assert "concentration: 0.5 M (500 mol/m³)" in audit
    assert "temperature: 50 degC (323.15 K)" in audit
    for text in (shown, audit):
        assert "499.99" not in text and "0.49999" not in text
    data = w.ok(w.cli("module", "show", "QMB-0142", "--json")).json()
    cleaning = next(r for r in data["history"] if r["record"].startswith("cleaning"))
    # JSON keeps the number (in the display unit, as before) and adds the text as typed
    assert cleaning["value"]["entered"] == "50 degC"
    assert cleaning["value"]["value"] == pytest.approx(50.0)
    assert cleaning["value"]["unit"] == "degC"


def test_a_water_test_typed_in_psi_shows_its_tmp_in_psi(sqlite_world: World) -> None:
    w = sqlite_world
    w.add_module()
    out = w.ok(w.baseline()).stdout  # feed 3.2 psi, retentate 2.8 psi: TMP 3.0 psi
    assert "TMP 3.000 psi" in out
    row = _row(w, "water_flux_test")
    assert row["tmp_pa"] == pytest.approx(3.0 * PA_PER_PSI, rel=1e-6)
    audit = " ".join(w.ok(w.cli("audit", "show", "--entity", "water_flux_test")).stdout.split())
    assert "tmp: 3 psi" in audit
    assert "mbar" not in audit


def test_a_permeate_pressure_is_entered_only_when_typed(sqlite_world: World) -> None:
    """Left out, --permeate takes its default in the entry layer and is no entered text;
    typed, even as the default's "0 psi", it is kept as typed."""
    w = sqlite_world
    w.add_module()
    w.ok(w.baseline())
    assert "permeate" not in (_row(w, "water_flux_test")["entered"] or "")
    w.ok(w.water("QMB-0142", "baseline", "150 mL/min", "--permeate", "0 psi"))
    row = _row(w, "water_flux_test")
    assert '"permeate": "0 psi"' in str(row["entered"])
    assert row["tmp_pa"] == pytest.approx(3.0 * PA_PER_PSI, rel=1e-6)  # (3.2 + 2.8) / 2 - 0


def test_a_site_display_unit_shows_computed_values_in_it(sqlite_world: World) -> None:
    w = sqlite_world
    w.add_module()
    w.ok(
        w.as_user(
            "op.kim", "test", "water", "QMB-0142", "--stage", "baseline", "--feed", "0.22 bar",
            "--retentate", "0.2 bar", "--flow", "170 mL/min", "--temperature", "20 degC",
        )
    )  # fmt: skip
    before = " ".join(w.ok(w.cli("audit", "show", "--entity", "water_flux_test")).stdout.split())
    assert "tmp: 0.21 bar" in before
    w.ok(
        w.as_user(
            "sysadm", "site", "units", "--set", "pressure=psi", "--set", "permeability=LMH/psi",
            "--reason", "operators read psi",
        )
    )  # fmt: skip
    shown = w.ok(w.cli("site", "units", "--json")).json()
    units = {r["kind"]: r["unit"] for r in shown["display_units"]}
    assert units["pressure"] == "psi" and units["temperature"] == "degC"
    # A computed pressure nobody typed in psi (an old row: no entered text) now reads in psi.
    with w.engine().begin() as conn:
        conn.execute(sa.text("UPDATE water_flux_test SET entered = NULL"))
    line = w.ok(w.cli("module", "show", "QMB-0142")).stdout
    # 0.21 bar / 6894.757 Pa/psi = 3.0458 psi; NWP in LMH per psi
    assert "LMH/psi" in line or "L/(m^2*h*psi)" in line


def test_a_bad_display_unit_is_refused_and_nothing_is_written(sqlite_world: World) -> None:
    w = sqlite_world
    before = w.snapshot()
    out = w.as_user("sysadm", "site", "units", "--set", "temperature=psi", "--reason", "typo")
    assert out.code == 2, out.stdout
    assert "--set temperature" in out.stderr and "'psi'" in out.stderr
    assert "temperature" in out.stderr and "Traceback" not in out.stderr
    out = w.as_user("sysadm", "site", "units", "--set", "pressure", "--reason", "typo")
    assert out.code == 2 and "KIND=UNIT" in out.stderr
    out = w.as_user("sysadm", "site", "units", "--set", "pressur=psi", "--reason", "typo")
    assert out.code == 2 and "'pressur'" in out.stderr
    assert w.snapshot() == before


def test_only_an_administrator_sets_display_units(sqlite_world: World) -> None:
    w = sqlite_world
    before = w.snapshot()
    out = w.as_user("eng.ray", "site", "units", "--set", "pressure=psi", "--reason", "want psi")
    assert out.code == 3
    assert w.snapshot() == before


def test_old_rows_without_entered_text_still_verify(sqlite_world: World) -> None:
    w = sqlite_world
    _clean_molar(w)
    w.ok(w.as_user("sysadm", "site", "units", "--set", "pressure=psi", "--reason", "psi"))
    assert w.cli("audit", "verify").code == 0
