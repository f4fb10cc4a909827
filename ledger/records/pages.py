"""What every page of a batch record carries: running head, footer, the draft watermark and,
on a copy of a revision that is not fully signed, a status band.

The footer names the record, revision, short content hash, template and software version,
"page x of y" and the true-copy statement. "y" is only known once the story is laid out, so
the canvas keeps each finished page and draws the footers when the document is saved.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

from reportlab.lib import colors  # type: ignore[import-untyped]
from reportlab.lib.units import mm  # type: ignore[import-untyped]
from reportlab.pdfbase.pdfmetrics import stringWidth  # type: ignore[import-untyped]
from reportlab.pdfgen.canvas import Canvas  # type: ignore[import-untyped]

from ledger.records import fonts, layout
from ledger.records.context import TRUE_COPY

DRAFT_INK = colors.Color(0.70, 0.10, 0.10)
WATERMARK = colors.Color(0.95, 0.86, 0.86)
# The status band: amber, apart from the draft's red; dark ink on it stays legible in grey.
BAND_FILL = colors.Color(0.98, 0.80, 0.35)
BAND_INK = colors.Color(0.25, 0.16, 0.0)
BAND_H = 5.2 * mm


@dataclass(frozen=True)
class Marks:
    """The texts of the running head and footer (the page numbers are added per page)."""

    head_left: str
    head_right: str
    foot: str
    draft: bool
    band: str | None = None  # e.g. "revision 1 — in review — not for release"


def _fitted(canv: Any, text: str, font: str, size: float, room: float) -> float:
    """Set ``font`` at ``size``, or smaller so ``text`` fits ``room`` points; the width."""
    width = stringWidth(text, font, size)
    if width > room:
        size, width = size * room / width, room
    canv.setFont(font, size)
    return float(width)


def furniture(canv: Any, marks: Marks, page: int, pages: int) -> None:
    """Draw the running head and the footer of one page."""
    left, right = layout.MARGIN_X, layout.PAGE_W - layout.MARGIN_X
    top = layout.PAGE_H - 11 * mm
    canv.saveState()
    canv.setFillColor(layout.INK)
    head_right = layout.plain(marks.head_right)
    _fitted(canv, layout.plain(marks.head_left), fonts.BOLD, 8, layout.FRAME_W * 0.48)
    canv.drawString(left, top, layout.plain(marks.head_left))
    if marks.draft:
        head_right = f"DRAFT · {head_right}"
        canv.setFillColor(DRAFT_INK)
    _fitted(canv, head_right, fonts.SANS, 8, layout.FRAME_W * 0.5)
    canv.drawRightString(right, top, head_right)
    canv.setStrokeColor(layout.RULE)
    canv.setLineWidth(0.5)
    canv.line(left, top - 3.5, right, top - 3.5)

    bottom = 12 * mm
    canv.line(left, bottom + 9, right, bottom + 9)
    canv.setFillColor(layout.INK)
    numbering = f"page {page} of {pages}"
    used = _fitted(canv, numbering, fonts.BOLD, 7.5, 80)
    canv.drawRightString(right, bottom, numbering)
    foot = layout.plain(marks.foot)
    _fitted(canv, foot, fonts.SANS, 7, layout.FRAME_W - used - 12)
    canv.drawString(left, bottom, foot)
    canv.setFillColor(layout.MUTED)
    _fitted(canv, TRUE_COPY, fonts.ITALIC, 6.8, layout.FRAME_W)
    canv.drawString(left, bottom - 9, TRUE_COPY)
    canv.restoreState()
    if marks.band:
        status_band(canv, marks.band)


def status_band(canv: Any, text: str) -> None:
    """A full-width band above the running head, in the top margin clear of the content."""
    top = layout.PAGE_H - 2.5 * mm
    canv.saveState()
    canv.setFillColor(BAND_FILL)
    canv.rect(0, top - BAND_H, layout.PAGE_W, BAND_H, stroke=0, fill=1)
    canv.setFillColor(BAND_INK)
    shown = layout.plain(text)
    _fitted(canv, shown, fonts.BOLD, 8.5, layout.FRAME_W)
    canv.drawCentredString(layout.PAGE_W / 2, top - BAND_H + 1.6 * mm, shown)
    canv.restoreState()


def watermark(canv: Any, doc: Any) -> None:
    """A large diagonal DRAFT under the page's content (a draft is revision 0)."""
    canv.saveState()
    canv.setFillColor(WATERMARK)
    canv.setFont(fonts.BOLD, 120)
    canv.translate(layout.PAGE_W / 2, layout.PAGE_H / 2)
    canv.rotate(52)
    canv.drawCentredString(0, -40, "DRAFT")
    canv.restoreState()


def held_pages(draw: Callable[[Canvas, int, int], None]) -> type[Canvas]:
    """A canvas class that holds its pages back until ``save``, then calls
    ``draw(canvas, page_number, page_count)`` on each before it is written, so every page's
    furniture knows the page count."""

    class HeldCanvas(Canvas):
        def __init__(self, *args: Any, **kwargs: Any) -> None:
            super().__init__(*args, **kwargs)
            self._held: list[dict[str, Any]] = []

        def showPage(self) -> None:
            self._held.append(dict(self.__dict__))
            self._startPage()

        def save(self) -> None:
            total = len(self._held)
            for state in self._held:
                self.__dict__.update(state)
                draw(self, self._pageNumber, total)
                Canvas.showPage(self)
            Canvas.save(self)

    return HeldCanvas


def canvas_maker(marks: Marks) -> type[Canvas]:
    """The batch record's canvas: its furniture on every page, once the page count is known."""
    return held_pages(lambda canv, number, total: furniture(canv, marks, number, total))
