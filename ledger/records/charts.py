"""The record's charts as reportlab drawings (sizes in points).

``series_chart`` draws one skid channel over time: the min/max envelope of each time bucket
as a filled band whose outline runs through the highs and back through the lows, the planned
ranges as shaded bands between dashed limit lines with their labels (over the phase a range
belongs to, else the whole log), and the phase boundaries as light vertical lines with the
phase names above, in full: staggered over up to ``PHASE_ROWS`` rows when they would collide,
else numbered with a legend under the time axis. The time axis is in h:mm from the start of
the log; values are shown in the series' display unit (SI × ``scale``). No value axis goes
below zero unless a value (or a planned limit) does: the padding around the data never
invents a negative flux, volume or pressure. ``recovery_chart`` draws the module's NWP
recovery per cycle (%) with its minimum and alert limits.

The series arrive downsampled (``ledger.records.downsample.min_max``); one with more than
``MAX_BUCKETS`` buckets is downsampled again to ``REDRAW_BUCKETS`` before drawing, so a chart
never carries more than ``2 × MAX_BUCKETS`` points.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass

from reportlab.graphics.shapes import (  # type: ignore[import-untyped]
    Circle,
    Drawing,
    Group,
    Line,
    Polygon,
    PolyLine,
    Rect,
    String,
)
from reportlab.lib import colors  # type: ignore[import-untyped]
from reportlab.pdfbase.pdfmetrics import stringWidth  # type: ignore[import-untyped]

from ledger.records import fonts, layout
from ledger.records.context import Band, History, Series
from ledger.records.downsample import min_max

MAX_BUCKETS = 2000
REDRAW_BUCKETS = 400

BAND_FILL = colors.Color(0.86, 0.94, 0.86)
ENVELOPE_FILL = colors.Color(0.62, 0.74, 0.90)
ENVELOPE_EDGE = colors.Color(0.10, 0.28, 0.58)
LIMIT = colors.Color(0.70, 0.16, 0.10)
ALERT = colors.Color(0.78, 0.46, 0.00)
PHASE = colors.Color(0.70, 0.70, 0.74)
GRID = colors.Color(0.90, 0.90, 0.92)
TEXT_SIZE = 6.5
PHASE_SIZE = 7.0
PHASE_ROW = 8.5  # points per row of phase names (and of the phase legend)
PHASE_ROWS = 3  # rows of staggered names before the chart numbers them with a legend
_GAP = 5.0  # points between two phase names in a row

# Plot area insets inside a drawing: left (value labels), right, bottom (time labels), top
# (phase names).
_LEFT, _RIGHT, _BOTTOM, _TOP = 44.0, 10.0, 22.0, 14.0


def hmm(seconds: float) -> str:
    """Seconds from the start of the log as h:mm (rounded to the minute)."""
    minutes = round(seconds / 60.0)
    sign = "-" if minutes < 0 else ""
    h, m = divmod(abs(minutes), 60)
    return f"{sign}{h}:{m:02d}"


def nice_step(span: float, most: int = 6) -> float:
    """A 1-2-2.5-5 step that divides ``span`` into at most ``most`` intervals."""
    if not math.isfinite(span) or span <= 0:
        return 1.0
    raw = span / most
    mag = 10.0 ** math.floor(math.log10(raw))
    for f in (1.0, 2.0, 2.5, 5.0, 10.0):
        if f * mag >= raw:
            return f * mag
    return 10.0 * mag


def value_axis(values: Sequence[float], most: int = 6) -> tuple[float, float, list[float]]:
    """Axis ends and ticks (multiples of a nice step) that hold every finite value.

    When no value is negative the axis starts at max(0, nice lower bound): a flux, volume or
    pressure that comes close to zero is not drawn on an axis that runs below zero. A value
    below zero keeps the axis's true range."""
    finite = [v for v in values if math.isfinite(v)]
    lo, hi = (min(finite), max(finite)) if finite else (0.0, 1.0)
    never_negative = lo >= 0
    if hi == lo:
        lo, hi = lo - (abs(lo) * 0.1 or 1.0), hi + (abs(hi) * 0.1 or 1.0)
    pad = (hi - lo) * 0.06
    lo, hi = lo - pad, hi + pad
    if never_negative:
        lo = max(0.0, lo)
    step = nice_step(hi - lo, most)
    lo, hi = math.floor(lo / step) * step, math.ceil(hi / step) * step
    count = round((hi - lo) / step)
    return lo, hi, [lo + i * step for i in range(count + 1)]


