"""The site's display units per kind: audited settings ``display.<kind>``, set by an
administrator only, each unit checked against its kind before anything is written."""

from __future__ import annotations

import pytest
from sqlmodel import col, select

from ledger.errors import InputError, RefusedError
from ledger.logbook.auth import find_user
from ledger.logbook.site import display_unit_rows, display_units, set_display_units
from ledger.store.engine import transaction
from ledger.store.tables import AuditEvent, Setting
from tests.world import World

pytestmark = pytest.mark.sqlite_only


def test_an_administrator_sets_display_units_audited(sqlite_world: World) -> None:
    with transaction(sqlite_world.engine()) as s:
        admin = find_user(s, "sysadm")
        assert admin is not None
        now = set_display_units(s, admin, ["pressure=psi", "temperature = degF"], "US site")
    assert now == {"pressure": "psi", "temperature": "degF"}
    with transaction(sqlite_world.engine()) as s:
        assert display_units(s) == now
        keys = [
            r.key for r in s.exec(select(Setting).where(col(Setting.key).startswith("display.")))
        ]
        assert sorted(keys) == ["display.pressure", "display.temperature"]
        events = s.exec(select(AuditEvent).where(AuditEvent.entity == "setting")).all()
        assert {e.entity_id for e in events} >= {"display.pressure", "display.temperature"}
        assert all(e.reason == "US site" for e in events if e.entity_id.startswith("display."))
        rows = {k: (u, mine) for k, u, mine in display_unit_rows(display_units(s))}
    assert rows["pressure"] == ("psi", True)
    assert rows["flow"] == ("mL/min", False)  # the kind's own display unit


def test_changing_a_unit_is_an_audited_change(sqlite_world: World) -> None:
    with transaction(sqlite_world.engine()) as s:
        admin = find_user(s, "sysadm")
        assert admin is not None
        set_display_units(s, admin, ["pressure=psi"], "first")
        set_display_units(s, admin, ["pressure=kPa"], "second")
    with transaction(sqlite_world.engine()) as s:
        assert display_units(s) == {"pressure": "kPa"}
        change = s.exec(
            select(AuditEvent).where(
                AuditEvent.entity_id == "display.pressure", AuditEvent.field == "value"
            )
        ).one()
        assert (change.old_value, change.new_value, change.reason) == ('"psi"', '"kPa"', "second")


@pytest.mark.parametrize(
    ("setting", "field_text"),
    [("pressure=degC", "--set pressure"), ("temperature=psi", "--set temperature"),
     ("pressure", "KIND=UNIT"), ("flux=", "KIND=UNIT"), ("nokind=psi", "'nokind'")],
)  # fmt: skip
def test_a_bad_setting_is_refused_and_nothing_is_written(
    sqlite_world: World, setting: str, field_text: str
) -> None:
    before = sqlite_world.snapshot()
    with transaction(sqlite_world.engine()) as s:
        admin = find_user(s, "sysadm")
        assert admin is not None
        with pytest.raises(InputError) as err:
            set_display_units(s, admin, ["flow=L/h", setting], "why")
    assert err.value.field == "set"
    assert field_text in str(err.value)
    assert sqlite_world.snapshot() == before


def test_only_an_administrator_sets_them(sqlite_world: World) -> None:
    with transaction(sqlite_world.engine()) as s:
        engineer = find_user(s, "eng.ray")
        assert engineer is not None
        with pytest.raises(RefusedError):
            set_display_units(s, engineer, ["pressure=psi"], "why")
