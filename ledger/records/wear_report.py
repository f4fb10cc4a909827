"""Module wear reports as files: the PDF of ``fluxledger history SERIAL`` and of
``fluxledger fleet``, and the PNG pictures of both.

``history_pdf`` writes a few A4 pages: the module's header, the recovery chart with the
reuse-life projection and its assumptions beside it, the I-MR charts of recovery (%) and
pressure-decay rate (mbar/min), the tables of recovery, decay, signals and of the uses and
holds, and the site's note once at the end. ``fleet_pdf`` writes one landscape A4 page: the
fleet table and the fleet picture, shrunk to fit when the fleet is large, the note at its foot.
Times are shown in UTC with their offset ("2026-11-28 13:05:00 +00:00"), as the terminal
report of the same command shows them in UTC and as the batch record writes its times.

PNG: the charts are rendered from the very same reportlab drawings the PDF holds: each
drawing becomes a one-page PDF (``renderPDF``) that PDFium (``pypdfium2``, a PyPI wheel with
the PDFium library inside it) rasterizes. reportlab's own bitmap renderer is not used: from
reportlab 4.1 on it needs the ``rlPyCairo`` backend, whose ``pycairo`` has no Linux wheel and
builds only against the system's cairo headers, and the older ``rl_renderPM`` wheel installs
but reportlab 5 no longer loads it. matplotlib would mean drawing every chart twice, in two
libraries, and the PNG could then differ from the PDF. One drawing, one set of tests.

Every file is checked before anything is drawn (``check_target``: an existing file is refused
without ``overwrite``, exit 2, nothing written) and put in place atomically
(``ledger.records.pdf.write_atomic``).
"""

from __future__ import annotations

import io
import os
from collections.abc import Sequence
from datetime import datetime
from pathlib import Path
from typing import Any

from reportlab.graphics import renderPDF  # type: ignore[import-untyped]
from reportlab.graphics.shapes import Drawing, Group  # type: ignore[import-untyped]
from reportlab.lib.pagesizes import A4, landscape  # type: ignore[import-untyped]
from reportlab.lib.units import mm  # type: ignore[import-untyped]
from reportlab.platypus import (  # type: ignore[import-untyped]
    BaseDocTemplate,
    CondPageBreak,
    Frame,
    KeepInFrame,
    KeepTogether,
    PageTemplate,
    Spacer,
    Table,
    TableStyle,
)

from ledger import __version__
from ledger.errors import InputError
from ledger.logbook.fleet import Standing
from ledger.logbook.module_trend import ModuleTrend
from ledger.records import fonts, layout, wear_charts
from ledger.records.pages import held_pages
from ledger.records.pdf import write_atomic
from ledger.rules.localtime import local_text
from ledger.store.types import utc_now

PNG_SCALE = 2.0  # pixels per point: 144 dpi
STACK_GAP = 12.0  # points between the charts stacked in one PNG
_MAX_PATH = 4096  # bytes (Linux PATH_MAX), as in ledger.userfiles


def at_text(at: datetime) -> str:
    """A stored (aware) time as shown in these reports: UTC with its offset."""
    return layout.when(local_text(at))


def number(x: float | None, missing: str = "—") -> str:
    """A number to four significant digits, or ``missing`` for None."""
    return missing if x is None else f"{x:.4g}"


def percent(fraction: float | None, missing: str = "—") -> str:
    """A fraction as a percentage with one decimal, e.g. "87.0 %"."""
    return missing if fraction is None else f"{100 * fraction:.1f} %"


