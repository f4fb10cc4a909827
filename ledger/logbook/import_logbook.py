"""Bulk import of an old logbook's history: water-flux tests or pressure-decay integrity tests,
one per sheet row, validated, computed and written with their audit events in one transaction.

Input is SI (ledger.entries.logbook_mapping has parsed the sheet): pressures in Pa (gauge),
flows m³/s, temperatures K, times s, volumes m³, activity times aware UTC. Each row goes
through the checks and the science of its typed command (``test water``, ``test
integrity --start --end --hold-time``): the WaterPoint flow and TMP checks,
``science.permeability`` for TMP, flux, NWP and resistance, ``rules.water_test`` for the
verdict, ``science.integrity`` for the decay verdict, the module type's limits in force at
the row's time. Records and events are written in chunks by the driver's executemany on the
session's SQLAlchemy connection, each value in the storage form its column type's own bind
processor gives (``store.audit.StoredRows``); each row's record hash and audit event are
exactly those ``store.audit.Journal.create`` makes (canonical JSON of the record's columns,
SHA-256; the event's HMAC under the site key, chained: ``store.audit.CreateEvents``), so
``audit verify`` checks them like any other record (tests/store/test_audit_bulk.py compares
the bytes with Journal.create's).

Back-entered history follows ``logbook.context.begin`` with two rules relaxed (DEVELOPERS.md,
"Importing an old logbook"): the status a module has now does not have to allow each row's
action, and an imported row changes no status (nor puts a module on hold). The sheet holds
one kind of record, without the uses and cleanings between them, so the status machine
cannot be replayed from it; a failed historical test keeps its verdict and counts in the
module's history and fitness. Kept: the role, the module must exist and not be retired, a
row must not be in the future nor before the module's latest recorded activity, and every
row is a late entry.
"""

from __future__ import annotations

import pickle
import subprocess
from collections.abc import Callable, Generator, Iterable
from contextlib import closing
from dataclasses import dataclass, field
from datetime import datetime
from types import SimpleNamespace
from typing import Any

from sqlalchemy import func, text
from sqlmodel import Session, select

from ledger import __version__
from ledger.errors import InputError
from ledger.logbook import typelimits
from ledger.logbook.auth import RECORDERS, require_role
from ledger.logbook.documents import versions_of
from ledger.logbook.required import optional, positive
from ledger.logbook.times import activity_time
from ledger.logbook.waterflux import METHOD_ONE, WaterPoint
from ledger.rules import versions as version_rules
from ledger.rules import water_test
from ledger.rules.names import shown
from ledger.science import integrity as integrity_sci
from ledger.science import permeability as perm
from ledger.science import water
from ledger.store.audit import CreateEvents, StoredRows
from ledger.store.sealing import EventForm, RecordForm, Sealed, iso_utc, seal, worker_command
from ledger.store.tables import (
    STAGES,
    AuditHead,
    Cleaning,
    IntegrityTest,
    Module,
    ModuleType,
    ModuleUse,
    Storage,
    TemplateVersion,
    UserAccount,
    WaterFluxTest,
)
from ledger.store.types import UTCDateTime

KINDS = ("water_flux", "pressure_decay")
CHUNK = 5_000  # rows per executemany
PARALLEL_ROWS = 20_000  # from this many rows on, a worker process makes the hashes
_IN_CHUNK = 500  # values per SQL IN list
DECAY_METHOD = "pressure decay: (start − end) / hold time"


@dataclass(frozen=True)
class Rejection:
    """Why one sheet row was refused: its row number as the spreadsheet shows it (header = 1)."""

    row: int
    field: str
    value: object
    expected: str
    message: str


@dataclass
class SheetRows:
    """The parsed rows of one sheet (SI). ``quantities[name][i]`` is None where row i's cell
    was empty; ``entered[i]`` holds row i's quantities as the sheet gave them ("12.5 psi")."""

    kind: str
    source: str
    rows: list[int] = field(default_factory=list)
    at: list[datetime] = field(default_factory=list)
    texts: dict[str, list[str | None]] = field(default_factory=dict)
    quantities: dict[str, list[float | None]] = field(default_factory=dict)
    entered: list[dict[str, str]] = field(default_factory=list)
    rejected: list[Rejection] = field(default_factory=list)  # refused while parsing
    blank: list[int] = field(default_factory=list)  # empty rows, skipped

    def text(self, name: str, i: int) -> str | None:
        column = self.texts.get(name)
        return column[i] if column is not None else None

    def quantity(self, name: str, i: int) -> float | None:
        column = self.quantities.get(name)
        return column[i] if column is not None else None


