"""Actuals of a skid log, per phase and for the run, and every excursion outside a range.

SI throughout (Pa gauge, m³/s, m/s, 1/s, K, m³, s). Definitions (the tests rely on them):

- A phase is a run of consecutive samples with one label of the phase column (a label that
  comes back later starts another phase of that name), or the samples of a user's time window
  (start <= t < end). It spans from its first sample to the first sample after it (the last
  phase ends at the last sample); duration = end - start. The run spans first to last sample.
- Integrals (permeate volume from flow) and time-weighted means use the trapezoid rule from
  the phase's first sample up to and including the first sample after it, so the phases'
  integrals add up to the run's. min and max are over the phase's own samples.
- Permeate volume: the balance's mass change over the density when permeate_mass is mapped,
  else the integrated permeate flow.
- Initial and final retentate volume (and the flux at start and end) are the value at the
  phase's start or end time of a least-squares line through the phase's own samples within
  a time window of that boundary: END_WINDOW_S = 30 s for the volume, FLUX_WINDOW_S = 60 s
  for the flux (``summarize(end_window_s=..., flux_window_s=...)`` sets them). A window in
  seconds, not samples, gives the same estimate at any sampling rate. When fewer than two
  samples fall in the window, the line goes through the phase's two samples nearest the
  boundary (so the end of a phase is extrapolated by at most one interval; the summary's
  assumptions say so); a phase of one sample gives that sample. The run's start and end
  values use only the first and the last phase's samples, never a neighbouring phase's.
  Concentration factor = initial / final.
- Diavolumes = (permeate volume + final volume - initial volume) / time-weighted mean
  retentate volume: buffer added over working volume (about 0 for a pure concentration).
- Flux decline = 1 - flux at end / flux at start.
- An excursion is a maximal run of consecutive samples on one side of a range (below low or
  above high). It starts at the first sample outside and ends at the first sample back inside
  (or out of the range's phase), or one median interval after the last sample if the log ends
  outside, so n samples at 1 Hz last n s; worst is the most extreme value beyond the limit.

Derived channels: tmp = (Pf + Pr)/2 - Pp (never with an assumed permeate pressure),
pressure_drop = Pf - Pr, wall_shear = 32·(Q_feed/N)/(π·D³) (ledger.science.hydraulics),
flux = Qp/A, permeate_volume (cumulative since the first sample).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import asdict, dataclass, field
from datetime import datetime, timedelta
from typing import Any

import numpy as np
from numpy.typing import NDArray

from ledger.runs.skidlog import SkidLog, phase_warnings

END_WINDOW_S = 30.0  # s of a phase's start or end for the retentate-volume estimates
FLUX_WINDOW_S = 60.0  # s of a phase's start or end for the flux estimates

# Every channel a summary may hold (the mapped ones and the derived ones) and its kind.
CHANNEL_KINDS: dict[str, str] = {
    "feed_pressure": "pressure",
    "retentate_pressure": "pressure",
    "permeate_pressure": "pressure",
    "tmp": "pressure",
    "pressure_drop": "pressure",
    "feed_flow": "flow",
    "permeate_flow": "flow",
    "wall_shear": "shear_rate",
    "flux": "flux",
    "temperature": "temperature",
    "retentate_volume": "volume",
    "permeate_volume": "volume",
}
MAPPED = (
    "feed_pressure",
    "retentate_pressure",
    "permeate_pressure",
    "feed_flow",
    "permeate_flow",
    "temperature",
    "retentate_volume",
)
VOLUME_METRICS = ("initial_volume", "final_volume", "concentration_factor", "diavolumes")


@dataclass(frozen=True)
class Geometry:
    """The module's membrane area (m²), fiber count and lumen inner diameter (m)."""

    area_m2: float | None = None
    fibers: int | None = None
    lumen_diameter_m: float | None = None


@dataclass(frozen=True)
class ChannelLimit:
    """Limits (SI) on a channel, optionally only within the samples of one phase."""

    name: str
    channel: str
    low: float | None
    high: float | None
    phase: str | None = None


