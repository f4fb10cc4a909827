"""The record's charts as reportlab drawings (sizes in points).

``series_chart`` draws one skid channel over time: the min/max envelope of each time bucket
as a filled band whose outline runs through the highs and back through the lows, the planned
ranges as dashed limit lines with their labels, and the phase boundaries as light vertical
lines with the phase names above. The time axis is in h:mm from the start of the log; values
are shown in the series' display unit (SI × ``scale``). ``recovery_chart`` draws the module's
NWP recovery per cycle (%) with its minimum and alert limits.

The series arrive downsampled (``ledger.records.downsample.min_max``); one with more than
``MAX_BUCKETS`` buckets is downsampled again to ``REDRAW_BUCKETS`` before drawing, so a chart
never carries more than ``2 × MAX_BUCKETS`` points.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence

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
from ledger.records.context import History, Series
from ledger.records.downsample import min_max

MAX_BUCKETS = 2000
REDRAW_BUCKETS = 400

ENVELOPE_FILL = colors.Color(0.62, 0.74, 0.90)
ENVELOPE_EDGE = colors.Color(0.10, 0.28, 0.58)
LIMIT = colors.Color(0.70, 0.16, 0.10)
ALERT = colors.Color(0.78, 0.46, 0.00)
PHASE = colors.Color(0.70, 0.70, 0.74)
GRID = colors.Color(0.90, 0.90, 0.92)
TEXT_SIZE = 6.5

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
    """Axis ends and ticks (multiples of a nice step) that hold every finite value."""
    finite = [v for v in values if math.isfinite(v)]
    lo, hi = (min(finite), max(finite)) if finite else (0.0, 1.0)
    if hi == lo:
        lo, hi = lo - (abs(lo) * 0.1 or 1.0), hi + (abs(hi) * 0.1 or 1.0)
    pad = (hi - lo) * 0.06
    lo, hi = lo - pad, hi + pad
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


def _fit(text: str, font: str, size: float, room: float) -> str:
    """``text``, shortened with an ellipsis to fit ``room`` points ('' if nothing fits)."""
    if stringWidth(text, font, size) <= room:
        return text
    while text and stringWidth(text + "…", font, size) > room:
        text = text[:-1]
    return text + "…" if text else ""


def _frame(width: float, height: float) -> tuple[Drawing, float, float, float, float]:
    fonts.register()
    d = Drawing(width, height, initialFontName=fonts.SANS, initialFontSize=TEXT_SIZE)
    x0, x1, y0, y1 = _LEFT, width - _RIGHT, _BOTTOM, height - _TOP
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


def series_chart(series: Series, width: float = layout.FRAME_W, height: float = 150.0) -> Drawing:
    """One skid channel over time (see the module docstring)."""
    d, x0, x1, y0, y1 = _frame(width, height)
    t, low, high = envelope(series)
    k = series.scale
    band_values = [v * k for b in series.bands for v in (b.low, b.high) if v is not None]
    lo, hi, ticks = value_axis([*(v * k for v in low), *(v * k for v in high), *band_values])
    ends = [e for _, s, e in series.phases] + [s for _, s, _ in series.phases]
    t0 = min([*t[:1], *ends]) if t or ends else 0.0
    t1 = max([*t[-1:], *ends]) if t or ends else 1.0
    if t1 <= t0:
        t1 = t0 + 60.0

    def sx(v: float) -> float:
        return x0 + (v - t0) / (t1 - t0) * (x1 - x0)

    def sy(v: float) -> float:
        return y0 + (v - lo) / (hi - lo) * (y1 - y0)

    g = Group()
    _value_grid(g, ticks, sy, x0, x1, ticks[1] - ticks[0] if len(ticks) > 1 else 1.0)
    for tick in time_ticks(t0, t1):
        x = sx(tick)
        g.add(Line(x, y0, x, y0 - 2.5, strokeColor=layout.INK, strokeWidth=0.5))
        g.add(_label(x, y0 - 10, hmm(tick), anchor="middle"))
    g.add(_label(x1, 2, "time from start of log (h:mm)", anchor="end", colour=layout.MUTED))
    g.add(_label(x0 - 3, y1 + 6, series.unit, anchor="end", font=fonts.BOLD))
    # One phase's end is usually the next one's start: draw each boundary once.
    for edge in sorted({e for _, s, f in series.phases for e in (s, f) if t0 < e < t1}):
        g.add(Line(sx(edge), y0, sx(edge), y1 + 2, strokeColor=PHASE, strokeWidth=0.6))
    for name, start, end in series.phases:
        left, right = sx(max(start, t0)), sx(min(end, t1))
        text = _fit(name, fonts.ITALIC, TEXT_SIZE, right - left - 4)
        if text:
            g.add(_label((left + right) / 2, y1 + 4, text, "middle", font=fonts.ITALIC,
                         colour=layout.MUTED))  # fmt: skip
    if t:
        outline = [c for tv, hv in zip(t, high, strict=True) for c in (sx(tv), sy(hv * k))]
        outline += [c for tv, lv in zip(reversed(t), reversed(low), strict=True)
                    for c in (sx(tv), sy(lv * k))]  # fmt: skip
        g.add(Polygon(outline, fillColor=ENVELOPE_FILL, strokeColor=ENVELOPE_EDGE,
                      strokeWidth=0.6, strokeLineJoin=1))  # fmt: skip
    else:
        g.add(_label((x0 + x1) / 2, (y0 + y1) / 2, "no samples", "middle", colour=layout.MUTED))
    for band in series.bands:
        for limit, word, above in ((band.high, "max", True), (band.low, "min", False)):
            if limit is None:
                continue
            y = sy(limit * k)
            g.add(Line(x0, y, x1, y, strokeColor=LIMIT, strokeWidth=0.8,
                       strokeDashArray=[4, 2.5]))  # fmt: skip
            text = f"{band.label} {word} {limit * k:.4g} {series.unit}"
            g.add(_label(x1 - 3, y + 2.2 if above else y - 7.2, text, "end", colour=LIMIT))
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
