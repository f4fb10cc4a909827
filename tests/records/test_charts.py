"""Record charts (ledger.records.charts): axes, envelope, limit lines, recovery trend."""

from __future__ import annotations

import dataclasses
import io
import itertools
import math
import re
from collections.abc import Iterator
from datetime import UTC, datetime, timedelta
from pathlib import Path
from typing import Any

import pytest
from pypdf import PdfReader
from reportlab.graphics.shapes import (  # type: ignore[import-untyped]
    Circle,
    Drawing,
    Group,
    Line,
    Polygon,
    Rect,
    String,
)
from reportlab.lib import colors  # type: ignore[import-untyped]
from reportlab.pdfbase.pdfmetrics import stringWidth  # type: ignore[import-untyped]

from ledger.records import charts, fonts
from ledger.records import context as c
from tests.records.sample import sample_context
from tests.world import World


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


def labelled(d: Drawing) -> list[String]:
    return [s for s in shapes(d) if isinstance(s, String)]


def boxes_overlap(a: String, b: String) -> bool:
    """Two strings' boxes overlap (same baseline, horizontally), measured in their font."""
    if abs(a.y - b.y) > 0.1:
        return False
    wa = stringWidth(a.text, a.fontName, a.fontSize)
    wb = stringWidth(b.text, b.fontName, b.fontSize)
    la, lb = a.x - wa / 2, b.x - wb / 2  # phase names are centred
    return la < lb + wb and lb < la + wa


def test_phase_name_too_wide_for_its_span_is_shown_in_full_on_a_second_row() -> None:
    s = series(100, phases=(("a_very_long_phase_name_for_a_short_span", 0.0, 600.0),
                            ("equilibrate_and_flush", 600.0, 1800.0),
                            ("rest", 1800.0, 86400.0)))  # fmt: skip
    d = charts.series_chart(s, width=500, height=150)
    names = [t for t in labelled(d) if t.fontName == fonts.ITALIC and t.text != "…"]
    texts = [t.text for t in names]
    assert {"a_very_long_phase_name_for_a_short_span", "equilibrate_and_flush", "rest"} <= set(
        texts
    )
    assert not any("…" in t for t in texts)
    assert not any(boxes_overlap(a, b) for a, b in itertools.combinations(names, 2))
    assert len({round(t.y, 1) for t in names}) >= 2  # staggered: two rows of names
    assert d.height > 150  # the extra row adds height instead of squeezing the plot
    for t in names:  # inside the drawing, right of the unit's label
        w = stringWidth(t.text, t.fontName, t.fontSize)
        assert t.x - w / 2 >= 44 and t.x + w / 2 <= 500


def test_phases_too_many_to_stagger_are_numbered_with_a_full_legend() -> None:
    phases = tuple((f"wash_step_{i:02d}", i * 2880.0, (i + 1) * 2880.0) for i in range(30))
    d = charts.series_chart(series(200, phases=phases), width=500, height=150)
    texts = strings(d)
    legend = " ".join(t for t in texts if "wash_step_" in t)
    for i, (name, a, b) in enumerate(phases, start=1):
        assert f"{i} {name} {charts.hmm(a)}–{charts.hmm(b)}" in legend
    assert {str(i) for i in range(1, 31)} <= set(texts)  # the numbers over the spans
    for t in labelled(d):
        assert 0 <= t.y <= d.height
        assert stringWidth(t.text, t.fontName, t.fontSize) <= 500


