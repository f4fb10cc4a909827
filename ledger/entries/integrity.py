"""The integrity-test entry of the logbook (``test integrity``): a pressure decay, from
readings or from start, end and hold time, a bubble point, or a flow-type test (diffusion,
water intrusion) from a measured flow or from a pressure decay and the upstream gas volume."""

from __future__ import annotations

from collections.abc import Mapping
from contextlib import AbstractContextManager, nullcontext
from dataclasses import dataclass
from datetime import datetime
from typing import TYPE_CHECKING, Any, cast

from ledger.entries.fields import Field, Spec, Values, label, refuse_with, when
from ledger.errors import InputError

if TYPE_CHECKING:
    from ledger.logbook.integrity import DecayInput, FlowInput
    from ledger.pointsfile import Points
    from ledger.rules.integrity_limits import FlowTest

# --method as typed -> the kind of test ("-" or "_", any case).
METHODS = {
    "pressure-decay": "pressure_decay",
    "bubble-point": "bubble_point",
    "diffusion": "diffusion",
    "water-intrusion": "water_intrusion",
}
# Where a flow-type test keeps its flow: the typed --flow is kept under that column's name.
FLOW_ENTERED = {"diffusion": "gas_flow", "water_intrusion": "intrusion_flow"}

INTEGRITY_TEST = Spec(
    "test integrity",
    (
        Field("serial", required=True),
        Field("readings", help="CSV of the hold: 'time [min]' and 'pressure [psi]' columns"),
        Field("start", "pressure"),
        Field("end", "pressure"),
        Field("hold_time", "time"),
        Field("test_pressure", "pressure"),
        Field("upstream_volume", "volume"),
        Field("bubble_point", "pressure"),
        Field("method", help="pressure-decay, bubble-point, diffusion or water-intrusion"),
        Field("flow", "flow", help="a diffusion or water-intrusion flow as measured"),
        Field("temperature", "temperature"),
        Field("activity_time", "datetime"),
        Field("note"),
    ),
)


@dataclass(frozen=True)
class IntegrityEntry:
    """A decay (``decay`` set), a bubble point (``bubble_point_pa`` set) or a flow-type test
    (``flow_test`` set), SI."""

    serial: str
    decay: DecayInput | None
    bubble_point_pa: float | None
    temperature_k: float | None
    activity_at: datetime | None
    note: str | None
    readings: Points | None = None
    entered: dict[str, str] | None = None  # quantity options as typed ("30 psi")
    flow_test: FlowInput | None = None

    def bubble_point(self) -> float:
        """The bubble point (Pa); only for a bubble-point entry."""
        if self.bubble_point_pa is None:
            raise ValueError("not a bubble-point entry")  # a bug, not user input
        return self.bubble_point_pa

    def blame(self) -> AbstractContextManager[None]:
        """Attribute a later error on the readings to the readings file's line."""
        return self.readings.blame() if self.readings is not None else nullcontext()


def read_decay_readings(path: str) -> Points:
    """A pressure-hold readings file: 'time' and 'pressure' columns with units, 2 rows or more."""
    from ledger.pointsfile import Column, read_points

    return read_points(path, [Column("time", "time"), Column("pressure", "pressure")], minimum=2)


def _method(v: Values) -> str | None:
    """The kind of test --method names (None when not given)."""
    text = v["method"]
    if text is None:
        return None
    key = text.strip().lower().replace("_", "-")
    if key not in METHODS:
        raise InputError(
            f"--method: {text!r} is not an integrity-test method",
            field="method",
            value=text,
            expected=", ".join(METHODS),
        )
    return METHODS[key]


def _decay_input(v: Values) -> tuple[DecayInput, Points | None]:
    from ledger.logbook.integrity import DecayInput

    pts = None
    pairs = None
    if v["readings"] is not None:
        pts = read_decay_readings(v["readings"])
        pairs = list(zip(pts.columns["time"], pts.columns["pressure"], strict=True))
    decay = DecayInput(
        test_pressure_pa=v["test_pressure"],
        readings=pairs,
        start_pa=v["start"],
        end_pa=v["end"],
        hold_time_s=v["hold_time"],
        upstream_volume_m3=v["upstream_volume"],
        temperature_k=v["temperature"],
    )
    return decay, pts