def check_target(path: str | os.PathLike[str], field: str, overwrite: bool) -> Path:
    """``path`` as a Path once it may be written: its folder exists, it is not a folder, and
    it does not exist unless ``overwrite``. InputError (exit 2) naming ``field`` otherwise."""
    text = os.fspath(path)

    def refuse(why: str, expected: str) -> InputError:
        return InputError(
            f"--{field} {text!r}: {why}; nothing was written",
            field=field,
            value=text,
            expected=expected,
        )

    if not text.strip():
        raise refuse("the path is empty", "a file path")
    if "\x00" in text or len(text.encode("utf-8", "surrogateescape")) >= _MAX_PATH:
        raise refuse("not a usable path", "a file path without NUL, under 4096 bytes")
    p = Path(text)
    if not p.parent.is_dir():
        raise refuse(f"the folder {str(p.parent)!r} does not exist", "a path in an existing folder")
    if p.is_dir():
        raise refuse("it is a directory", "a file path, not a directory")
    if p.exists() and not overwrite:
        raise refuse("the file exists", "a file name not yet taken, or --overwrite to replace it")
    return p


def _place(path: Path, data: bytes, field: str) -> Path:
    try:
        write_atomic(path, data)
    except OSError as exc:
        raise InputError(
            f"--{field} {str(path)!r}: cannot write: {exc.strerror or exc}; nothing was written",
            field=field,
            value=str(path),
            expected="a file in a folder you may write to",
        ) from None
    return path


# --- pictures --------------------------------------------------------------------------------


def stacked(drawings: Sequence[Drawing], gap: float = STACK_GAP) -> Drawing:
    """The drawings one above the other (first on top) in one drawing."""
    width = max(d.width for d in drawings)
    height = sum(d.height for d in drawings) + gap * (len(drawings) - 1)
    out = Drawing(width, height)
    y = height
    for d in drawings:
        y -= d.height
        g = Group(*d.contents)
        g.translate(0, y)
        out.add(g)
        y -= gap
    return out


def png_bytes(drawing: Drawing, scale: float = PNG_SCALE) -> bytes:
    """The drawing as a PNG on white, ``scale`` pixels per point (through its PDF)."""
    import pypdfium2 as pdfium  # type: ignore[import-untyped]

    fonts.register()
    doc = pdfium.PdfDocument(renderPDF.drawToString(drawing))
    try:
        image = doc[0].render(scale=scale).to_pil()
    finally:
        doc.close()
    out = io.BytesIO()
    image.save(out, format="PNG", optimize=True)
    return out.getvalue()


def history_drawing(trend: ModuleTrend, width: float = layout.FRAME_W) -> Drawing:
    """The recovery chart over the I-MR charts of recovery and decay rate."""
    return stacked(
        [
            wear_charts.recovery_chart(trend, width),
            wear_charts.recovery_control_chart(trend, width),
            wear_charts.decay_control_chart(trend, width),
        ]
    )


def history_png(
    trend: ModuleTrend, path: str | os.PathLike[str], *, overwrite: bool = False
) -> Path:
    """Write the history charts (``history_drawing``) as one PNG to ``path``."""
    target = check_target(path, "png", overwrite)
    return _place(target, png_bytes(history_drawing(trend)), "png")


def fleet_png(
    rows: Sequence[Standing], path: str | os.PathLike[str], *, overwrite: bool = False
) -> Path:
    """Write the fleet picture as a PNG to ``path``."""
    target = check_target(path, "png", overwrite)
    return _place(target, png_bytes(wear_charts.fleet_chart(rows, FLEET_W)), "png")


# --- PDF pages -------------------------------------------------------------------------------

FLEET_PAGE = landscape(A4)
MARGIN = 14 * mm
FLEET_W = FLEET_PAGE[0] - 2 * MARGIN


def _document(
    buffer: io.BytesIO,
    size: tuple[float, float],
    title: str,
    subject: str,
    margin_x: float,
    top: float,
    bottom: float,
) -> Any:
    doc = BaseDocTemplate(
        buffer,
        pagesize=size,
        leftMargin=margin_x,
        rightMargin=margin_x,
        topMargin=top,
        bottomMargin=bottom,
        title=title,
        author="fluxledger",
        subject=subject,
        creator=f"fluxledger {__version__}",
        invariant=1,
        pageCompression=1,
        initialFontName=fonts.SANS,
        initialFontSize=8,
    )
    frame = Frame(
        margin_x,
        bottom,
        size[0] - 2 * margin_x,
        size[1] - top - bottom,
        id="body",
        leftPadding=0,
        rightPadding=0,
        topPadding=0,
        bottomPadding=0,
    )
    doc.addPageTemplates([PageTemplate(id="wear", frames=[frame], pagesize=size)])
    return doc


