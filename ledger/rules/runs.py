"""The run's life: which action each run status allows, and what a run start requires.

planned -> (start) in_progress -> (finish) finished -> (submit) in_review -> (approval, the
last signature) approved. Skid logs and QC results can be entered while the run is in progress
or finished; deviations until review. Once in review the record's data is frozen for signing;
an approved record is locked. A correction (from review or after approval) sends the run back
to finished, and its next submission is signed as a new revision. A run that goes wrong before
review is aborted (planned, in progress or finished -> aborted) with a reason; it is kept and
its record prints as aborted. A skid log can be voided while the run is in progress or
finished, and another imported.

Times keep their order: a skid log lies within the run, from its start to its finish (or to
now while it runs), give or take LOG_TOLERANCE_S for clocks that differ between the skid and
this system, and never in the future.
"""

from __future__ import annotations

from datetime import datetime, timedelta

RUN_STATUSES = ("planned", "in_progress", "finished", "in_review", "approved", "aborted")
# How far a skid log may reach outside its run's start and finish: the skid's clock and this
# system's may differ by minutes (common practice; a site may set its own in its procedure).
LOG_TOLERANCE_S = 600.0

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
    "abort": frozenset({"planned", "in_progress", "finished"}),
    "approve_plan": frozenset({"planned"}),
    "void_log": frozenset({"in_progress", "finished"}),
    "step": frozenset({"in_progress"}),
}
NEXT: dict[str, str] = {
    "planned": "have the plan approved (run approve-plan), then start the run (run start)",
    "in_progress": "import the skid log, enter QC results, then finish the run (run finish)",
    "finished": "enter any missing QC results and deviations, then submit it (run submit)",
    "in_review": "sign it (fluxledger record sign), or correct it (fluxledger record correct)",
    "approved": "nothing: the record is approved and locked; a correction makes a new revision "
    "(fluxledger record correct)",
    "aborted": "nothing: the run was aborted; print its record (fluxledger record print) and "
    "plan a new run",
}
WORDS = {"close_deviation": "close a deviation of", "qc": "enter QC results for",
         "import": "import a skid log into", "void_log": "void a skid log of",
         "approve_plan": "approve the plan of", "step": "sign a step of"}  # fmt: skip


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


def log_outside_run(
    log_start: datetime,
    log_end: datetime,
    started_at: datetime | None,
    finished_at: datetime | None,
    now: datetime,
    tolerance_s: float = LOG_TOLERANCE_S,
) -> str | None:
    """Why a skid log spanning ``log_start``..``log_end`` (aware UTC) cannot belong to a run
    started at ``started_at`` and finished at ``finished_at`` (None: still running), or None
    when it can. Each bound is widened by ``tolerance_s``; the edge itself is inside."""
    slack = timedelta(seconds=tolerance_s)
    minutes = f"{tolerance_s / 60:g} min"

    def t(x: datetime) -> str:
        return x.isoformat(timespec="seconds")

    if log_end > now + slack:
        return (f"the log ends at {t(log_end)}, in the future (now {t(now)}, tolerance "
                f"{minutes})")  # fmt: skip
    if started_at is None:
        return "the run has not started"
    if log_start < started_at - slack:
        return (f"the log starts at {t(log_start)}, before the run started at {t(started_at)} "
                f"(tolerance {minutes})")  # fmt: skip
    if finished_at is not None and log_end > finished_at + slack:
        return (f"the log ends at {t(log_end)}, after the run finished at {t(finished_at)} "
                f"(tolerance {minutes})")  # fmt: skip
    return None


def plan_approval_problem(planner: str, approver: str, approved_at: datetime | None) -> str | None:
    """Why ``approver`` cannot approve a plan made by ``planner`` (None when they can): a plan
    is approved once, by a second person (common practice: the four-eyes principle)."""
    if approved_at is not None:
        return "its plan is already approved"
    if approver == planner:
        return f"{approver} planned it; the plan is approved by a second engineer or QA"
    return None


def planned_time(planned_at: datetime | None, created_at: datetime) -> datetime:
    """When a run was planned: the time entered for a late plan, else when it was recorded."""
    return planned_at if planned_at is not None else created_at