@dataclass
class ImportResult:
    """What an import did: rows read, written, refused (with reasons), blank rows skipped."""

    kind: str
    source: str
    read: int
    accepted: int
    written: int
    rejected: list[Rejection]
    blank: list[int]
    first_id: int | None = None
    last_id: int | None = None
    modules: int = 0

    @property
    def complete(self) -> bool:
        return not self.rejected


@dataclass
class _Module:
    module: Module
    mtype: ModuleType
    versions: list[TemplateVersion]
    previous: datetime | None
    baseline: tuple[int, float] | None = None  # (id, NWP) of its latest valid baseline
    post_clean: float | None = None  # NWP of its latest valid post-clean test


def _reject(row: int, err: InputError, fallback: str) -> Rejection:
    expected = err.expected or ""
    return Rejection(row, err.field or fallback, err.value, expected, err.message)


def _chunks(values: list[Any], size: int) -> Iterable[list[Any]]:
    for start in range(0, len(values), size):
        yield values[start : start + size]


def _modules(session: Session, serials: set[str]) -> dict[str, _Module]:
    """The registered modules among ``serials`` (locked), with their type, limits versions,
    latest activity, latest baseline and post-clean NWP: a few queries for all of them."""
    found: dict[str, Module] = {}
    for part in _chunks(sorted(serials), _IN_CHUNK):
        stmt = select(Module).where(Module.serial.in_(part)).with_for_update()  # type: ignore[attr-defined]
        for m in session.exec(stmt):
            found[m.serial] = m
    by_id = {m.id: m for m in found.values()}
    ids = sorted(by_id)  # type: ignore[type-var]
    types = {t.id: t for t in session.exec(select(ModuleType))}
    versions = {t.code: versions_of(session, typelimits.LIMITS, t.code) for t in types.values()}
    previous: dict[int, datetime] = {}
    baseline: dict[int, tuple[int, float]] = {}
    post_clean: dict[int, float] = {}
    conn = session.connection()
    for part in _chunks(ids, _IN_CHUNK):
        columns: list[tuple[Any, Any]] = [
            (cls, cls.activity_at)
            for cls in (WaterFluxTest, IntegrityTest, Cleaning, Storage, ModuleUse)
        ]
        columns.append((ModuleUse, ModuleUse.ended_at))
        for cls, column in columns:
            latest: Any = (
                select(cls.module_id, func.max(column))
                .where(cls.module_id.in_(part), cls.voided_at.is_(None))
                .group_by(cls.module_id)
            )
            for mid, when in session.exec(latest):
                if when is not None and (mid not in previous or when > previous[mid]):
                    previous[mid] = when
        tests: Any = WaterFluxTest.__table__  # type: ignore[attr-defined]
        ordered = (
            tests.select()
            .with_only_columns(tests.c.module_id, tests.c.stage, tests.c.id, tests.c.nwp_m_s_pa)
            .where(
                tests.c.module_id.in_(part),
                tests.c.voided_at.is_(None),
                tests.c.stage.in_(("baseline", "post_clean")),
            )
            .order_by(tests.c.activity_at, tests.c.id)
        )
        for mid, stage, tid, nwp in conn.execute(ordered):
            if stage == "baseline":
                baseline[mid] = (tid, nwp)  # ascending: the last one seen is the latest
            else:
                post_clean[mid] = nwp
    out = {}
    for serial, m in found.items():
        mtype = types[m.type_id]
        key: Any = m.id
        out[serial] = _Module(
            m, mtype, versions[mtype.code], previous.get(key), baseline.get(key),
            post_clean.get(key),
        )  # fmt: skip
    return out


