"""Water-flux entries: a logged test (``test water``) and the calculator (``calc nwp``).

Both read TMP points from the one points-file reader below, so both accept the same columns:
``permeate_flow`` (or ``volume`` and ``time``), ``feed`` and ``retentate`` (and optionally
``permeate``) or a ready ``tmp``, and an optional ``temperature``; units in the headers.
"""

from __future__ import annotations

from collections.abc import Mapping
from contextlib import AbstractContextManager, nullcontext
from dataclasses import dataclass
from datetime import datetime
from typing import TYPE_CHECKING

from ledger.entries.fields import Field, Spec, Values, label, refuse_with, when
from ledger.errors import InputError

if TYPE_CHECKING:
    from ledger.logbook.waterflux import WaterPoint
    from ledger.pointsfile import Points


@dataclass(frozen=True)
class Reading:
    """One TMP point of a points file, SI: pressures in Pa (gauge), flow m³/s, temperature K."""

    line: int
    permeate_flow: float
    tmp: float
    feed: float | None
    retentate: float | None
    permeate: float
    temperature: float | None
    volume: float | None = None
    time: float | None = None


@dataclass(frozen=True)
class WaterPoints:
    """The points of one file, with the file's name so that later errors can name its lines."""

    points: Points
    readings: list[Reading]

    @property
    def source(self) -> str:
        return self.points.source

    def temperatures(self) -> list[float] | None:
        temps = [r.temperature for r in self.readings if r.temperature is not None]
        return temps if len(temps) == len(self.readings) else None


def read_water_points(path: str, *, minimum: int = 1) -> WaterPoints:
    """Read a points file of a water-flux test (see the module's docstring for its columns)."""
    from ledger.pointsfile import Column, read_points
    from ledger.science.permeability import transmembrane_pressure

    pts = read_points(
        path,
        [
            Column("permeate_flow", "flow", required=False),
            Column("volume", "volume", required=False),
            Column("time", "time", required=False),
            Column("tmp", "pressure", required=False),
            Column("feed", "pressure", required=False),
            Column("retentate", "pressure", required=False),
            Column("permeate", "pressure", required=False),
            Column("temperature", "temperature", required=False),
        ],
        minimum=minimum,
    )
    c = pts.columns
    by_flow = pts.has("permeate_flow")
    if not (by_flow or (pts.has("volume") and pts.has("time"))):
        raise InputError(
            f"{pts.source}: needs a permeate_flow column, or volume and time",
            field="points_file",
            value=pts.source,
            expected="columns permeate_flow [mL/min], or volume [mL] and time [s]",
            line=1,
        )
    by_pressures = pts.has("feed") and pts.has("retentate")
    if not (by_pressures or pts.has("tmp")):
        raise InputError(
            f"{pts.source}: needs feed and retentate columns, or a tmp column",
            field="points_file",
            value=pts.source,
            expected="columns feed [psi] and retentate [psi] (and permeate [psi]), or tmp [psi]",
            line=1,
        )
    readings = []
    for i, line in enumerate(pts.lines):
        permeate = c["permeate"][i] if pts.has("permeate") else 0.0
        feed = c["feed"][i] if by_pressures else None
        retentate = c["retentate"][i] if by_pressures else None
        tmp = (
            transmembrane_pressure(feed, retentate, permeate)  # type: ignore[arg-type]
            if by_pressures
            else c["tmp"][i]
        )
        volume = c["volume"][i] if not by_flow else None
        time = c["time"][i] if not by_flow else None
        if by_flow:
            flow = c["permeate_flow"][i]
        else:
            if not (volume and time and volume > 0 and time > 0):
                raise InputError(
                    "volume and time must be above zero",
                    field="volume" if not (volume and volume > 0) else "time",
                    value=(volume, time),
                    expected="a collected volume and a collection time above zero",
                    source=pts.source,
                    line=line,
                )
            flow = volume / time
        readings.append(
            Reading(
                line=line,
                permeate_flow=flow,
                tmp=tmp,
                feed=feed,
                retentate=retentate,
                permeate=permeate,
                temperature=c["temperature"][i] if pts.has("temperature") else None,
                volume=volume,
                time=time,
            )
        )
    return WaterPoints(pts, readings)


