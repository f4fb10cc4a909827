"""Run entries: planning a run (``run plan``), importing its skid log (``run import``), QC
results (``run qc``), the activity time of a start or finish, and ``log summarize``'s phases."""

from __future__ import annotations

import os
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from datetime import datetime
from typing import TYPE_CHECKING, Any

from ledger.entries.fields import Field, Spec, label, when
from ledger.errors import InputError

if TYPE_CHECKING:
    from ledger.runs.actuals import PhaseWindow


def pairs(items: Sequence[str], name: str) -> dict[str, str]:
    """``NAME=VALUE`` items (``--input``, ``--result``, ``--phase``) as a dict; each name once."""
    out: dict[str, str] = {}
    for item in items:
        key, sep, value = item.partition("=")
        if not sep or not key.strip() or not value.strip():
            raise InputError(
                f"{label(name)} {item!r} is not NAME=VALUE",
                field=name,
                value=item,
                expected="NAME=VALUE, e.g. initial_volume='1.2 L'",
            )
        if key.strip() in out:
            raise InputError(
                f"{label(name)} {key.strip()} is given twice",
                field=name,
                value=item,
                expected="each name once",
            )
        out[key.strip()] = value.strip()
    return out


def phase_windows(items: Sequence[str]) -> list[PhaseWindow]:
    """``--phase NAME=START/END`` (ISO 8601 with offset) as phase windows."""
    from ledger.logbook.times import parse_time
    from ledger.runs.actuals import PhaseWindow

    out = []
    for name, span in pairs(items, "phase").items():
        start, sep, end = span.partition("/")
        if not sep:
            raise InputError(
                f"--phase {name}={span!r} is not START/END",
                field="phase",
                value=span,
                expected="NAME=START/END in ISO 8601 with offset",
            )
        t0 = parse_time(start, field="phase")
        t1 = parse_time(end, field="phase")
        if t1 <= t0:
            raise InputError(
                f"--phase {name}: the end is not after the start",
                field="phase",
                value=span,
                expected="END after START",
            )
        out.append(PhaseWindow(name, t0, t1))
    return out


def read_scouting(path: str) -> list[tuple[float, float]]:
    """A scouting run's flux against concentration: (kg/m³, m/s) pairs, 2 rows or more."""
    from ledger.pointsfile import Column, read_points

    pts = read_points(
        path, [Column("concentration", "concentration"), Column("flux", "flux")], minimum=2
    )
    return list(zip(pts.columns["concentration"], pts.columns["flux"], strict=True))


RUN_PLAN = Spec(
    "run plan",
    (
        Field("template", required=True),
        Field("module", required=True),
        Field("product", required=True),
        Field("lot", required=True),
        Field("scouting"),
        Field("override_reason"),
        Field("product_override_reason"),
        Field("activity_time", "datetime"),
        Field("skid"),
        Field("template_version"),
    ),
)


@dataclass(frozen=True)
class PlanEntry:
    template: str
    module: str
    product: str
    lot: str
    inputs: dict[str, str]  # checked against the template's inputs by the planner
    scouting: list[tuple[float, float]] | None
    override_reason: str | None
    product_override_reason: str | None = None  # a template of another product, and why
    planned_at: datetime | None = None  # entered late: when the run was planned
    skid: str | None = None  # the registered skid the run is made on
    template_version: str | None = None  # must be the version in force at the plan time


def run_plan(raw: Mapping[str, Any]) -> PlanEntry:
    """Check a run plan's fields; the template's own inputs are checked when it is planned."""
    v = RUN_PLAN.parse(raw)
    given = pairs(list(raw.get("inputs") or ()), "input")
    scouting = read_scouting(v["scouting"]) if v["scouting"] is not None else None
    return PlanEntry(
        v["template"], v["module"], v["product"], v["lot"], given, scouting, v["override_reason"],
        v["product_override_reason"], v["activity_time"], v["skid"], v["template_version"],
    )  # fmt: skip


RUN_IMPORT = Spec(
    "run import",
    (
        Field("run", "integer", required=True),
        Field("mapping"),
    ),
)


@dataclass(frozen=True)
class ImportEntry:
    run: int
    files: list[str]  # one or more files of the run's log, in time order
    mapping: str | None  # None: the run's skid's approved mapping
    phases: list[PhaseWindow]


def run_import(raw: Mapping[str, Any]) -> ImportEntry:
    """Check a skid-log import: the run, its file or files, the mapping and phase windows."""
    v = RUN_IMPORT.parse({k: w for k, w in raw.items() if k != "file"})
    given = raw.get("file")
    files = [str(given)] if isinstance(given, (str, os.PathLike)) else [str(f) for f in given or ()]
    if not files:
        raise InputError("no skid log file given", field="file", expected="one or more files")
    return ImportEntry(v["run"], files, v["mapping"], phase_windows(raw.get("phase") or ()))


def qc_results(raw: Mapping[str, Any]) -> dict[str, str]:
    """``--result NAME=VALUE`` items; each value is checked against its attribute later."""
    return pairs(list(raw.get("results") or ()), "result")


RUN_STEP = Spec("run", (Field("run", "integer", required=True), Field("activity_time", "datetime")))


def activity(raw: Mapping[str, Any]) -> tuple[int, datetime | None]:
    """The run number and optional late-entry time of ``run start`` or ``run finish``."""
    v = RUN_STEP.parse(raw)
    return v["run"], when(v)


STEP_SIGN = Spec(
    "run step",
    (
        Field("run", "integer", required=True),
        Field("step", "integer", required=True),
        Field("meaning", required=True),
        Field("deviation", "integer"),
        Field("activity_time", "datetime"),
    ),
)


