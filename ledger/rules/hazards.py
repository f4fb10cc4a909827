"""Cautions by chemistry: each cleaning, sanitizing or storage agent has a hazard class, and
the caution printed beside a cleaning step, a solution or a storage period comes from that
class, in one wording per class that every front end and the PDF use.

The shipped agent list covers agents common in hollow-fiber care (common practice, from
general chemistry: sodium and potassium hydroxide are caustic, the mineral and organic acids
used for descaling are acids, hypochlorite, peroxide and peracetic acid are oxidizers, the
alcohols used for storage are flammable solvents). A site adds its own agents (the setting
``agents.hazards``, audited). The cautions say no more than the usual protective equipment and
to follow the site's safety procedure: the procedure, not this text, is what governs.
"""

from __future__ import annotations

import re
from collections.abc import Mapping
from dataclasses import dataclass

HAZARD_CLASSES = ("caustic", "acid", "oxidizer", "solvent", "none")

_PPE = "Wear eye protection, gloves and protective clothing"

# One wording per class; {agent} is the agent as the record names it.
CAUTIONS: dict[str, str] = {
    "caustic": f"Caution: {{agent}} is caustic. {_PPE}, and follow the site's safety procedure "
    "for caustic solutions.",
    "acid": f"Caution: {{agent}} is an acid. {_PPE}, and follow the site's safety procedure for "
    "acids.",
    "oxidizer": f"Caution: {{agent}} is an oxidizer. {_PPE}, and follow the site's safety "
    "procedure for oxidizers.",
    "solvent": f"Caution: {{agent}} is a flammable solvent. {_PPE}, and follow the site's safety "
    "procedure for flammable solvents.",
}
UNLISTED = (
    "Caution: {agent} is not on the site's agent list, so its hazard is not known here. Follow "
    "the site's safety procedure and the agent's safety data sheet."
)

# name (casefolded, single spaces) -> class. Synonyms and formulas people type are listed.
SHIPPED: dict[str, str] = {
    "sodium hydroxide": "caustic",
    "naoh": "caustic",
    "caustic soda": "caustic",
    "potassium hydroxide": "caustic",
    "koh": "caustic",
    "phosphoric acid": "acid",
    "h3po4": "acid",
    "citric acid": "acid",
    "nitric acid": "acid",
    "hno3": "acid",
    "acetic acid": "acid",
    "hydrochloric acid": "acid",
    "hcl": "acid",
    "sodium hypochlorite": "oxidizer",
    "hypochlorite": "oxidizer",
    "naocl": "oxidizer",
    "hydrogen peroxide": "oxidizer",
    "h2o2": "oxidizer",
    "peracetic acid": "oxidizer",  # an acid too, but its oxidizer hazard governs
    "ethanol": "solvent",
    "isopropanol": "solvent",
    "isopropyl alcohol": "solvent",
    "2-propanol": "solvent",
    "benzyl alcohol": "solvent",
    "water": "none",
    "wfi": "none",
    "water for injection": "none",
    "purified water": "none",
    "sodium chloride": "none",
    "nacl": "none",
    "pbs": "none",
}

# A leading strength people type into the agent ("0.5 M NaOH", "20 % ethanol", "20% v/v
# ethanol") does not change what the agent is.
_STRENGTH = re.compile(
    r"^\s*[\d.,]+\s*(?:%\s*(?:v/v|w/v|w/w)?|m|mol/l|mm|g/l|ppm|n)?\s+", re.IGNORECASE
)


def key(agent: str) -> str:
    """The agent's name as looked up: strength removed, casefolded, single spaces."""
    text = _STRENGTH.sub("", agent.strip())
    return " ".join(text.casefold().split())


@dataclass(frozen=True)
class Hazard:
    """An agent's hazard class (None: not on the agent list) and the caution to print (None
    for an agent of class "none")."""

    agent: str
    hazard_class: str | None
    caution: str | None


def hazard_of(agent: str, site: Mapping[str, str] | None = None) -> Hazard:
    """The hazard of ``agent`` from the site's list (``site``: name -> class, which overrides
    the shipped defaults), then the shipped list; an agent on neither gets the unlisted
    caution. The agent's words appear in the caution as given."""
    name = key(agent)
    table = {**SHIPPED, **{key(k): v for k, v in (site or {}).items()}}
    found = table.get(name)
    if found is None:
        # "sodium hydroxide solution", "ethanol 20 %": a listed name inside the words.
        for listed in sorted(table, key=len, reverse=True):
            if re.search(rf"(?<![\w-]){re.escape(listed)}(?![\w-])", name):
                found = table[listed]
                break
    shown = agent.strip()
    if found is None:
        return Hazard(shown, None, UNLISTED.format(agent=shown))
    if found == "none":
        return Hazard(shown, "none", None)
    return Hazard(shown, found, CAUTIONS[found].format(agent=shown))


def cautions_for(agents: list[str], site: Mapping[str, str] | None = None) -> list[str]:
    """The distinct cautions of ``agents`` in their order (none for class "none")."""
    out: list[str] = []
    for a in agents:
        text = hazard_of(a, site).caution
        if text is not None and text not in out:
            out.append(text)
    return out


def agents_in(text: str, site: Mapping[str, str] | None = None) -> list[Hazard]:
    """The listed agents named in free ``text`` (a step's instruction), longest names first so
    "peracetic acid" is not also read as "acetic acid"; each as its words appear in the text.
    Agents of class "none" are left out (they carry no caution)."""
    table = {**SHIPPED, **{key(k): v for k, v in (site or {}).items()}}
    folded = text.casefold()
    taken: list[tuple[int, int]] = []
    found: list[tuple[int, Hazard]] = []
    for listed in sorted(table, key=len, reverse=True):
        if table[listed] == "none":
            continue
        for m in re.finditer(rf"(?<![\w-]){re.escape(listed)}(?![\w-])", folded):
            if any(a < m.end() and m.start() < b for a, b in taken):
                continue
            taken.append((m.start(), m.end()))
            shown = text[m.start() : m.end()]
            cls = table[listed]
            found.append((m.start(), Hazard(shown, cls, CAUTIONS[cls].format(agent=shown))))
    out: list[Hazard] = []
    seen: set[str] = set()
    for _, h in sorted(found, key=lambda x: x[0]):
        if key(h.agent) not in seen:
            seen.add(key(h.agent))
            out.append(h)
    return out


def check_class(value: str) -> str | None:
    """``value`` as a hazard class, or None when it is not one."""
    v = value.strip().casefold()
    return v if v in HAZARD_CLASSES else None


def agent_rows(site: Mapping[str, str] | None = None) -> list[tuple[str, str, str]]:
    """(agent, class, "site" or "shipped") for every listed agent, sorted by name; a site's
    entry replaces the shipped one of the same name."""
    own = {key(k): v for k, v in (site or {}).items()}
    rows = {k: (k, v, "shipped") for k, v in SHIPPED.items()}
    rows.update({k: (k, v, "site") for k, v in own.items()})
    return [rows[k] for k in sorted(rows)]
