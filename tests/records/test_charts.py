"""Record charts (ledger.records.charts): axes, envelope, limit lines, recovery trend."""

from __future__ import annotations

import dataclasses
import itertools
import math
from collections.abc import Iterator

import pytest
from reportlab.graphics.shapes import (  # type: ignore[import-untyped]
    Circle,
    Drawing,
    Group,
    Line,
    Polygon,
    String,
)

from ledger.records import charts, fonts
from ledger.records import context as c
from tests.records.sample import sample_context


def shapes(node: object) -> Iterator[object]:
    """Every leaf shape of a drawing (the charts use groups without transforms)."""
    for child in node.contents:  # type: ignore[attr-defined]
        if isinstance(child, Group):
            yield from shapes(child)
        else:
            yield child


def strings(d: Drawing) -> list[str]:
    return [s.text for s in shapes(d) if isinstance(s, String)]


def dashed(d: Drawing) -> list[Line]:
    return [s for s in shapes(d) if isinstance(s, Line) and s.strokeDashArray]


def series(n: int, spike_at: int | None = None, **kw: object) -> c.Series:
    """``n`` buckets over 24 h of a slow sine (SI, pascal), one spike if asked."""
    t = [86400.0 * i / n for i in range(n)]
    base = [3e4 + 5e3 * math.sin(i / 50) for i in range(n)]
    high = [b + (2e4 if i == spike_at else 100.0) for i, b in enumerate(base)]
    low = [b - 100.0 for b in base]
    fields = dict(name="tmp", title="TMP", unit="bar", scale=1e-5, t_s=tuple(t), low=tuple(low),
                  high=tuple(high), raw_points=86400, bands=(c.Band("diafilter", 2e4, 4.5e4),),
                  phases=(("concentrate", 0.0, 28800.0), ("diafilter", 28800.0, 57600.0),
                          ("final", 57600.0, 86400.0)))  # fmt: skip
    fields.update(kw)
    return c.Series(**fields)  # type: ignore[arg-type]


@pytest.mark.parametrize(("seconds", "text"), [(0, "0:00"), (29, "0:00"), (59, "0:01"),
                                                (5400, "1:30"), (86400, "24:00"),
                                                (-120, "-0:02")])  # fmt: skip
def test_hmm(seconds: float, text: str) -> None:
    assert charts.hmm(seconds) == text


@pytest.mark.parametrize(("end", "step"), [(86400, 10800), (7200, 900), (600, 120), (90, 60)])
def test_time_ticks_are_whole_minutes_at_a_readable_step(end: float, step: float) -> None:
    ticks = charts.time_ticks(0, end)
    assert ticks[0] == 0 and ticks[-1] <= end
    assert all(b - a == step for a, b in itertools.pairwise(ticks))
    assert all(t % 60 == 0 for t in ticks)
    assert len(ticks) <= 9


@pytest.mark.parametrize("values", [[0.21, 0.47], [40, 55.3], [0.6, 0.6], [-3, 2], [1e-4, 3e-4]])
def test_value_axis_holds_every_value_on_even_ticks(values: list[float]) -> None:
    lo, hi, ticks = charts.value_axis(values)
    assert lo < min(values) and hi > max(values)
    assert ticks[0] == pytest.approx(lo) and ticks[-1] == pytest.approx(hi)
    steps = [b - a for a, b in itertools.pairwise(ticks)]
    assert all(s == pytest.approx(steps[0]) for s in steps)
    assert 2 <= len(steps) <= 7


@pytest.mark.parametrize(("step", "places"), [(5, 0), (0.5, 1), (0.05, 2), (2.5, 1),
                                              (0.25, 2), (20, 0)])  # fmt: skip
def test_decimals_show_the_step(step: float, places: int) -> None:
    assert charts.decimals(step) == places


def test_envelope_passes_a_downsampled_series_through() -> None:
    s = series(400)
    t, low, high = charts.envelope(s)
    assert (t, low, high) == (list(s.t_s), list(s.low), list(s.high))
    assert charts.points_drawn(s) == 800


def test_envelope_downsamples_again_above_the_limit_and_keeps_extremes() -> None:
    s = series(5000, spike_at=3210)
    t, low, high = charts.envelope(s)
    assert len(t) == len(low) == len(high) <= charts.REDRAW_BUCKETS
    assert max(high) == max(s.high) and min(low) == min(s.low)
    assert all(lo <= hi for lo, hi in zip(low, high, strict=True))
    assert t == sorted(t) and t[0] == s.t_s[0]
    assert charts.points_drawn(s) == 2 * len(t) <= 2 * charts.MAX_BUCKETS


