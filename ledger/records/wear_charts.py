"""Pictures of module wear as reportlab drawings (data in, Drawing out; sizes in points).

``recovery_chart`` draws post-clean NWP recovery per cycle (% of baseline NWP) with the
type's alert and action limits as labelled dashed lines, each point marked by its verdict,
and the linear reuse-life fit with its one-sided 95 % lower confidence bound, both extended
to the action limit when the life is projected (the bound reaches the limit first).
``control_chart`` draws one series as an individuals chart over a moving-range chart: centre
line, UCL and LCL (MR: MR-bar and its UCL), the baseline period shaded and every signal point
ringed with its rule label ("WE2": Western Electric rule 2, "N3": Nelson rule 3, "MR": a
moving range above its UCL). ``fleet_chart`` draws one horizontal bar per module, cycles used
as a share of its reuse limit, in the fleet's urgency order, with the last recovery and the
projected cycles left beside it; a module on hold is hatched and one NOT FIT is drawn open,
each also named in words beside its bar, and a legend says so.

Greys and one accent colour only; a meaning is never carried by colour alone (markers,
patterns and words carry it). No value axis runs below zero: recovery, decay rates and
moving ranges cannot be negative, so an LCL below zero is drawn at zero and labelled so.
"""

from __future__ import annotations

import itertools
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

from ledger.logbook.fleet import Standing
from ledger.logbook.module_trend import Chart, ModuleTrend, Signal
from ledger.records import fonts, layout
from ledger.records.charts import decimals, value_axis
from ledger.science import trending

ACCENT = colors.Color(0.10, 0.28, 0.58)
GREY = colors.Color(0.45, 0.45, 0.48)
LIGHT = colors.Color(0.88, 0.88, 0.90)
SHADE = colors.Color(0.93, 0.93, 0.95)
GRID = colors.Color(0.90, 0.90, 0.92)
TEXT_SIZE = 6.5
LABEL_ROW = 7.5  # points between stacked signal labels
RATE_SCALE = 60.0 / 100.0  # Pa/s -> mbar/min: 1 mbar = 100 Pa, 1 min = 60 s
RULE_CODES = {"western_electric": "WE", "nelson": "N", "moving_range": "MR"}
VERDICT_WORDS = {
    "within": "within limits",
    "alert": "below alert limit",
    "action": "below action limit",
}

# Plot insets inside a drawing: left (value labels and axis title), right, bottom, top.
_LEFT, _RIGHT, _BOTTOM, _TOP = 52.0, 12.0, 26.0, 18.0


def _text(
    x: float,
    y: float,
    text: str,
    anchor: str = "start",
    size: float = TEXT_SIZE,
    font: str = fonts.SANS,
    colour: object = layout.INK,
) -> String:
    return String(
        x, y, layout.plain(text), fontName=font, fontSize=size, fillColor=colour, textAnchor=anchor
    )


def _width(text: str, size: float = TEXT_SIZE, font: str = fonts.SANS) -> float:
    return float(stringWidth(layout.plain(text), font, size))


@dataclass(frozen=True)
class Plot:
    """A plot area (points) and its scales: x in cycles, y in the axis unit."""

    x0: float
    x1: float
    y0: float
    y1: float
    c0: float
    c1: float
    lo: float
    hi: float
    ticks: tuple[float, ...]

    def sx(self, c: float) -> float:
        return self.x0 + (c - self.c0) / (self.c1 - self.c0) * (self.x1 - self.x0)

    def sy(self, v: float) -> float:
        return self.y0 + (v - self.lo) / (self.hi - self.lo) * (self.y1 - self.y0)