class _Limits:
    """The module type's limits in force at a time (typelimits.in_force), one lookup per
    version rather than per row."""

    def __init__(self, session: Session) -> None:
        self.session = session
        self.cache: dict[tuple[int | None, int | None], tuple[Any, int | None]] = {}

    def at(self, m: _Module, at: datetime) -> tuple[Any, int | None]:
        version = version_rules.in_force(m.versions, at)
        key = (m.mtype.id, version.id if version is not None else None)
        if key not in self.cache:
            mtype, row = typelimits.in_force(self.session, m.mtype, at)
            self.cache[key] = (_plain(mtype), row.id if row is not None else None)
        return self.cache[key]


def _plain(mtype: ModuleType) -> Any:
    """The type's column values as plain attributes: read per row without the ORM's
    instrumented access (the same values)."""
    columns = ModuleType.__table__.columns  # type: ignore[attr-defined]
    return SimpleNamespace(**{c.name: getattr(mtype, c.name) for c in columns})


def _stage(text_: str | None) -> str:
    key = (text_ or "").strip().lower().replace("-", "_")
    if key not in STAGES:
        raise InputError(
            f"stage {text_!r} is unknown",
            field="stage",
            value=text_,
            expected="baseline, pre-use, post-use or post-clean",
        )
    return key


def _module_time(m: _Module | None, serial: str, at: datetime, now: datetime) -> _Module:
    """The checks of ``context.begin`` that history keeps (see the module's docstring)."""
    if m is None:
        raise InputError(
            f"no module with serial {shown(serial)}",
            field="serial",
            value=shown(serial),
            expected="the serial of a registered module (fluxledger module list)",
        )
    if m.module.status == "retired":
        raise InputError(
            f"module {serial} is retired; a retired module takes no further records",
            field="serial",
            value=serial,
            expected="a module that is not retired",
        )
    activity_time(at, now)
    if m.previous is not None and at < m.previous:
        raise InputError(
            f"activity time {at.isoformat()} is before module {serial}'s latest recorded "
            f"activity ({m.previous.isoformat()}); enter records in the order they happened",
            field="activity_time",
            value=at.isoformat(),
            expected=f"a time after {m.previous.isoformat()}",
        )
    return m


@dataclass
class _Factors:
    """µ(T)/µ(T_ref) and µ(T) by temperature: IAPWS once per distinct value, not per row."""

    factor: dict[tuple[float, float], float] = field(default_factory=dict)
    mu: dict[float, float] = field(default_factory=dict)

    def correction(self, t: float, t_ref: float) -> float:
        key = (t, t_ref)
        if key not in self.factor:
            self.factor[key] = perm.correction_factor(t, t_ref)
        return self.factor[key]

    def viscosity(self, t: float) -> float:
        if t not in self.mu:
            self.mu[t] = water.viscosity(t)
        return self.mu[t]


