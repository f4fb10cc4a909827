"""Who may sign a batch-record revision, with which meaning, and when (DEVELOPERS.md).

From 21 CFR Part 11 (§11.50 manifestation, §11.70 binding, §11.200 components) and EU GMP
Annex 11 §14, as a site would configure them; the meanings and roles per meaning come from the
master-record template:

- the meanings are a fixed list and are signed in the template's order, each once per revision;
- the signer's role must be one the template allows for that meaning; an administrator never
  signs a production record;
- no one signs two meanings of the same revision (performer, verifier, reviewer and approver are
  different people);
- approval is refused while a check is FAIL without a closed deviation naming it, while a check
  is MISSING, or while any deviation is open.

Every reason is returned, not only the first, so the signer sees all that stands in the way.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass

MEANINGS = ("performed", "verified", "reviewed", "approved")
ADMIN_ROLE = "admin"


@dataclass(frozen=True)
class Signed:
    """A signature already on the revision: its meaning and who gave it."""

    meaning: str
    login: str


@dataclass(frozen=True)
class Blocker:
    """A check that stands in the way of approval: its name and verdict."""

    check: str
    verdict: str  # FAIL or MISSING
    deviation: int | None = None  # the deviation naming it, if any
    deviation_closed: bool = False


def refusals(
    meaning: str,
    login: str,
    role: str,
    required: Sequence[str],
    roles: Mapping[str, Sequence[str]],
    signed: Iterable[Signed],
    blockers: Iterable[Blocker] = (),
    open_deviations: Iterable[int] = (),
) -> list[str]:
    """Why ``login`` (``role``) may not sign this revision as ``meaning``; empty when allowed."""
    if meaning not in MEANINGS:
        return [f"{meaning!r} is not a signature meaning; one of {', '.join(MEANINGS)}"]
    out: list[str] = []
    done = list(signed)
    if role == ADMIN_ROLE:
        out.append(f"{login} is an administrator; administrators cannot sign production records")
    if meaning not in required:
        out.append(
            f"the master record asks for no {meaning!r} signature; it asks for "
            + ", ".join(required)
        )
        return out
    allowed = tuple(roles.get(meaning, ()))
    if role != ADMIN_ROLE and role not in allowed:
        out.append(
            f"the {meaning!r} signature needs the role {' or '.join(allowed)}; {login} is {role}"
        )
    same = [s for s in done if s.meaning == meaning]
    if same:
        out.append(f"this revision is already signed as {meaning} by {same[0].login}")
    earlier = required[: list(required).index(meaning)]
    missing = [m for m in earlier if m not in {s.meaning for s in done}]
    if missing:
        out.append(f"sign in order: {', '.join(missing)} first, then {meaning}")
    own = [s.meaning for s in done if s.login == login and s.meaning != meaning]
    if own:
        out.append(
            f"{login} already signed this revision as {', '.join(own)}; each signature "
            "of a revision must be by a different person"
        )
    if meaning == "approved":
        out.extend(approval_blockers(blockers, open_deviations))
    return out


def next_meaning(required: Sequence[str], signed: Iterable[str]) -> str | None:
    """The first meaning of ``required`` (the template's order) not yet signed on the
    revision; None when every one is."""
    done = set(signed)
    return next((m for m in required if m not in done), None)


def fully_signed(required: Sequence[str], signed: Iterable[str]) -> bool:
    """True when the revision carries every meaning ``required``: approved and locked, and
    the only revision that may be sealed."""
    return next_meaning(required, signed) is None


def approval_blockers(blockers: Iterable[Blocker], open_deviations: Iterable[int]) -> list[str]:
    """What stops approval: FAIL without a closed deviation, MISSING, open deviations."""
    out: list[str] = []
    for b in blockers:
        if b.verdict == "MISSING":
            out.append(f"check {b.check} is MISSING: enter its result or correct the record")
        elif b.verdict == "FAIL" and b.deviation is None:
            out.append(f"check {b.check} is FAIL and no deviation names it")
        elif b.verdict == "FAIL" and not b.deviation_closed:
            out.append(f"check {b.check} is FAIL and its deviation {b.deviation} is still open")
    for number in open_deviations:
        out.append(f"deviation {number} is open: close it before approval")
    return sorted(set(out), key=out.index)