def _canvas(head: str, foot: str, size: tuple[float, float], margin_x: float) -> type:
    """A canvas that draws the running head and "page x of y" once the page count is known."""
    left, right = margin_x, size[0] - margin_x

    def draw(canv: Any, number: int, total: int) -> None:
        canv.saveState()
        canv.setFillColor(layout.INK)
        canv.setFont(fonts.BOLD, 8)
        canv.drawString(left, size[1] - 9 * mm, layout.plain(head))
        canv.setStrokeColor(layout.RULE)
        canv.setLineWidth(0.5)
        canv.line(left, size[1] - 9 * mm - 3.5, right, size[1] - 9 * mm - 3.5)
        canv.line(left, 9 * mm + 9, right, 9 * mm + 9)
        canv.setFont(fonts.SANS, 7)
        canv.drawString(left, 9 * mm, layout.plain(foot))
        canv.setFont(fonts.BOLD, 7.5)
        canv.drawRightString(right, 9 * mm, f"page {number} of {total}")
        canv.restoreState()

    return held_pages(draw)


def _dated(canvas: type, printed: datetime) -> type:
    from ledger.records.pdf import pdf_date

    stamp = pdf_date(printed)

    class Dated(canvas):
        def __init__(self, *args: Any, **kwargs: Any) -> None:
            super().__init__(*args, **kwargs)
            self.setDateFormatter(lambda *_: stamp)

    return Dated


def _heading(text: str) -> Any:
    return layout.para(text, layout.styles().section)


def _projection_block(trend: ModuleTrend) -> Any:
    """The projection's numbers on the left, its assumptions and note on the right."""
    p = trend.projection
    s = layout.styles()
    rows = [
        ("status", p.status.replace("_", " ")),
        ("points", str(p.points)),
        ("recovery limit", percent(p.limit)),
        ("change per cycle", "—" if p.slope is None else f"{100 * p.slope:+.3g} % per cycle"),
        ("intercept (cycle 0)", percent(p.intercept)),
        ("r²", number(p.r_squared)),
        ("fit reaches limit at cycle", number(p.point_cycle)),
        ("95 % bound reaches limit at cycle", number(p.bound_cycle)),
        ("cycles left (bound − cycles used)", number(p.cycles_left)),
    ]
    left_w = layout.FRAME_W * 0.5
    numbers = layout.table(["reuse-life projection", "value"], rows, [left_w * 0.62, left_w * 0.38])
    words = [
        layout.para("Assumptions", s.cell_bold),
        layout.para(p.assumptions, s.cell),
        Spacer(1, 3),
        layout.para(p.note, s.note),
    ]
    t = Table([[numbers, words]], colWidths=[left_w, layout.FRAME_W - left_w], hAlign="LEFT")
    t.setStyle(
        TableStyle(
            [
                ("VALIGN", (0, 0), (-1, -1), "TOP"),
                ("LEFTPADDING", (0, 0), (0, 0), 0),
                ("LEFTPADDING", (1, 0), (1, 0), 8),
                ("RIGHTPADDING", (0, 0), (-1, -1), 0),
                ("TOPPADDING", (0, 0), (-1, -1), 0),
            ]
        )
    )
    return t


def _limits_line(chart: Any, scale: float, unit: str) -> str:
    lim = chart.limits
    if lim is None:
        return f"no control limits: {chart.note}"
    return (
        f"from the first {chart.baseline} points: centre {lim.centre * scale:.4g} {unit}, "
        f"UCL {lim.ucl * scale:.4g}, LCL {lim.lcl * scale:.4g}, MR-bar "
        f"{lim.mr_bar * scale:.4g}, MR UCL {lim.mr_ucl * scale:.4g} {unit}; "
        f"{len(chart.signals)} signal(s)"
    )


