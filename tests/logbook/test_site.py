"""The site's name and IANA time zone: audited settings, admin only, validated with zoneinfo;
times shown in local time with their offset (ledger.rules.localtime).

The expected local times across the 2026 changes in Europe/Berlin are written out by hand
from the EU rule (summer time from 01:00 UTC on the last Sunday of March to 01:00 UTC on the
last Sunday of October: 2026-03-29 and 2026-10-25) and cross-checked with
``datetime.astimezone``.
"""

from __future__ import annotations

import json
from datetime import UTC, datetime, timedelta
from zoneinfo import ZoneInfo

import pytest
from sqlmodel import col, select

from ledger.errors import InputError, RefusedError
from ledger.logbook.auth import find_user
from ledger.logbook.site import set_site, site_name, site_settings, site_zone
from ledger.rules.localtime import local_text
from ledger.store.engine import transaction
from ledger.store.tables import AuditEvent, Setting
from tests.world import World

BERLIN = ZoneInfo("Europe/Berlin")

# (UTC instant, local text by the EU rule)
SPRING = [
    (datetime(2026, 3, 29, 0, 30, tzinfo=UTC), "2026-03-29T01:30:00+01:00"),
    (datetime(2026, 3, 29, 0, 59, 59, tzinfo=UTC), "2026-03-29T01:59:59+01:00"),
    (datetime(2026, 3, 29, 1, 0, tzinfo=UTC), "2026-03-29T03:00:00+02:00"),
    (datetime(2026, 3, 29, 1, 30, tzinfo=UTC), "2026-03-29T03:30:00+02:00"),
]
AUTUMN = [  # 02:30 local happens twice: only the offset tells them apart
    (datetime(2026, 10, 25, 0, 30, tzinfo=UTC), "2026-10-25T02:30:00+02:00"),
    (datetime(2026, 10, 25, 1, 30, tzinfo=UTC), "2026-10-25T02:30:00+01:00"),
]


@pytest.mark.parametrize(("at", "expected"), SPRING + AUTUMN)
def test_local_text_across_the_daylight_saving_changes(at: datetime, expected: str) -> None:
    assert local_text(at, BERLIN) == expected
    assert datetime.fromisoformat(expected) == at  # the same instant
    assert datetime.fromisoformat(expected).utcoffset() == at.astimezone(BERLIN).utcoffset()


def test_local_text_defaults_to_utc_and_refuses_a_naive_time() -> None:
    at = datetime(2026, 3, 29, 0, 30, 12, 345678, tzinfo=UTC)
    assert local_text(at) == "2026-03-29T00:30:12+00:00"
    assert local_text(at.astimezone(BERLIN), UTC) == "2026-03-29T00:30:12+00:00"
    with pytest.raises(ValueError, match="no time zone"):
        local_text(datetime(2026, 3, 29, 0, 30), BERLIN)


def _events(world: World, key: str) -> list[AuditEvent]:
    with transaction(world.engine()) as s:
        return list(
            s.exec(
                select(AuditEvent)
                .where(AuditEvent.entity == "setting", AuditEvent.entity_id == key)
                .order_by(col(AuditEvent.seq))
            )
        )


@pytest.mark.sqlite_only
def test_unset_site_is_utc_and_nameless(sqlite_world: World) -> None:
    with transaction(sqlite_world.engine()) as s:
        assert site_zone(s) is UTC
        assert site_name(s) is None
        assert site_settings(s).time_zone is None


def test_an_administrator_sets_the_site_and_it_is_audited(world: World) -> None:
    with transaction(world.engine()) as s:
        admin = find_user(s, "sysadm")
        assert admin is not None
        site = set_site(s, admin, "Halden Fill Hall", "Europe/Berlin", "site commissioning")
    assert (site.name, site.time_zone) == ("Halden Fill Hall", "Europe/Berlin")
    with transaction(world.engine()) as s:
        assert site_zone(s) == BERLIN
        assert site_name(s) == "Halden Fill Hall"
        row = s.get(Setting, "site.timezone")
        assert row is not None and row.created_by == "sysadm"
    (created,) = _events(world, "site.timezone")
    assert created.action == "create" and created.actor == "sysadm"
    assert created.reason == "site commissioning"
    assert json.loads(created.new_value or "{}")["value"] == "Europe/Berlin"


