"""Page geometry, paragraph styles and table builders of the batch-record PDF (points, A4).

Every text goes through :func:`esc`, which escapes Paragraph markup and writes a character
the embedded Vera faces have no glyph for as ``[U+XXXX]`` (visible, never a blank box).
Tables are full-width ``LongTable``s whose first row repeats on every page they run onto;
a cell that would not fit its column becomes a wrapping Paragraph.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from datetime import datetime
from functools import cache
from typing import Any

from reportlab.lib import colors  # type: ignore[import-untyped]
from reportlab.lib.pagesizes import A4  # type: ignore[import-untyped]
from reportlab.lib.styles import ParagraphStyle  # type: ignore[import-untyped]
from reportlab.lib.units import mm  # type: ignore[import-untyped]
from reportlab.pdfbase.pdfmetrics import stringWidth  # type: ignore[import-untyped]
from reportlab.platypus import LongTable, Paragraph, TableStyle  # type: ignore[import-untyped]

from ledger.records import fonts

PAGE_W, PAGE_H = A4
MARGIN_X = 16 * mm
MARGIN_TOP = 20 * mm  # room for the running head
MARGIN_BOTTOM = 21 * mm  # room for the two footer lines
FRAME_W = PAGE_W - 2 * MARGIN_X
PAD = 2.5  # cell padding left and right

INK = colors.Color(0.12, 0.12, 0.14)
MUTED = colors.Color(0.38, 0.38, 0.42)
RULE = colors.Color(0.62, 0.64, 0.68)
HEAD_BG = colors.Color(0.90, 0.92, 0.95)
ZEBRA = colors.Color(0.97, 0.975, 0.985)
CAUTION_BG = colors.Color(1.0, 0.97, 0.88)
CAUTION_EDGE = colors.Color(0.72, 0.50, 0.05)

# The glyphs Vera lacks that have a look-alike it has (same meaning in a record).
_LOOKALIKE = {0x0394: "∆", 0x2011: "-", 0x2192: "->", 0x2190: "<-", 0x2009: " ", 0x202F: " "}


@dataclass(frozen=True)
class Styles:
    body: Any
    small: Any
    cell: Any
    cell_bold: Any
    head: Any
    title: Any
    section: Any
    mono: Any
    caution: Any
    note: Any


@cache
def styles() -> Styles:
    """The paragraph styles (all in the registered Vera faces)."""
    mono = fonts.register()

    def st(name: str, font: str = fonts.SANS, size: float = 8.5, **kw: Any) -> Any:
        return ParagraphStyle(name, fontName=font, fontSize=size, leading=size * 1.25,
                              textColor=kw.pop("textColor", INK), **kw)  # fmt: skip

    return Styles(
        body=st("body", spaceAfter=3),
        small=st("small", size=7, textColor=MUTED),
        cell=st("cell", size=7.2, splitLongWords=1),
        cell_bold=st("cell_bold", fonts.BOLD, 7.2),
        head=st("head", fonts.BOLD, 7.2),
        title=st("title", fonts.BOLD, 15, spaceAfter=2),
        section=st("section", fonts.BOLD, 11, spaceBefore=10, spaceAfter=4),
        mono=st("mono", mono, 7.2, splitLongWords=0),
        caution=st("caution", size=7.6),
        note=st("note", fonts.ITALIC, 7.2, textColor=MUTED, spaceAfter=3),
    )


def esc(text: object) -> str:
    """``text`` as Paragraph markup: escaped, every glyph printable in the Vera faces."""
    s = str(text)
    have = fonts.covered()
    if any(ord(ch) not in have for ch in s):
        s = "".join(
            ch if ord(ch) in have or ch in "\n\t" else _LOOKALIKE.get(ord(ch), f"[U+{ord(ch):04X}]")
            for ch in s
        )
    return s.replace("&", "&amp;").replace("<", "&lt;").replace(">", "&gt;")


def plain(text: object) -> str:
    """``text`` with the glyph fallback of :func:`esc` but no markup escaping (canvas text)."""
    return esc(text).replace("&lt;", "<").replace("&gt;", ">").replace("&amp;", "&")


def when(iso: str | None, missing: str = "—") -> str:
    """An ISO 8601 time as "2026-11-28 13:05:00 +00:00" (its own offset kept); as given if
    it does not parse; ``missing`` for None."""
    if iso is None:
        return missing
    try:
        at = datetime.fromisoformat(iso)
    except ValueError:
        return iso
    if at.tzinfo is None:
        return iso  # never invent an offset
    offset = at.strftime("%z")
    return f"{at:%Y-%m-%d %H:%M:%S} {offset[:3]}:{offset[3:]}"


def para(text: object, style: Any = None) -> Any:
    return Paragraph(esc(text), style or styles().body)


def markup(xml: str, style: Any = None) -> Any:
    """A Paragraph of already escaped markup."""
    return Paragraph(xml, style or styles().body)


def cell(text: object, width: float, style: Any = None) -> Any:
    """A table cell: the plain string when it fits on one line, else a wrapping Paragraph."""
    st = style or styles().cell
    s = plain(text)
    if "\n" not in s and stringWidth(s, st.fontName, st.fontSize) <= width - 2 * PAD - 0.5:
        return s
    return Paragraph(esc(text).replace("\n", "<br/>"), st)


def widths(*fractions: float) -> list[float]:
    """Column widths filling the frame, in proportion to ``fractions``."""
    total = sum(fractions)
    return [FRAME_W * f / total for f in fractions]


def table(
    heading: Sequence[str],
    rows: Sequence[Sequence[object]],
    col_widths: Sequence[float],
    extra: Sequence[tuple[Any, ...]] = (),
) -> Any:
    """A full-width table; its heading row repeats on every page it runs onto.

    A row item that is a string is wrapped with :func:`cell`; anything else (a Paragraph,
    a mark) is placed as it is.
    """
    s = styles()
    data: list[list[object]] = [[cell(h, w, s.head) for h, w in zip(heading, col_widths,
                                                                    strict=True)]]  # fmt: skip
    for row in rows:
        data.append([cell(v, w) if isinstance(v, str) else v
                     for v, w in zip(row, col_widths, strict=True)])  # fmt: skip
    commands: list[tuple[Any, ...]] = [
        ("FONT", (0, 0), (-1, -1), fonts.SANS, 7.2, 9),
        ("FONT", (0, 0), (-1, 0), fonts.BOLD, 7.2, 9),
        ("TEXTCOLOR", (0, 0), (-1, -1), INK),
        ("BACKGROUND", (0, 0), (-1, 0), HEAD_BG),
        ("VALIGN", (0, 0), (-1, -1), "TOP"),
        ("LEFTPADDING", (0, 0), (-1, -1), PAD),
        ("RIGHTPADDING", (0, 0), (-1, -1), PAD),
        ("TOPPADDING", (0, 0), (-1, -1), 2),
        ("BOTTOMPADDING", (0, 0), (-1, -1), 2),
        ("LINEBELOW", (0, 0), (-1, 0), 0.8, INK),
        ("LINEBELOW", (0, 1), (-1, -1), 0.25, RULE),
        ("BOX", (0, 0), (-1, -1), 0.5, RULE),
    ]
    commands += [("BACKGROUND", (0, i), (-1, i), ZEBRA) for i in range(2, len(data), 2)]
    t = LongTable(data, colWidths=list(col_widths), repeatRows=1, hAlign="LEFT")
    t.setStyle(TableStyle([*commands, *extra]))
    return t


def fields_grid(pairs: Sequence[tuple[str, object]], wide: Sequence[tuple[str, object]]) -> Any:
    """Label/value pairs two to a row, then ``wide`` pairs one to a full-width row."""
    s = styles()
    lw = 0.17 * FRAME_W
    vw = FRAME_W / 2 - lw
    data: list[list[object]] = []
    for i in range(0, len(pairs), 2):
        row: list[object] = []
        for label, value in pairs[i : i + 2]:
            row += [cell(label, lw, s.head), value if not isinstance(value, str)
                    else cell(value, vw)]  # fmt: skip
        data.append(row + [""] * (4 - len(row)))
    first_wide = len(data)
    for label, value in wide:
        shown = value if not isinstance(value, str) else cell(value, FRAME_W - lw)
        data.append([cell(label, lw, s.head), shown, "", ""])
    commands: list[tuple[Any, ...]] = [
        ("FONT", (0, 0), (-1, -1), fonts.SANS, 7.2, 9),
        ("VALIGN", (0, 0), (-1, -1), "TOP"),
        ("LEFTPADDING", (0, 0), (-1, -1), PAD),
        ("RIGHTPADDING", (0, 0), (-1, -1), PAD),
        ("TOPPADDING", (0, 0), (-1, -1), 1.6),
        ("BOTTOMPADDING", (0, 0), (-1, -1), 1.6),
        ("BACKGROUND", (0, 0), (0, -1), HEAD_BG),
        ("BACKGROUND", (2, 0), (2, first_wide - 1), HEAD_BG),
        ("LINEBELOW", (0, 0), (-1, -1), 0.25, RULE),
        ("BOX", (0, 0), (-1, -1), 0.5, RULE),
    ]
    commands += [("SPAN", (1, i), (3, i)) for i in range(first_wide, len(data))]
    t = LongTable(data, colWidths=[lw, vw, lw, vw], hAlign="LEFT")
    t.setStyle(TableStyle(commands))
    return t