def _water_row(sheet: SheetRows, i: int, m: _Module, mtype: Any, f: _Factors) -> dict[str, Any]:
    """The columns of one water-flux test, as ``record_water_test`` computes them for one
    point (its method, METHOD_ONE)."""
    stage = _stage(sheet.text("stage", i))
    temperature = sheet.quantity("temperature", i)
    if temperature is None:
        raise InputError("the water temperature is missing", field="temperature", value=None,
                         expected="a temperature, e.g. 22 degC")  # fmt: skip
    water.check_temperature(temperature)
    feed, retentate = sheet.quantity("feed", i), sheet.quantity("retentate", i)
    for name, value in (("feed", feed), ("retentate", retentate), ("flow", None)):
        if name != "flow" and value is None:
            raise InputError(f"the {name} pressure is missing", field=name, value=None,
                             expected="a gauge pressure, e.g. 10 psi")  # fmt: skip
    point = WaterPoint(
        feed_pa=feed,  # type: ignore[arg-type]
        retentate_pa=retentate,  # type: ignore[arg-type]
        permeate_pa=sheet.quantity("permeate", i) or 0.0,
        flow_m3_s=sheet.quantity("flow", i),
        volume_m3=sheet.quantity("volume", i),
        time_s=sheet.quantity("time", i),
    )
    q = point.flow(0)
    # check_tmp returns perm.transmembrane_pressure of the point, which the body of
    # perm.normalized_permeability computes again: the same call, so the same float.
    tmp = point.check_tmp(0)
    t_ref = mtype.reference_temperature_k
    # The body of perm.normalized_permeability, its correction factor looked up once per
    # temperature: the same functions in the same order, so the same floats.
    flux = perm.flux(q, mtype.area_m2)
    factor = f.correction(temperature, t_ref)
    nwp = perm.permeability(flux, tmp) * factor
    if not nwp > 0:
        raise InputError("the points give a non-positive NWP (flux falls as TMP rises)",
                         field="points", value=nwp, expected="flux rising with TMP")  # fmt: skip
    resistance = perm.resistance_from_permeability(nwp / factor, f.viscosity(temperature))
    recovery = verdict = None
    baseline_id = None
    if stage != "baseline":
        if m.baseline is None:
            raise InputError(
                f"module {m.module.serial} has no valid baseline water-flux test (in the "
                "logbook or on an earlier row of the sheet)",
                field="stage", value=stage, expected="a baseline test before this one",
            )  # fmt: skip
        baseline_id = m.baseline[0]
        recovery = perm.recovery(nwp, m.baseline[1])
        ratio = nwp / m.post_clean if stage == "pre_use" and m.post_clean is not None else None
        verdict = water_test.verdict(
            stage, recovery=recovery, preuse_ratio=ratio, recovery_min=mtype.recovery_min,
            recovery_alert=mtype.recovery_alert, preuse_band=mtype.preuse_band,
        )  # fmt: skip
    stored_point = {k: v for k, v in {**point.__dict__, "flow_m3_s": q}.items() if v is not None}
    return {
        "note": optional("note", sheet.text("note", i), "a remark"),
        "stage": stage,
        "water_grade": optional(
            "water_grade", sheet.text("water_grade", i), "e.g. WFI or PW", kind="name"
        ),
        "temperature_k": temperature,
        "reference_temperature_k": t_ref,
        "points": [stored_point],
        "tmp_pa": tmp,
        "flux_m_s": flux,
        "nwp_m_s_pa": nwp,
        "intercept_m_s": None,
        "r_squared": None,
        "resistance_per_m": resistance,
        "baseline_test_id": baseline_id,
        "recovery": recovery,
        "verdict": verdict,
        "method": METHOD_ONE,
    }


def _decay_row(sheet: SheetRows, i: int, mtype: Any) -> dict[str, Any]:
    """The columns of one pressure-decay test from start, end and hold time, as
    ``record_decay_test`` computes them."""
    start, end = sheet.quantity("start", i), sheet.quantity("end", i)
    hold = sheet.quantity("hold_time", i)
    for name, value in (("start", start), ("end", end), ("hold_time", hold)):
        if value is None:
            raise InputError(
                f"the {name.replace('_', ' ')} is missing", field=name, value=None,
                expected="a pressure-decay test needs start, end and hold time",
            )  # fmt: skip
    assert start is not None and end is not None and hold is not None
    positive("hold_time", hold, "a time above zero")
    positive("start", start, "a gauge pressure above zero", label="start pressure")
    rate = (start - end) / hold
    given = sheet.quantity("test_pressure", i)
    test_pressure = given if given is not None else start
    from ledger.logbook.integrity import PRESSURE_TOLERANCE

    stated = mtype.integrity_test_pressure_pa
    if abs(test_pressure / stated - 1.0) > PRESSURE_TOLERANCE:
        raise InputError(
            f"test pressure {test_pressure / 1e5:.3g} bar differs from the module type's "
            f"stated {stated / 1e5:.3g} bar by more than {PRESSURE_TOLERANCE:.0%}",
            field="test_pressure", value=test_pressure,
            expected=f"{stated / 1e5:.3g} bar ± {PRESSURE_TOLERANCE:.0%}, the pressure its "
            "limit was validated at",
        )  # fmt: skip
    temperature = sheet.quantity("temperature", i)
    if temperature is not None:
        water.check_temperature(temperature)
    volume = sheet.quantity("upstream_volume", i)
    flow = integrity_sci.gas_flow_from_decay(max(rate, 0.0), volume) if volume is not None else None
    judged = integrity_sci.judge_decay(max(rate, 0.0), mtype.decay_limit_pa_s)
    return {
        "note": optional("note", sheet.text("note", i), "a remark"),
        "kind": "pressure_decay",
        "test_pressure_pa": test_pressure,
        "hold_time_s": hold,
        "upstream_volume_m3": volume,
        "temperature_k": temperature,
        "readings": None,
        "decay_rate_pa_s": rate,
        "r_squared": None,
        "gas_flow_m3_s": flow,
        "intrusion_flow_m3_s": None,
        "bubble_point_pa": None,
        "limit_value": mtype.decay_limit_pa_s,
        "passed": judged.passed,
        "method": DECAY_METHOD,
    }