def test_temperature(values: Values, points: WaterPoints | None) -> float:
    """The one water temperature of a test: --temperature, else the points file's column.

    The column's values must agree within the rule of :mod:`ledger.rules.water_test`.
    """
    from ledger.rules.water_test import TEMPERATURE_SPREAD_MAX_K, temperature_spread_ok

    if values["temperature"] is not None:
        return float(values["temperature"])
    temps = points.temperatures() if points is not None else None
    if temps is None:
        raise InputError(
            "give --temperature, or a temperature column in the points file",
            field="temperature",
            value=None,
            expected="e.g. --temperature '22 degC'",
        )
    if not temperature_spread_ok(temps):
        assert points is not None
        raise InputError(
            f"{points.source}: the water temperature varies by more than "
            f"{TEMPERATURE_SPREAD_MAX_K:g} K",
            field="temperature",
            value=max(temps) - min(temps),
            expected=f"one water temperature for the test (within {TEMPERATURE_SPREAD_MAX_K:g} K)",
        )
    return sum(temps) / len(temps)


# `test water` ---------------------------------------------------------------------------------

SINGLE_POINT = ("feed", "retentate", "flow", "volume", "time")

WATER_TEST = Spec(
    "test water",
    (
        Field("serial", required=True),
        Field("stage", required=True, help="baseline, pre-use, post-use or post-clean"),
        Field("feed", "pressure", help="Feed pressure (gauge), '10 psi'"),
        Field("retentate", "pressure", help="Retentate pressure"),
        Field("permeate", "pressure", help="Permeate pressure (default 0)"),
        Field("flow", "flow", help="Permeate flow, '120 mL/min'"),
        Field("volume", "volume", help="Or: permeate collected, '250 mL'"),
        Field("time", "time", help="... over this time, '2 min'"),
        Field("temperature", "temperature", help="Water, '22 degC'"),
        Field("points_file", help="CSV of several TMP points"),
        Field("water_grade", help="e.g. WFI, PW"),
        Field("activity_time", "datetime"),
        Field("note"),
    ),
)


@dataclass(frozen=True)
class WaterTestEntry:
    """A water-flux test as the logbook records it (SI)."""

    serial: str
    stage: str
    points: list[WaterPoint]
    temperature_k: float
    water_grade: str | None
    activity_at: datetime | None
    note: str | None
    points_file: WaterPoints | None  # to name the file's lines in later errors
    entered: dict[str, str] | None = None  # quantity options as typed ("20 psi")
    rows: tuple[int, ...] | None = None  # typed as a table: the row number of each point

    def blame(self) -> AbstractContextManager[None]:
        """Attribute a later error on the points to the points file's line, or to the cell
        of the table row it was typed in."""
        if self.rows is not None:
            return RowBlame(self.rows)
        return self.points_file.points.blame() if self.points_file else nullcontext()


def _point(v: Values) -> WaterPoint:
    """One point from checked values: feed, retentate, permeate (default 0), and a flow or
    a volume over a time."""
    from ledger.logbook.waterflux import WaterPoint

    return WaterPoint(
        feed_pa=v["feed"],
        retentate_pa=v["retentate"],
        permeate_pa=v.get("permeate", 0.0),
        flow_m3_s=v["flow"],
        volume_m3=v["volume"],
        time_s=v["time"],
    )


def water_test(raw: Mapping[str, object]) -> WaterTestEntry:
    """Check a water-flux test entry: one point from options, or several from a points file."""
    from ledger.logbook.waterflux import WaterPoint

    v = WATER_TEST.parse(raw)
    pts: WaterPoints | None = None
    if v["points_file"] is not None:
        refuse_with(v, "points_file", "reads every point from the file", *SINGLE_POINT)
        pts = read_water_points(v["points_file"])
        if any(r.feed is None for r in pts.readings):
            raise InputError(
                f"{pts.source}: a logged test needs feed and retentate columns, not only tmp "
                "(the channel pressure drop is part of the record)",
                field="points_file",
                value=pts.source,
                expected="columns feed [psi] and retentate [psi] (and permeate [psi])",
                line=1,
            )
        points = [
            WaterPoint(
                feed_pa=r.feed,  # type: ignore[arg-type]
                retentate_pa=r.retentate,  # type: ignore[arg-type]
                permeate_pa=r.permeate,
                flow_m3_s=None if r.volume is not None else r.permeate_flow,
                volume_m3=r.volume,
                time_s=r.time,
            )
            for r in pts.readings
        ]
    else:
        missing = [n for n in ("feed", "retentate", "temperature") if v[n] is None]
        if missing:
            raise InputError(
                "a single-point test needs --feed, --retentate and --temperature",
                field=missing[0],
                value=None,
                expected="all three (or --points-file)",
            )
        points = [_point(v)]
    return WaterTestEntry(
        serial=v["serial"],
        stage=v["stage"],
        points=points,
        temperature_k=test_temperature(v, pts),
        water_grade=v["water_grade"],
        activity_at=when(v),
        note=v["note"],
        points_file=pts,
        # A points file's values are not kept as text: its points are stored in SI as before.
        entered=v.entered(),
    )


