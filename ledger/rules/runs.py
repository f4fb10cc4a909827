"""The run's life: which action each run status allows, and what a run start requires.

planned -> (start) in_progress -> (finish) finished -> (submit) in_review -> (approval, the
last signature) approved. Skid logs and QC results can be entered while the run is in progress
or finished; deviations until review. Once in review the record's data is frozen for signing;
an approved record is locked. A correction (from review or after approval) sends the run back
to finished, and its next submission is signed as a new revision.
"""

from __future__ import annotations

from datetime import datetime

RUN_STATUSES = ("planned", "in_progress", "finished", "in_review", "approved")

ALLOWED: dict[str, frozenset[str]] = {
    "start": frozenset({"planned"}),
    "import": frozenset({"in_progress", "finished"}),
    "qc": frozenset({"in_progress", "finished"}),
    "deviation": frozenset({"planned", "in_progress", "finished"}),
    "close_deviation": frozenset({"planned", "in_progress", "finished"}),
    "finish": frozenset({"in_progress"}),
    "submit": frozenset({"finished"}),
    "sign": frozenset({"in_review"}),
    "correct": frozenset({"in_review", "approved"}),
}
NEXT: dict[str, str] = {
    "planned": "start the run (run start)",
    "in_progress": "import the skid log, enter QC results, then finish the run (run finish)",
    "finished": "enter any missing QC results and deviations, then submit it (run submit)",
    "in_review": "sign it (fluxledger record sign), or correct it (fluxledger record correct)",
    "approved": "nothing: the record is approved and locked; a correction makes a new revision "
    "(fluxledger record correct)",
}
WORDS = {"close_deviation": "close a deviation of", "qc": "enter QC results for",
         "import": "import a skid log into"}  # fmt: skip


def refusal(action: str, status: str, label: str) -> str | None:
    """Why ``action`` is refused for a run in ``status``, or None when it is allowed."""
    if status in ALLOWED[action]:
        return None
    verb = WORDS.get(action, action)
    return f"cannot {verb} {label}: it is {status.replace('_', ' ')}; next: {NEXT[status]}"


def start_problems(
    now: datetime,
    clean_hold_s: float,
    cleaned_at: datetime | None,
    pre_use_at: datetime | None,
    pre_use_ok: bool,
    integrity_at: datetime | None,
    integrity_ok: bool,
) -> list[str]:
    """What stops a run from starting: the pre-use water-flux test and the integrity test
    must both have passed since the last cleaning and within the clean-hold window."""
    problems: list[str] = []
    hours = clean_hold_s / 3600
    for what, at, ok in (
        ("pre-use water-flux test", pre_use_at, pre_use_ok),
        ("integrity test", integrity_at, integrity_ok),
    ):
        if at is None or (cleaned_at is not None and at < cleaned_at):
            problems.append(f"no {what} since the last cleaning")
        elif not ok:
            problems.append(f"the {what} since the last cleaning did not pass")
        elif (now - at).total_seconds() > clean_hold_s:
            age = (now - at).total_seconds() / 3600
            problems.append(
                f"the {what} is {age:.1f} h old, beyond the clean-hold window of {hours:g} h"
            )
    return problems