def history_story(trend: ModuleTrend, note: str) -> list[Any]:
    """Every flowable of the history PDF."""
    s = layout.styles()
    t = trend
    out: list[Any] = [
        layout.para(f"Module wear history — {t.serial}", s.title),
        layout.fields_grid(
            [
                ("serial", t.serial),
                ("type", t.type_code),
                ("status", t.status.replace("_", " ")),
                ("cycles used", f"{t.cycles_used} of {t.reuse_limit}"),
                ("action limit (minimum)", percent(t.recovery_min)),
                ("alert limit", percent(t.recovery_alert)),
            ],
            [
                (
                    "limits",
                    "the module type's limits in force now; each recovery below is judged "
                    "against them",
                )
            ],
        ),
        _heading("Recovery per cycle and reuse-life projection"),
        wear_charts.recovery_chart(t),
        Spacer(1, 6),
        _projection_block(t),
    ]
    for title, drawing, chart, scale, unit in (
        (
            "Recovery control chart (I-MR)",
            wear_charts.recovery_control_chart(t),
            t.recovery_chart,
            100.0,
            "%",
        ),
        (
            "Decay-rate control chart (I-MR)",
            wear_charts.decay_control_chart(t),
            t.decay_chart,
            wear_charts.RATE_SCALE,
            "mbar/min",
        ),
    ):
        out.append(
            KeepTogether(
                [_heading(title), drawing, layout.para(_limits_line(chart, scale, unit), s.note)]
            )
        )
    w = layout.widths
    tables: list[tuple[str, list[str], list[list[object]], list[float], str]] = [
        (
            "Recovery",
            ["cycle", "at (UTC)", "recovery", "verdict", "water test"],
            [
                [str(r.cycle), at_text(r.at), percent(r.recovery), r.verdict, str(r.record_id)]
                for r in t.recovery
            ],
            w(1, 3, 1.5, 2, 1.5),
            "no post-clean recovery yet",
        ),
        (
            "Decay",
            ["cycle", "at (UTC)", "decay rate (mbar/min)", "integrity test"],
            [
                [
                    str(d.cycle),
                    at_text(d.at),
                    f"{d.value * wear_charts.RATE_SCALE:.4g}",
                    str(d.record_id),
                ]
                for d in t.decay
            ],
            w(1, 3, 2, 1.5),
            "no pressure-decay test yet",
        ),
        (
            "Signals",
            ["series", "label", "rule set", "what", "cycle", "record"],
            [
                [
                    series,
                    wear_charts.rule_code(v),
                    v.rule_set.replace("_", " "),
                    v.description,
                    str(v.cycle),
                    str(v.record_id),
                ]
                for series, c in (("recovery", t.recovery_chart), ("decay", t.decay_chart))
                for v in c.signals
            ],
            w(1.2, 0.8, 1.5, 5, 0.8, 0.9),
            "no run-rule signal against the baseline limits",
        ),
        (
            "Uses and holds",
            ["at (UTC)", "what", "record", "details"],
            [[at_text(e.at), e.kind, str(e.record_id), e.text] for e in t.events],
            w(2.6, 1.2, 0.9, 5.3),
            "no uses or holds",
        ),
    ]
    for title, heading, rows, widths, empty in tables:
        out += [CondPageBreak(90), _heading(title)]
        out.append(layout.table(heading, rows, widths) if rows else layout.para(empty, s.note))
    out += [Spacer(1, 10), layout.para(note, s.body)]
    return out