@dataclass(frozen=True)
class PhaseWindow:
    """A phase given by time (aware datetimes): the samples with start <= t < end."""

    name: str
    start: datetime
    end: datetime


@dataclass
class Stats:
    mean: float
    min: float
    max: float


@dataclass
class Excursion:
    name: str
    channel: str
    phase: str | None
    side: str  # "low" or "high"
    limit: float
    start: datetime
    end: datetime
    duration_s: float
    worst: float
    samples: int


@dataclass
class Actuals:
    """One phase's (or, with ``phase`` None, the whole run's) actuals in SI."""

    phase: str | None
    start: datetime
    end: datetime
    samples: int
    duration_s: float
    stats: dict[str, Stats] = field(default_factory=dict)
    permeate_volume_m3: float | None = None
    permeate_source: str | None = None
    initial_volume_m3: float | None = None
    final_volume_m3: float | None = None
    concentration_factor: float | None = None
    diavolumes: float | None = None
    flux_start_m_s: float | None = None
    flux_end_m_s: float | None = None
    flux_decline: float | None = None


@dataclass
class NotComputed:
    what: str
    why: str


@dataclass
class Summary:
    source: str
    sha256: str | None
    rows: int
    start: datetime
    end: datetime
    run: Actuals
    phases: list[Actuals]
    excursions: list[Excursion]
    not_computed: list[NotComputed]
    assumptions: list[str]
    files: list[dict[str, Any]] = field(default_factory=list)  # skidlog.LogFile.to_record()
    warnings: list[str] = field(default_factory=list)  # phases the log and mapping disagree on

    def scope(self, phase: str | None) -> Actuals | None:
        """The run (``phase`` None) or the first phase of that name."""
        if phase is None:
            return self.run
        return next((p for p in self.phases if p.phase == phase), None)

    def metric(self, name: str, phase: str | None = None) -> float | None:
        """A scalar actual by metric name (duration, permeate_volume, diavolumes,
        initial_volume, final_volume, concentration_factor, flux_decline or
        <channel>.mean|min|max) of the run or the first phase of that name; None if absent."""
        a = self.scope(phase)
        if a is None:
            return None
        if "." in name:
            channel, stat = name.split(".", 1)
            s = a.stats.get(channel)
            if s is None or stat not in ("mean", "min", "max"):
                return None
            return float(getattr(s, stat))
        fields = {
            "duration": a.duration_s,
            "permeate_volume": a.permeate_volume_m3,
            "initial_volume": a.initial_volume_m3,
            "final_volume": a.final_volume_m3,
            "concentration_factor": a.concentration_factor,
            "diavolumes": a.diavolumes,
            "flux_decline": a.flux_decline,
        }
        return fields.get(name)

    def to_record(self) -> dict[str, Any]:
        """JSON-ready (SI, ISO 8601 times); :meth:`from_record` reads it back exactly."""
        out: dict[str, Any] = _jsonable(asdict(self))
        return out

    @classmethod
    def from_record(cls, d: Mapping[str, Any]) -> Summary:
        """The inverse of :meth:`to_record`."""

        def actuals(a: Mapping[str, Any]) -> Actuals:
            b = dict(a)
            b["start"], b["end"] = _time(b["start"]), _time(b["end"])
            b["stats"] = {k: Stats(**v) for k, v in b["stats"].items()}
            return Actuals(**b)

        return cls(
            source=d["source"],
            sha256=d["sha256"],
            rows=d["rows"],
            start=_time(d["start"]),
            end=_time(d["end"]),
            run=actuals(d["run"]),
            phases=[actuals(p) for p in d["phases"]],
            excursions=[
                Excursion(**{**e, "start": _time(e["start"]), "end": _time(e["end"])})
                for e in d["excursions"]
            ],
            not_computed=[NotComputed(**n) for n in d["not_computed"]],
            assumptions=list(d["assumptions"]),
            files=list(d.get("files") or []),
            warnings=list(d.get("warnings") or []),
        )