@pytest.mark.sqlite_only
def test_a_later_change_keeps_old_and_new_and_the_zone_as_it_was(sqlite_world: World) -> None:
    with transaction(sqlite_world.engine()) as s:
        admin = find_user(s, "sysadm")
        assert admin is not None
        set_site(s, admin, "Halden Fill Hall", "Europe/Lisbon", "site commissioning")
    with transaction(sqlite_world.engine()) as s:
        admin = find_user(s, "sysadm")
        assert admin is not None
        set_site(s, admin, "Halden Fill Hall", "Europe/Berlin", "zone was set wrong")
    created, changed = _events(sqlite_world, "site.timezone")
    assert changed.action == "change" and changed.field == "value"
    assert json.loads(changed.old_value or "") == "Europe/Lisbon"
    assert json.loads(changed.new_value or "") == "Europe/Berlin"
    assert changed.reason == "zone was set wrong"
    assert len(_events(sqlite_world, "site.name")) == 1  # the same name again: no event
    with transaction(sqlite_world.engine()) as s:
        assert site_zone(s) == BERLIN
        assert site_zone(s, as_of=created.at - timedelta(seconds=1)) is UTC
        assert site_zone(s, as_of=created.at) == ZoneInfo("Europe/Lisbon")
        assert site_zone(s, as_of=changed.at - timedelta(microseconds=1)) == ZoneInfo(
            "Europe/Lisbon"
        )
        assert site_zone(s, as_of=changed.at) == BERLIN
        assert site_name(s, as_of=created.at - timedelta(seconds=1)) is None


@pytest.mark.sqlite_only
@pytest.mark.parametrize("login", ["eng.ray", "qa.lin", "op.kim"])
def test_only_an_administrator_sets_the_site(sqlite_world: World, login: str) -> None:
    before = sqlite_world.snapshot()
    with pytest.raises(RefusedError), transaction(sqlite_world.engine()) as s:
        actor = find_user(s, login)
        assert actor is not None
        set_site(s, actor, "Halden Fill Hall", "Europe/Berlin", "site commissioning")
    assert sqlite_world.snapshot() == before


@pytest.mark.sqlite_only
@pytest.mark.parametrize(
    "zone", ["Europe/Berlinn", "CET+1", "", " Europe/Berlin", "../etc/passwd", "Mars/Olympus"]
)
def test_an_unknown_zone_is_refused_naming_field_value_and_expectation(
    sqlite_world: World, zone: str
) -> None:
    before = sqlite_world.snapshot()
    with pytest.raises(InputError) as err, transaction(sqlite_world.engine()) as s:
        admin = find_user(s, "sysadm")
        assert admin is not None
        set_site(s, admin, "Halden Fill Hall", zone, "site commissioning")
    assert err.value.field == "time_zone"
    assert "an IANA time zone such as Europe/Berlin" in str(err.value)
    assert err.value.exit_code == 2
    assert sqlite_world.snapshot() == before


@pytest.mark.sqlite_only
def test_the_agent_list_as_it_stood_at_an_earlier_time(sqlite_world: World) -> None:
    from ledger.logbook.site import agent_hazards, caution_of, set_agent_hazards

    with transaction(sqlite_world.engine()) as s:
        admin = find_user(s, "sysadm")
        assert admin is not None
        set_agent_hazards(s, admin, ["Sodium Percarbonate=oxidizer"], "new agent")
    between = datetime.now(UTC)
    with transaction(sqlite_world.engine()) as s:
        admin = find_user(s, "sysadm")
        assert admin is not None
        set_agent_hazards(s, admin, ["sodium percarbonate=none", "glycerol=none"], "reclassed")
    with transaction(sqlite_world.engine()) as s:
        assert agent_hazards(s, between) == {"sodium percarbonate": "oxidizer"}
        assert agent_hazards(s) == {"sodium percarbonate": "none", "glycerol": "none"}
        assert caution_of(s, "sodium percarbonate") is None
        assert "oxidizer" in (caution_of(s, "sodium percarbonate", between) or "")
        with pytest.raises(InputError) as err:
            set_agent_hazards(s, find_user(s, "sysadm"), ["x=corrosive"], "why")  # type: ignore[arg-type]
    assert err.value.field == "set" and "corrosive" in str(err.value)