def _plot(
    g: Group,
    box: tuple[float, float, float, float],
    cycles: tuple[float, float],
    values: Sequence[float],
    y_title: str,
    x_title: str | None,
    most: int = 6,
) -> Plot:
    """The frame, value grid, cycle ticks and axis titles of one plot in ``box`` (x0, y0,
    x1, y1); the value axis holds every value and starts at zero or above."""
    x0, y0, x1, y1 = box
    lo, hi, ticks = value_axis([v for v in values if math.isfinite(v)], most)
    p = Plot(x0, x1, y0, y1, cycles[0], cycles[1], lo, hi, tuple(ticks))
    g.add(
        Rect(
            x0,
            y0,
            x1 - x0,
            y1 - y0,
            fillColor=colors.white,
            strokeColor=layout.RULE,
            strokeWidth=0.5,
        )
    )
    places = decimals(ticks[1] - ticks[0]) if len(ticks) > 1 else 0
    for v in ticks:
        g.add(Line(x0, p.sy(v), x1, p.sy(v), strokeColor=GRID, strokeWidth=0.4))
        g.add(_text(x0 - 3, p.sy(v) - 2.2, f"{v:.{places}f}", anchor="end"))
    span = p.c1 - p.c0
    every = max(1, math.ceil(span / 15))
    for c in range(math.ceil(p.c0), math.floor(p.c1) + 1):
        if c % every == 0:
            g.add(Line(p.sx(c), y0, p.sx(c), y0 - 2.5, strokeColor=layout.INK, strokeWidth=0.5))
            g.add(_text(p.sx(c), y0 - 9.5, str(c), "middle"))
    vertical = Group(_text(0, 0, y_title, "middle", font=fonts.BOLD))
    vertical.translate(x0 - 34, (y0 + y1) / 2)
    vertical.rotate(90)
    g.add(vertical)
    if x_title:
        g.add(_text(x1, y0 - 19, x_title, "end", colour=layout.MUTED))
    return p


def _marker(verdict: str, x: float, y: float, r: float = 2.6) -> list[object]:
    """A recovery point: filled disc (within), open triangle (below alert), cross (below the
    action limit)."""
    if verdict == "alert":
        return [
            Polygon(
                [x - r * 1.1, y - r, x + r * 1.1, y - r, x, y + r * 1.2],
                fillColor=colors.white,
                strokeColor=layout.INK,
                strokeWidth=1.0,
            )
        ]
    if verdict == "action":
        return [
            Line(x - r, y - r, x + r, y + r, strokeColor=layout.INK, strokeWidth=1.3),
            Line(x - r, y + r, x + r, y - r, strokeColor=layout.INK, strokeWidth=1.3),
        ]
    return [Circle(x, y, r, fillColor=ACCENT, strokeColor=ACCENT)]


def _dash(x: float, y: float, colour: object, dash: list[float] | None, w: float = 14) -> Line:
    return Line(x, y, x + w, y, strokeColor=colour, strokeWidth=0.9, strokeDashArray=dash)


@dataclass(frozen=True)
class LifeLines:
    """The fit and bound curves to draw (cycle, recovery %) and how far the x axis runs."""

    fit: list[tuple[float, float]]
    bound: list[tuple[float, float]]
    end: float


def life_lines(trend: ModuleTrend, samples: int = 60) -> LifeLines | None:
    """The linear fit and its one-sided 95 % lower bound, in %, from the first cycle to the
    cycle where the fit meets the action limit when the life is projected, else over the
    recovery points; None without a fit (fewer than three points or no spread)."""
    pts = trend.recovery
    proj = trend.projection
    if proj.slope is None or proj.intercept is None or len(pts) < 3:
        return None
    life = trending.project_life([p.cycle for p in pts], [p.recovery for p in pts], proj.limit)
    first = float(min(p.cycle for p in pts))
    last = float(max(p.cycle for p in pts))
    end = last
    if proj.status == "projected" and proj.point_cycle is not None:
        end = max(last, proj.point_cycle)
    xs = [first + (end - first) * i / samples for i in range(samples + 1)]
    if proj.status == "projected" and proj.bound_cycle is not None:
        xs = sorted({*xs, proj.bound_cycle})
    fit = [(x, 100 * (proj.intercept + proj.slope * x)) for x in xs]
    bound_x = [x for x in xs if proj.bound_cycle is None or x <= proj.bound_cycle + 1e-9]
    bound = [(x, 100 * trending.lower_bound(life, x)) for x in bound_x]
    return LifeLines(fit, [(x, y) for x, y in bound if y >= 0], end)


