"""The logbook's tables (DEVELOPERS.md). SI units in every numeric column; times are UTC.

Every record table carries ``record_hash`` (SHA-256 of its content, see audit.py) and who
created it and when. Records that can be wrong carry void fields: nothing is deleted.
Column names end in their SI unit where the unit is not obvious (``_pa``, ``_m3_s``, ``_k``).
"""

from __future__ import annotations

from datetime import date, datetime
from typing import Any, ClassVar

from sqlalchemy import JSON, Index, LargeBinary
from sqlmodel import Field, SQLModel

from ledger.store.types import UTCDateTime, utc_now

ROLES = ("operator", "engineer", "qa", "admin")
STAGES = ("baseline", "pre_use", "post_use", "post_clean")
STATUSES = (
    "commissioning",  # registered; needs a baseline water-flux test and a passing integrity test
    "available",
    "in_use",
    "awaiting_cleaning",
    "cleaned",  # cleaned; needs its post-clean water-flux test (and integrity if damage suspected)
    "on_hold",
    "awaiting_retest",  # a disposition chose retest: post-clean water flux and integrity again
    "retired",
)


class Recorded(SQLModel):
    """Columns of every audited record."""

    # Table rows are never validated on construction; deferring pydantic's schema build
    # saves ~15 ms of start-up on every logbook command.
    model_config = {"defer_build": True}

    # Journal.create sets who and when; the defaults only make a bare instance well-formed.
    record_hash: str = Field(default="", max_length=64)
    created_at: datetime = Field(default_factory=utc_now, sa_type=UTCDateTime)
    created_by: str = Field(default="", max_length=64)

    # Columns left out of the content hash and the audit values.
    hash_excluded: ClassVar[frozenset[str]] = frozenset({"record_hash"})
    # Columns whose values the audit trail must not repeat (it records that they changed).
    redacted: ClassVar[frozenset[str]] = frozenset()
    # Columns a later migration added to an existing table, with the value it gave old rows:
    # left out of the hash while they hold it, so rows hashed before still verify.
    hash_defaults: ClassVar[dict[str, Any]] = {}


class Voidable(Recorded):
    """A record that can be voided with a reason (never deleted)."""

    voided_at: datetime | None = Field(default=None, sa_type=UTCDateTime)
    voided_by: str | None = Field(default=None, max_length=64)
    void_reason: str | None = None


class Activity(Voidable):
    """A record of something done to a module at a time that may be entered late."""

    module_id: int = Field(foreign_key="module.id")  # indexed with activity_at per table
    activity_at: datetime = Field(sa_type=UTCDateTime)
    late: bool = False  # entered with an explicit activity time instead of the system clock
    note: str | None = None


class UserAccount(Recorded, table=True):
    __tablename__ = "user_account"
    __table_args__ = {"sqlite_autoincrement": True}
    redacted: ClassVar[frozenset[str]] = frozenset({"password_hash"})
    hash_defaults: ClassVar[dict[str, Any]] = {"password_temporary": False}

    id: int | None = Field(default=None, primary_key=True)
    login: str = Field(max_length=64, unique=True)
    full_name: str
    role: str = Field(max_length=16)
    password_hash: str
    active: bool = True
    failed_logins: int = 0
    locked: bool = False
    # Set when someone other than the owner chose the password: it must be changed first.
    password_temporary: bool = False


class Setting(Recorded, table=True):
    """Site settings changed by an administrator (audited), e.g. the lockout threshold."""

    key: str = Field(primary_key=True, max_length=64)
    value: str