def history_pdf_bytes(trend: ModuleTrend, note: str, printed: datetime | None = None) -> bytes:
    """The history PDF of ``trend`` (A4), ending with ``note`` (the site's note), dated
    ``printed`` (default: now)."""
    fonts.register()
    at = printed or utc_now()
    buffer = io.BytesIO()
    doc = _document(
        buffer,
        A4,
        f"Module wear history {trend.serial}",
        trend.serial,
        layout.MARGIN_X,
        16 * mm,
        17 * mm,
    )
    head = f"Module wear history · {trend.serial} · type {trend.type_code}"
    foot = f"printed {at_text(at)} · fluxledger {__version__} · not a batch record"
    doc.build(
        history_story(trend, note), canvasmaker=_dated(_canvas(head, foot, A4, layout.MARGIN_X), at)
    )
    return buffer.getvalue()


def history_pdf(
    trend: ModuleTrend,
    path: str | os.PathLike[str],
    *,
    note: str,
    overwrite: bool = False,
    printed: datetime | None = None,
) -> Path:
    """Write the history PDF of ``trend`` to ``path`` (see :func:`history_pdf_bytes`)."""
    target = check_target(path, "pdf", overwrite)
    return _place(target, history_pdf_bytes(trend, note, printed), "pdf")


def fleet_rows(rows: Sequence[Standing]) -> list[list[object]]:
    """The fleet table's cells, in the order given."""
    out: list[list[object]] = []
    for r in rows:
        trend = "—" if r.trend is None or r.slope is None else f"{r.trend} {100 * r.slope:+.1f} %"
        out.append(
            [
                r.serial,
                r.type_code,
                r.status.replace("_", " "),
                r.verdict,
                f"{r.cycles} of {r.reuse_limit}",
                percent(r.last_recovery),
                trend,
                "—" if r.cycles_left is None else f"{r.cycles_left:.1f}",
                "—" if r.storage_expires is None else at_text(r.storage_expires),
                "; ".join(r.holds) or "—",
            ]
        )
    return out


FLEET_HEADING = [
    "serial",
    "type",
    "status",
    "verdict",
    "cycles",
    "last recovery",
    "trend per cycle",
    "cycles left",
    "storage expires (UTC)",
    "open holds",
]


def fleet_pdf_bytes(rows: Sequence[Standing], note: str, printed: datetime | None = None) -> bytes:
    """The fleet PDF: one landscape A4 page (the table and the picture shrink to fit it)."""
    fonts.register()
    at = printed or utc_now()
    s = layout.styles()
    top, bottom = 15 * mm, 16 * mm
    frame_h = FLEET_PAGE[1] - top - bottom
    fracs = [1.3, 1.0, 1.2, 0.9, 0.9, 1.0, 1.3, 0.8, 2.1, 2.4]
    widths = [FLEET_W * f / sum(fracs) for f in fracs]
    body: list[Any] = [
        layout.para(f"Fleet standing — {len(rows)} module(s), most urgent first", s.title)
    ]
    if rows:
        body.append(layout.table(FLEET_HEADING, fleet_rows(rows), widths))
    else:
        body.append(layout.para("no modules match", s.note))
    body += [Spacer(1, 8), wear_charts.fleet_chart(rows, FLEET_W)]
    foot = layout.para(note, s.body)
    note_h = foot.wrap(FLEET_W, frame_h)[1] + 6
    story = [KeepInFrame(FLEET_W, frame_h - note_h, body, mode="shrink"), Spacer(1, 6), foot]
    buffer = io.BytesIO()
    doc = _document(buffer, FLEET_PAGE, "Fleet standing", "module fleet", MARGIN, top, bottom)
    head = "Fleet standing · cycles used, recovery and projected life of every module"
    foot_text = f"printed {at_text(at)} · fluxledger {__version__}"
    doc.build(story, canvasmaker=_dated(_canvas(head, foot_text, FLEET_PAGE, MARGIN), at))
    return buffer.getvalue()


def fleet_pdf(
    rows: Sequence[Standing],
    path: str | os.PathLike[str],
    *,
    note: str,
    overwrite: bool = False,
    printed: datetime | None = None,
) -> Path:
    """Write the one-page fleet PDF to ``path`` (see :func:`fleet_pdf_bytes`)."""
    target = check_target(path, "pdf", overwrite)
    return _place(target, fleet_pdf_bytes(rows, note, printed), "pdf")