def recovery_chart(
    trend: ModuleTrend, width: float = layout.FRAME_W, height: float = 200.0
) -> Drawing:
    """Recovery (%) per cycle against the limits, with the reuse-life projection."""
    fonts.register()
    d = Drawing(width, height, initialFontName=fonts.SANS, initialFontSize=TEXT_SIZE)
    g = Group()
    pts = trend.recovery
    proj = trend.projection
    lines = life_lines(trend)
    action, alert = 100 * trend.recovery_min, 100 * trend.recovery_alert
    c0 = min((p.cycle for p in pts), default=0) - 0.5
    c1 = max((p.cycle for p in pts), default=1) + 0.5
    if lines is not None:
        c1 = max(c1, lines.end + 0.5)
    shown_limit = c0 < trend.reuse_limit <= c1 + 0.5 * (c1 - c0)
    if shown_limit:
        c1 = max(c1, trend.reuse_limit + 0.5)
    values = [*(100 * p.recovery for p in pts), action, alert, 100.0]
    if lines is not None:
        values += [y for _, y in lines.fit if y >= action] + [y for _, y in lines.bound]
    legend_h = 12.0
    p = _plot(
        g,
        (_LEFT, _BOTTOM, width - _RIGHT, height - _TOP - legend_h),
        (c0, c1),
        values,
        "recovery (% of baseline NWP)",
        "cycle (valid uses completed)",
    )
    for value, word, dash in (
        (action, "action limit (minimum)", [5, 2.5]),
        (alert, "alert limit", [1.5, 2]),
    ):
        y = p.sy(value)
        g.add(Line(p.x0, y, p.x1, y, strokeColor=layout.INK, strokeWidth=0.8, strokeDashArray=dash))
        g.add(_text(p.x0 + 3, y + 2.2 if value == alert else y - 7.5, f"{word} {value:.4g} %"))
    if shown_limit:
        x = p.sx(trend.reuse_limit)
        g.add(Line(x, p.y0, x, p.y1, strokeColor=GREY, strokeWidth=0.6, strokeDashArray=[2, 2]))
        g.add(_text(x - 2, p.y1 - 8, f"reuse limit {trend.reuse_limit}", "end", colour=GREY))
    if lines is not None:
        fit = [xy for xy in lines.fit if xy[1] >= p.lo]
        g.add(
            PolyLine(
                [c for x, y in fit for c in (p.sx(x), p.sy(y))], strokeColor=ACCENT, strokeWidth=0.8
            )
        )
        bound = [xy for xy in lines.bound if xy[1] >= p.lo]
        if len(bound) > 1:
            g.add(
                PolyLine(
                    [c for x, y in bound for c in (p.sx(x), p.sy(y))],
                    strokeColor=ACCENT,
                    strokeWidth=0.8,
                    strokeDashArray=[3, 1.8],
                )
            )
        if proj.status == "projected" and proj.bound_cycle is not None:
            x, y = p.sx(proj.bound_cycle), p.sy(action)
            g.add(Line(x, y, x, p.y0, strokeColor=ACCENT, strokeWidth=0.6))
            text = f"bound meets limit at cycle {proj.bound_cycle:.4g}"
            anchor = "end" if x + _width(text) / 2 > p.x1 else "middle"
            g.add(
                _text(
                    min(x, p.x1 - 2) if anchor == "end" else x,
                    p.y0 + 3,
                    text,
                    anchor,
                    colour=ACCENT,
                )
            )
    if len(pts) > 1:
        g.add(
            PolyLine(
                [c for pt in pts for c in (p.sx(pt.cycle), p.sy(100 * pt.recovery))],
                strokeColor=GREY,
                strokeWidth=0.5,
            )
        )
    for pt in pts:
        for shape in _marker(pt.verdict, p.sx(pt.cycle), p.sy(100 * pt.recovery)):
            g.add(shape)
    if not pts:
        g.add(
            _text(
                (p.x0 + p.x1) / 2,
                (p.y0 + p.y1) / 2,
                "no NWP recovery results yet",
                "middle",
                colour=layout.MUTED,
            )
        )
    x, y = p.x0, height - _TOP - 4
    for verdict in ("within", "alert", "action"):
        for shape in _marker(verdict, x + 3, y + 2.2, 2.2):
            g.add(shape)
        g.add(_text(x + 8, y, VERDICT_WORDS[verdict]))
        x += 16 + _width(VERDICT_WORDS[verdict])
    legend: tuple[tuple[str, list[float] | None], ...] = (
        ("linear fit", None),
        ("one-sided 95 % lower bound", [3, 1.8]),
    )
    for word, pattern in legend:
        g.add(_dash(x, y + 2.2, ACCENT, pattern))
        g.add(_text(x + 17, y, word))
        x += 24 + _width(word)
    g.add(
        _text(
            width - _RIGHT,
            height - 9,
            f"{trend.serial}: recovery per cycle",
            "end",
            font=fonts.BOLD,
            size=7.5,
        )
    )
    d.add(g)
    return d