def test_axis_of_a_non_negative_quantity_near_zero_starts_at_zero() -> None:
    # A flux that stops (0.004 LMH) and runs at 48 LMH: padding alone would put the axis at
    # -10 LMH (step 10), below anything a flux can be.
    lo, hi, ticks = charts.value_axis([0.004, 48.0])
    assert lo == 0.0 and ticks[0] == 0.0 and hi >= 48.0
    assert charts.value_axis([0.0, 0.0])[0] == 0.0  # all zeros: 0 to 1, not -1 to 1
    lmh = 1 / 3.6e6  # m/s per LMH
    s = series(200, name="flux", title="Permeate flux", unit="LMH", scale=3.6e6,
               low=tuple(0.0 if i < 20 else 40 * lmh for i in range(200)),
               high=tuple(0.5 * lmh if i < 20 else 48 * lmh for i in range(200)),
               bands=())  # fmt: skip
    d = charts.series_chart(s, width=500, height=150)
    values = [float(t) for t in strings(d) if re.fullmatch(r"-?\d+(\.\d+)?", t)]
    assert min(values) == 0.0
    envelope = next(p for p in shapes(d) if isinstance(p, Polygon))
    frame = next(r for r in shapes(d) if isinstance(r, Rect) and r.fillColor == colors.white)
    assert min(envelope.points[1::2]) == pytest.approx(frame.y)  # zero flux on the axis


def test_a_series_with_real_negative_values_keeps_them() -> None:
    lo, _, ticks = charts.value_axis([-0.12, 0.4])
    assert lo <= -0.12 and ticks[0] == lo < 0
    # Permeate gauge pressure dipping to -0.12 bar under suction.
    s = series(200, name="permeate_pressure", low=tuple(-1.2e4 if i == 50 else 1e4
                                                       for i in range(200)),
               high=tuple(3e4 for _ in range(200)), bands=())  # fmt: skip
    d = charts.series_chart(s, width=500, height=150)
    values = [float(t) for t in strings(d) if re.fullmatch(r"-?\d+(\.\d+)?", t)]
    assert min(values) == -0.2  # -0.12 padded, on the 0.1 bar step
    envelope = next(p for p in shapes(d) if isinstance(p, Polygon))
    frame = next(r for r in shapes(d) if isinstance(r, Rect) and r.fillColor == colors.white)
    assert min(envelope.points[1::2]) >= frame.y  # the dip is drawn, inside the plot


def test_planned_ranges_are_shaded_over_their_phase_or_the_whole_log() -> None:
    s = series(400, bands=(c.Band("diafilter", 2e4, 4.5e4), c.Band("whole run", None, 5.5e4)))
    d = charts.series_chart(s, width=500, height=150)
    shaded = [r for r in shapes(d) if isinstance(r, Rect) and r.fillColor == charts.BAND_FILL]
    assert len(shaded) == 2
    phase, whole = sorted(shaded, key=lambda r: r.width)
    x0, x1 = 44.0, 500 - 10.0
    third = (x1 - x0) / 3
    assert phase.x == pytest.approx(x0 + third) and phase.width == pytest.approx(third)
    assert whole.x == pytest.approx(x0) and whole.width == pytest.approx(x1 - x0)
    limits = {round(line.y1, 3): line for line in dashed(d)}
    assert len(limits) == 3  # diafilter min and max, whole-run max
    low, high, top = sorted(limits)
    assert phase.y == pytest.approx(low) and phase.y + phase.height == pytest.approx(high)
    frame = next(r for r in shapes(d) if isinstance(r, Rect) and r.fillColor == colors.white)
    assert whole.y == pytest.approx(frame.y)  # open below: shaded from the axis's bottom
    assert whole.y + whole.height == pytest.approx(top)
    assert limits[low].x1 == pytest.approx(x0 + third)  # the diafilter lines span its phase
    assert limits[low].x2 == pytest.approx(x0 + 2 * third)
    assert "diafilter min 0.2 bar" in strings(d) and "whole run max 0.55 bar" in strings(d)


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


# --- in the PDF ------------------------------------------------------------------------------

DEMO_PHASES = (("equilibrate", 0.0, 300.0), ("concentrate", 300.0, 1860.0),
               ("diafilter", 1860.0, 5520.0), ("concentrate_final", 5520.0, 6000.0),
               ("recover", 6000.0, 6240.0))  # fmt: skip


