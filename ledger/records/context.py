"""The batch record's context: a plain object holding everything a record shows, no database.

``ledger.records.assemble`` builds it from the database for one run revision; the PDF renderer
(``ledger.records.pdf``) draws it and reads nothing else. Texts are already formatted in the
units the trade uses ("0.42 bar", "78 nm"); times are ISO 8601 strings with their UTC offset;
chart series are SI floats (seconds from the start of the log, pascal, m/s, m³), already
downsampled. ``content()`` is what a revision's SHA-256 covers: everything but the signatures,
which are added later and each carry the hash of the revision they sign.
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass, field, fields, is_dataclass
from functools import cache
from typing import Any, TypeVar, get_args, get_origin, get_type_hints

from ledger.canonical import canonical

# 2: the review by exception (``review``); revisions issued at 1 are compared without it.
# 3: cautions by the hazard class of each agent named (steps, cleanings) instead of one
#    caustic caution; a revision issued at 2 is assembled again the old way.
# 4: a cleaning recorded as a cycle lists its steps (CleaningRow.steps; None before) and the
#    history names the module type's limits version in force (History.limits; "" before).
CONTEXT_VERSION = 4

SITE_CAUTION = (
    "Acceptance limits, specifications and signature roles in this record come from the site's "
    "validated procedures and are set by its quality unit. fluxledger computes and records; "
    "it does not release product."
)
# Revisions issued before version 3 printed this one caution for every cleaning; kept so they
# render and verify as issued.
CAUSTIC_CAUTION = (
    "Caution: cleaning and sanitizing agents (e.g. sodium hydroxide) are caustic. Follow the "
    "site's safety procedure: eye and skin protection, and flush spills with water."
)
TRUE_COPY = "True copy generated from the fluxledger database; not valid if altered."


@dataclass(frozen=True)
class Header:
    """Who, what and which versions: the record's identity."""

    record_id: str  # "BR-000001": one per run, stable across revisions
    revision: int  # 1, 2, ...; 0 for a draft printed before the run is submitted
    revision_reason: str  # "first issue", or the reason for the correction
    run_id: int
    product: str
    lot: str
    status: str  # the run's status when the revision was issued
    template_id: str
    template_version: str
    template_title: str
    template_sha256: str
    module_serial: str
    module_type: str
    module_area: str  # "0.105 m²"
    cycle: int | None  # the run's cycle number on this module (None before it started)
    planned_by: str
    planned_at: str
    started_at: str | None
    finished_at: str | None
    submitted_at: str | None
    skid_log: str | None  # "file.csv (86,400 rows, SHA-256 1a2b…)" or None
    override_reason: str | None  # planned on a module that was not fit, and why
    site: str | None = None  # the site's name when the revision was issued (None: not set)


@dataclass(frozen=True)
class StepValue:
    """A value entered when a step was performed, as typed, against its range."""

    name: str
    title: str
    value: str  # as typed, with its unit; "—" not entered
    range: str  # "45.6–50.4 mL"; "" without a range
    verdict: str  # "in range", "OUT OF RANGE", or "" (no range, or not entered)


@dataclass(frozen=True)
class StepSignoff:
    """Who performed or verified a step, and when the work was done and entered."""

    meaning: str  # performed, verified
    login: str
    full_name: str
    done_at: str  # ISO 8601 with UTC offset
    entered_at: str
    late: bool
    note: str  # "late: done at X, entered at Y", or ""
    deviation: int | None  # the deviation that explains a value out of range


@dataclass(frozen=True)
class Step:
    """A step of the master record with its text filled in from the plan."""

    operation: str
    phase: str
    title: str
    text: str
    signatures: tuple[str, ...]
    cleaning: bool  # before version 3: prints the caustic caution beside it
    # None (not an empty tuple) when a step has no entries or signatures, so revisions issued
    # before steps were executed one by one assemble to the same content.
    values: tuple[StepValue, ...] | None = None
    signoffs: tuple[StepSignoff, ...] | None = None
    # version 3 on: the cautions of the agents the step names (by hazard class); None before
    cautions: tuple[str, ...] | None = None