class ModuleType(Recorded, table=True):
    """A hollow-fiber module model with its geometry and the site's acceptance limits (§6)."""

    __tablename__ = "module_type"
    __table_args__ = {"sqlite_autoincrement": True}

    id: int | None = Field(default=None, primary_key=True)
    code: str = Field(max_length=64, unique=True)
    supplier: str | None = None
    membrane: str
    pore_rating: str  # as the supplier states it: "750 kDa", "0.2 um"
    lumen_diameter_m: float
    fiber_count: int
    effective_length_m: float
    area_m2: float
    reference_temperature_k: float = 293.15
    recovery_min: float = 0.80  # fraction of baseline NWP after cleaning
    recovery_alert: float = 0.90
    damage_ratio: float = 1.20  # NWP / baseline above this suggests damage
    preuse_band: float = 0.10  # pre-use NWP within ± this fraction of the last post-clean NWP
    decay_limit_pa_s: float  # pressure-decay limit ...
    integrity_test_pressure_pa: float  # ... at this test pressure (gauge)
    bubble_point_min_pa: float | None = None
    reuse_limit_cycles: int
    storage_limit_s: float
    max_volume_loading_m: float | None = None  # feed volume per membrane area (m³/m²)
    max_mass_loading_kg_m2: float | None = None
    clean_hold_s: float | None = None  # pre-use tests must be this recent at a run's start
    diffusion_max_flow_m3_s: float | None = None  # diffusion (forward-flow) limit ...
    diffusion_test_pressure_pa: float | None = None  # ... at this test pressure (gauge)
    intrusion_max_flow_m3_s: float | None = None  # water-intrusion limit ...
    intrusion_test_pressure_pa: float | None = None  # ... at this test pressure (gauge)
    # As typed, field -> text with its unit (e.g. {"concentration": "0.5 M"}), so a value is
    # shown in the unit it was entered in; the SI columns hold the values computed with.
    entered: dict[str, str] | None = Field(default=None, sa_type=JSON)
    hash_defaults: ClassVar[dict[str, Any]] = {
        "entered": None,
        "diffusion_max_flow_m3_s": None,
        "diffusion_test_pressure_pa": None,
        "intrusion_max_flow_m3_s": None,
        "intrusion_test_pressure_pa": None,
    }


class Module(Recorded, table=True):
    __table_args__ = {"sqlite_autoincrement": True}

    id: int | None = Field(default=None, primary_key=True)
    serial: str = Field(max_length=64, unique=True)
    type_id: int = Field(foreign_key="module_type.id", index=True)
    manufacturer_lot: str | None = None
    received_on: date | None = None
    first_use_at: datetime | None = Field(default=None, sa_type=UTCDateTime)
    dedicated_product: str | None = None
    status: str = Field(default="commissioning", max_length=24)
    status_before_hold: str | None = Field(default=None, max_length=24)
    note: str | None = None


class WaterFluxTest(Activity, table=True):
    """Clean-water flux at one or several TMPs, normalized to the reference temperature."""

    __tablename__ = "water_flux_test"
    __table_args__ = (
        Index("ix_water_flux_test_module_stage_time", "module_id", "stage", "activity_at"),
        {"sqlite_autoincrement": True},
    )

    id: int | None = Field(default=None, primary_key=True)
    stage: str = Field(max_length=16)
    water_grade: str | None = None
    temperature_k: float
    reference_temperature_k: float
    # Inputs, SI: [{"feed_pa", "retentate_pa", "permeate_pa", "flow_m3_s"[, "volume_m3",
    # "time_s"]}]; flow is derived from volume/time when those were given.
    points: list[dict[str, float]] = Field(sa_type=JSON)
    tmp_pa: float  # mean TMP of the points
    flux_m_s: float  # mean flux at the test temperature
    nwp_m_s_pa: float  # permeability at the reference temperature
    intercept_m_s: float | None = None  # several points: intercept of J(T_ref) against TMP
    r_squared: float | None = None
    resistance_per_m: float  # membrane (or total) resistance at the test temperature
    baseline_test_id: int | None = Field(default=None, foreign_key="water_flux_test.id")
    recovery: float | None = None  # NWP / baseline NWP
    verdict: str | None = Field(default=None, max_length=16)  # pass, alert, fail
    method: str
    method_version: str
    # As typed, field -> text with its unit (e.g. {"concentration": "0.5 M"}), so a value is
    # shown in the unit it was entered in; the SI columns hold the values computed with.
    entered: dict[str, str] | None = Field(default=None, sa_type=JSON)
    # The module-type limits version the test was judged under (None: as registered).
    limits_version_id: int | None = Field(default=None, foreign_key="template_version.id")
    hash_defaults: ClassVar[dict[str, Any]] = {"entered": None, "limits_version_id": None}


