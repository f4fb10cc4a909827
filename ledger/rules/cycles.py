"""Cleaning cycles: each step of a validated cleaning-cycle procedure against what was done at
it (pure: SI values in, departures in words out).

A procedure step states its agent (or water), and where it has them a concentration range, a
temperature range, a minimum contact time, a flow range, a TMP range and an endpoint: pH
(a range), conductivity, TOC (at most) or volume (at least). A step departs from its procedure
when a value lies outside its range, the contact time is short, or the endpoint is not reached.
Any departure holds the module until a signed disposition (``ledger.rules.sequence``); the NWP
recovery after the cycle stays the acceptance test of the whole cycle.

Edges: a value exactly at a limit keeps it, with the relative EDGE_TOLERANCE of
``ledger.rules.water_test`` for binary rounding (the same convention as every other limit).
"""

from __future__ import annotations

from dataclasses import dataclass

from ledger.rules.water_test import at_least, at_most

ENDPOINT_KINDS = ("ph", "conductivity", "toc", "volume")
# Which side of the endpoint's limit is "reached": a rinse reaches a conductivity or TOC at or
# below its limit, a flush a volume at or above it, and a pH inside its range.
_ENDPOINT_WORDS = {"ph": "pH", "conductivity": "conductivity", "toc": "TOC", "volume": "volume"}


@dataclass(frozen=True)
class Range:
    """A closed range in SI units; None for an open end."""

    low: float | None = None
    high: float | None = None

    def keeps(self, value: float) -> bool:
        """True when ``value`` lies inside (edges included, with the edge tolerance)."""
        ok_low = self.low is None or at_least(value, self.low)
        ok_high = self.high is None or at_most(value, self.high)
        return ok_low and ok_high


@dataclass(frozen=True)
class StepSpec:
    """One step of a cleaning-cycle procedure, in SI units (concentration in its own unit:
    mol/m³, kg/m³ or a fraction, as ``concentration_unit`` says)."""

    name: str
    agent: str
    concentration: Range | None = None
    concentration_unit: str = ""
    temperature_k: Range | None = None
    contact_time_min_s: float | None = None
    flow_m3_s: Range | None = None
    tmp_pa: Range | None = None
    endpoint: str | None = None  # one of ENDPOINT_KINDS
    endpoint_range: Range | None = None  # pH: a range; conductivity S/m, TOC kg/m³: high;
    # volume m³: low
    needs_solution: bool = False  # a chemical step names the prepared solution it used

    def needs(self) -> tuple[str, ...]:
        """The values a record of this step must give (its field names)."""
        out = []
        if self.needs_solution:
            out.append("solution")
        if self.concentration is not None:
            out.append("concentration")
        if self.temperature_k is not None:
            out.append("temperature")
        if self.contact_time_min_s is not None:
            out.append("contact_time")
        if self.flow_m3_s is not None:
            out.append("flow")
        if self.tmp_pa is not None:
            out.append("tmp")
        if self.endpoint is not None:
            out.append("endpoint")
        return tuple(out)


@dataclass(frozen=True)
class StepDone:
    """What was done at a step, in SI units; None where the step asks for nothing."""

    concentration: float | None = None
    temperature_k: float | None = None
    contact_time_s: float | None = None
    flow_m3_s: float | None = None
    tmp_pa: float | None = None
    endpoint_value: float | None = None


def _fmt(value: float, scale: float, unit: str) -> str:
    return f"{value / scale:.4g} {unit}".rstrip()


def _outside(word: str, value: float, r: Range, scale: float, unit: str) -> str:
    low = "…" if r.low is None else _fmt(r.low, scale, unit)
    high = "…" if r.high is None else _fmt(r.high, scale, unit)
    return f"{word} {_fmt(value, scale, unit)} outside {low} – {high}"


_CONC = {"mol/m**3": (1000.0, "mol/L"), "kg/m**3": (1.0, "g/L"), "": (0.01, "%")}
_ENDPOINT_SCALE = {"ph": (1.0, ""), "conductivity": (1e-4, "µS/cm"), "toc": (1e-6, "µg/L"),
                   "volume": (1e-3, "L")}  # fmt: skip


def departures(number: int, spec: StepSpec, done: StepDone) -> list[str]:
    """Each way step ``number`` departs from its procedure step, in words; [] when it keeps
    every range and reaches its endpoint. A value the spec asks for must be given (the entry
    layer refuses a record without it), so a missing one here is a bug."""
    head = f"step {number} ({spec.name})"
    out: list[str] = []

    def need(value: float | None, what: str) -> float:
        if value is None:
            raise ValueError(f"{head}: {what} missing")  # a bug: entries require it
        return value

    if spec.concentration is not None:
        c = need(done.concentration, "concentration")
        scale, unit = _CONC[spec.concentration_unit]
        if not spec.concentration.keeps(c):
            out.append(f"{head}: " + _outside("concentration", c, spec.concentration, scale, unit))
    if spec.temperature_k is not None:
        t = need(done.temperature_k, "temperature")
        if not spec.temperature_k.keeps(t):
            r = spec.temperature_k
            shifted = Range(None if r.low is None else r.low - 273.15,
                            None if r.high is None else r.high - 273.15)  # fmt: skip
            out.append(f"{head}: " + _outside("temperature", t - 273.15, shifted, 1.0, "°C"))
    if spec.contact_time_min_s is not None:
        s = need(done.contact_time_s, "contact_time")
        if not at_least(s, spec.contact_time_min_s):
            out.append(f"{head}: contact time {s / 60:.4g} min shorter than the "
                       f"{spec.contact_time_min_s / 60:.4g} min required")  # fmt: skip
    if spec.flow_m3_s is not None:
        q = need(done.flow_m3_s, "flow")
        if not spec.flow_m3_s.keeps(q):
            out.append(f"{head}: " + _outside("flow", q, spec.flow_m3_s, 1e-6 / 60, "mL/min"))
    if spec.tmp_pa is not None:
        p = need(done.tmp_pa, "tmp")
        if not spec.tmp_pa.keeps(p):
            out.append(f"{head}: " + _outside("TMP", p, spec.tmp_pa, 1e5, "bar"))
    if spec.endpoint is not None:
        v = need(done.endpoint_value, "endpoint")
        r = spec.endpoint_range or Range()
        if not r.keeps(v):
            scale, unit = _ENDPOINT_SCALE[spec.endpoint]
            word = _ENDPOINT_WORDS[spec.endpoint]
            if spec.endpoint == "ph":
                limit = _outside(f"endpoint not reached: {word}", v, r, scale, unit)
                out.append(f"{head}: {limit}")
            elif spec.endpoint == "volume":
                assert r.low is not None
                out.append(f"{head}: endpoint not reached: {word} {_fmt(v, scale, unit)} below "
                           f"the {_fmt(r.low, scale, unit)} required")  # fmt: skip
            else:
                assert r.high is not None
                out.append(f"{head}: endpoint not reached: {word} {_fmt(v, scale, unit)} above "
                           f"{_fmt(r.high, scale, unit)}")  # fmt: skip
    return out