def rule_code(signal: Signal) -> str:
    """The short label of a signal: "WE2", "N3" or "MR"."""
    code = RULE_CODES.get(signal.rule_set, signal.rule_set)
    return code if signal.rule_set == "moving_range" else f"{code}{signal.rule}"


def _signal_labels(
    g: Group, p: Plot, marks: dict[int, list[str]], at: Callable[[int], float | None]
) -> None:
    """Ring each signal point and write its rule labels beside it: above the point, lifted a
    row at a time, else below, at the first place where the label touches no label already
    written (the top row of the plot is left to the baseline caption)."""
    placed: list[tuple[float, float, float, float]] = []  # x0, y0, x1, y1 of each label
    height = TEXT_SIZE + 1.0
    top = p.y1 - LABEL_ROW - 2  # the baseline caption's row

    def free(x0: float, y0: float, x1: float) -> bool:
        return all(
            x1 + 2 <= a0 or x0 >= a1 + 2 or y0 + height <= b0 or y0 >= b1
            for a0, b0, a1, b1 in placed
        )

    for cycle in sorted(marks):
        y = at(cycle)
        if y is None:
            continue
        x = p.sx(cycle)
        g.add(Circle(x, y, 4.2, fillColor=None, strokeColor=ACCENT, strokeWidth=1.0))
        text = " ".join(dict.fromkeys(marks[cycle]))
        w = _width(text, font=fonts.BOLD)
        left = min(max(x - w / 2, p.x0 + 1), p.x1 - w - 1)
        above = [y + 6 + k * LABEL_ROW for k in range(6)]
        below = [y - 11 - k * LABEL_ROW for k in range(6)]
        tries = [t for t in above if t + height <= top] + [t for t in below if t >= p.y0 + 1]
        ty = next((t for t in tries if free(left, t, left + w)), tries[0] if tries else y + 6)
        placed.append((left, ty, left + w, ty + height))
        g.add(_text(left, ty, text, font=fonts.BOLD, colour=ACCENT))