class IntegrityTest(Activity, table=True):
    """Pressure-decay, bubble-point, diffusion or water-intrusion test and its verdict against
    the module type's limit."""

    __tablename__ = "integrity_test"
    __table_args__ = (
        Index("ix_integrity_test_module_time", "module_id", "activity_at"),
        {"sqlite_autoincrement": True},
    )

    id: int | None = Field(default=None, primary_key=True)
    kind: str = Field(max_length=16)  # pressure_decay, bubble_point, diffusion, water_intrusion
    test_pressure_pa: float | None = None
    hold_time_s: float | None = None
    upstream_volume_m3: float | None = None
    temperature_k: float | None = None
    readings: list[list[float]] | None = Field(default=None, sa_type=JSON)  # [[t_s, p_pa], ...]
    decay_rate_pa_s: float | None = None
    r_squared: float | None = None
    gas_flow_m3_s: float | None = None  # a decay's gas flow, or the diffusion flow
    intrusion_flow_m3_s: float | None = None  # water-intrusion flow
    bubble_point_pa: float | None = None
    limit_value: float  # Pa/s for a decay, Pa for a bubble point, m³/s for a flow test
    passed: bool
    method: str
    method_version: str
    # As typed, field -> text with its unit (e.g. {"concentration": "0.5 M"}), so a value is
    # shown in the unit it was entered in; the SI columns hold the values computed with.
    entered: dict[str, str] | None = Field(default=None, sa_type=JSON)
    # The module-type limits version the test was judged under (None: as registered).
    limits_version_id: int | None = Field(default=None, foreign_key="template_version.id")
    hash_defaults: ClassVar[dict[str, Any]] = {
        "entered": None,
        "intrusion_flow_m3_s": None,
        "limits_version_id": None,
    }


class CleaningProcedure(Recorded, table=True):
    """A validated cleaning procedure: the ranges a cleaning must keep (DEVELOPERS.md)."""

    __tablename__ = "cleaning_procedure"
    __table_args__ = {"sqlite_autoincrement": True}

    id: int | None = Field(default=None, primary_key=True)
    code: str = Field(max_length=64, unique=True)
    title: str
    agent: str
    concentration_min: float  # SI value in concentration_unit
    concentration_max: float
    concentration_unit: str = Field(max_length=16)  # mol/m**3, kg/m**3 or "" (a fraction)
    temperature_min_k: float
    temperature_max_k: float
    contact_time_min_s: float
    rinse_ph_min: float | None = None
    rinse_ph_max: float | None = None
    rinse_conductivity_max_s_m: float | None = None
    # As typed, field -> text with its unit (e.g. {"concentration": "0.5 M"}), so a value is
    # shown in the unit it was entered in; the SI columns hold the values computed with.
    entered: dict[str, str] | None = Field(default=None, sa_type=JSON)
    hash_defaults: ClassVar[dict[str, Any]] = {"entered": None}


class Cleaning(Activity, table=True):
    __table_args__ = (
        Index("ix_cleaning_module_time", "module_id", "activity_at"),
        {"sqlite_autoincrement": True},
    )

    id: int | None = Field(default=None, primary_key=True)
    agent: str
    concentration: float  # SI value in concentration_unit
    concentration_unit: str = Field(max_length=16)  # mol/m**3, kg/m**3 or "" (a fraction)
    temperature_k: float
    contact_time_s: float
    reagent_lot: str
    rinse_ph: float | None = None
    rinse_conductivity_s_m: float | None = None
    procedure_id: int | None = Field(default=None, foreign_key="cleaning_procedure.id")
    # A cleaning cycle: the cleaning-procedure version it was recorded under (its steps are
    # cleaning_step rows); None for a one-agent cleaning.
    procedure_version_id: int | None = Field(default=None, foreign_key="template_version.id")
    # None: not checked against a procedure; []: conforms; else each departure in words.
    deviations: list[str] | None = Field(default=None, sa_type=JSON)
    # As typed, field -> text with its unit (e.g. {"concentration": "0.5 M"}), so a value is
    # shown in the unit it was entered in; the SI columns hold the values computed with.
    entered: dict[str, str] | None = Field(default=None, sa_type=JSON)
    hash_defaults: ClassVar[dict[str, Any]] = {"entered": None, "procedure_version_id": None}


class CleaningStep(Recorded, table=True):
    """One step of a cleaning cycle as done, against its procedure step (SI values; None where
    the step asks for nothing)."""

    __tablename__ = "cleaning_step"
    __table_args__ = (
        Index("ix_cleaning_step_cleaning_number", "cleaning_id", "number", unique=True),
        {"sqlite_autoincrement": True},
    )

    id: int | None = Field(default=None, primary_key=True)
    cleaning_id: int = Field(foreign_key="cleaning.id")
    number: int
    name: str
    agent: str
    solution_code: str | None = Field(default=None, max_length=64)
    concentration: float | None = None  # SI value in concentration_unit
    concentration_unit: str = Field(default="", max_length=16)
    temperature_k: float | None = None
    contact_time_s: float | None = None
    flow_m3_s: float | None = None
    tmp_pa: float | None = None
    endpoint_kind: str | None = Field(default=None, max_length=16)  # ph, conductivity, toc...
    endpoint_value: float | None = None  # pH; S/m; kg/m³ (TOC); m³ (volume)
    departures: list[str] = Field(default_factory=list, sa_type=JSON)  # [] when it conforms
    entered: dict[str, str] | None = Field(default=None, sa_type=JSON)