def _flow_test(v: Values, test: FlowTest, common: dict[str, Any]) -> IntegrityEntry:
    """A diffusion or water-intrusion entry: a measured --flow at --test-pressure, or a
    pressure decay (readings, or start, end and hold time) with --upstream-volume."""
    from ledger.logbook.integrity import FlowInput

    method = v.raw["method"]
    refuse_with(v, "method", f"{method} is a flow-type test and takes no bubble point",
                "bubble_point")  # fmt: skip
    entered = dict(v.entered() or {})
    if "flow" in entered:
        entered[FLOW_ENTERED[test]] = entered.pop("flow")
    common = {**common, "entered": entered or None}
    if v["flow"] is not None:
        refuse_with(v, "flow", "is a measured flow and takes no decay values",
                    "readings", "start", "end", "hold_time")  # fmt: skip
        if v["test_pressure"] is None:
            raise InputError(
                f"--method {method} with --flow needs --test-pressure",
                field="test_pressure",
                value=None,
                expected="the gauge pressure the flow was measured at, e.g. '2.5 bar'",
            )
        flow = FlowInput(
            test=test,
            flow_m3_s=v["flow"],
            test_pressure_pa=v["test_pressure"],
            temperature_k=v["temperature"],
        )
        return IntegrityEntry(decay=None, bubble_point_pa=None, flow_test=flow, **common)
    if not v.given("readings", "start", "end", "hold_time", "upstream_volume"):
        raise InputError(
            f"--method {method} needs --flow, or a pressure decay (--readings, or --start, --end "
            "and --hold-time) with --upstream-volume",
            field="flow",
            value=None,
            expected="a measured flow such as '8 mL/min', or the decay values",
        )
    if v["upstream_volume"] is None:
        what = "upstream gas volume" if test == "diffusion" else "gas volume over the water"
        raise InputError(
            f"--method {method} from a pressure decay needs --upstream-volume (the {what})",
            field="upstream_volume",
            value=None,
            expected=f"{label('flow')} as measured, or the decay and --upstream-volume, '120 mL'",
        )
    decay, pts = _decay_input(v)
    flow = FlowInput(test=test, decay=decay, temperature_k=v["temperature"])
    return IntegrityEntry(decay=None, bubble_point_pa=None, flow_test=flow, readings=pts, **common)


def integrity_test(raw: Mapping[str, object]) -> IntegrityEntry:
    """Check an integrity-test entry."""
    v = INTEGRITY_TEST.parse(raw)
    method = _method(v)
    common = dict(
        serial=v["serial"],
        temperature_k=v["temperature"],
        activity_at=when(v),
        note=v["note"],
        entered=v.entered(),
    )
    if method in FLOW_ENTERED:
        return _flow_test(v, cast("FlowTest", method), common)
    if v["flow"] is not None:
        raise InputError(
            "--flow is the measured flow of a diffusion or water-intrusion test",
            field="flow",
            value=v.raw["flow"],
            expected="--method diffusion or --method water-intrusion with --flow, or no --flow",
        )
    if method == "bubble_point" and v["bubble_point"] is None:
        raise InputError(
            "--method bubble-point needs --bubble-point",
            field="bubble_point",
            value=None,
            expected="the bubble point seen, e.g. '52 psi'",
        )
    if method == "pressure_decay":
        refuse_with(v, "method", "pressure-decay takes no bubble point", "bubble_point")
    if v["bubble_point"] is not None:
        refuse_with(
            v, "bubble_point", "is a bubble-point test and takes no decay values",
            "readings", "start", "end", "hold_time", "test_pressure", "upstream_volume",
        )  # fmt: skip
        return IntegrityEntry(decay=None, bubble_point_pa=v["bubble_point"], **common)
    decay, pts = _decay_input(v)
    return IntegrityEntry(decay=decay, bubble_point_pa=None, readings=pts, **common)