# `calc nwp` -----------------------------------------------------------------------------------

NWP_CALC = Spec(
    "calc nwp",
    (
        Field("area", "area", required=True, positive=True),
        Field("permeate_flow", "flow"),
        Field("feed", "pressure"),
        Field("retentate", "pressure"),
        Field("permeate", "pressure"),
        Field("temperature", "temperature"),
        Field("reference_temperature", "temperature"),
        Field("correction"),
        Field("u_constant", "u_constant", positive=True, default_unit="K"),
        Field("baseline", "permeability"),
        Field("points_file"),
    ),
)
CORRECTIONS = ("viscosity", "exponential")


@dataclass(frozen=True)
class NwpCalcEntry:
    """Inputs of the NWP calculator (SI). ``points`` is None for a single point."""

    area: float
    reference_temperature: float
    correction: str
    u_constant: float | None
    baseline: float | None
    points: WaterPoints | None
    temperatures: list[float]  # one per point
    # single point
    permeate_flow: float | None = None
    feed: float | None = None
    retentate: float | None = None
    permeate: float = 0.0


def nwp_calc(raw: Mapping[str, object]) -> NwpCalcEntry:
    """Check the NWP calculator's inputs."""
    defaults = {"reference_temperature": "20 degC", "correction": "viscosity"}
    v = NWP_CALC.parse(raw, defaults)
    method = str(v["correction"])
    if method not in CORRECTIONS:
        raise InputError(
            f"--correction {method!r} is unknown",
            field="correction",
            value=method,
            expected=" or ".join(CORRECTIONS),
        )
    if method == "exponential" and v["u_constant"] is None:
        raise InputError(
            "--correction exponential needs --u-constant (K), e.g. --u-constant '2640 K'",
            field="u_constant",
            value=None,
            expected="a constant in K",
        )
    if method != "exponential":
        refuse_with(v, "correction", f"{method} takes no U constant", "u_constant")
    common = dict(
        area=v["area"],
        reference_temperature=v["reference_temperature"],
        correction=method,
        u_constant=v["u_constant"],
        baseline=v["baseline"],
    )
    if v["points_file"] is not None:
        # --permeate has a default; the file's permeate column (or 0) is used.
        refuse_with(v, "points_file", "reads every point from the file", "permeate_flow", "feed",
                    "retentate")  # fmt: skip
        pts = read_water_points(v["points_file"], minimum=2)
        temps = pts.temperatures()
        if temps is None:
            if v["temperature"] is None:
                raise InputError(
                    "no temperature: add a 'temperature [degC]' column or give --temperature",
                    field="temperature",
                    value=None,
                    expected="a temperature",
                )
            temps = [v["temperature"]] * len(pts.readings)
        for r in pts.readings:
            _positive_tmp(r.tmp, "tmp", source=pts.source, line=r.line)
        return NwpCalcEntry(points=pts, temperatures=temps, **common)
    missing = [n for n in ("permeate_flow", "feed", "retentate", "temperature") if v[n] is None]
    if missing:
        raise InputError(
            f"missing {', '.join(label(n) for n in missing)} (or give --points-file)",
            field=missing[0],
            value=None,
            expected="a value for each, or a points file",
        )
    from ledger.science.permeability import transmembrane_pressure

    permeate = v.get("permeate", 0.0)
    tmp = transmembrane_pressure(v["feed"], v["retentate"], permeate)
    _positive_tmp(tmp, "feed", message_options=True)
    return NwpCalcEntry(
        points=None,
        temperatures=[v["temperature"]],
        permeate_flow=v["permeate_flow"],
        feed=v["feed"],
        retentate=v["retentate"],
        permeate=permeate,
        **common,
    )


def _positive_tmp(
    tmp: float,
    name: str,
    *,
    source: str | None = None,
    line: int | None = None,
    message_options: bool = False,
) -> None:
    if tmp > 0:
        return
    where = "TMP from --feed, --retentate and --permeate" if message_options else "TMP"
    raise InputError(
        f"{where} is {tmp / 1e5:.4g} bar; expected a positive TMP"
        + (" (feed and retentate above permeate)" if message_options else ""),
        field=name,
        value=tmp,
        expected="a positive TMP",
        source=source,
        line=line,
    )


# A water-flux test typed as a table of TMP points (the web form) ------------------------------