def _reserve_ids(session: Session, table: str, n: int) -> list[int]:
    """``n`` new ids of ``table``: the next ones of SQLite's AUTOINCREMENT counter (the
    transaction holds the write lock), or ``n`` values of the PostgreSQL sequence."""
    conn = session.connection()
    if conn.dialect.name == "postgresql":
        rows = conn.execute(
            text("SELECT nextval(pg_get_serial_sequence(:t, 'id')) FROM generate_series(1, :n)"),
            {"t": table, "n": n},
        )
        return [int(r[0]) for r in rows]
    seq = conn.execute(text("SELECT seq FROM sqlite_sequence WHERE name = :t"), {"t": table})
    top = max(int(seq.scalar() or 0), int(conn.execute(
        text(f"SELECT coalesce(max(id), 0) FROM {table}")).scalar() or 0))  # fmt: skip
    return list(range(top + 1, top + 1 + n))


def import_rows(
    session: Session,
    actor: UserAccount,
    sheet: SheetRows,
    *,
    keep_valid: bool = False,
    progress: Callable[[int], None] | None = None,
) -> ImportResult:
    """Validate every row of ``sheet``, then write the accepted ones with their audit events.

    With ``keep_valid`` False (the default), one refused row (or one refused while parsing)
    means nothing is written; with it True the accepted rows are written and the refused ones
    reported. ``progress(n)`` is called as rows are validated and as they are written."""
    if sheet.kind not in KINDS:
        raise ValueError(f"unknown record kind {sheet.kind!r}")  # the entry checks it
    what = "water-flux" if sheet.kind == "water_flux" else "integrity"
    require_role(actor, RECORDERS, f"record {what} results")
    head = session.exec(select(AuditHead).where(AuditHead.id == 1).with_for_update()).first()
    if head is None:
        raise RuntimeError("audit_head row is missing; the schema was not created by init")
    now = _now()
    serials = {s for s in (sheet.texts.get("serial") or []) if s}
    modules = _modules(session, serials)
    limits = _Limits(session)
    factors = _Factors()
    rejected = list(sheet.rejected)
    order = sorted(range(len(sheet.rows)), key=lambda i: sheet.at[i])  # stable: sheet order
    accepted: list[tuple[int, _Module, int | None, dict[str, Any]]] = []
    for done, i in enumerate(order, 1):
        row = sheet.rows[i]
        serial = sheet.text("serial", i) or ""
        try:
            m = _module_time(modules.get(serial), serial, sheet.at[i], now)
            mtype, version = limits.at(m, sheet.at[i])
            if sheet.kind == "water_flux":
                values = _water_row(sheet, i, m, mtype, factors)
            else:
                values = _decay_row(sheet, i, mtype)
        except InputError as err:
            rejected.append(_reject(row, err, "row"))
            continue
        m.previous = sheet.at[i]
        if sheet.kind == "water_flux":
            if values["stage"] == "baseline":
                m.baseline = (-len(accepted) - 1, values["nwp_m_s_pa"])  # id given below
            elif values["stage"] == "post_clean":
                m.post_clean = values["nwp_m_s_pa"]
        accepted.append((i, m, version, values))
        if progress is not None and done % 1000 == 0:
            progress(1000)
    rejected.sort(key=lambda r: r.row)
    read = len(sheet.rows) + len({r.row for r in sheet.rejected})
    result = ImportResult(sheet.kind, sheet.source, read,
                          len(accepted), 0, rejected, list(sheet.blank),
                          modules=len({m.module.id for _, m, _, _ in accepted}))  # fmt: skip
    if not accepted or (rejected and not keep_valid):
        return result
    _write(session, actor, head, sheet, accepted, now, result, progress)
    return result