class PreparedSolution(Voidable, table=True):
    """A prepared cleaning or storage solution: what it is meant to be, what it was verified
    to be, the reagent it was made from and until when it may be used.

    ``target_concentration`` and ``verified_concentration`` are SI values in
    ``concentration_unit`` (mol/m³, kg/m³, or "" for a fraction); ``verification`` holds the
    reading it was verified with (conductivity in S/m and its temperature in K, or the
    titration result) and the stated calibration or titrant, as typed.
    """

    __tablename__ = "prepared_solution"
    __table_args__ = {"sqlite_autoincrement": True}

    id: int | None = Field(default=None, primary_key=True)
    code: str = Field(max_length=64, unique=True)
    agent: str
    target_concentration: float
    concentration_unit: str = Field(default="", max_length=16)
    reagent_lot: str
    reagent_expiry: date
    prepared_by: str = Field(max_length=64)
    prepared_at: datetime = Field(sa_type=UTCDateTime)
    use_by: datetime = Field(sa_type=UTCDateTime)
    verified_concentration: float | None = None
    verification_method: str | None = Field(default=None, max_length=16)  # conductivity...
    verification: dict[str, Any] | None = Field(default=None, sa_type=JSON)
    verified_by: str | None = Field(default=None, max_length=64)
    verified_at: datetime | None = Field(default=None, sa_type=UTCDateTime)
    note: str | None = None
    entered: dict[str, str] | None = Field(default=None, sa_type=JSON)


class Storage(Activity, table=True):
    __table_args__ = (
        Index("ix_storage_module_time", "module_id", "activity_at"),
        {"sqlite_autoincrement": True},
    )

    id: int | None = Field(default=None, primary_key=True)
    solution: str


class ModuleUse(Activity, table=True):
    """One processing cycle: the module was used for a product lot (activity_at = start)."""

    __tablename__ = "module_use"
    __table_args__ = (
        Index("ix_module_use_module_time", "module_id", "activity_at"),
        {"sqlite_autoincrement": True},
    )

    id: int | None = Field(default=None, primary_key=True)
    product: str
    lot: str
    ended_at: datetime | None = Field(default=None, sa_type=UTCDateTime)
    override_reason: str | None = None  # why a dedicated module was used for another product


class Hold(Recorded, table=True):
    """A module put on hold, and the signed disposition that ended it."""

    __table_args__ = {"sqlite_autoincrement": True}

    id: int | None = Field(default=None, primary_key=True)
    module_id: int = Field(foreign_key="module.id", index=True)
    cause: str = Field(max_length=16)  # integrity, recovery, manual
    reason: str
    source_entity: str | None = None
    source_id: int | None = None
    decision: str | None = Field(default=None, max_length=16)  # retest, return, retire
    decision_reason: str | None = None
    decided_by: str | None = Field(default=None, max_length=64)
    decided_at: datetime | None = Field(default=None, sa_type=UTCDateTime)
    meaning: str | None = Field(default=None, max_length=16)  # the signature's meaning


RUN_STATUSES = ("planned", "in_progress", "finished", "in_review", "approved", "aborted")