def _time(text: str) -> datetime:
    return datetime.fromisoformat(text)


def _jsonable(v: Any) -> Any:
    if isinstance(v, datetime):
        return v.isoformat()
    if isinstance(v, dict):
        return {k: _jsonable(x) for k, x in v.items()}
    if isinstance(v, list | tuple):
        return [_jsonable(x) for x in v]
    if isinstance(v, float | np.floating):
        return float(v)
    if isinstance(v, np.integer):
        return int(v)
    return v


def _not_mapped(names: Sequence[str]) -> str:
    verb = "is" if len(names) == 1 else "are"
    return f"{', '.join(names)} {verb} not mapped"


def derived_channels(
    log: SkidLog, geometry: Geometry
) -> tuple[dict[str, NDArray[np.float64]], list[NotComputed]]:
    """Every channel in SI that the log and geometry allow, and what could not be and why."""
    from ledger.science.hydraulics import per_fiber_flow, wall_shear_rate

    ch = log.channels
    out = {name: ch[name] for name in MAPPED if name in ch}
    missing = [NotComputed(name, "not mapped") for name in MAPPED if name not in ch]
    pressures = ("feed_pressure", "retentate_pressure", "permeate_pressure")
    absent = [p for p in pressures if p not in ch]
    if not absent:
        # TMP as ledger.science.permeability.transmembrane_pressure, over whole arrays
        out["tmp"] = (ch["feed_pressure"] + ch["retentate_pressure"]) * 0.5
        out["tmp"] -= ch["permeate_pressure"]
    else:
        why = "needs feed, retentate and permeate pressure; " + _not_mapped(absent)
        missing.append(NotComputed("tmp", why))
    absent = [p for p in pressures[:2] if p not in ch]
    if not absent:
        out["pressure_drop"] = ch["feed_pressure"] - ch["retentate_pressure"]
    else:
        why = "needs feed and retentate pressure; " + _not_mapped(absent)
        missing.append(NotComputed("pressure_drop", why))
    reasons = []
    if "feed_flow" not in ch:
        reasons.append("needs feed_flow, which is not mapped")
    if not (geometry.fibers and geometry.lumen_diameter_m):
        reasons.append("needs the fiber count and lumen diameter (--fibers, --lumen-diameter)")
    if not reasons:
        assert geometry.fibers and geometry.lumen_diameter_m  # narrowed above
        # γ is linear in the feed flow: one factor from the science function, per m³/s
        per_m3_s = wall_shear_rate(per_fiber_flow(1.0, geometry.fibers), geometry.lumen_diameter_m)
        out["wall_shear"] = ch["feed_flow"] * per_m3_s
    else:
        missing.append(NotComputed("wall_shear", "; ".join(reasons)))
    reasons = []
    if "permeate_flow" not in ch:
        reasons.append("needs permeate_flow, which is not mapped")
    if not geometry.area_m2:
        reasons.append("needs the membrane area (--area)")
    if not reasons:
        assert geometry.area_m2
        out["flux"] = ch["permeate_flow"] / geometry.area_m2
    else:
        missing.append(NotComputed("flux", "; ".join(reasons)))
        missing.append(NotComputed("flux_decline", "needs flux, which " + "; ".join(reasons)))
    if "permeate_mass" in ch:
        out["permeate_volume"] = (ch["permeate_mass"] - ch["permeate_mass"][0]) / log.density_kg_m3
    elif "permeate_flow" in ch:
        out["permeate_volume"] = _cumulative(ch["permeate_flow"], log.time_s)
    else:
        missing.append(
            NotComputed(
                "permeate_volume", "needs permeate_flow or permeate_mass; neither is mapped"
            )
        )
    if "retentate_volume" not in ch:
        for what in VOLUME_METRICS:
            missing.append(NotComputed(what, "needs retentate_volume, which is not mapped"))
    elif "permeate_volume" not in out:
        missing.append(
            NotComputed(
                "diavolumes",
                "needs a permeate volume (permeate_flow or permeate_mass); neither is mapped",
            )
        )
    return out, missing