@dataclass(frozen=True)
class StepSignEntry:
    run: int
    step: int  # from 1
    meaning: str  # performed, verified (checked by the service against the template)
    values: dict[str, str]  # entry name -> text as typed; parsed against the template's kinds
    deviation: int | None  # the deviation that explains a value out of range
    done_at: datetime | None  # entered late: when the step was done


def run_step(raw: Mapping[str, Any]) -> StepSignEntry:
    """Check ``run step``'s fields; each ``--value NAME=TEXT`` is parsed by the service
    against the step's entries (their kinds and units are in the run's template)."""
    v = STEP_SIGN.parse(raw)
    given = pairs(list(raw.get("values") or ()), "value")
    meaning = str(v["meaning"]).strip()
    return StepSignEntry(v["run"], v["step"], meaning, given, v["deviation"], when(v))


LOG_SUMMARY = Spec(
    "log summarize",
    (
        Field("mapping", required=True),
        Field("limits"),
        Field("area", "area", positive=True),
        Field("fibers", "integer"),
        Field("lumen_diameter", "length", positive=True),
    ),
)


@dataclass(frozen=True)
class LogSummaryEntry:
    file: list[str]  # one or more files of one run, in order
    mapping: str
    limits: str | None
    area_m2: float | None
    fibers: int | None
    lumen_diameter_m: float | None
    phases: list[PhaseWindow]


def log_summary(raw: Mapping[str, Any]) -> LogSummaryEntry:
    """Check ``log summarize``'s fields: the files, the module's geometry and phase windows."""
    v = LOG_SUMMARY.parse({k: w for k, w in raw.items() if k != "file"})
    files = [str(f) for f in (raw.get("file") or ())]
    if not files:
        raise InputError("no skid log file given", field="file", expected="one or more files")
    if v["fibers"] is not None and v["fibers"] < 1:
        raise InputError(
            f"--fibers {v['fibers']}: must be at least 1",
            field="fibers",
            value=v["fibers"],
            expected="a whole number of 1 or more",
        )
    return LogSummaryEntry(
        files,
        v["mapping"],
        v["limits"],
        v["area"],
        v["fibers"],
        v["lumen_diameter"],
        phase_windows(raw.get("phase") or ()),
    )


LOG_TOLERANCE = Spec(
    "run log-tolerance",
    (Field("tolerance", "time", required=True), Field("reason", required=True)),
)


def log_tolerance(raw: Mapping[str, Any]) -> tuple[float, str]:
    """The skid-log tolerance (s) and the reason it changes."""
    v = LOG_TOLERANCE.parse(raw)
    return v["tolerance"], v["reason"]


# What `run import` reads (ledger.runs.skidlog): a text export, or an Excel workbook, which
# the reader knows by its name or its zip signature; a mapping is a TOML file.
LOG_TEXT_SUFFIXES = (".csv", ".tsv", ".txt")
LOG_WORKBOOK_SUFFIXES = (".xlsx", ".xlsm")
MAPPING_SUFFIXES = (".toml",)
ZIP_SIGNATURE = b"PK\x03\x04"
MAX_NAME_BYTES = 255  # a file name's bytes (NAME_MAX on common file systems)


def uploaded_name(field: str, name: str | None) -> str:
    """The base name of a file sent from a browser (a browser may send a path), refused when
    empty, a dot name, over MAX_NAME_BYTES or holding a control character."""
    base = (name or "").replace("\\", "/").rsplit("/", 1)[-1].strip()
    if not base:
        raise InputError(
            f"{field}: no file chosen", field=field, value=name or "",
            expected="a file to upload",
        )  # fmt: skip
    bad = base in (".", "..") or base.startswith(".") or not base.isprintable()
    if bad or len(base.encode("utf-8", "surrogatepass")) > MAX_NAME_BYTES:
        raise InputError(
            f"{field}: {base[:80]!r} is not a usable file name", field=field,
            value=base[:80], expected=f"a plain file name of at most {MAX_NAME_BYTES} bytes",
        )  # fmt: skip
    return base


def skid_upload(field: str, name: str | None, head: bytes) -> str:
    """The name of an uploaded skid log (``field`` "file") or mapping (``field`` "mapping")
    once its name and its first bytes are of a type ``run import`` reads: a log is a text
    export (.csv, .tsv, .txt: text in an encoding the reader detects, not a zip archive) or
    an Excel workbook (.xlsx, .xlsm: a zip archive); a mapping is a TOML text file. The
    InputError names the field, the file and what is expected."""
    from ledger.runs.dialect import detect_encoding

    base = uploaded_name(field, name)
    suffix = os.path.splitext(base)[1].lower()
    kinds: tuple[str, ...]
    if field == "mapping":
        kinds, expected = MAPPING_SUFFIXES, "a column mapping as a TOML file (.toml)"
    else:
        kinds = LOG_TEXT_SUFFIXES + LOG_WORKBOOK_SUFFIXES
        expected = (
            "a skid log as a text export (.csv, .tsv, .txt) or an Excel workbook (.xlsx, .xlsm)"
        )

    def refuse(why: str) -> InputError:
        return InputError(f"{base}: {why}", field=field, value=base, expected=expected)

    if suffix not in kinds:
        raise refuse(f"a {suffix or 'file without an extension'} file is not read here")
    if not head:
        raise refuse("the file is empty")
    zipped = head.startswith(ZIP_SIGNATURE)
    if suffix in LOG_WORKBOOK_SUFFIXES:
        if not zipped:
            raise refuse(f"the file is named {suffix} but is not an Excel workbook")
        return base
    if zipped:
        raise refuse(f"the file is named {suffix} but is a zip archive, not text")
    try:
        detect_encoding(head)
    except InputError:
        raise refuse(f"the file is named {suffix} but holds binary data, not text") from None
    return base