@dataclass(frozen=True)
class CheckRow:
    """Planned against actual for one parameter or QC attribute."""

    name: str
    source: str  # parameter, qc
    title: str
    phase: str | None
    planned: str
    actual: str
    rule: str
    verdict: str  # PASS, FAIL, MISSING
    note: str
    deviation: int | None  # the number of the deviation that names this check
    deviation_closed: bool


@dataclass(frozen=True)
class ExcursionRow:
    """A stretch of time a skid channel spent outside its planned range."""

    check: str  # the check (parameter) it belongs to
    channel: str
    phase: str | None
    start: str  # time into the log, "01:23:45"
    duration: str  # "24 s"
    worst: str  # "0.51 bar"
    limit: str  # "0.20–0.45 bar"


@dataclass(frozen=True)
class QcRow:
    attribute: str
    title: str
    specification: str
    result: str
    method: str | None
    entered_by: str | None
    entered_at: str | None
    verdict: str


@dataclass(frozen=True)
class DeviationRow:
    number: int
    check: str | None
    description: str
    impact: str | None
    recorded_by: str
    recorded_at: str
    closed_by: str | None
    closed_at: str | None
    closure: str | None
    classification: str | None = None  # minor, major, critical or the site's word


@dataclass(frozen=True)
class ReviewTopic:
    """One topic of the review by exception and its findings (none: nothing to look at)."""

    topic: str
    findings: tuple[str, ...]


@dataclass(frozen=True)
class CycleRow:
    """One use of the module, as its history shows it."""

    cycle: int
    product: str
    lot: str
    started_at: str
    ended_at: str | None
    this_run: bool


@dataclass(frozen=True)
class RecoveryPoint:
    """Post-clean NWP against the baseline after a cycle (recovery as a fraction)."""

    cycle: int  # cycles completed when the test was done
    at: str
    nwp: str  # "612 LMH/bar at 20 °C"
    recovery: float  # 0.93
    verdict: str  # pass, alert, fail


@dataclass(frozen=True)
class IntegrityRow:
    at: str
    kind: str  # pressure decay, bubble point, diffusion or water intrusion at its test pressure
    result: str  # "0.8 mbar/min", a bubble point, or a flow "8 mL/min"
    limit: str
    passed: bool


@dataclass(frozen=True)
class CycleStepRow:
    """One step of a cleaning cycle as done: its values as people read them and its verdict."""

    number: int
    name: str
    agent: str
    solution: str  # the prepared solution's code, "" for none
    values: str  # "0.5 M (500 mol/m³), 45 degC (318.15 K), 60 min (3600 s)"
    conforms: str  # "yes" or "no: ..."


@dataclass(frozen=True)
class CleaningRow:
    at: str
    agent: str
    concentration: str
    temperature: str
    contact_time: str
    conforms: str  # "yes", "no: ...", "not checked"
    # version 4 on: a cycle's steps under its procedure "QC-CYCLE-05 v1"; () for a one-agent
    # cleaning; None before version 4
    steps: tuple[CycleStepRow, ...] | None = None
    procedure: str = ""


@dataclass(frozen=True)
class History:
    """The module's history up to this run: cycles, NWP recovery trend, last integrity test."""

    cycles_done: int
    reuse_limit: int
    recovery_min: float  # fraction
    recovery_alert: float
    recent_cycles: tuple[CycleRow, ...]
    recovery: tuple[RecoveryPoint, ...]
    last_integrity: IntegrityRow | None
    cleanings: tuple[CleaningRow, ...]  # the last cleanings before this run
    # version 3 on: the cautions of those cleanings' agents; None before (one caustic caution)
    cleaning_cautions: tuple[str, ...] | None = None
    # version 4 on: the module type's limits version in force ("QM-HF750-S limits version 2,
    # effective from ..." or "... as registered"); "" before
    limits: str = ""


@dataclass(frozen=True)
class Band:
    """A planned range drawn across a chart, in the series' SI unit (None: open end)."""

    label: str
    low: float | None
    high: float | None


@dataclass(frozen=True)
class Series:
    """One chart: a skid channel over time, downsampled to min/max per time bucket.

    ``t_s`` holds each bucket's start (s from the start of the log); ``low`` and ``high``
    the smallest and largest sample in it, in ``si_unit``; ``unit`` is how to label it.
    """

    name: str  # tmp, flux, retentate_volume
    title: str
    unit: str  # display unit, e.g. "bar", "LMH", "L"
    scale: float  # display value = SI value × scale
    t_s: tuple[float, ...]
    low: tuple[float, ...]
    high: tuple[float, ...]
    raw_points: int  # samples in the log before downsampling
    bands: tuple[Band, ...]
    phases: tuple[tuple[str, float, float], ...]  # (phase, start s, end s)