def control_chart(
    cycles: Sequence[int],
    values: Sequence[float],
    chart: Chart,
    title: str,
    unit: str,
    scale: float = 1.0,
    width: float = layout.FRAME_W,
    height: float = 230.0,
) -> Drawing:
    """An individuals chart over a moving-range chart of one series: ``values`` in SI (or a
    fraction) at ``cycles``, shown × ``scale`` in ``unit``; ``chart`` holds the limits (SI)
    from its first ``baseline`` points and the signals."""
    fonts.register()
    d = Drawing(width, height, initialFontName=fonts.SANS, initialFontSize=TEXT_SIZE)
    g = Group()
    shown = [v * scale for v in values]
    lim = chart.limits
    c0 = min(cycles, default=0) - 0.5
    c1 = max(cycles, default=1) + 0.5
    split = _BOTTOM + (height - _BOTTOM - _TOP) * 0.36
    i_lines: list[tuple[str, float, list[float] | None]] = []
    mr_lines: list[tuple[str, float, list[float] | None]] = []
    lcl_note = ""
    if lim is not None:
        lcl = lim.lcl * scale
        if lcl < 0:
            lcl_note = f" (computed {lcl:.3g}, below zero)"
        i_lines = [
            ("UCL", lim.ucl * scale, [4, 2]),
            ("centre", lim.centre * scale, None),
            ("LCL", max(lcl, 0.0), [4, 2]),
        ]
        mr_lines = [("UCL", lim.mr_ucl * scale, [4, 2]), ("MR-bar", lim.mr_bar * scale, None)]
    ranges = [abs(b - a) for a, b in itertools.pairwise(shown)]
    top = height - _TOP - 12
    pi = _plot(
        g,
        (_LEFT, split + 22, width - _RIGHT - 58, top),
        (c0, c1),
        [*shown, *(v for _, v, _ in i_lines)],
        f"{title} ({unit})",
        None,
        most=5,
    )
    pm = _plot(
        g,
        (_LEFT, _BOTTOM, width - _RIGHT - 58, split),
        (c0, c1),
        [0.0, *ranges, *(v for _, v, _ in mr_lines)],
        f"moving range ({unit})",
        "cycle (valid uses completed)",
        most=3,
    )
    for p in (pi, pm):
        if chart.baseline > 0 and cycles:
            last = cycles[min(chart.baseline, len(cycles)) - 1]
            g.add(
                Rect(
                    p.x0,
                    p.y0,
                    p.sx(last + 0.5) - p.x0,
                    p.y1 - p.y0,
                    fillColor=SHADE,
                    strokeColor=None,
                    strokeWidth=0,
                )
            )
    g.add(
        _text(
            pi.x0 + 3,
            pi.y1 - 8,
            f"baseline: first {chart.baseline} point{'s' if chart.baseline != 1 else ''} (shaded)",
            colour=layout.MUTED,
        )
    )
    for p, lines in ((pi, i_lines), (pm, mr_lines)):
        for word, value, dash in lines:
            y = p.sy(value)
            g.add(
                Line(
                    p.x0, y, p.x1, y, strokeColor=layout.INK, strokeWidth=0.7, strokeDashArray=dash
                )
            )
            extra = lcl_note if word == "LCL" and p is pi else ""
            g.add(_text(p.x1 + 3, y - 2.2, f"{word} {value:.4g}{extra}", size=6.0))
    if lim is None:
        g.add(
            _text(
                (pi.x0 + pi.x1) / 2,
                (pi.y0 + pi.y1) / 2,
                f"no control limits: {chart.note or 'none set'}",
                "middle",
                colour=layout.MUTED,
            )
        )
    if len(shown) > 1:
        g.add(
            PolyLine(
                [c for x, v in zip(cycles, shown, strict=True) for c in (pi.sx(x), pi.sy(v))],
                strokeColor=GREY,
                strokeWidth=0.5,
            )
        )
        g.add(
            PolyLine(
                [c for x, r in zip(cycles[1:], ranges, strict=True) for c in (pm.sx(x), pm.sy(r))],
                strokeColor=GREY,
                strokeWidth=0.5,
            )
        )
    for x, v in zip(cycles, shown, strict=True):
        g.add(Circle(pi.sx(x), pi.sy(v), 2.0, fillColor=ACCENT, strokeColor=ACCENT))
    for x, r in zip(cycles[1:], ranges, strict=True):
        g.add(Circle(pm.sx(x), pm.sy(r), 1.8, fillColor=ACCENT, strokeColor=ACCENT))
    on_i: dict[int, list[str]] = {}
    on_mr: dict[int, list[str]] = {}
    for s in chart.signals:
        (on_mr if s.rule_set == "moving_range" else on_i).setdefault(s.cycle, []).append(
            rule_code(s)
        )
    value_at = dict(zip(cycles, shown, strict=True))
    range_at = dict(zip(cycles[1:], ranges, strict=True))
    _signal_labels(g, pi, on_i, lambda c: pi.sy(value_at[c]) if c in value_at else None)
    _signal_labels(g, pm, on_mr, lambda c: pm.sy(range_at[c]) if c in range_at else None)
    g.add(
        _text(
            _LEFT, height - 9, f"{title}: individuals and moving range", font=fonts.BOLD, size=7.5
        )
    )
    key = "signals ringed: WE = Western Electric rule, N = Nelson rule, MR = moving range > UCL"
    g.add(_text(_LEFT, height - 19, key, colour=layout.MUTED))
    d.add(g)
    return d