def _cumulative(x: NDArray[np.float64], t: NDArray[np.float64]) -> NDArray[np.float64]:
    """Cumulative trapezoid integral of x over t, 0 at the first sample."""
    c = np.empty_like(x)
    c[0] = 0.0
    if x.size > 1:
        steps = (x[1:] + x[:-1]) * np.diff(t)
        np.cumsum(steps, out=c[1:])
        c[1:] *= 0.5
    return c


def _integral(x: NDArray[np.float64], dt: NDArray[np.float64], i: int, j: int) -> float:
    """Trapezoid integral of x over samples i..j inclusive; ``dt`` = np.diff(time).

    einsum sums the products over views without a temporary array; a BLAS dot product would
    too, but it stalled for milliseconds next to pyarrow's threads (measured)."""
    if j <= i:
        return 0.0
    w = dt[i:j]
    return 0.5 * float(np.einsum("i,i->", x[i:j], w) + np.einsum("i,i->", x[i + 1 : j + 1], w))


def segments(log: SkidLog, windows: Sequence[PhaseWindow] | None) -> list[tuple[str, int, int]]:
    """Phases as (name, first sample, one past the last sample), in order."""
    n = log.rows
    if windows:
        out = []
        for w in windows:
            a = (w.start - log.start).total_seconds()
            b = (w.end - log.start).total_seconds()
            i0 = int(np.searchsorted(log.time_s, a, side="left"))
            i1 = int(np.searchsorted(log.time_s, b, side="left"))
            out.append((w.name, i0, i1))
        return out
    if log.phases is None or log.phase_codes is None:
        return []
    codes = log.phase_codes
    change = np.flatnonzero(codes[1:] != codes[:-1]) + 1
    starts = np.concatenate(([0], change))
    ends = np.concatenate((change, [n]))
    # a step the mapping ignores ("" after [phases]) belongs to no phase
    spans = [(str(log.phases[a]), int(a), int(b)) for a, b in zip(starts, ends, strict=True)]
    return [span for span in spans if span[0]]


@dataclass
class _EndWindows:
    """The end-value windows (s) of one summary, and which of them ran short of samples."""

    volume_s: float
    flux_s: float
    short: dict[str, float] = field(default_factory=dict)  # quantity -> window (s)
    single: list[str] = field(default_factory=list)  # scopes of a single sample


def _end_value(
    x: NDArray[np.float64],
    t: NDArray[np.float64],
    i0: int,
    i1: int,
    at: float,
    window_s: float,
    first: bool,
) -> tuple[float, int]:
    """Value at time ``at`` of the least-squares line through the samples i0..i1-1 that lie
    within ``window_s`` after ``at`` (``first``) or before it, and how many samples that was.
    With fewer than two in the window the line runs through the two samples nearest ``at``;
    with a single sample in i0..i1-1, it is that sample.

    A line evaluated at the boundary rather than a median: while the level falls through the
    window a median lags by half the window, whereas the line is unbiased for a linear trend
    and still averages the sensor's noise and the pump's pulsation."""
    from ledger.science.fit import fit_line

    own = t[i0:i1]
    if first:
        inside = int(np.searchsorted(own, at + window_s, side="right"))
    else:
        inside = own.size - int(np.searchsorted(own, at - window_s, side="left"))
    k = min(max(inside, 2), own.size)
    sl = slice(i0, i0 + k) if first else slice(i1 - k, i1)
    if k < 2:
        return float(x[sl][0]), inside
    return fit_line(t[sl] - at, x[sl], x_name="time", y_name="value").intercept, inside