def _now() -> datetime:
    from ledger.store.types import utc_now

    return utc_now()


def _write(
    session: Session,
    actor: UserAccount,
    head: AuditHead,
    sheet: SheetRows,
    accepted: list[tuple[int, _Module, int | None, dict[str, Any]]],
    at: datetime,
    result: ImportResult,
    progress: Callable[[int], None] | None,
) -> None:
    """Insert the records and their events, move the chain head: the columns, record hashes
    and events of ``Journal.create`` (canonical JSON of the record's columns, SHA-256; the
    event's HMAC, chained), through the driver's executemany in chunks.

    From PARALLEL_ROWS rows on, ``sealing.seal`` makes each chunk's hashes in a worker
    process while this one writes the chunk before: the same function on the same values, so
    the same bytes (tests/store/test_audit_bulk.py runs both ways). A worker that cannot start
    or dies leaves the rest to this process."""
    cls: Any = WaterFluxTest if sheet.kind == "water_flux" else IntegrityTest
    table: Any = cls.__table__
    entity = table.name
    if cls.redacted:
        raise RuntimeError(f"{entity} has redacted columns; their create events differ")
    ids = _reserve_ids(session, entity, len(accepted))
    actor_login = actor.login
    events = CreateEvents(session, head, entity=entity, actor=actor_login, at=at)
    fixed = {"late": True, "method_version": f"fluxledger {__version__}", "created_at": at,
             "created_by": actor_login, "voided_at": None, "voided_by": None,
             "void_reason": None}  # fmt: skip
    computed = list(accepted[0][3])  # every row of a kind has the same columns
    names = ["id", "module_id", "activity_at", "limits_version_id", "entered", *computed]
    rows = StoredRows(session.connection(), table, [*names, "record_hash"], fixed)
    form = _form(cls, names, fixed)
    batches: list[list[tuple[str, int | None, list[Any]]]] = []
    for part, part_ids in zip(_chunks(accepted, CHUNK), _chunks(ids, CHUNK), strict=True):
        batch = []
        for (i, m, version, values), new_id in zip(part, part_ids, strict=True):
            if len(values) != len(computed):
                raise RuntimeError("rows of one kind must have the same columns")
            baseline = values.get("baseline_test_id")
            if baseline is not None and baseline < 0:
                values["baseline_test_id"] = ids[-baseline - 1]
            module_id = m.module.id
            row: list[Any] = [new_id, module_id, sheet.at[i], version, sheet.entered[i] or None]
            row += [values[k] for k in computed]
            batch.append((str(new_id), module_id, row))
        batches.append(batch)
    parallel = len(accepted) >= PARALLEL_ROWS
    sealing = closing(_sealed(form, events.form, batches, events.seq, events.prev, parallel))
    with sealing as each:
        for batch, sealed in zip(batches, each, strict=True):
            _insert(rows, events, batch, sealed)
            if progress is not None:
                progress(len(batch))
    events.close()
    result.written = len(accepted)
    result.first_id, result.last_id = ids[0], ids[-1]


def _insert(
    rows: StoredRows, events: CreateEvents, batch: list[tuple[str, int | None, list[Any]]],
    sealed: Sealed,
) -> None:  # fmt: skip
    """Write one sealed batch: its records, then their create events."""
    stored_rows: list[Any] = []
    stored_events: list[Any] = []
    for (entity_id, module_id, row), (body, record, digest) in zip(
        batch, sealed.records, strict=True
    ):
        stored_events.append(events.stored(entity_id, module_id, body, record, digest))
        row.append(record)
        stored_rows.append(rows.stored(row))
    rows.insert(stored_rows)
    events.rows.insert(stored_events)


