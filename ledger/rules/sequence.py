"""Module status and the order of work (DEVELOPERS.md; issue: the module logbook).

available -> in use -> awaiting cleaning -> cleaned -> (post-clean tests) -> available.
A failed integrity test or a recovery below the limit puts the module on hold until a signed
disposition (retest, or retire). Pure functions on status words and plain facts.
"""

from __future__ import annotations

from dataclasses import dataclass

from ledger.rules.water_test import damage_suspected, recovery_meets_minimum

# Which statuses allow each action.
ALLOWED: dict[str, frozenset[str]] = {
    "water:baseline": frozenset({"commissioning"}),
    "water:pre_use": frozenset({"available"}),
    "water:post_use": frozenset({"awaiting_cleaning"}),
    "water:post_clean": frozenset({"cleaned", "awaiting_retest"}),
    "integrity": frozenset(
        {"commissioning", "available", "awaiting_cleaning", "cleaned", "awaiting_retest"}
    ),
    "cleaning": frozenset(
        {"commissioning", "available", "awaiting_cleaning", "cleaned", "awaiting_retest"}
    ),
    "storage": frozenset({"commissioning", "available"}),
    "use:start": frozenset({"available"}),
    "use:end": frozenset({"in_use"}),
    "hold": frozenset(
        {"commissioning", "available", "in_use", "awaiting_cleaning", "cleaned", "awaiting_retest"}
    ),
    "release": frozenset({"on_hold"}),
    "retire": frozenset(
        {"commissioning", "available", "awaiting_cleaning", "cleaned", "on_hold", "awaiting_retest"}
    ),
    "void": frozenset(
        {
            "commissioning",
            "available",
            "awaiting_cleaning",
            "cleaned",
            "awaiting_retest",
            "on_hold",
            "in_use",
        }
    ),
}

ACTION_WORDS = {
    "water:baseline": "a baseline water-flux test",
    "water:pre_use": "a pre-use water-flux test",
    "water:post_use": "a post-use water-flux test",
    "water:post_clean": "a post-clean water-flux test",
    "integrity": "an integrity test",
    "cleaning": "a cleaning",
    "storage": "a storage start",
    "use:start": "the start of a use",
    "use:end": "the end of a use",
    "hold": "a hold",
    "release": "a disposition",
    "retire": "retirement",
    "void": "voiding a record",
}

NEXT_STEP = {
    "commissioning": "record a baseline water-flux test and a passing integrity test",
    "available": "start a use, or record a pre-use test, an integrity test or a storage start",
    "in_use": "end the use",
    "awaiting_cleaning": "record the cleaning (a post-use water-flux test may come first)",
    "cleaned": "record the post-clean water-flux test",
    "on_hold": "an engineer or QA signs a disposition (retest or retire)",
    "awaiting_retest": "record a post-clean water-flux test and a passing integrity test",
    "retired": "nothing: a retired module takes no further records",
}


def refusal(action: str, status: str, serial: str) -> str | None:
    """None when ``action`` is allowed in ``status``; else a message saying what comes first."""
    if status in ALLOWED[action]:
        return None
    return (
        f"cannot record {ACTION_WORDS[action]} for module {serial}: it is "
        f"{status.replace('_', ' ')}; first {NEXT_STEP[status]}"
    )


@dataclass(frozen=True)
class Transition:
    """The status after an action; ``hold`` names the cause when the action put it on hold."""

    status: str
    hold: str | None = None
    note: str | None = None


def after_water_test(
    status: str,
    stage: str,
    *,
    recovery: float | None,
    recovery_min: float,
    damage_ratio: float,
    integrity_passed: bool,
) -> Transition:
    """Status after a water-flux test.

    ``integrity_passed``: in commissioning, whether an integrity test has passed; awaiting
    retest, whether one passed after the disposition. A post-clean NWP above the damage ratio
    always waits for an integrity test recorded after it.
    """
    if stage == "baseline":
        if integrity_passed:
            return Transition("available", note="baseline and integrity done: available")
        return Transition(status, note="baseline recorded; a passing integrity test is next")
    if stage != "post_clean":
        return Transition(status)
    if recovery is None:
        raise ValueError("a post-clean test needs a recovery against the baseline")
    if not recovery_meets_minimum(recovery, recovery_min):
        return Transition(
            "on_hold",
            hold="recovery",
            note=f"recovery {100 * recovery:.1f} % is below the minimum {100 * recovery_min:.1f} %",
        )
    if damage_suspected(recovery, damage_ratio):
        # The integrity test must follow the NWP that raised the suspicion (as in fitness).
        return Transition(
            status,
            note=f"NWP is {100 * recovery:.1f} % of baseline (damage "
            "suspected): a passing integrity test is needed",
        )
    if status == "awaiting_retest" and not integrity_passed:
        return Transition(
            status, note="the disposition asked for a retest: a passing integrity test is needed"
        )
    return Transition("available", note="post-clean tests passed: available")


def after_cleaning(status: str, deviations: list[str] | None) -> Transition:
    """Status after a cleaning. A cleaning that departs from its validated procedure holds the
    module until a signed disposition; ``deviations`` None means no procedure was named."""
    if deviations:
        return Transition(
            "on_hold",
            hold="cleaning",
            note="cleaning outside its procedure: " + "; ".join(deviations),
        )
    if status in ("available", "awaiting_cleaning", "cleaned"):
        return Transition("cleaned", note="cleaned: record the post-clean water-flux test next")
    return Transition(status)


def after_integrity_test(
    status: str,
    passed: bool,
    *,
    has_baseline: bool,
    post_clean_passed: bool,
) -> Transition:
    """Status after an integrity test.

    ``post_clean_passed``: a post-clean water-flux test at or above the recovery minimum was
    recorded after the cleaning (or disposition) and is waiting only for this test.
    """
    if not passed:
        return Transition("on_hold", hold="integrity", note="integrity test failed: on hold")
    if status == "commissioning" and has_baseline:
        return Transition("available", note="baseline and integrity done: available")
    if status in ("cleaned", "awaiting_retest") and post_clean_passed:
        return Transition("available", note="post-clean tests passed: available")
    return Transition(status)