def test_envelope_drops_rows_that_are_not_finite() -> None:
    s = series(10)
    s = dataclasses.replace(s, low=(math.nan, *s.low[1:]), high=(*s.high[:-1], math.inf))
    t, _, _ = charts.envelope(s)
    assert t == list(s.t_s[1:-1])


def test_series_chart_draws_envelope_limits_and_phases() -> None:
    s = series(400, spike_at=100)
    d = charts.series_chart(s, width=500, height=150)
    polygons = [p for p in shapes(d) if isinstance(p, Polygon)]
    assert len(polygons) == 1 and len(polygons[0].points) == 4 * 400  # x, y of highs and lows
    ys = polygons[0].points[1::2]
    spike_y = polygons[0].points[2 * 100 + 1]
    assert spike_y == max(ys)  # the spike is the top of the envelope
    limits = dashed(d)
    assert len(limits) == 2 and all(line.y1 == line.y2 for line in limits)
    high, low = sorted(limits, key=lambda line: -line.y1)
    assert high.y1 > low.y1
    texts = strings(d)
    assert "diafilter max 0.45 bar" in texts and "diafilter min 0.2 bar" in texts
    assert {"concentrate", "diafilter", "final"} <= set(texts)
    assert {"0:00", "12:00", "24:00", "bar", "time from start of log (h:mm)"} <= set(texts)
    edges = [s for s in shapes(d) if isinstance(s, Line) and s.x1 == s.x2
             and s.strokeColor == charts.PHASE]  # fmt: skip
    assert len(edges) == 2  # the two inner phase boundaries, not the chart's ends
    assert edges[1].x1 - edges[0].x1 == pytest.approx((500 - 44 - 10) / 3)


def test_series_chart_stays_in_its_box_and_in_our_fonts() -> None:
    d = charts.series_chart(series(400, spike_at=7), width=480, height=140)
    registered = set(fonts.embedded_names())
    for s in shapes(d):
        if isinstance(s, String):
            assert s.fontName in registered
            assert 0 <= s.x <= 480 and 0 <= s.y <= 140
        if isinstance(s, Polygon):
            xs, ys = s.points[0::2], s.points[1::2]
            assert min(xs) >= 0 and max(xs) <= 480 and min(ys) >= 0 and max(ys) <= 140
    assert d.initialFontName == fonts.SANS


def test_open_band_draws_one_line_and_empty_series_says_so() -> None:
    d = charts.series_chart(series(50, bands=(c.Band("all", None, 4e4),)))
    assert len(dashed(d)) == 1 and "all max 0.4 bar" in strings(d)
    empty = charts.series_chart(series(1, t_s=(), low=(), high=()))
    assert "no samples" in strings(empty)
    assert not [p for p in shapes(empty) if isinstance(p, Polygon)]


def test_phase_name_too_wide_for_its_span_is_shortened() -> None:
    s = series(100, phases=(("a_very_long_phase_name_for_a_short_span", 0.0, 600.0),
                            ("rest", 600.0, 86400.0)))  # fmt: skip
    texts = strings(charts.series_chart(s, width=500))
    assert "a_very_long_phase_name_for_a_short_span" not in texts
    assert "rest" in texts


def test_recovery_chart_draws_limits_and_a_marker_per_cycle() -> None:
    h = sample_context().history
    d = charts.recovery_chart(h, width=500, height=130)
    limits = dashed(d)
    assert len(limits) == 2
    minimum, alert = sorted(limits, key=lambda line: line.y1)
    assert minimum.strokeColor == charts.LIMIT and alert.strokeColor == charts.ALERT
    texts = strings(d)
    assert "minimum 80 %" in texts and "alert 90 %" in texts
    assert {"0", "1", "2", "3", "4", "cycles completed", "%"} <= set(texts)
    discs = [s for s in shapes(d) if isinstance(s, Circle)]
    passes = sum(p.verdict == "pass" for p in h.recovery)
    assert len(discs) == passes + 1  # and one in the legend
    # 100 % sits above the alert line, 88 % (cycle 4, alert) between the two lines.
    top = max(discs, key=lambda s: s.cy)
    assert top.cy > alert.y1
    triangles = [s for s in shapes(d) if isinstance(s, Polygon)]  # alerts: data and legend
    assert len(triangles) == 2
    data = min(triangles, key=lambda s: s.points[1])
    centre = (data.points[1] + data.points[5]) / 2
    assert minimum.y1 < centre < alert.y1


def test_recovery_chart_without_points() -> None:
    h = dataclasses.replace(sample_context().history, recovery=())
    assert "no NWP recovery results yet" in strings(charts.recovery_chart(h))
