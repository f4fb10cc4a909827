"""The fit-for-reuse verdict: plain facts about a module in, FIT or NOT FIT with every reason out.

Pure: no database, no clock (``now`` is a fact). Ratios are fractions (0.85 = 85 %), times
are timezone-aware datetimes, durations seconds. The default limits in ledger are common
practice (DEVELOPERS.md); the site's validated procedures and its quality unit set the real ones.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from datetime import datetime
from typing import Literal

from ledger.rules.water_test import (
    RecoveryClass,
    damage_suspected,
    preuse_in_band,
    recovery_class,
)

Outcome = Literal["ok", "alert", "fail", "info"]

FIT, NOT_FIT = "FIT", "NOT FIT"

_DAY = 86_400.0


@dataclass(frozen=True)
class Limits:
    """The module type's acceptance limits (fractions, cycles, seconds)."""

    recovery_min: float
    recovery_alert: float
    damage_ratio: float
    preuse_band: float
    reuse_limit_cycles: int
    storage_limit_s: float


@dataclass(frozen=True)
class WaterResult:
    """One water-flux test: when, which stage, NWP (m/(s·Pa)) and NWP / baseline."""

    test_id: int
    at: datetime
    stage: str
    nwp: float
    ratio: float | None


@dataclass(frozen=True)
class IntegrityResult:
    test_id: int
    at: datetime
    passed: bool
    kind: str


@dataclass(frozen=True)
class CleaningResult:
    """The latest cleaning: its procedure (None: none named) and its departures from it."""

    cleaning_id: int
    at: datetime
    procedure: str | None
    deviations: tuple[str, ...] | None  # None: not checked; (): conforms


@dataclass(frozen=True)
class Facts:
    """What the verdict needs to know about one module, gathered by the logbook."""

    serial: str
    status: str
    cycles: int
    limits: Limits
    now: datetime
    baseline: WaterResult | None = None
    last_use_at: datetime | None = None  # start of the latest use
    post_clean: WaterResult | None = None  # latest post-clean test
    pre_use: WaterResult | None = None  # latest pre-use test
    latest_water: WaterResult | None = None  # latest test of any stage
    integrity: IntegrityResult | None = None  # latest integrity test
    cleaning: CleaningResult | None = None  # latest cleaning
    storage_start: datetime | None = None  # latest storage start, if still in storage
    storage_solution: str | None = None
    hold_reason: str | None = None
    dedicated_product: str | None = None
    product: str | None = None  # the product the engineer wants to run next


@dataclass(frozen=True)
class Reason:
    """One line of the verdict: what was checked, how it came out, and why.

    ``value`` and ``limit`` are the numbers compared, when there are any, with ``kind`` naming
    what they are: "fraction" (1.0 = 100 %), "time" (s) or "count".
    """

    check: str
    outcome: Outcome
    message: str
    value: float | None = None
    limit: float | None = None
    kind: str | None = None


@dataclass(frozen=True)
class Verdict:
    serial: str
    reasons: tuple[Reason, ...] = field(default_factory=tuple)

    @property
    def fit(self) -> bool:
        return all(r.outcome != "fail" for r in self.reasons)

    @property
    def word(self) -> str:
        return FIT if self.fit else NOT_FIT


def _pct(x: float) -> str:
    return f"{100 * x:.1f} %"


def _days(seconds: float) -> str:
    return f"{seconds / _DAY:.1f} d"


_STATUS_MESSAGES: dict[str, tuple[Outcome, str]] = {
    "available": ("ok", "available"),
    "commissioning": (
        "fail",
        "new module: needs a baseline water-flux test and a passing "
        "integrity test before first use",
    ),
    "in_use": ("fail", "in use: end the use and clean the module first"),
    "awaiting_cleaning": ("fail", "awaiting cleaning"),
    "cleaned": ("fail", "cleaned but not yet released by its post-clean tests"),
    "awaiting_retest": ("fail", "awaiting the retest its disposition asked for"),
    "retired": ("fail", "retired"),
}


def check_status(f: Facts) -> Reason:
    if f.status == "on_hold":
        why = f": {f.hold_reason}" if f.hold_reason else ""
        return Reason("status", "fail", f"on hold{why}; needs a signed disposition")
    outcome, message = _STATUS_MESSAGES.get(f.status, ("fail", f"unknown status {f.status!r}"))
    return Reason("status", outcome, message)


def check_cycles(f: Facts) -> Reason:
    limit = f.limits.reuse_limit_cycles
    text = f"{f.cycles} of {limit} validated cycles used"
    numbers: tuple[float, float, str] = (f.cycles, limit, "count")
    if f.cycles >= limit:
        return Reason("cycles", "fail", f"{text}: the validated reuse limit is reached", *numbers)
    return Reason("cycles", "ok", text, *numbers)


_RECOVERY_OUTCOMES: dict[RecoveryClass, Outcome] = {"pass": "ok", "alert": "alert", "fail": "fail"}