MAX_ROWS = 12
ROW_FIELDS = ("feed", "retentate", "permeate", "flow", "volume", "time")
WATER_ROW = Spec(
    "water-flux point",
    (
        Field("feed", "pressure", help="Feed pressure (gauge), '12 psi'"),
        Field("retentate", "pressure", help="Retentate pressure"),
        Field("permeate", "pressure", help="Permeate pressure (default 0)"),
        Field("flow", "flow", help="Permeate flow, '228 mL/min'"),
        Field("volume", "volume", help="Or: permeate collected, '250 mL'"),
        Field("time", "time", help="... over this time, '1 min'"),
    ),
)
# The test's own fields when its points come from a table (no points file, no single point).
WATER_TABLE = Spec(
    "test water",
    tuple(f for f in WATER_TEST.fields if f.name not in (*ROW_FIELDS, "points_file")),
)


def row_field(name: str, row: int) -> str:
    """The name of a table cell: the point's field and its row number ("feed_2")."""
    return f"{name}_{row}"


@dataclass(frozen=True)
class RowBlame:
    """Turns an error on the ``index``-th point (as the service raises it) into one naming
    the table cell: the field ``feed_3`` and "row 3" in the message."""

    rows: tuple[int, ...]  # the row number of each point, blank rows skipped

    def __enter__(self) -> None:
        return None

    def __exit__(self, kind: object, err: object, tb: object) -> None:
        if (
            isinstance(err, InputError)
            and err.index is not None
            and 0 <= err.index < len(self.rows)
        ):
            _name_row(err, self.rows[err.index])


def _name_row(err: InputError, row: int) -> None:
    if err.field in ROW_FIELDS:
        err.field = row_field(err.field, row)
    err.index = row - 1
    if not err.message.startswith(f"row {row}"):
        err.message = f"row {row}: {err.message}"
        err.args = (err.message,)


def water_test_rows(raw: Mapping[str, object], rows: int = MAX_ROWS) -> WaterTestEntry:
    """Check a water-flux test typed as a table: the test's fields (``serial``, ``stage``,
    ``temperature``, ``water_grade``, ``activity_time``, ``note``) and up to ``rows`` points,
    row N in the fields ``feed_N``, ``retentate_N``, ``permeate_N`` (default 0) and
    ``flow_N``, or ``volume_N`` and ``time_N`` instead of the flow. Quantities in any unit of
    their kind ("12 psi", "228 mL/min"), SI in the entry. A row left blank is skipped.

    An error names the cell (``field`` "feed_2", ``index`` 1 for row 2, "row 2" in the
    message); :meth:`WaterTestEntry.blame` does the same for the service's errors on a point.
    One point is recorded as ``test water`` records its single-point options (the same
    ``entered`` text); several as from a points file (SI only, the temperature as typed)."""

    v = WATER_TABLE.parse(raw)
    points: list[WaterPoint] = []
    numbers: list[int] = []
    typed: dict[str, str] | None = None
    for row in range(1, rows + 1):
        cells = {name: raw.get(row_field(name, row)) for name in ROW_FIELDS}
        if all(c is None or (isinstance(c, str) and not c.strip()) for c in cells.values()):
            continue
        try:
            p = WATER_ROW.parse(cells)
            missing = [n for n in ("feed", "retentate") if p[n] is None]
            if missing:
                raise InputError(
                    "a point needs its feed and retentate pressures",
                    field=missing[0],
                    value=None,
                    expected="both, e.g. '12 psi' and '9 psi'",
                )
            if p["flow"] is None and not (p["volume"] is not None and p["time"] is not None):
                name = "flow" if p["volume"] is None and p["time"] is None else (
                    "time" if p["time"] is None else "volume")  # fmt: skip
                raise InputError(
                    "a point needs a permeate flow, or a volume and a time",
                    field=name,
                    value=None,
                    expected="a flow such as '228 mL/min', or '250 mL' over '1 min'",
                )
        except InputError as err:
            _name_row(err, row)
            raise
        points.append(_point(p))
        numbers.append(row)
        typed = p.entered()
    if not points:
        raise InputError(
            "a water-flux test needs at least one point: fill in row 1",
            field=row_field("feed", 1),
            value=None,
            expected="feed, retentate and permeate flow (or volume and time) of each point",
        )
    if v["temperature"] is None:
        raise InputError(
            "give the water temperature of the test",
            field="temperature",
            value=None,
            expected="e.g. '22 degC'",
        )
    entered = {**(typed or {}), **(v.entered() or {})} if len(points) == 1 else v.entered()
    return WaterTestEntry(
        serial=v["serial"],
        stage=v["stage"],
        points=points,
        temperature_k=float(v["temperature"]),
        water_grade=v["water_grade"],
        activity_at=when(v),
        note=v["note"],
        points_file=None,
        entered=entered or None,
        rows=tuple(numbers),
    )