_TIME_STEPS = (60, 120, 300, 600, 900, 1200, 1800, 3600, 7200, 10800, 14400, 21600, 43200)


def time_ticks(t0: float, t1: float, most: int = 8) -> list[float]:
    """Whole-minute ticks from ``t0`` to ``t1`` (s), at most about ``most`` intervals."""
    span = max(t1 - t0, 1.0)
    days = 86400 * math.ceil(span / 86400 / most)
    step = next((s for s in _TIME_STEPS if span / s <= most), days)
    first = math.ceil(t0 / step) * step
    return [float(first + i * step) for i in range(int((t1 - first) // step) + 1)]


def decimals(step: float) -> int:
    """Decimals that show a tick step exactly (2.5 needs one more than 2)."""
    if step >= 1 and float(step).is_integer():
        return 0
    d = max(0, -math.floor(math.log10(step)))
    return d + (1 if round(step * 10**d, 6) % 1 else 0)


def envelope(series: Series) -> tuple[list[float], list[float], list[float]]:
    """The buckets to draw (start s, low, high in SI): as given, or downsampled again when
    there are more than ``MAX_BUCKETS``."""
    rows = [(t, lo, hi) for t, lo, hi in zip(series.t_s, series.low, series.high, strict=True)
            if math.isfinite(t) and math.isfinite(lo) and math.isfinite(hi)]  # fmt: skip
    t = [r[0] for r in rows]
    low = [r[1] for r in rows]
    high = [r[2] for r in rows]
    if len(rows) <= MAX_BUCKETS:
        return t, low, high
    # Same t and bucket count: both calls cut the same buckets, and every bucket that holds
    # a row is kept by both, so the two results line up bucket for bucket.
    starts, new_low, _ = min_max(t, low, buckets=REDRAW_BUCKETS)
    _, _, new_high = min_max(t, high, buckets=REDRAW_BUCKETS)
    return starts, new_low, new_high


def points_drawn(series: Series) -> int:
    """Vertices of the envelope drawn for ``series`` (highs and lows)."""
    return 2 * len(envelope(series)[0])


def _label(x: float, y: float, text: str, anchor: str = "start", size: float = TEXT_SIZE,
           font: str = fonts.SANS, colour: object = layout.INK) -> String:  # fmt: skip
    return String(x, y, layout.plain(text), fontName=font, fontSize=size, fillColor=colour,
                  textAnchor=anchor)  # fmt: skip


@dataclass(frozen=True)
class PhaseLabel:
    """Where a phase's name goes: its text, centre x (points) and row (0 is next to the plot)."""

    text: str
    x: float
    row: int


def _width(text: str) -> float:
    return float(stringWidth(layout.plain(text), fonts.ITALIC, PHASE_SIZE))


def stagger(spans: Sequence[tuple[str, float, float]], left: float, right: float,
            rows: int = PHASE_ROWS) -> list[PhaseLabel] | None:  # fmt: skip
    """Each text centred over its span (x from, x to; points), kept within ``left``–``right``
    and put in the first row where it does not touch the text before it. None when a text
    finds no free row among ``rows``."""
    ends = [-math.inf] * rows
    out = []
    for text, a, b in sorted(spans, key=lambda p: (p[1] + p[2]) / 2):
        w = _width(text)
        x = min(max((a + b) / 2, left + w / 2), right - w / 2)
        row = next((r for r in range(rows) if ends[r] + _GAP <= x - w / 2), None)
        if row is None:
            return None
        ends[row] = x + w / 2
        out.append(PhaseLabel(text, x, row))
    return out


def legend_lines(entries: Sequence[str], room: float) -> list[str]:
    """The entries joined into lines no wider than ``room`` points (an entry is never cut)."""
    lines: list[str] = []
    for entry in entries:
        joined = f"{lines[-1]}   {entry}" if lines else entry
        if lines and _width(joined) <= room:
            lines[-1] = joined
        else:
            lines.append(entry)
    return lines


def phase_labels(phases: Sequence[tuple[str, float, float]], sx: Callable[[float], float],
                 t0: float, t1: float, left: float,
                 right: float) -> tuple[list[PhaseLabel], list[str]]:  # fmt: skip
    """The phase names over their spans, in full: staggered when they collide; numbered with
    a legend (the returned lines, "1 name 0:00–1:30") when even staggered they do not fit."""
    spans = [(name, sx(max(a, t0)), sx(min(b, t1))) for name, a, b in phases]
    placed = stagger(spans, left, right)
    if placed is not None:
        return placed, []
    numbers = [(str(i), a, b) for i, (_, a, b) in enumerate(spans, start=1)]
    placed = stagger(numbers, left, right, rows=len(numbers)) or []
    entries = [f"{i} {name} {hmm(a)}–{hmm(b)}" for i, (name, a, b) in enumerate(phases, 1)]
    return placed, legend_lines(entries, right - left)


def _frame(width: float, height: float, top: float = _TOP,
           bottom: float = _BOTTOM) -> tuple[Drawing, float, float, float, float]:  # fmt: skip
    fonts.register()
    d = Drawing(width, height, initialFontName=fonts.SANS, initialFontSize=TEXT_SIZE)
    x0, x1, y0, y1 = _LEFT, width - _RIGHT, bottom, height - top
    d.add(Rect(x0, y0, x1 - x0, y1 - y0, fillColor=colors.white, strokeColor=layout.RULE,
               strokeWidth=0.5))  # fmt: skip
    return d, x0, x1, y0, y1


def _value_grid(g: Group, ticks: list[float], scale_y: Callable[[float], float], x0: float,
                x1: float, step: float) -> None:  # fmt: skip
    places = decimals(step)
    for v in ticks:
        y = scale_y(v)
        g.add(Line(x0, y, x1, y, strokeColor=GRID, strokeWidth=0.4))
        g.add(_label(x0 - 3, y - 2.2, f"{v:.{places}f}", anchor="end"))


def band_spans(band: Band, phases: Sequence[tuple[str, float, float]], t0: float,
               t1: float) -> list[tuple[float, float]]:  # fmt: skip
    """The times (s) a planned range holds: the spans of the phase it names, else the whole
    log ("whole run", or a phase the log does not show)."""
    spans = [(max(a, t0), min(b, t1)) for name, a, b in phases if name == band.label]
    spans = [(a, b) for a, b in spans if b > a]
    return spans or [(t0, t1)]


def series_chart(series: Series, width: float = layout.FRAME_W, height: float = 150.0) -> Drawing:
    """One skid channel over time (see the module docstring). ``height`` is that of a chart
    with one row of phase names; staggered rows and a phase legend add to it."""
    t, low, high = envelope(series)
    k = series.scale
    band_values = [v * k for b in series.bands for v in (b.low, b.high) if v is not None]
    lo, hi, ticks = value_axis([*(v * k for v in low), *(v * k for v in high), *band_values])
    ends = [e for _, s, e in series.phases] + [s for _, s, _ in series.phases]
    t0 = min([*t[:1], *ends]) if t or ends else 0.0
    t1 = max([*t[-1:], *ends]) if t or ends else 1.0
    if t1 <= t0:
        t1 = t0 + 60.0
    x0, x1 = _LEFT, width - _RIGHT

    def sx(v: float) -> float:
        return x0 + (v - t0) / (t1 - t0) * (x1 - x0)

    # From the plot's left edge: the unit's label sits left of it, at the height of row 0.
    labels, legend = phase_labels(series.phases, sx, t0, t1, x0, width)
    rows = max((p.row + 1 for p in labels), default=1)
    top = _TOP + (rows - 1) * PHASE_ROW
    bottom = _BOTTOM + len(legend) * PHASE_ROW
    height += top - _TOP + bottom - _BOTTOM
    d, x0, x1, y0, y1 = _frame(width, height, top, bottom)

    def sy(v: float) -> float:
        return y0 + (v - lo) / (hi - lo) * (y1 - y0)

    g = Group()
    _value_grid(g, ticks, sy, x0, x1, ticks[1] - ticks[0] if len(ticks) > 1 else 1.0)
    for band in series.bands:
        bottom_v = lo if band.low is None else band.low * k
        top_v = hi if band.high is None else band.high * k
        for a, b in band_spans(band, series.phases, t0, t1):
            g.add(Rect(sx(a), sy(bottom_v), sx(b) - sx(a), sy(top_v) - sy(bottom_v),
                       fillColor=BAND_FILL, strokeColor=None, strokeWidth=0))  # fmt: skip
    for tick in time_ticks(t0, t1):
        x = sx(tick)
        g.add(Line(x, y0, x, y0 - 2.5, strokeColor=layout.INK, strokeWidth=0.5))
        g.add(_label(x, y0 - 10, hmm(tick), anchor="middle"))
    axis_y = y0 - 20
    g.add(_label(x1, axis_y, "time from start of log (h:mm)", anchor="end", colour=layout.MUTED))
    for i, line in enumerate(legend):
        g.add(_label(x0, axis_y - (i + 1) * PHASE_ROW, line, size=PHASE_SIZE, font=fonts.ITALIC,
                     colour=layout.MUTED))  # fmt: skip
    g.add(_label(x0 - 3, y1 + 6, series.unit, anchor="end", font=fonts.BOLD))
    # One phase's end is usually the next one's start: draw each boundary once.
    for edge in sorted({e for _, s, f in series.phases for e in (s, f) if t0 < e < t1}):
        g.add(Line(sx(edge), y0, sx(edge), y1 + 2, strokeColor=PHASE, strokeWidth=0.6))
    for p in labels:
        g.add(_label(p.x, y1 + 4 + p.row * PHASE_ROW, p.text, "middle", size=PHASE_SIZE,
                     font=fonts.ITALIC, colour=layout.MUTED))  # fmt: skip
    if t:
        outline = [c for tv, hv in zip(t, high, strict=True) for c in (sx(tv), sy(hv * k))]
        outline += [c for tv, lv in zip(reversed(t), reversed(low), strict=True)
                    for c in (sx(tv), sy(lv * k))]  # fmt: skip
        g.add(Polygon(outline, fillColor=ENVELOPE_FILL, strokeColor=ENVELOPE_EDGE,
                      strokeWidth=0.6, strokeLineJoin=1))  # fmt: skip
    else:
        g.add(_label((x0 + x1) / 2, (y0 + y1) / 2, "no samples", "middle", colour=layout.MUTED))
    for band in series.bands:
        spans = band_spans(band, series.phases, t0, t1)
        for limit, word, above in ((band.high, "max", True), (band.low, "min", False)):
            if limit is None:
                continue
            y = sy(limit * k)
            for a, b in spans:
                g.add(Line(sx(a), y, sx(b), y, strokeColor=LIMIT, strokeWidth=0.8,
                           strokeDashArray=[4, 2.5]))  # fmt: skip
            text = f"{band.label} {word} {limit * k:.4g} {series.unit}"
            # At the right end of the range's last span, but never out of the plot's left.
            room = stringWidth(layout.plain(text), fonts.SANS, TEXT_SIZE)
            x = max(sx(spans[-1][1]) - 3, x0 + 3 + room)
            g.add(_label(x, y + 2.2 if above else y - 7.2, text, "end", colour=LIMIT))
    d.add(g)
    return d


def _marker(kind: str, x: float, y: float, r: float = 2.6) -> list[object]:
    """A recovery point: filled disc (pass), open triangle (alert), cross (fail), else a ring."""
    if kind == "pass":
        return [Circle(x, y, r, fillColor=ENVELOPE_EDGE, strokeColor=ENVELOPE_EDGE)]
    if kind == "alert":
        return [Polygon([x - r * 1.1, y - r, x + r * 1.1, y - r, x, y + r * 1.2], fillColor=None,
                        strokeColor=ALERT, strokeWidth=1.1)]  # fmt: skip
    if kind == "fail":
        return [Line(x - r, y - r, x + r, y + r, strokeColor=LIMIT, strokeWidth=1.2),
                Line(x - r, y + r, x + r, y - r, strokeColor=LIMIT, strokeWidth=1.2)]  # fmt: skip
    return [Circle(x, y, r, fillColor=colors.white, strokeColor=layout.MUTED)]


def _kind(verdict: str) -> str:
    v = verdict.strip().lower()
    return v if v in ("pass", "alert", "fail") else "other"


def recovery_chart(history: History, width: float = layout.FRAME_W,
                   height: float = 130.0) -> Drawing:  # fmt: skip
    """NWP recovery (%) per cycle with the minimum and alert limits as labelled lines."""
    d, x0, x1, y0, y1 = _frame(width, height)
    pts = sorted(history.recovery, key=lambda p: p.cycle)
    limits = [history.recovery_min * 100, history.recovery_alert * 100]
    lo, hi, ticks = value_axis([*(p.recovery * 100 for p in pts), *limits, 100.0])
    c0 = min((p.cycle for p in pts), default=0) - 0.5
    c1 = max((p.cycle for p in pts), default=1) + 0.5

    def sx(v: float) -> float:
        return x0 + (v - c0) / (c1 - c0) * (x1 - x0)

    def sy(v: float) -> float:
        return y0 + (v - lo) / (hi - lo) * (y1 - y0)

    g = Group()
    _value_grid(g, ticks, sy, x0, x1, ticks[1] - ticks[0] if len(ticks) > 1 else 1.0)
    every = max(1, math.ceil((c1 - c0) / 15))
    for cycle in range(math.ceil(c0), math.floor(c1) + 1):
        if cycle % every == 0:
            g.add(Line(sx(cycle), y0, sx(cycle), y0 - 2.5, strokeColor=layout.INK,
                       strokeWidth=0.5))  # fmt: skip
            g.add(_label(sx(cycle), y0 - 10, str(cycle), "middle"))
    g.add(_label(x1, 2, "cycles completed", anchor="end", colour=layout.MUTED))
    g.add(_label(x0 - 3, y1 + 6, "%", anchor="end", font=fonts.BOLD))
    for value, word, colour in ((limits[0], "minimum", LIMIT), (limits[1], "alert", ALERT)):
        y = sy(value)
        g.add(Line(x0, y, x1, y, strokeColor=colour, strokeWidth=0.8, strokeDashArray=[4, 2.5]))
        g.add(_label(x1 - 3, y + 2.2, f"{word} {value:.4g} %", "end", colour=colour))
    if len(pts) > 1:
        g.add(PolyLine([c for p in pts for c in (sx(p.cycle), sy(p.recovery * 100))],
                       strokeColor=layout.MUTED, strokeWidth=0.6))  # fmt: skip
    for p in pts:
        for shape in _marker(_kind(p.verdict), sx(p.cycle), sy(p.recovery * 100)):
            g.add(shape)
    if not pts:
        g.add(_label((x0 + x1) / 2, (y0 + y1) / 2, "no NWP recovery results yet", "middle",
                     colour=layout.MUTED))  # fmt: skip
    x = x0
    for kind in ("pass", "alert", "fail"):  # the legend, in the strip above the plot
        for shape in _marker(kind, x + 3, y1 + 6.2, 2.2):
            g.add(shape)
        g.add(_label(x + 8, y1 + 4, kind))
        x += 14 + stringWidth(kind, fonts.SANS, TEXT_SIZE)
    d.add(g)
    return d
