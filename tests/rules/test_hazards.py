"""Hazard classes of agents and the one caution wording per class (ledger.rules.hazards).

The classes of the shipped agents are checked against the harmonised classifications of
Regulation (EC) No 1272/2008 (CLP), Annex VI, as recalled from memory (not looked up here):
sodium and potassium hydroxide Skin Corr. 1A (H314) -> caustic; nitric and phosphoric acid
corrosive acids -> acid; hydrogen peroxide Ox. Liq. (H271 at high strength) and sodium
hypochlorite (H314, EUH031) -> oxidizer for their oxidizing hazard; ethanol and 2-propanol
Flam. Liq. 2 (H225) -> solvent. Water and sodium chloride carry no classification.
"""

from __future__ import annotations

import pytest
from hypothesis import given
from hypothesis import strategies as st

from ledger.rules.hazards import CAUTIONS, HAZARD_CLASSES, cautions_for, hazard_of, key

CLP = [  # (agent as typed, expected class) - CLP Annex VI, from memory (see above)
    ("sodium hydroxide", "caustic"),
    ("0.5 M NaOH", "caustic"),
    ("Potassium Hydroxide", "caustic"),
    ("nitric acid", "acid"),
    ("0.1 M phosphoric acid", "acid"),
    ("hydrogen peroxide", "oxidizer"),
    ("200 ppm sodium hypochlorite", "oxidizer"),
    ("20 % ethanol", "solvent"),
    ("20% v/v ethanol", "solvent"),
    ("2-propanol", "solvent"),
    ("WFI", "none"),
    ("sodium chloride", "none"),
]


@pytest.mark.parametrize(("agent", "expected"), CLP)
def test_shipped_agents_have_their_class(agent: str, expected: str) -> None:
    assert hazard_of(agent).hazard_class == expected


def test_each_class_has_its_own_wording_and_none_has_no_caution() -> None:
    texts = {c: hazard_of(a).caution for a, c in [("NaOH", "caustic"), ("nitric acid", "acid"),
                                                  ("hydrogen peroxide", "oxidizer"),
                                                  ("ethanol", "solvent")]}  # fmt: skip
    assert len(set(texts.values())) == 4
    for cls, text in texts.items():
        assert text is not None
        assert "follow the site's safety procedure" in text
        assert "eye protection" in text
        assert text == CAUTIONS[cls].format(agent=text.split(" is ")[0].removeprefix("Caution: "))
    assert hazard_of("WFI").caution is None
    assert set(CAUTIONS) == set(HAZARD_CLASSES) - {"none"}


def test_no_caution_gives_instructions_beyond_protection_and_the_procedure() -> None:
    for text in CAUTIONS.values():
        assert "flush" not in text and "spill" not in text and "neutraliz" not in text


def test_an_unlisted_agent_gets_the_unlisted_caution_naming_it() -> None:
    h = hazard_of("Quellclean 7")
    assert h.hazard_class is None
    assert h.caution is not None and "Quellclean 7 is not on the site's agent list" in h.caution
    assert "safety data sheet" in h.caution


def test_the_site_list_adds_agents_and_overrides_the_shipped_one() -> None:
    site = {"Quellclean 7": "caustic", "citric acid": "none"}
    assert hazard_of("quellclean 7", site).hazard_class == "caustic"
    assert hazard_of("citric acid", site).hazard_class == "none"
    assert hazard_of("citric acid").hazard_class == "acid"


def test_a_listed_name_inside_longer_words_is_found_but_not_inside_another_word() -> None:
    assert hazard_of("sodium hydroxide solution").hazard_class == "caustic"
    assert hazard_of("ethanol 20 %").hazard_class == "solvent"
    assert hazard_of("methanolic buffer").hazard_class is None  # "ethanol" inside a word


def test_cautions_for_several_agents_are_distinct_and_in_order() -> None:
    got = cautions_for(["NaOH", "WFI", "0.5 M NaOH", "nitric acid"])
    assert len(got) == 3
    assert got[0].startswith("Caution: NaOH is caustic")
    assert got[2].startswith("Caution: nitric acid is an acid")


@given(st.sampled_from([a for a, _ in CLP]), st.sampled_from(["", " ", "  "]))
def test_surrounding_space_and_case_do_not_change_the_class(agent: str, pad: str) -> None:
    assert hazard_of(pad + agent.upper() + pad).hazard_class == hazard_of(agent).hazard_class
    assert key(agent.upper()) == key(agent)


def test_agents_named_in_a_step_are_found_longest_name_first() -> None:
    from ledger.rules.hazards import agents_in

    found = agents_in("Flush with WFI, sanitize with 2 % Peracetic Acid, then 0.5 M NaOH; "
                      "store in 20 % ethanol. Peracetic acid again.")  # fmt: skip
    # peracetic acid is an oxidizer and is not also read as acetic acid; WFI carries none;
    # each agent once, in the order the text names them, in the text's own words
    assert [(h.agent, h.hazard_class) for h in found] == [
        ("Peracetic Acid", "oxidizer"),
        ("NaOH", "caustic"),
        ("ethanol", "solvent"),
    ]
    assert agents_in("Equilibrate with formulation buffer") == []


def test_a_site_entry_replaces_the_shipped_class_and_is_listed_as_the_sites() -> None:
    from ledger.rules.hazards import agent_rows, agents_in

    site = {"Sodium Percarbonate": "oxidizer", "ethanol": "none"}
    rows = {r[0]: r for r in agent_rows(site)}
    assert rows["sodium percarbonate"] == ("sodium percarbonate", "oxidizer", "site")
    assert rows["ethanol"] == ("ethanol", "none", "site")
    assert rows["sodium hydroxide"] == ("sodium hydroxide", "caustic", "shipped")
    assert hazard_of("20 % ethanol", site).caution is None
    assert [h.agent for h in agents_in("soak in sodium percarbonate", site)] == [
        "sodium percarbonate"
    ]