class Run(Voidable, table=True):
    """A planned and executed batch run on one module, from one master-record template."""

    __table_args__ = {"sqlite_autoincrement": True}

    id: int | None = Field(default=None, primary_key=True)
    module_id: int = Field(foreign_key="module.id", index=True)
    product: str
    lot: str
    template_id: str = Field(max_length=64)
    template_version: str = Field(max_length=32)
    template_sha256: str = Field(max_length=64)
    template_text: str  # the exact template file the plan was computed from
    inputs: dict[str, str] = Field(sa_type=JSON)  # as typed by the planner
    plan: dict[str, Any] = Field(sa_type=JSON)  # ledger.runs.plan.Plan.to_record(), SI
    status: str = Field(default="planned", max_length=16)
    override_reason: str | None = None  # planned on a module that was not fit, and why
    use_id: int | None = Field(default=None, foreign_key="module_use.id")
    started_at: datetime | None = Field(default=None, sa_type=UTCDateTime)
    finished_at: datetime | None = Field(default=None, sa_type=UTCDateTime)
    submitted_at: datetime | None = Field(default=None, sa_type=UTCDateTime)
    correction_reason: str | None = None  # why the record is being corrected (next revision)
    planned_at: datetime | None = Field(default=None, sa_type=UTCDateTime)  # a late plan
    plan_approved_at: datetime | None = Field(default=None, sa_type=UTCDateTime)
    plan_approved_by: str | None = Field(default=None, max_length=64)
    # the skid it runs on: skid.id, checked by the run service (no foreign key, so that the
    # logbook's commands need not load the skid tables, ledger/store/equipment.py)
    skid_id: int | None = None
    aborted_at: datetime | None = Field(default=None, sa_type=UTCDateTime)
    aborted_by: str | None = Field(default=None, max_length=64)
    abort_reason: str | None = None


class SkidLogFile(Voidable, table=True):
    """A skid's data log attached to a run, kept byte for byte, and the actuals computed from it."""

    __tablename__ = "skid_log_file"
    __table_args__ = {"sqlite_autoincrement": True}
    # The content hash covers the file by its SHA-256; the audit trail does not repeat it.
    redacted: ClassVar[frozenset[str]] = frozenset({"content"})
    hash_defaults: ClassVar[dict[str, Any]] = {"parts": None}

    id: int | None = Field(default=None, primary_key=True)
    run_id: int = Field(foreign_key="run.id", index=True)
    file_name: str
    sha256: str = Field(max_length=64, index=True)
    size_bytes: int
    content: bytes = Field(sa_type=LargeBinary)
    mapping_text: str
    mapping_sha256: str = Field(max_length=64)
    windows: list[dict[str, str]] | None = Field(default=None, sa_type=JSON)  # phase windows
    # Later files of a log split over several (name, sha256, bytes each); None for one file.
    parts: list[dict[str, Any]] | None = Field(default=None, sa_type=JSON)
    rows: int
    actuals: dict[str, Any] = Field(sa_type=JSON)  # ledger.runs.actuals.Summary.to_record()


class SkidLogPart(SQLModel, table=True):
    """The second and later files of a skid log split over several files, byte for byte.

    The first file is the log's own ``content``; the log's record hash covers each part by
    its SHA-256 through ``SkidLogFile.parts``."""

    __tablename__ = "skid_log_part"

    log_id: int = Field(foreign_key="skid_log_file.id", primary_key=True)
    position: int = Field(primary_key=True, sa_column_kwargs={"autoincrement": False})
    file_name: str
    sha256: str = Field(max_length=64)
    size_bytes: int
    content: bytes = Field(sa_type=LargeBinary)


class QcResult(Voidable, table=True):
    """One QC result of a run, in SI (``value``) and as typed (``text``)."""

    __tablename__ = "qc_result"
    __table_args__ = {"sqlite_autoincrement": True}

    id: int | None = Field(default=None, primary_key=True)
    run_id: int = Field(foreign_key="run.id", index=True)
    attribute: str = Field(max_length=64)
    value: float
    text: str
    method: str | None = None


class Deviation(Recorded, table=True):
    """A departure from the plan or a specification, recorded against a run, and its closure."""

    __table_args__ = {"sqlite_autoincrement": True}

    id: int | None = Field(default=None, primary_key=True)
    run_id: int = Field(foreign_key="run.id", index=True)
    number: int  # 1, 2, ... within the run
    check_name: str | None = Field(default=None, max_length=64)  # the check it explains
    description: str
    # minor, major, critical, or the site's own words (setting "deviation.classes")
    classification: str | None = Field(default=None, max_length=32)
    hash_defaults: ClassVar[dict[str, Any]] = {"classification": None}
    impact: str | None = None
    closed_at: datetime | None = Field(default=None, sa_type=UTCDateTime)
    closed_by: str | None = Field(default=None, max_length=64)
    closure: str | None = None