def recovery_control_chart(trend: ModuleTrend, width: float = layout.FRAME_W) -> Drawing:
    """The I-MR chart of the recovery series, in %."""
    return control_chart(
        [p.cycle for p in trend.recovery],
        [p.recovery for p in trend.recovery],
        trend.recovery_chart,
        "recovery",
        "%",
        100.0,
        width,
    )


def decay_control_chart(trend: ModuleTrend, width: float = layout.FRAME_W) -> Drawing:
    """The I-MR chart of the pressure-decay rate, in mbar/min."""
    return control_chart(
        [p.cycle for p in trend.decay],
        [p.value for p in trend.decay],
        trend.decay_chart,
        "decay rate",
        "mbar/min",
        RATE_SCALE,
        width,
    )


def cycles_left_text(row: Standing) -> str:
    """The projected cycles left in words, e.g. "8.3 cycles left" or "no projection"."""
    if row.cycles_left is None:
        return (
            "no projection"
            if row.life_status in (None, "not_enough_points", "no_fit")
            else row.life_status.replace("_", " ")
        )
    return f"{row.cycles_left:.1f} cycles left"


def _hatch(g: Group, x: float, y: float, w: float, h: float, step: float = 3.5) -> None:
    """Diagonal lines across the rectangle (x, y, w, h), clipped to it by hand."""
    k = -h
    while k < w:
        xa, ya = x + max(k, 0.0), y + max(-k, 0.0)
        xb = x + min(k + h, w)
        yb = y + (xb - x - k)
        g.add(Line(xa, ya, xb, yb, strokeColor=layout.INK, strokeWidth=0.5))
        k += step