@dataclass(frozen=True)
class AuditRow:
    seq: int
    at: str
    actor: str
    action: str
    entity: str
    entity_id: str
    field: str | None
    old: str | None
    new: str | None
    reason: str | None
    change: str | None = None  # version 2 on: the change in words (ledger.audittext)


@dataclass(frozen=True)
class SignatureRow:
    """An electronic signature as the record shows it (21 CFR 11.50)."""

    id: int
    revision: int  # the revision it signs
    meaning: str  # performed, verified, reviewed, approved
    login: str
    full_name: str
    role: str
    signed_at: str  # ISO 8601 with UTC offset
    revision_sha256: str  # the hash of the revision it signs


@dataclass(frozen=True)
class Context:
    """Everything one revision of a batch record shows."""

    header: Header
    steps: tuple[Step, ...]
    checks: tuple[CheckRow, ...]
    excursions: tuple[ExcursionRow, ...]
    qc: tuple[QcRow, ...]
    deviations: tuple[DeviationRow, ...]
    history: History
    charts: tuple[Series, ...]
    audit: tuple[AuditRow, ...]
    required_signatures: tuple[str, ...]  # meanings, in the template's order
    signature_roles: dict[str, tuple[str, ...]]  # meaning -> roles that may sign it
    assumptions: tuple[str, ...] = ()  # how the actuals were computed, in words
    cautions: tuple[str, ...] = (SITE_CAUTION,)
    review: tuple[ReviewTopic, ...] = ()  # version 2 on: what a reviewer must look at
    version: int = CONTEXT_VERSION
    signatures: tuple[SignatureRow, ...] = field(default=(), compare=False)

    def content(self) -> dict[str, Any]:
        """The hashed part: everything but the signatures, as plain JSON values."""
        out = to_record(self)
        del out["signatures"]
        return out

    def sha256(self) -> str:
        return content_sha256(self.content())

    def with_signatures(self, rows: tuple[SignatureRow, ...]) -> Context:
        from dataclasses import replace

        return replace(self, signatures=rows)


def content_sha256(content: dict[str, Any]) -> str:
    """SHA-256 of the UTF-8 bytes of the content's canonical JSON (hex)."""
    return hashlib.sha256(canonical(content).encode()).hexdigest()


def to_record(obj: Any) -> Any:
    """Plain JSON values (tuples become lists)."""
    if is_dataclass(obj) and not isinstance(obj, type):
        # Field by field rather than asdict(), which deep-copies the whole tree first.
        return {f.name: to_record(getattr(obj, f.name)) for f in fields(obj)}
    if isinstance(obj, dict):
        return {k: to_record(v) for k, v in obj.items()}
    if isinstance(obj, list | tuple):
        return [to_record(v) for v in obj]
    return obj


T = TypeVar("T")


def from_record(cls: type[T], data: Any) -> T:
    """The inverse of :func:`to_record` for the dataclasses of this module."""
    built: T = _build(cls, data)
    return built


@cache
def _hints(tp: type) -> dict[str, Any]:
    """The resolved field types of a dataclass (resolving them is slow; they never change)."""
    return get_type_hints(tp)


def _build(tp: Any, data: Any) -> Any:
    if data is None:
        return None
    origin = get_origin(tp)
    if is_dataclass(tp) and isinstance(tp, type):
        hints = _hints(tp)
        return tp(**{f.name: _build(hints[f.name], data[f.name]) for f in fields(tp)
                     if f.name in data})  # fmt: skip
    if origin is tuple:
        args = get_args(tp)
        if len(args) == 2 and args[1] is Ellipsis:
            return tuple(_build(args[0], v) for v in data)
        return tuple(_build(a, v) for a, v in zip(args, data, strict=True))
    if origin is dict:
        _, value_type = get_args(tp)
        return {k: _build(value_type, v) for k, v in data.items()}
    if origin is not None:  # X | None
        real = [a for a in get_args(tp) if a is not type(None)]
        return _build(real[0], data) if len(real) == 1 else data
    return data