class StepEntry(Voidable, table=True):
    """One signature on one step of a run's master record, given when the step was done:
    ``performed`` carries the values entered at the step; ``verified`` (by a second person)
    confirms them. ``done_at`` is when the work was done; later than ``created_at`` by more
    than the site's allowance, the entry is ``late``."""

    __tablename__ = "step_entry"
    __table_args__ = (
        Index("ix_step_entry_run_step", "run_id", "step"),
        {"sqlite_autoincrement": True},
    )

    id: int | None = Field(default=None, primary_key=True)
    run_id: int = Field(foreign_key="run.id")
    step: int  # the step's number in the template, from 1
    meaning: str = Field(max_length=16)  # performed, verified
    login: str = Field(max_length=64)
    full_name: str
    # As entered: [{"name", "text" (as typed), "unit" (as typed), "si", "low", "high" (SI,
    # may be null), "in_range" (bool or null)}]
    values: list[dict[str, Any]] | None = Field(default=None, sa_type=JSON)
    done_at: datetime = Field(sa_type=UTCDateTime)
    late: bool = False
    deviation_number: int | None = None  # the deviation that explains an out-of-range value


class RecordRevision(Recorded, table=True):
    """One issued revision of a run's batch record: its frozen context and that content's hash.

    Issued when the first signature is given; signatures bind to ``sha256``. A correction
    supersedes it; its signatures stay, belonging to it.
    """

    __tablename__ = "record_revision"
    __table_args__ = (
        Index("ix_record_revision_run_number", "run_id", "number", unique=True),
        {"sqlite_autoincrement": True},
    )
    # The content hash covers the frozen context; the audit trail does not repeat it.
    redacted: ClassVar[frozenset[str]] = frozenset({"content"})

    id: int | None = Field(default=None, primary_key=True)
    run_id: int = Field(foreign_key="run.id")
    number: int  # 1, 2, ... within the run
    reason: str  # "first issue" or why it was corrected
    content: dict[str, Any] = Field(sa_type=JSON)  # ledger.records.context.Context.content()
    sha256: str = Field(max_length=64)  # SHA-256 of the canonical JSON of content
    as_of: datetime = Field(sa_type=UTCDateTime)  # the database as it was then
    audit_seq: int  # the last audit event the content includes
    superseded_at: datetime | None = Field(default=None, sa_type=UTCDateTime)
    superseded_by: str | None = Field(default=None, max_length=64)
    superseded_reason: str | None = None


class Signature(Recorded, table=True):
    """An electronic signature on one record revision (21 CFR 11.50, 11.70)."""

    __table_args__ = (
        Index("ix_signature_run_revision", "run_id", "revision"),
        {"sqlite_autoincrement": True},
    )

    id: int | None = Field(default=None, primary_key=True)
    run_id: int = Field(foreign_key="run.id")
    revision_id: int = Field(foreign_key="record_revision.id")
    revision: int  # the revision's number
    revision_sha256: str = Field(max_length=64)  # the hash of the content it signs
    meaning: str = Field(max_length=16)  # performed, verified, reviewed, approved
    login: str = Field(max_length=64)
    full_name: str
    role: str = Field(max_length=16)
    signed_at: datetime = Field(sa_type=UTCDateTime)


class AuditEvent(SQLModel, table=True):
    """One append-only entry of the audit trail, chained to the previous one by SHA-256."""

    __tablename__ = "audit_event"
    __table_args__ = (Index("ix_audit_event_entity", "entity", "entity_id"),)

    seq: int = Field(primary_key=True, sa_column_kwargs={"autoincrement": False})
    at: datetime = Field(sa_type=UTCDateTime, index=True)
    actor: str = Field(max_length=64, index=True)
    action: str = Field(max_length=24)  # create, change, void, login_failed, locked...
    entity: str = Field(max_length=32)
    entity_id: str = Field(max_length=64)
    module_id: int | None = Field(default=None, index=True)
    field: str | None = Field(default=None, max_length=64)
    old_value: str | None = None  # JSON
    new_value: str | None = None  # JSON
    reason: str | None = None
    record_hash: str | None = Field(default=None, max_length=64)
    prev_hash: str = Field(max_length=64)
    hash: str = Field(max_length=64)


class AuditHead(SQLModel, table=True):
    """The last event's number and hash: lets verify notice a removed final event."""

    __tablename__ = "audit_head"

    id: int = Field(default=1, primary_key=True, sa_column_kwargs={"autoincrement": False})
    seq: int
    hash: str = Field(max_length=64)
    # Which site key the chain is under (a fingerprint, never the key) and a MAC over
    # (seq, hash) under that key, so a head moved back to an earlier event is noticed.
    key_id: str | None = Field(default=None, max_length=64)
    mac: str | None = Field(default=None, max_length=64)


