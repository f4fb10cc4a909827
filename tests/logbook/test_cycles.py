"""Cleaning-cycle procedures as files and under change control (issue 15 items 1 and 3): a
procedure file parses into SI steps, and every fault names the file and the key; a new
version is in force from its approval's effective time, and an approval may not reach back
past a cycle already recorded; a procedure ID used by a master-record template is refused.

Unit conversions are checked against a plain pint registry (the reference library);
procedure ranges are invented test values.
"""

from __future__ import annotations

from pathlib import Path

import pint
import pytest

from ledger.errors import InputError
from ledger.logbook.cycles import parse
from tests.cli.test_cleaning_cycles import (
    PROCEDURE,
    approved_procedure,
    procedure_file,
    used_module,
    values,
    verified_naoh,
)
from tests.world import World

pytestmark = pytest.mark.sqlite_only

UREG = pint.UnitRegistry()


def si(text: str, unit: str) -> float:
    return float(UREG.Quantity(text).to(unit).magnitude)


def test_a_procedure_file_parses_into_si_steps() -> None:
    p = parse(PROCEDURE.format(version="1").encode(), "cycle.toml")
    assert (p.id, p.version, len(p.steps)) == ("QC-CYCLE-05", "1", 5)
    flush, caustic, _acid, sanitize, rinse = p.steps
    assert flush.flow_m3_s is not None and flush.flow_m3_s.low == pytest.approx(
        si("200 mL/min", "m**3/s")
    )
    assert flush.endpoint == "volume" and flush.endpoint_range is not None
    assert flush.endpoint_range.low == pytest.approx(si("5 L", "m**3"))
    assert caustic.needs_solution and caustic.concentration_unit == "mol/m**3"
    assert caustic.concentration is not None
    assert caustic.concentration.low == pytest.approx(si("0.45 mol/L", "mol/m**3"))
    assert caustic.temperature_k is not None
    assert caustic.temperature_k.high == pytest.approx(UREG.Quantity(50, "degC").to("K").magnitude)
    assert caustic.contact_time_min_s == pytest.approx(si("60 min", "s"))
    assert caustic.tmp_pa is not None and caustic.tmp_pa.high == pytest.approx(si("1 bar", "Pa"))
    assert sanitize.concentration_unit == ""  # a percentage is a fraction
    assert sanitize.concentration is not None and sanitize.concentration.high == pytest.approx(
        0.0003
    )
    assert rinse.endpoint_range is not None
    assert rinse.endpoint_range.high == pytest.approx(si("2 uS/cm", "S/m"))


@pytest.mark.parametrize(
    ("old", "new", "key"),
    [
        ('name = "acid"', 'name = "acid"\ncolour = "red"', "steps[3].colour"),
        ('["40 degC", "50 degC"]', '["50 degC", "40 degC"]', "steps[2].temperature"),
        ('contact_time = "20 min"', 'contact_time = "20 parsecs"', "steps[3].contact_time"),
        ('{ volume = "5 L" }', '{ turbidity = "1 NTU" }', "steps[1].endpoint"),
        ('{ volume = "5 L" }', '{ ph = ["6", "15"] }', "steps[1].endpoint.ph"),
        ("solution = true", 'solution = "yes"', "steps[2].solution"),
        ('id = "QC-CYCLE-05"', 'id = "QC CYCLE 05"', "procedure.id"),
        ('["0.45 mol/L", "0.55 mol/L"]', '["0.45 mol/L"]', "steps[2].concentration"),
    ],
)
def test_a_fault_in_the_file_names_the_key(old: str, new: str, key: str) -> None:
    text = PROCEDURE.format(version="1")
    assert old in text
    with pytest.raises(InputError) as caught:
        parse(text.replace(old, new, 1).encode(), "cycle.toml")
    assert f"cycle.toml: {key}:" in caught.value.message


def test_a_file_that_is_not_toml_names_its_line() -> None:
    with pytest.raises(InputError) as caught:
        parse(b'[procedure]\nid = "X"\nversion = \n', "broken.toml")
    assert caught.value.source == "broken.toml" and "line 3" in caught.value.message


def test_too_many_steps_are_refused() -> None:
    step = '[[steps]]\nname = "flush"\nagent = "water"\n'
    text = '[procedure]\nid = "P"\nversion = "1"\ntitle = "t"\n' + step * 21
    with pytest.raises(InputError, match="1 to 20"):
        parse(text.encode(), "long.toml")


def test_a_new_version_takes_over_and_cannot_reach_back(
    sqlite_world: World, tmp_path: Path
) -> None:
    w = sqlite_world
    approved_procedure(w, tmp_path)
    verified_naoh(w)
    used_module(w)
    first = w.ok(w.as_user("op.kim", "care", "cycle", "QMB-0142", "--procedure", "QC-CYCLE-05",
                           *values(), "--json")).json()  # fmt: skip
    assert first["procedure"]["version"] == "1"
    w.ok(w.water("QMB-0142", "post-clean", "165 mL/min"))
    w.ok(w.as_user("eng.ray", "care", "cycle-procedure", "submit",
                   str(procedure_file(tmp_path, "2"))))  # fmt: skip
    # An approval effective before the cycle already recorded under version 1 is refused.
    before = w.snapshot()
    back = w.as_user("qa.lin", "care", "cycle-procedure", "approve", "QC-CYCLE-05", "2",
                     "--effective-from", "2020-01-01T00:00Z", "--late-reason", "typo")  # fmt: skip
    assert back.code != 0 and w.snapshot() == before
    w.ok(w.as_user("qa.lin", "care", "cycle-procedure", "approve", "QC-CYCLE-05", "2",
                   "--effective-from", "now"))  # fmt: skip
    w.ok(w.as_user("op.kim", "use", "start", "QMB-0142", "--product", "QB-117", "--lot", "L-2"))
    w.ok(w.as_user("op.kim", "use", "end", "QMB-0142"))
    w.ok(w.water("QMB-0142", "post-use", "90 mL/min"))
    second = w.ok(w.as_user("op.kim", "care", "cycle", "QMB-0142", "--procedure",
                            "QC-CYCLE-05", *values(), "--json")).json()  # fmt: skip
    assert second["procedure"]["version"] == "2"
    history = w.ok(w.cli("care", "cycle-procedure", "history", "QC-CYCLE-05", "--json")).json()
    rows = next(v for k, v in history.items() if k.startswith("versions"))
    assert [(v["version"], v["status"]) for v in rows] == [("1", "superseded"), ("2", "effective")]


def test_an_id_used_by_a_master_record_template_is_refused(
    sqlite_world: World, tmp_path: Path
) -> None:
    w = sqlite_world  # its shipped master-record templates include QB-MR-LNP-101
    path = tmp_path / "clash.toml"
    path.write_text(PROCEDURE.format(version="1").replace("QC-CYCLE-05", "QB-MR-LNP-101"),
                    encoding="utf-8")  # fmt: skip
    before = w.snapshot()
    refused = w.as_user("eng.ray", "care", "cycle-procedure", "submit", str(path))
    assert refused.code in (2, 3) and "QB-MR-LNP-101" in refused.stderr
    assert w.snapshot() == before