def _ends(
    x: NDArray[np.float64],
    t: NDArray[np.float64],
    span: tuple[int, int, int, int],
    times: tuple[float, float],
    window_s: float,
    what: str,
    w: _EndWindows,
) -> tuple[float, float]:
    """Start and end values of one scope; ``span`` = (i0, i1, last sample of the start
    window's phase + 1, first sample of the end window's phase)."""
    i0, i1, head, tail = span
    start, n_start = _end_value(x, t, i0, head, times[0], window_s, True)
    end, n_end = _end_value(x, t, tail, i1, times[1], window_s, False)
    if min(n_start, n_end) < 2 and min(head - i0, i1 - tail) > 1:
        w.short[what] = window_s
    return start, end


def _actuals(
    log: SkidLog,
    ch: dict[str, NDArray[np.float64]],
    dt: NDArray[np.float64],
    name: str | None,
    bounds: tuple[int, int, int, int],
    missing: list[NotComputed],
    w: _EndWindows,
) -> Actuals:
    t, n = log.time_s, log.rows
    i0, i1 = bounds[:2]
    j = min(i1, n - 1)  # the first sample after the phase closes its last interval
    t0, t1 = float(t[i0]), float(t[j])
    span = t1 - t0
    a = Actuals(
        phase=name,
        start=log.start + timedelta(seconds=t0),
        end=log.start + timedelta(seconds=t1),
        samples=i1 - i0,
        duration_s=span,
    )
    for key, x in ch.items():
        own = x[i0:i1]
        mean = _integral(x, dt, i0, j) / span if span > 0 else float(own.mean())
        a.stats[key] = Stats(mean, float(own.min()), float(own.max()))
    raw = log.channels
    if "permeate_volume" in ch:
        a.permeate_volume_m3 = float(ch["permeate_volume"][j] - ch["permeate_volume"][i0])
        a.permeate_source = "permeate_mass" if "permeate_mass" in raw else "permeate_flow"
    where = "the run" if name is None else f"phase {name}"
    if i1 - i0 == 1 and ("retentate_volume" in raw or "flux" in ch):
        w.single.append(where)
    if "retentate_volume" in raw:
        v = raw["retentate_volume"]
        a.initial_volume_m3, a.final_volume_m3 = _ends(
            v, t, bounds, (t0, t1), w.volume_s, "retentate volume", w
        )
        if a.final_volume_m3 > 0 and a.initial_volume_m3 > 0:
            a.concentration_factor = a.initial_volume_m3 / a.final_volume_m3
        else:
            # A run that opens with a flush starts at an empty reservoir: no factor, not 0.
            end = "final" if not a.final_volume_m3 > 0 else "initial"
            missing.append(
                NotComputed(
                    f"concentration_factor ({where})",
                    f"the {end} retentate volume is not above zero",
                )
            )
        mean_v = a.stats["retentate_volume"].mean
        if a.permeate_volume_m3 is not None and mean_v > 0:
            added = a.permeate_volume_m3 + a.final_volume_m3 - a.initial_volume_m3
            a.diavolumes = added / mean_v
        elif a.permeate_volume_m3 is not None:
            missing.append(
                NotComputed(f"diavolumes ({where})", "the mean retentate volume is not above zero")
            )
    if "flux" in ch:
        a.flux_start_m_s, a.flux_end_m_s = _ends(
            ch["flux"], t, bounds, (t0, t1), w.flux_s, "flux", w
        )
        if a.flux_start_m_s > 0:
            a.flux_decline = 1 - a.flux_end_m_s / a.flux_start_m_s
        else:
            missing.append(
                NotComputed(f"flux_decline ({where})", "the flux at the start is not above zero")
            )
    return a


def _run_bounds(n: int, spans: list[tuple[str, int, int]]) -> tuple[int, int, int, int]:
    """The run's samples and the reach of its start and end windows: the first and the last
    phase (or the stretch before the first or after the last phase boundary)."""
    cuts = sorted({i for _, i0, i1 in spans for i in (i0, i1) if 0 < i < n})
    return 0, n, cuts[0] if cuts else n, cuts[-1] if cuts else 0


