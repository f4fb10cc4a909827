"""Verdict and hazard marks drawn as vector strokes (points), readable without colour.

Vera has no tick or cross glyph, so each verdict's symbol is a few strokes in a small box:
a tick for a pass, a cross for a fail, a dash for a missing value, an upright bar and dot for
an alert. The word is always printed beside it; the colour is only an aid.
"""

from __future__ import annotations

from typing import Any

from reportlab.lib import colors  # type: ignore[import-untyped]
from reportlab.pdfbase.pdfmetrics import stringWidth  # type: ignore[import-untyped]
from reportlab.platypus import Flowable  # type: ignore[import-untyped]

from ledger.records import fonts, layout

# Strokes in a unit box (0..1 each way), one polyline per tuple.
SYMBOLS: dict[str, tuple[tuple[tuple[float, float], ...], ...]] = {
    "pass": (((0.18, 0.52), (0.42, 0.26), (0.84, 0.78)),),
    "fail": (((0.24, 0.24), (0.76, 0.76)), ((0.24, 0.76), (0.76, 0.24))),
    "missing": (((0.24, 0.5), (0.76, 0.5)),),
    "alert": (((0.5, 0.80), (0.5, 0.42)), ((0.5, 0.24), (0.5, 0.22))),
    "other": (),
}
COLOURS = {
    "pass": colors.Color(0.10, 0.44, 0.22),
    "fail": colors.Color(0.72, 0.12, 0.10),
    "missing": colors.Color(0.52, 0.40, 0.04),
    "alert": colors.Color(0.74, 0.42, 0.00),
    "other": layout.MUTED,
}
_KINDS = {"pass": "pass", "passed": "pass", "fail": "fail", "failed": "fail",
          "missing": "missing", "alert": "alert"}  # fmt: skip


def kind_of(verdict: str) -> str:
    """The symbol for a verdict word (PASS, FAIL, MISSING, pass, alert, fail, ...)."""
    return _KINDS.get(verdict.strip().lower(), "other")


def draw_symbol(canv: Any, kind: str, x: float, y: float, size: float) -> None:
    """The boxed symbol of ``kind`` with its lower left corner at (x, y)."""
    colour = COLOURS[kind]
    canv.saveState()
    canv.setStrokeColor(colour)
    canv.setLineWidth(0.6)
    canv.rect(x, y, size, size, stroke=1, fill=0)
    canv.setLineWidth(max(0.9, size * 0.13))
    canv.setLineCap(1)
    canv.setLineJoin(1)
    for line in SYMBOLS[kind]:
        path = canv.beginPath()
        (x0, y0), *rest = line
        path.moveTo(x + x0 * size, y + y0 * size)
        for px, py in rest:
            path.lineTo(x + px * size, y + py * size)
        canv.drawPath(path, stroke=1, fill=0)
    canv.restoreState()


class VerdictMark(Flowable):
    """The boxed symbol and the verdict word beside it, as one table cell."""

    SIZE = 7.0
    FONT_SIZE = 7.2

    def __init__(self, verdict: str, kind: str | None = None) -> None:
        super().__init__()
        self.word = verdict
        self.kind = kind or kind_of(verdict)
        fonts.register()
        self.width = self.SIZE + 3 + stringWidth(verdict, fonts.BOLD, self.FONT_SIZE)
        self.height = 9.0

    def wrap(self, avail_width: float, avail_height: float) -> tuple[float, float]:
        return self.width, self.height

    def draw(self) -> None:
        canv = self.canv
        draw_symbol(canv, self.kind, 0, 1.0, self.SIZE)
        canv.setFillColor(COLOURS[self.kind] if self.kind != "other" else layout.INK)
        canv.setFont(fonts.BOLD, self.FONT_SIZE)
        canv.drawString(self.SIZE + 3, 1.6, layout.plain(self.word))


class HazardMark(Flowable):
    """A warning triangle with an exclamation stroke, beside a caution text."""

    def __init__(self, size: float = 13.0) -> None:
        super().__init__()
        self.size = size
        self.width = size
        self.height = size * 0.9

    def wrap(self, avail_width: float, avail_height: float) -> tuple[float, float]:
        return self.width, self.height

    def draw(self) -> None:
        canv, s = self.canv, self.size
        canv.saveState()
        canv.setStrokeColor(layout.CAUTION_EDGE)
        canv.setFillColor(colors.Color(1.0, 0.88, 0.45))
        canv.setLineWidth(1.1)
        canv.setLineJoin(1)
        path = canv.beginPath()
        path.moveTo(0.5, 0.5)
        path.lineTo(s - 0.5, 0.5)
        path.lineTo(s / 2, s * 0.9 - 0.5)
        path.close()
        canv.drawPath(path, stroke=1, fill=1)
        canv.setStrokeColor(layout.INK)
        canv.setLineWidth(1.3)
        canv.setLineCap(1)
        canv.line(s / 2, s * 0.62, s / 2, s * 0.33)
        canv.line(s / 2, s * 0.18, s / 2, s * 0.17)
        canv.restoreState()