def fleet_chart(
    rows: Sequence[Standing], width: float = layout.FRAME_W, row_h: float = 15.0
) -> Drawing:
    """One bar per module (in the order given, the fleet's urgency order): cycles used as a
    share of its reuse limit (%), with "used of limit" on the bar and the last recovery and
    cycles left beside it."""
    fonts.register()
    label_w = max([_width(r.serial, 7, fonts.BOLD) for r in rows] + [30.0]) + 8
    note_w = 190.0
    x0, x1 = label_w + 4, width - note_w
    legend_h, axis_h = 16.0, 26.0
    height = legend_h + axis_h + row_h * max(len(rows), 1) + 6
    d = Drawing(width, height, initialFontName=fonts.SANS, initialFontSize=TEXT_SIZE)
    g = Group()
    top = height - legend_h
    share = [r.cycles / r.reuse_limit if r.reuse_limit > 0 else 0.0 for r in rows]
    hi = max([1.0, *share])
    ticks = [i * 0.2 for i in range(math.ceil(hi / 0.2 - 1e-9) + 1)]
    hi = ticks[-1]

    def sx(f: float) -> float:
        return x0 + f / hi * (x1 - x0)

    y_axis = axis_h
    for t in ticks:
        g.add(Line(sx(t), y_axis, sx(t), top, strokeColor=GRID, strokeWidth=0.4))
        g.add(_text(sx(t), y_axis - 9, f"{100 * t:.0f}", "middle"))
    g.add(
        Line(
            sx(1.0),
            y_axis,
            sx(1.0),
            top,
            strokeColor=layout.INK,
            strokeWidth=0.8,
            strokeDashArray=[4, 2],
        )
    )
    g.add(Line(x0, y_axis, x1, y_axis, strokeColor=layout.RULE, strokeWidth=0.5))
    g.add(
        _text(
            x1,
            y_axis - 19,
            "cycles used (% of the module's reuse limit; dashed: the limit)",
            "end",
            colour=layout.MUTED,
        )
    )
    for i, (r, f) in enumerate(zip(rows, share, strict=True)):
        yc = top - (i + 0.5) * row_h
        bh = row_h * 0.6
        yb = yc - bh / 2
        g.add(_text(x0 - 4, yc - 2.5, r.serial, "end", 7, fonts.BOLD))
        g.add(
            Rect(
                x0, yb, sx(min(1.0, hi)) - x0, bh, fillColor=LIGHT, strokeColor=None, strokeWidth=0
            )
        )
        w = sx(f) - x0
        held = r.status == "on_hold"
        if held:
            g.add(
                Rect(x0, yb, w, bh, fillColor=colors.white, strokeColor=layout.INK, strokeWidth=0.7)
            )
            _hatch(g, x0, yb, w, bh)
        elif not r.fit:
            g.add(
                Rect(x0, yb, w, bh, fillColor=colors.white, strokeColor=layout.INK, strokeWidth=0.9)
            )
        else:
            g.add(Rect(x0, yb, w, bh, fillColor=ACCENT, strokeColor=ACCENT, strokeWidth=0.5))
        used = f"{r.cycles} of {r.reuse_limit}"
        tx = sx(f) + 3
        if tx + _width(used) > x1:
            g.add(
                _text(
                    sx(f) - 3,
                    yc - 2.3,
                    used,
                    "end",
                    colour=colors.white if r.fit and not held else layout.INK,
                )
            )
        else:
            g.add(_text(tx, yc - 2.3, used))
        flag = "ON HOLD" if held else ("NOT FIT" if not r.fit else "")
        last = "—" if r.last_recovery is None else f"{100 * r.last_recovery:.1f} %"
        beside = f"last recovery {last} · {cycles_left_text(r)}"
        x = x1 + 8
        if flag:
            g.add(_text(x, yc - 2.5, flag, font=fonts.BOLD, size=6.8))
        g.add(_text(x + 38, yc - 2.5, beside))
    if not rows:
        g.add(_text((x0 + x1) / 2, top - row_h / 2, "no modules", "middle", colour=layout.MUTED))
    x, y = x0, height - 11
    for word, kind in (
        ("fit for reuse", "fit"),
        ("NOT FIT (open bar)", "not_fit"),
        ("on hold (hatched)", "held"),
    ):
        if kind == "fit":
            g.add(Rect(x, y, 14, 6, fillColor=ACCENT, strokeColor=ACCENT, strokeWidth=0.5))
        else:
            g.add(
                Rect(x, y, 14, 6, fillColor=colors.white, strokeColor=layout.INK, strokeWidth=0.8)
            )
            if kind == "held":
                _hatch(g, x, y, 14, 6, 3.0)
        g.add(_text(x + 18, y + 0.5, word))
        x += 30 + _width(word)
    g.add(
        _text(
            x + 6,
            y + 0.5,
            "grey track: up to the reuse limit; most urgent first",
            colour=layout.MUTED,
        )
    )
    d.add(g)
    return d