def _sealed(
    form: RecordForm,
    events: EventForm,
    batches: list[list[tuple[str, int | None, list[Any]]]],
    seq: int,
    prev: str,
    parallel: bool,
) -> Generator[Sealed, None, None]:
    """``seal`` of each batch in turn, the chain running on from one to the next. In
    parallel, batch k + 1 is sealed in a worker process while the caller writes batch k
    (each batch is pickled when it is handed over, before the caller changes its rows)."""
    worker = None
    if parallel and len(batches) > 1:
        try:
            worker = _Worker(form, events)
            worker.submit(batches[0], seq, prev)
        except _GONE:
            _stopped(worker)
            worker = None
    try:
        for k, batch in enumerate(batches):
            sealed = None
            if worker is not None:
                try:
                    sealed = worker.result()
                    if k + 1 < len(batches):
                        worker.submit(batches[k + 1], sealed.seq, sealed.prev)
                except _GONE:
                    _stopped(worker)
                    worker = None
            if sealed is None:
                sealed = seal(form, events, batch, seq, prev)
            seq, prev = sealed.seq, sealed.prev
            yield sealed
    finally:
        _stopped(worker)


# What a worker that could not start, or died, looks like from here (its hashes are then
# made in this process: the same function on the same values).
_GONE = (OSError, EOFError, pickle.UnpicklingError)


class _Worker:
    """A sealing worker (``sealing.serve``) in its own process, fed one batch at a time
    through its standard input; its standard error is discarded (a worker that fails is
    replaced by this process, which then raises any error itself)."""

    def __init__(self, form: RecordForm, events: EventForm) -> None:
        self.process = subprocess.Popen(
            worker_command(), stdin=subprocess.PIPE, stdout=subprocess.PIPE,
            stderr=subprocess.DEVNULL,
        )  # fmt: skip
        self._send((form, events))

    def _send(self, value: Any) -> None:
        pipe: Any = self.process.stdin
        pickle.dump(value, pipe, pickle.HIGHEST_PROTOCOL)
        pipe.flush()

    def submit(self, rows: list[Any], seq: int, prev: str) -> None:
        """Hand over the next batch, its chain starting after event ``seq`` (digest ``prev``)."""
        self._send((rows, seq, prev))

    def result(self) -> Sealed:
        """The sealed batch last handed over."""
        records, seq, prev = pickle.load(self.process.stdout)  # type: ignore[arg-type]
        return Sealed(records, seq, prev)

    def close(self) -> None:
        """End the worker: close both pipes (it stops at the end of its input, or at a write
        nobody reads when the import stopped early), wait for it, kill it if it lingers."""
        for pipe in (self.process.stdin, self.process.stdout):
            try:
                if pipe is not None:
                    pipe.close()
            except OSError:
                pass
        try:
            self.process.wait(timeout=5)
        except subprocess.TimeoutExpired:
            self.process.kill()
            self.process.wait()


def _stopped(worker: _Worker | None) -> None:
    if worker is not None:
        worker.close()


def _form(cls: Any, names: list[str], fixed: dict[str, Any]) -> RecordForm:
    """How ``cls``'s content JSON (``store.audit.content``) is made from its row values: a
    float column as float, a time as ISO 8601 UTC, a column holding its hash default left
    out; the columns in ``fixed`` encoded once."""
    from sqlalchemy import Float

    table = cls.__table__
    hashed = {c.name for c in table.columns} - cls.hash_excluded
    if hashed != {*names, *fixed} - cls.hash_excluded:
        raise RuntimeError(f"{table.name}: the hashed columns are not those given")
    defaults: dict[str, Any] = cls.hash_defaults
    return RecordForm(
        entity=table.name,
        names=tuple(names),
        fixed={
            k: iso_utc(v) if isinstance(v, datetime) else v  # these tables hold no bytes
            for k, v in fixed.items()
            if k in hashed and not (k in defaults and v == defaults[k])
        },
        floats=tuple(n for n in names if isinstance(table.c[n].type, Float)),
        times=tuple(n for n in names if isinstance(table.c[n].type, UTCDateTime)),
        defaults=tuple((n, v) for n, v in defaults.items() if n in names),
    )