def check_recovery(f: Facts) -> Reason:
    lim = f.limits
    if f.baseline is None:
        return Reason("recovery", "fail", "no baseline water-flux test recorded")
    pc = f.post_clean
    if pc is None or (f.last_use_at is not None and pc.at < f.last_use_at):
        if f.last_use_at is None:
            return Reason("recovery", "ok", "not used yet: the baseline NWP stands")
        return Reason("recovery", "fail", "no post-clean water-flux test since the last use")
    if pc.ratio is None:
        return Reason("recovery", "fail", "the post-clean test has no recovery against baseline")
    text = (
        f"post-clean NWP recovery {_pct(pc.ratio)} of baseline (minimum "
        f"{_pct(lim.recovery_min)}, alert below {_pct(lim.recovery_alert)})"
    )
    numbers: tuple[float, float, str] = (pc.ratio, lim.recovery_min, "fraction")
    outcome = _RECOVERY_OUTCOMES[recovery_class(pc.ratio, lim.recovery_min, lim.recovery_alert)]
    return Reason("recovery", outcome, text, *numbers)


def check_damage(f: Facts) -> Reason:
    latest = f.latest_water
    if latest is None or latest.ratio is None:
        return Reason("damage", "info", "no water-flux test to compare with the baseline")
    text = (
        f"latest NWP ({latest.stage.replace('_', '-')}) is {_pct(latest.ratio)} of baseline "
        f"(damage suspected above {_pct(f.limits.damage_ratio)})"
    )
    numbers: tuple[float, float, str] = (latest.ratio, f.limits.damage_ratio, "fraction")
    if not damage_suspected(latest.ratio, f.limits.damage_ratio):
        return Reason("damage", "ok", text, *numbers)
    it = f.integrity
    if it is not None and it.passed and it.at > latest.at:
        return Reason("damage", "alert", f"{text}; an integrity test passed after it", *numbers)
    return Reason("damage", "fail", f"{text}; an integrity test must pass before reuse", *numbers)


def check_integrity(f: Facts) -> Reason:
    it = f.integrity
    if it is None:
        return Reason("integrity", "fail", "no integrity test recorded")
    kind = it.kind.replace("_", "-")
    when = it.at.isoformat(timespec="minutes")
    if not it.passed:
        return Reason("integrity", "fail", f"last integrity test ({kind}, {when}) failed")
    return Reason("integrity", "ok", f"last integrity test ({kind}, {when}) passed")


def check_cleaning(f: Facts) -> Reason:
    c = f.cleaning
    if c is None:
        return Reason("cleaning", "info", "no cleaning recorded")
    if f.last_use_at is not None and c.at < f.last_use_at:
        return Reason("cleaning", "fail", "no cleaning since the last use")
    if c.deviations is None:
        return Reason(
            "cleaning", "info", f"cleaning {c.cleaning_id} was not checked against a procedure"
        )
    if c.deviations:
        return Reason(
            "cleaning",
            "fail",
            f"cleaning {c.cleaning_id} departed from procedure "
            f"{c.procedure}: " + "; ".join(c.deviations),
        )
    return Reason("cleaning", "ok", f"cleaning {c.cleaning_id} followed procedure {c.procedure}")


def check_storage(f: Facts) -> Reason:
    if f.storage_start is None:
        return Reason("storage", "info", "not in storage")
    held = (f.now - f.storage_start).total_seconds()
    solution = f" in {f.storage_solution}" if f.storage_solution else ""
    text = f"stored{solution} for {_days(held)} (limit {_days(f.limits.storage_limit_s)})"
    numbers: tuple[float, float, str] = (held, f.limits.storage_limit_s, "time")
    if held > f.limits.storage_limit_s:
        return Reason("storage", "fail", f"{text}: clean and retest before use", *numbers)
    return Reason("storage", "ok", text, *numbers)


def check_pre_use(f: Facts) -> Reason:
    pre, pc = f.pre_use, f.post_clean
    if pre is None or pc is None or pre.at < pc.at:
        return Reason("pre-use", "info", "no pre-use water-flux test since the last cleaning")
    if not pc.nwp > 0:
        return Reason("pre-use", "fail", "the last post-clean NWP is not positive")
    ratio = pre.nwp / pc.nwp
    band = f.limits.preuse_band
    text = f"pre-use NWP is {_pct(ratio)} of the last post-clean NWP (band ±{_pct(band)})"
    numbers: tuple[float, float, str] = (ratio, band, "fraction")
    if not preuse_in_band(ratio, band):
        return Reason("pre-use", "fail", text, *numbers)
    return Reason("pre-use", "ok", text, *numbers)


def check_product(f: Facts) -> Reason:
    if f.dedicated_product is None:
        nxt = f"; first use dedicates it to {f.product}" if f.product else ""
        return Reason("product", "ok", f"not yet dedicated to a product{nxt}")
    if f.product is None:
        return Reason("product", "info", f"dedicated to {f.dedicated_product}")
    if f.product != f.dedicated_product:
        return Reason(
            "product",
            "fail",
            f"dedicated to {f.dedicated_product}, not {f.product}; "
            "another product needs a signed override with its reason",
        )
    return Reason("product", "ok", f"dedicated to {f.dedicated_product}")


CHECKS = (
    check_status,
    check_cycles,
    check_recovery,
    check_damage,
    check_integrity,
    check_cleaning,
    check_storage,
    check_pre_use,
    check_product,
)


def verdict(f: Facts) -> Verdict:
    """FIT when no check fails; every check's reason is listed either way."""
    return Verdict(f.serial, tuple(check(f) for check in CHECKS))