def _window_notes(w: _EndWindows, step_s: float | None) -> list[str]:
    notes = []
    interval = f" (median sampling interval {step_s:g} s)" if step_s else ""
    for what, window in w.short.items():
        notes.append(
            f"{what} at a phase's start or end: fewer than two samples within {window:g} s of "
            f"the boundary{interval}; the line through the phase's two samples nearest it was "
            "used, so the value at a phase's end is extrapolated over up to one interval"
        )
    for where in dict.fromkeys(w.single):
        notes.append(f"{where} has one sample: its start and end values are that sample")
    return notes


def _runs(mask: NDArray[np.bool_]) -> tuple[NDArray[np.intp], NDArray[np.intp]]:
    """Starts and ends (one past) of the runs of True in ``mask``."""
    edges = np.diff(np.concatenate(([0], mask.view(np.int8), [0])))
    return np.flatnonzero(edges == 1), np.flatnonzero(edges == -1)


def _run_extremes(
    x: NDArray[np.float64], starts: NDArray[np.intp], ends: NDArray[np.intp], high: bool
) -> NDArray[np.float64]:
    """Max (or min) of x over each run [start, end), in one reduceat."""
    bounds = np.empty(2 * starts.size, dtype=np.intp)
    bounds[0::2], bounds[1::2] = starts, ends
    if bounds[-1] == x.size:  # reduceat runs the last index to the end by itself
        bounds = bounds[:-1]
    ufunc = np.maximum if high else np.minimum
    return ufunc.reduceat(x, bounds)[0::2]


def _excursions(
    log: SkidLog,
    ch: dict[str, NDArray[np.float64]],
    ranges: Sequence[ChannelLimit],
    spans: list[tuple[str, int, int]],
) -> list[Excursion]:
    t, n = log.time_s, log.rows
    owner = np.full(n, -1, dtype=np.int32)
    for k, (_, i0, i1) in enumerate(spans):
        owner[i0:i1] = k
    step = log.median_step_s or 0.0
    found: list[Excursion] = []
    for r in ranges:
        x = ch.get(r.channel)
        if x is None:
            continue
        scope = None
        if r.phase is not None:
            scope = np.zeros(n, dtype=bool)
            for name, i0, i1 in spans:
                if name == r.phase:
                    scope[i0:i1] = True
        for side, limit in (("low", r.low), ("high", r.high)):
            if limit is None:
                continue
            out = x > limit if side == "high" else x < limit
            if scope is not None:
                out &= scope
            starts, ends = _runs(out)
            if starts.size == 0:
                continue
            worst = _run_extremes(x, starts, ends, side == "high")
            t_end = np.where(ends < n, t[np.minimum(ends, n - 1)], t[n - 1] + step)
            for a, b, w, te in zip(
                starts.tolist(), ends.tolist(), worst.tolist(), t_end.tolist(), strict=True
            ):
                k = int(owner[a])
                found.append(
                    Excursion(
                        name=r.name,
                        channel=r.channel,
                        phase=spans[k][0] if k >= 0 else None,
                        side=side,
                        limit=float(limit),
                        start=log.start + timedelta(seconds=float(t[a])),
                        end=log.start + timedelta(seconds=te),
                        duration_s=te - float(t[a]),
                        worst=w,
                        samples=b - a,
                    )
                )
    found.sort(key=lambda e: (e.start, e.name, e.side))
    return found


