"""Executing a master record step by step: which signature a step may take next, and when an
entry is late.

Steps are signed in order: step N is performed only once every step before it carries all the
meanings its template lists; a step is verified only after it was performed, and by another
person than its performer (common practice: the four-eyes principle of 21 CFR 211.188(b)(11),
"identification of the persons performing and directly supervising or checking each
significant step"). Each meaning is given once per step. An entry whose work was done more than
LATE_AFTER_S before it was entered is late: both times are kept and shown.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from datetime import datetime

STEP_MEANINGS = ("performed", "verified")
# How long after the work a step entry still counts as contemporaneous: 15 minutes (common
# practice for paper batch records, no single source; a site's procedure sets its own).
LATE_AFTER_S = 15 * 60.0


@dataclass(frozen=True)
class StepSigned:
    """A signature already on a step of the run: the step's number (from 1), meaning, who."""

    step: int
    meaning: str
    login: str


def sign_problem(
    step: int, meaning: str, login: str, required: Sequence[Sequence[str]],
    signed: Iterable[StepSigned],
) -> str | None:  # fmt: skip
    """Why ``login`` may not sign step ``step`` (from 1) as ``meaning``, or None when allowed.

    ``required`` holds each step's meanings in the template's order; ``signed`` the signatures
    already given on the run's steps.
    """
    if meaning not in STEP_MEANINGS:
        return f"{meaning!r} is not a step signature; one of {', '.join(STEP_MEANINGS)}"
    if not 1 <= step <= len(required):
        return f"there is no step {step}: the record has steps 1 to {len(required)}"
    wanted = required[step - 1]
    if meaning not in wanted:
        return f"step {step} is signed as {', '.join(wanted)} only, not {meaning}"
    done = list(signed)
    here = {s.meaning: s.login for s in done if s.step == step}
    if meaning in here:
        return f"step {step} is already {meaning} by {here[meaning]}"
    if meaning == "performed":
        for earlier in range(1, step):
            have = {s.meaning for s in done if s.step == earlier}
            missing = [m for m in required[earlier - 1] if m not in have]
            if missing:
                return (f"step {step} comes after step {earlier}, which is not yet "
                        f"{' and '.join(missing)}")  # fmt: skip
        return None
    performer = here.get("performed")
    if performer is None:
        return f"step {step} is not yet performed; it is verified after it is performed"
    if performer.casefold() == login.casefold():
        return f"{performer} performed step {step}; another person verifies it"
    return None


def is_late(done_at: datetime, entered_at: datetime, allowance_s: float = LATE_AFTER_S) -> bool:
    """True when the work (``done_at``) was done more than ``allowance_s`` seconds before it
    was entered (``entered_at``); both aware datetimes."""
    return (entered_at - done_at).total_seconds() > allowance_s