# Audited record tables by entity name (the name used in audit events and on the CLI).
RECORDS: dict[str, type[Recorded]] = {
    "user": UserAccount,
    "setting": Setting,
    "module_type": ModuleType,
    "cleaning_procedure": CleaningProcedure,
    "module": Module,
    "water_flux_test": WaterFluxTest,
    "integrity_test": IntegrityTest,
    "cleaning": Cleaning,
    "cleaning_step": CleaningStep,
    "prepared_solution": PreparedSolution,
    "storage": Storage,
    "module_use": ModuleUse,
    "hold": Hold,
    "run": Run,
    "skid_log_file": SkidLogFile,
    "qc_result": QcResult,
    "deviation": Deviation,
    "step_entry": StepEntry,
    "record_revision": RecordRevision,
    "signature": Signature,
}


def entity_of(record: Recorded) -> str:
    """The entity name of a record instance."""
    for name, cls in RECORDS.items():
        if type(record) is cls:
            return name
    raise TypeError(f"not an audited record: {type(record).__name__}")


def primary_key(record: Recorded) -> str:
    """The record's primary key as text (audit events store it so)."""
    value: Any = getattr(record, "key", None) if isinstance(record, Setting) else record.id  # type: ignore[attr-defined]
    return str(value)


class RecordCopy(Recorded, table=True):
    """One controlled copy of a batch record: a print or a sealed file, numbered within the
    run, with the revision and signatures it carries and the SHA-256 of the file written."""

    __tablename__ = "record_copy"
    __table_args__ = (
        Index("ix_record_copy_run_number", "run_id", "copy_number", unique=True),
        {"sqlite_autoincrement": True},
    )

    id: int | None = Field(default=None, primary_key=True)
    run_id: int = Field(foreign_key="run.id")
    copy_number: int  # 1, 2, ... within the run
    revision: int  # 0 for a draft
    revision_sha256: str | None = Field(default=None, max_length=64)
    state: str = Field(max_length=32)  # draft, in review, approved, superseded
    signatures: list[str] = Field(sa_type=JSON)  # the meanings the copy carries, in order
    file_name: str
    file_sha256: str = Field(max_length=64)
    kind: str = Field(max_length=16)  # print, sealed, archive


# Defined after RECORDS, so it joins it here: copies are audited like every record.
RECORDS["record_copy"] = RecordCopy


TEMPLATE_STATES = ("draft", "approved", "retired")  # stored; "effective" is read off the clock


class TemplateVersion(Recorded, table=True):
    """One version of a master-record template: the file's exact text and its SHA-256, who
    wrote it, which QA approved it and from when it takes effect, and its retirement.

    ``state`` holds what people decided (draft, approved, retired); whether an approved
    version is effective is a matter of ``effective_from`` against the clock, so it is derived
    (ledger.rules.versions), never stored: storing it would need a write at that time that
    nobody makes."""

    __tablename__ = "template_version"
    __table_args__ = (
        Index("ix_template_version_id_version", "template_id", "version", unique=True),
        Index("ix_template_version_sha256", "sha256"),
        {"sqlite_autoincrement": True},
    )

    id: int | None = Field(default=None, primary_key=True)
    # template (a master record) or cleaning_procedure (a cleaning cycle); one ID per kind
    kind: str = Field(default="template", max_length=32)
    template_id: str = Field(max_length=64)
    version: str = Field(max_length=32)
    sha256: str = Field(max_length=64)  # of the file's bytes (text is those bytes, UTF-8)
    text: str
    title: str
    source: str  # the file name it was submitted from
    state: str = Field(default="draft", max_length=16)  # TEMPLATE_STATES
    authored_by: str = Field(max_length=64)
    approved_by: str | None = Field(default=None, max_length=64)
    approved_at: datetime | None = Field(default=None, sa_type=UTCDateTime)
    effective_from: datetime | None = Field(default=None, sa_type=UTCDateTime)
    late_reason: str | None = None  # why an approval takes effect from a time already past
    retired_by: str | None = Field(default=None, max_length=64)
    retired_at: datetime | None = Field(default=None, sa_type=UTCDateTime)
    retire_reason: str | None = None
    hash_defaults: ClassVar[dict[str, Any]] = {"kind": "template"}


RECORDS["template_version"] = TemplateVersion