def summarize(
    log: SkidLog,
    geometry: Geometry = Geometry(),
    ranges: Sequence[ChannelLimit] = (),
    windows: Sequence[PhaseWindow] | None = None,
    *,
    end_window_s: float = END_WINDOW_S,
    flux_window_s: float = FLUX_WINDOW_S,
) -> Summary:
    """The run's and each phase's actuals, every excursion outside ``ranges``, and what could
    not be computed with the reason. ``end_window_s`` and ``flux_window_s`` (s) are the
    stretches of a phase's start and end that its initial and final retentate volume and its
    flux at start and end are estimated from."""
    from ledger.science.guards import positive

    w = _EndWindows(
        positive("end_window_s", end_window_s), positive("flux_window_s", flux_window_s)
    )
    ch, missing = derived_channels(log, geometry)
    spans = segments(log, windows)
    for w_name, i0, i1 in spans:
        if i1 <= i0:
            missing.append(NotComputed(f"phase {w_name}", "no samples in its time window"))
    spans = [s for s in spans if s[2] > s[1]]
    dt = np.diff(log.time_s)
    run = _actuals(log, ch, dt, None, _run_bounds(log.rows, spans), missing, w)
    phases = [_actuals(log, ch, dt, name, (i0, i1, i1, i0), missing, w) for name, i0, i1 in spans]
    names = list(dict.fromkeys(s[0] for s in spans))
    for r in ranges:
        if r.channel not in ch:
            why = next((m.why for m in missing if m.what == r.channel), "not a channel")
            missing.append(NotComputed(f"range {r.name}", f"{r.channel}: {why}"))
        elif r.phase is not None and r.phase not in names:
            known = ", ".join(names) if names else "none"
            missing.append(
                NotComputed(
                    f"range {r.name}", f"phase {r.phase!r} is not in the log (phases: {known})"
                )
            )
    log.settle()  # a SHA-256 computed while this function ran
    return Summary(
        source=log.source,
        sha256=log.sha256,
        rows=log.rows,
        start=run.start,
        end=run.end,
        run=run,
        phases=phases,
        excursions=_excursions(log, ch, ranges, spans),
        not_computed=missing,
        assumptions=[*log.assumptions, *_window_notes(w, log.median_step_s)],
        files=[f.to_record() for f in log.files],
        warnings=phase_warnings(log, ()) if windows is None else [],
    )


def summary_json(s: Summary) -> dict[str, Any]:
    """The summary as DEVELOPERS.md JSON: quantities as {"value", "unit"}, ISO 8601 times."""
    from ledger.units import quantity

    def q(v: float | None, kind: str) -> Any:
        return None if v is None else quantity(v, kind)

    def actuals(a: Actuals) -> dict[str, Any]:
        return {
            "phase": a.phase,
            "start": a.start.isoformat(),
            "end": a.end.isoformat(),
            "samples": a.samples,
            "duration": q(a.duration_s, "time"),
            "permeate_volume": q(a.permeate_volume_m3, "volume"),
            "permeate_source": a.permeate_source,
            "initial_volume": q(a.initial_volume_m3, "volume"),
            "final_volume": q(a.final_volume_m3, "volume"),
            "concentration_factor": a.concentration_factor,
            "diavolumes": a.diavolumes,
            "flux_start": q(a.flux_start_m_s, "flux"),
            "flux_end": q(a.flux_end_m_s, "flux"),
            "flux_decline": a.flux_decline,
            "channels": {
                k: {
                    "mean": q(v.mean, CHANNEL_KINDS[k]),
                    "min": q(v.min, CHANNEL_KINDS[k]),
                    "max": q(v.max, CHANNEL_KINDS[k]),
                }
                for k, v in a.stats.items()
            },
        }

    return {
        "file": s.source,
        "files": s.files,
        "warnings": s.warnings,
        "sha256": s.sha256,
        "rows": s.rows,
        "start": s.start.isoformat(),
        "end": s.end.isoformat(),
        "run": actuals(s.run),
        "phases": [actuals(p) for p in s.phases],
        "excursions": [
            {
                "name": e.name,
                "channel": e.channel,
                "phase": e.phase,
                "side": e.side,
                "limit": q(e.limit, CHANNEL_KINDS[e.channel]),
                "start": e.start.isoformat(),
                "end": e.end.isoformat(),
                "duration": q(e.duration_s, "time"),
                "worst": q(e.worst, CHANNEL_KINDS[e.channel]),
                "samples": e.samples,
            }
            for e in s.excursions
        ],
        "not_computed": [{"what": n.what, "why": n.why} for n in s.not_computed],
        "assumptions": list(s.assumptions),
    }