def _pdf(ctx: c.Context, **kw: Any) -> bytes:
    from ledger.records.pdf import render

    return render(ctx, software_version="9.9.9-test", **kw)


def test_full_phase_names_are_in_the_pdf_text() -> None:
    ctx = sample_context(log_seconds=6240)
    ctx = dataclasses.replace(ctx, charts=tuple(dataclasses.replace(s, phases=DEMO_PHASES)
                                                for s in ctx.charts))  # fmt: skip

    def text(**kw: Any) -> str:
        return " ".join(p.extract_text() for p in PdfReader(io.BytesIO(_pdf(ctx, **kw))).pages)

    full, plain = text(), text(charts=False)
    # Each chart shows every name twice, over its span and in the caption's phase list; the
    # print without charts shows neither (the procedure steps name phases in both prints).
    for name, _, _ in DEMO_PHASES:
        count = rf"(?<![\w]){name}(?![\w])"
        added = len(re.findall(count, full)) - len(re.findall(count, plain))
        assert added >= 2 * len(ctx.charts), name  # (and a range's label: "diafilter max")
    assert not re.search(r"(equilib|concent|diafil|recov)\w*…", full)  # none cut short


def _dates(data: bytes) -> tuple[datetime, datetime]:
    meta = PdfReader(io.BytesIO(data)).metadata
    assert meta is not None and meta.creation_date is not None
    assert meta.modification_date is not None
    return meta.creation_date, meta.modification_date


def test_the_pdf_is_dated_when_the_revision_was_issued() -> None:
    ctx = sample_context()
    at = datetime(2026, 11, 29, 9, 4, 59, 870000, tzinfo=UTC)  # as_of, a moment before signing
    data = _pdf(ctx, issued=at)
    assert _dates(data) == (at.replace(microsecond=0),) * 2
    assert _pdf(ctx, issued=at) == data  # same revision, same bytes
    assert b"/Metadata" not in data  # no XMP packet with other dates
    # Without the revision row: the revision's first signature, which issued it.
    first = min(s.signed_at for s in ctx.signatures if s.revision == ctx.header.revision)
    assert _dates(_pdf(ctx))[0] == datetime.fromisoformat(first)
    # A draft is never issued: dated by the newest time its data show, not the clock.
    draft = dataclasses.replace(ctx, header=dataclasses.replace(ctx.header, revision=0),
                                signatures=())  # fmt: skip
    h = ctx.header
    shown = [h.planned_at, h.started_at, h.finished_at, h.submitted_at, *(a.at for a in ctx.audit)]
    newest = max(datetime.fromisoformat(t) for t in shown if t)
    assert newest < datetime.fromisoformat(first)  # so the draft is not dated by a signature
    assert _dates(_pdf(draft))[0] == newest


def test_a_printed_record_is_dated_by_its_revision_issue_time(
    approved_sqlite: World, tmp_path: Path
) -> None:
    from sqlmodel import Session, select

    from ledger.store.tables import RecordRevision

    w = approved_sqlite
    args = ("record", "print", "1", "--out", str(tmp_path / "BR-1.pdf"), "--json")
    path = Path(w.ok(w.as_user("qa.lin", *args)).json()["file"])
    with Session(w.engine()) as session:
        rev = session.exec(select(RecordRevision)).one()
        issued = rev.as_of
        # Moved by a day and a few seconds: the date must follow as_of, not the clock or a
        # signature time.
        rev.as_of = issued + timedelta(days=1, seconds=7)
        session.add(rev)
        session.commit()
    assert _dates(path.read_bytes()) == (issued.replace(microsecond=0),) * 2
    w.ok(w.as_user("qa.lin", *args, "--force"))
    moved = issued.replace(microsecond=0) + timedelta(days=1, seconds=7)
    assert _dates(path.read_bytes()) == (moved, moved)
