"""Cautions by chemistry on the terminal (issue 15 item 4): each cleaning and storage prints the
caution of its agent's hazard class in the one wording of ``ledger.rules.hazards``; water
prints none; the site adds agents to its list (`site agents`, an administrator, audited); the
site-limits note prints once, at the foot of a report, and not after one-line outcomes.

Classes of the agents used here follow CLP Annex VI as recalled from memory (see
tests/rules/test_hazards.py): nitric acid is a corrosive acid, sodium hydroxide caustic,
ethanol a flammable liquid. Sodium percarbonate is an oxidizer (from memory); it is not on the
shipped list, which is the point of adding it.
"""

from __future__ import annotations

import json

import pytest
import sqlalchemy as sa

from ledger.cli.describe import SITE_NOTE
from ledger.rules.hazards import CAUTIONS, UNLISTED
from tests.world import World

pytestmark = pytest.mark.sqlite_only


def _clean(w: World, agent: str, *extra: str) -> str:
    w.add_module()
    w.ok(w.baseline())
    w.ok(w.integrity())
    out = w.ok(
        w.as_user(
            "op.kim", "care", "clean", "QMB-0142", "--agent", agent, "--concentration",
            "0.1 mol/L", "--temperature", "25 degC", "--contact-time", "30 min",
            "--reagent-lot", "RL-1", *extra,
        )
    )  # fmt: skip
    return out.stdout


def test_an_acid_cleaning_prints_the_acid_caution_and_not_the_caustic_one(
    sqlite_world: World,
) -> None:
    out = _clean(sqlite_world, "nitric acid")
    assert CAUTIONS["acid"].format(agent="nitric acid") in out
    assert "caustic" not in out


def test_a_caustic_cleaning_prints_the_caustic_caution_in_json_too(sqlite_world: World) -> None:
    body = json.loads(_clean(sqlite_world, "sodium hydroxide", "--json"))
    assert body["caution"] == CAUTIONS["caustic"].format(agent="sodium hydroxide")


def test_a_water_flush_prints_no_caution(sqlite_world: World) -> None:
    out = _clean(sqlite_world, "WFI")
    assert "Caution" not in out


def test_an_unlisted_agent_says_its_hazard_is_not_known(sqlite_world: World) -> None:
    out = _clean(sqlite_world, "Enzymatic cleaner X")
    assert UNLISTED.format(agent="Enzymatic cleaner X") in out


def test_storage_in_ethanol_prints_the_solvent_caution(sqlite_world: World) -> None:
    w = sqlite_world
    w.ready()
    w.ok(w.cycle())
    out = w.ok(w.as_user("op.kim", "care", "store", "QMB-0142", "--solution", "20 % ethanol"))
    assert CAUTIONS["solvent"].format(agent="20 % ethanol") in out.stdout


def test_the_site_adds_an_agent_and_its_class_chooses_the_caution(sqlite_world: World) -> None:
    w = sqlite_world
    done = w.as_user("sysadm", "site", "agents", "--set", "Sodium Percarbonate=oxidizer",
                     "--reason", "added to the cleaning programme", "--json")  # fmt: skip
    rows = {r["agent"]: r for r in w.ok(done).json()["agents"]}
    assert rows["sodium percarbonate"]["hazard_class"] == "oxidizer"
    assert rows["sodium percarbonate"]["source"] == "site"
    assert rows["sodium hydroxide"]["source"] == "shipped"
    out = _clean(w, "sodium percarbonate")
    assert CAUTIONS["oxidizer"].format(agent="sodium percarbonate") in out
    with w.engine().connect() as conn:
        events = conn.execute(
            sa.text(
                "SELECT actor, reason FROM audit_event WHERE entity = 'setting' "
                "AND entity_id = 'agents.hazards'"
            )
        ).all()
    assert [tuple(e) for e in events] == [("sysadm", "added to the cleaning programme")]


@pytest.mark.parametrize(
    ("value", "named"),
    [("sodium percarbonate=explosive", "explosive"), ("no equals sign", "AGENT=CLASS"),
     ("=acid", "AGENT=CLASS")],
)  # fmt: skip
def test_a_bad_agent_entry_is_refused_and_nothing_is_written(
    sqlite_world: World, value: str, named: str
) -> None:
    w = sqlite_world
    bad = w.as_user("sysadm", "site", "agents", "--set", value, "--reason", "x")
    assert bad.code == 2, (bad.stdout, bad.stderr)
    assert "set" in bad.stderr and named in bad.stderr
    assert "Traceback" not in bad.stderr + bad.stdout
    with w.engine().connect() as conn:
        n = conn.execute(sa.text("SELECT count(*) FROM setting WHERE key = 'agents.hazards'"))
        assert n.scalar() == 0


def test_only_an_administrator_changes_the_agent_list(sqlite_world: World) -> None:
    w = sqlite_world
    refused = w.as_user("eng.ray", "site", "agents", "--set", "x=acid", "--reason", "x")
    assert refused.code != 0
    assert "administrator" in refused.stderr.lower() or "admin" in refused.stderr, refused.stderr
    assert "Traceback" not in refused.stderr


def test_the_site_note_prints_once_at_the_foot_of_a_report(
    sqlite_world: World, monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.setenv("COLUMNS", "400")  # one line per note
    w = sqlite_world
    cleaned = _clean(w, "sodium hydroxide")
    assert SITE_NOTE not in cleaned  # a one-line outcome carries no note
    out = w.ok(w.cli("module", "show", "QMB-0142")).stdout
    assert out.count(SITE_NOTE) == 1
    assert out.rstrip().endswith(SITE_NOTE)  # at the foot: nothing of the report follows
    notes = w.ok(w.cli("module", "show", "QMB-0142", "--json")).json()["notes"]
    assert notes.count(SITE_NOTE) == 1
    assert CAUTIONS["caustic"].format(agent="sodium hydroxide") in notes
