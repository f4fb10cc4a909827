"""The sections of a batch record, each a list of flowables built from the context alone.

Order (``ledger.records.pdf.render``): identity, cautions, planned against actual,
excursions, QC results, deviations, procedure, charts, module history, audit excerpt,
assumptions; the signature sections are in ``ledger.records.signblocks``.
"""

from __future__ import annotations

from collections import Counter
from typing import Any

from reportlab.pdfbase.pdfmetrics import stringWidth  # type: ignore[import-untyped]
from reportlab.platypus import Flowable, KeepTogether, Spacer, Table  # type: ignore[import-untyped]
from reportlab.platypus import TableStyle as TS

from ledger.records import charts as ch
from ledger.records import fonts, layout, marks
from ledger.records.context import CAUSTIC_CAUTION, SITE_CAUTION, Context, Series
from ledger.records.layout import esc, para, styles, when, widths

ACCENT = layout.colors.Color(0.16, 0.30, 0.52)


class SectionHead(Flowable):
    """A numbered section title over a hairline."""

    def __init__(self, number: int, title: str) -> None:
        super().__init__()
        self.number, self.title = number, title
        self.spaceBefore, self.spaceAfter = 9.0, 4.0
        self.width, self.height = layout.FRAME_W, 17.0

    def wrap(self, avail_width: float, avail_height: float) -> tuple[float, float]:
        return self.width, self.height

    def draw(self) -> None:
        c = self.canv
        c.setFillColor(ACCENT)
        c.rect(0, 3, 4, 11, stroke=0, fill=1)
        c.setFont(fonts.BOLD, 11)
        number = str(self.number)
        c.drawString(9, 5, number)
        c.setFillColor(layout.INK)
        c.drawString(9 + stringWidth(number, fonts.BOLD, 11) + 6, 5, layout.plain(self.title))
        c.setStrokeColor(ACCENT)
        c.setLineWidth(0.6)
        c.line(0, 0.5, self.width, 0.5)


def sub(title: str) -> Any:
    """A sub-heading inside a section."""
    return layout.markup(f"<b>{esc(title)}</b>", styles().body)


def note(text: str) -> Any:
    """A muted italic line."""
    return para(text, styles().note)


def caution_panel(text: str, width: float = layout.FRAME_W, small: bool = False) -> Any:
    """A caution: the hazard triangle beside the text, on a tinted panel."""
    s = styles()
    size = 9.0 if small else 13.0
    style = s.small if small else s.caution
    body = layout.markup(esc(text), style.clone("c", textColor=layout.INK))
    t = Table([[marks.HazardMark(size), body]], colWidths=[size + 6, width - size - 6])
    t.setStyle(TS([("FONT", (0, 0), (-1, -1), fonts.SANS, 7.2),
                   ("BACKGROUND", (0, 0), (-1, -1), layout.CAUTION_BG),
                   ("LINEBEFORE", (0, 0), (0, 0), 2.0, layout.CAUTION_EDGE),
                   ("VALIGN", (0, 0), (-1, -1), "TOP"),
                   ("LEFTPADDING", (0, 0), (-1, -1), 3), ("RIGHTPADDING", (0, 0), (-1, -1), 3),
                   ("TOPPADDING", (0, 0), (-1, -1), 3),
                   ("BOTTOMPADDING", (0, 0), (-1, -1), 3)]))  # fmt: skip
    return t


def _quiet(text: str) -> str:
    """Markup for the small grey line under a cell's title (the machine name)."""
    return f"<font size=6.2 color='#606068'>{esc(text)}</font>"


def _mono(text: str) -> Any:
    return layout.markup(esc(text), styles().mono)


def identity(ctx: Context, content_sha256: str) -> list[Any]:
    h = ctx.header
    s = styles()
    out: list[Any] = [
        para(f"Batch record {h.record_id}", s.title),
        layout.markup(f"<b>Revision {h.revision}</b> — {esc(h.revision_reason)}", s.body),
    ]
    if h.revision == 0:
        text = (
            f"<b>ABORTED</b>: {esc(h.revision_reason)}"
            if h.status == "aborted"
            else "<b>DRAFT</b> (revision 0): printed before the run was submitted; not a "
            "released batch record."
        )
        banner = Table([[layout.markup(
            text, s.body.clone("d", textColor=layout.colors.Color(0.6, 0.08, 0.08)))]],
            colWidths=[layout.FRAME_W])  # fmt: skip
        banner.setStyle(
            TS(
                [
                    ("FONT", (0, 0), (-1, -1), fonts.SANS, 8),
                    ("BOX", (0, 0), (-1, -1), 1.2, layout.colors.Color(0.7, 0.1, 0.1)),
                    ("BACKGROUND", (0, 0), (-1, -1), layout.colors.Color(1, 0.93, 0.93)),
                ]
            )
        )
        out += [Spacer(1, 3), banner]
    pairs: list[tuple[str, object]] = [
        ("Record ID", h.record_id), ("Revision", str(h.revision)),
        ("Product", h.product), ("Lot", h.lot),
        ("Status at issue", h.status.replace("_", " ")), ("Run", str(h.run_id)),
        ("Module serial", h.module_serial), ("Module type", h.module_type),
        ("Module area", h.module_area),
        ("Cycle on module", "not started" if h.cycle is None else str(h.cycle)),
        ("Template ID", h.template_id), ("Template version", h.template_version),
        ("Planned by", h.planned_by), ("Planned at", when(h.planned_at)),
        ("Started", when(h.started_at, "not started")),
        ("Finished", when(h.finished_at, "not finished")),
        ("Submitted", when(h.submitted_at, "not submitted")),
        ("Record format", f"context version {ctx.version}"),
    ]  # fmt: skip
    wide: list[tuple[str, object]] = [
        ("Revision reason", h.revision_reason),
        ("Template title", h.template_title),
        ("Template SHA-256", _mono(h.template_sha256)),
        ("Content SHA-256", _mono(content_sha256)),
        ("Skid log", h.skid_log or "none imported"),
        (
            "Fitness override",
            "none (module was fit when planned)"
            if h.override_reason is None
            else layout.markup(
                f"<b>Planned on a module that was not fit:</b> {esc(h.override_reason)}", s.cell
            ),
        ),
    ]
    if h.site is not None:
        wide.insert(0, ("Site", h.site))
    return [*out, Spacer(1, 5), layout.fields_grid(pairs, wide)]


def cautions(ctx: Context) -> list[Any]:
    texts = list(ctx.cautions)
    if SITE_CAUTION not in texts:
        texts.insert(0, SITE_CAUTION)
    out: list[Any] = []
    for text in texts:
        out += [caution_panel(text), Spacer(1, 3)]
    return out


def _verdict_summary(verdicts: list[str]) -> str:
    counts = Counter(verdicts)
    return ", ".join(f"{n} {v}" for v, n in sorted(counts.items()))


def _deviation(number: int | None, closed: bool, verdict: str) -> str:
    if number is None:
        return "none" if verdict != "PASS" else "—"
    return f"no. {number}, {'closed' if closed else 'OPEN'}"


def checks(ctx: Context) -> list[Any]:
    if not ctx.checks:
        return [note("The template defines no acceptance checks.")]
    s = styles()
    cols = widths(34, 10, 11, 11, 12, 11, 11)
    rows = []
    for c in ctx.checks:
        title = f"{esc(c.title)}<br/>{_quiet(f'{c.name} · {c.source}')}"
        if c.note:
            title += f"<br/><i>{esc(c.note)}</i>"
        rows.append([layout.markup(title, s.cell), c.phase or "—", c.planned, c.actual, c.rule,
                     marks.VerdictMark(c.verdict),
                     _deviation(c.deviation, c.deviation_closed, c.verdict)])  # fmt: skip
    summary = f"{len(ctx.checks)} checks: {_verdict_summary([c.verdict for c in ctx.checks])}."
    heading = ("Check", "Phase", "Planned", "Actual", "Rule", "Verdict", "Deviation")
    return [note(summary), layout.table(heading, rows, cols)]


def excursions(ctx: Context) -> list[Any]:
    if not ctx.excursions:
        if ctx.header.skid_log is None:
            return [note("No skid log imported: excursions could not be looked for.")]
        return [note("The skid log shows no time outside the planned ranges.")]
    rows = [[e.check, e.channel, e.phase or "—", e.start, e.duration, e.worst, e.limit]
            for e in ctx.excursions]  # fmt: skip
    heading = ("Check", "Channel", "Phase", "Start (into log)", "Duration", "Worst", "Limit")
    return [layout.table(heading, rows, widths(16, 13, 15, 13, 11, 14, 18))]


def qc(ctx: Context) -> list[Any]:
    if not ctx.qc:
        return [note("The template names no QC attributes.")]
    s = styles()
    rows = []
    for q in ctx.qc:
        entered = "not entered" if q.entered_by is None else f"{q.entered_by}, {when(q.entered_at)}"
        attribute = f"{esc(q.title)}<br/>{_quiet(q.attribute)}"
        rows.append([layout.markup(attribute, s.cell), q.specification, q.result,
                     q.method or "—", entered, marks.VerdictMark(q.verdict)])  # fmt: skip
    heading = ("Attribute", "Specification", "Result", "Method", "Entered", "Verdict")
    return [layout.table(heading, rows, widths(24, 15, 13, 12, 24, 12))]


def deviations(ctx: Context) -> list[Any]:
    if not ctx.deviations:
        return [note("No deviations recorded for this run.")]
    s = styles()
    rows = []
    for d in ctx.deviations:
        text = esc(d.description) + (f"<br/><i>Impact:</i> {esc(d.impact)}" if d.impact else "")
        if d.closed_by is None:
            closure = layout.markup("<b>OPEN</b>", s.cell)
        else:
            closure = layout.markup(f"closed by {esc(d.closed_by)}, {esc(when(d.closed_at))}"
                                    f"<br/>{esc(d.closure or '')}", s.cell)  # fmt: skip
        klass = f"<br/><i>Class:</i> {esc(d.classification)}" if d.classification else ""
        rows.append([str(d.number), d.check or "—", layout.markup(text + klass, s.cell),
                     f"{d.recorded_by}, {when(d.recorded_at)}", closure])  # fmt: skip
    heading = ("No.", "Check", "Description", "Recorded", "Closure (QA)")
    return [layout.table(heading, rows, widths(5, 13, 36, 18, 28))]


def _step_cautions(st: Any, width: float) -> list[Any]:
    """The caution panels under a step: its agents' (version 3 on), or before that the one
    caustic caution for a step that reads as a cleaning; none for none."""
    texts = st.cautions if st.cautions is not None else (CAUSTIC_CAUTION,) if st.cleaning else ()
    return [caution_panel(t, width, small=True) for t in texts]


def _signoff(o: Any) -> str:
    """One signature of a step (markup): meaning, person, when done; when a late entry, when
    it was entered; the deviation that explains a value out of range."""
    text = (f"<b>{esc(o.meaning)}</b> by {esc(o.full_name)} ({esc(o.login)})"
            f"<br/>done {esc(when(o.done_at))}")  # fmt: skip
    if o.late:
        text += f"<br/><b>late entry</b>, entered {esc(when(o.entered_at))}"
    if o.deviation is not None:
        text += f"<br/>deviation {o.deviation}"
    return text


def procedure(ctx: Context) -> list[Any]:
    if not ctx.steps:
        return [note("The template lists no steps.")]
    s = styles()
    cols = widths(4, 14, 50, 32)
    rows = []
    for i, st in enumerate(ctx.steps, start=1):
        body: Any = layout.markup(
            f"<b>{esc(st.title)}</b><br/>{esc(st.text)}{_step_values(st)}", s.cell
        )
        panels = _step_cautions(st, cols[2] - 2 * layout.PAD)
        if panels:
            body = [body, Spacer(1, 3), *panels]
        needed = "needs " + (", ".join(st.signatures) or "no signature")
        signed = layout.markup(
            "<br/>".join([esc(needed), *(_signoff(o) for o in st.signoffs or ())]), s.cell
        )
        rows.append([str(i), f"{st.operation} · {st.phase}", body, signed])
    heading = ("No.", "Operation · phase", "Step, values entered and cautions", "Signatures")
    return [layout.table(heading, rows, cols)]


def _step_values(st: Any) -> str:
    """The values entered at a step, as typed, with their ranges and verdicts (markup)."""
    if not st.values:
        return ""
    lines = []
    for v in st.values:
        rng = f" (range {esc(v.range)})" if v.range else ""
        verdict = f" <b>{esc(v.verdict)}</b>" if v.verdict == "OUT OF RANGE" else \
            (f" {esc(v.verdict)}" if v.verdict else "")  # fmt: skip
        lines.append(f"{esc(v.title)}: {esc(v.value)}{rng}{verdict}")
    return "<br/>" + "<br/>".join(lines)


def _phase_list(series: Series) -> str:
    return " · ".join(f"{name} {ch.hmm(a)}–{ch.hmm(b)}" for name, a, b in series.phases)


def charts(ctx: Context, draw: bool) -> list[Any]:
    if not draw:
        return [note("Charts omitted from this print (plain-table record).")]
    if not ctx.charts:
        return [note("No skid log imported: nothing to chart.")]
    s = styles()
    out: list[Any] = []
    for series in ctx.charts:
        buckets = len(ch.envelope(series)[0])
        caption = (f"Min/max envelope of {buckets:,} time buckets ({ch.points_drawn(series):,} "
                   f"points drawn) from {series.raw_points:,} samples.")  # fmt: skip
        if series.bands:
            caption += " Planned ranges dashed."
        if series.phases:
            caption += f" Phases: {_phase_list(series)}."
        out.append(KeepTogether([
            layout.markup(f"<b>{esc(series.title)}</b> ({esc(series.unit)})", s.body),
            ch.series_chart(series), para(caption, s.small), Spacer(1, 6)]))  # fmt: skip
    return out


def history(ctx: Context, draw: bool) -> list[Any]:
    h = ctx.history
    s = styles()
    summary = (f"Cycles completed: {h.cycles_done} of a reuse limit of {h.reuse_limit}. NWP "
               f"recovery limits: minimum {h.recovery_min * 100:.4g} %, alert below "
               f"{h.recovery_alert * 100:.4g} %.")  # fmt: skip
    if h.limits:
        summary += f" Limits: {h.limits}."
    out: list[Any] = [para(summary, s.body)]
    out.append(sub("Recent cycles"))
    if h.recent_cycles:
        cols = widths(8, 15, 18, 24, 24, 11)
        rows = []
        for c in h.recent_cycles:
            values = (str(c.cycle), c.product, c.lot, when(c.started_at),
                      when(c.ended_at, "not ended"), "this run" if c.this_run else "")  # fmt: skip
            # The run this record is about stands out in bold, measured in bold so it fits.
            rows.append([layout.cell(v, w, s.cell_bold if c.this_run else None)
                         for v, w in zip(values, cols, strict=True)])  # fmt: skip
        out.append(layout.table(("Cycle", "Product", "Lot", "Started", "Ended", ""), rows, cols))
    else:
        out.append(note("No earlier cycles."))
    out += [Spacer(1, 5), sub("NWP recovery after cleaning")]
    if draw:
        out.append(ch.recovery_chart(h))
    if h.recovery:
        rows = [[str(p.cycle), when(p.at), p.nwp, f"{p.recovery * 100:.1f} %",
                 marks.VerdictMark(p.verdict)] for p in h.recovery]  # fmt: skip
        out.append(layout.table(("Cycles done", "Tested at", "NWP", "Recovery", "Verdict"), rows,
                                widths(12, 26, 32, 14, 16)))  # fmt: skip
    else:
        out.append(note("No NWP recovery results yet."))
    out += [Spacer(1, 5), sub("Last integrity test")]
    t = h.last_integrity
    if t is None:
        out.append(note("No integrity test recorded."))
    else:
        word = "passed" if t.passed else "failed"
        out.append(layout.table(("Tested at", "Test", "Result", "Limit", "Verdict"),
                                [[when(t.at), t.kind, t.result, t.limit,
                                  marks.VerdictMark(word)]],
                                widths(26, 22, 18, 18, 16)))  # fmt: skip
    out += [Spacer(1, 5), sub("Recent cleanings")]
    shown = (CAUSTIC_CAUTION,) if h.cleaning_cautions is None else h.cleaning_cautions
    for text in shown:
        out += [caution_panel(text), Spacer(1, 3)]
    if h.cleanings:
        rows = [[when(c.at), c.agent, c.concentration, c.temperature, c.contact_time, c.conforms]
                for c in h.cleanings]  # fmt: skip
        heading = ("At", "Agent", "Concentration", "Temperature", "Contact time",
                   "Conforms to procedure")  # fmt: skip
        out.append(layout.table(heading, rows, widths(24, 12, 15, 13, 13, 23)))
        for cl in h.cleanings:
            if cl.steps:
                out += [Spacer(1, 3), note(f"Cleaning cycle of {when(cl.at)} under procedure "
                                           f"{cl.procedure}, step by step:")]  # fmt: skip
                step_rows = [[f"{st.number}. {st.name}",
                              st.agent + (f" (solution {st.solution})" if st.solution else ""),
                              st.values, st.conforms] for st in cl.steps]  # fmt: skip
                out.append(layout.table(("Step", "Agent", "Values as entered", "Conforms"),
                                        step_rows, widths(14, 24, 38, 24)))  # fmt: skip
    else:
        out.append(note("No cleanings recorded before this run."))
    return out


def audit(ctx: Context) -> list[Any]:
    if not ctx.audit:
        return [note("No audit events in the excerpt.")]
    s = styles()
    if all(a.change is not None for a in ctx.audit):
        rows = [[str(a.seq), when(a.at), a.actor, f"{a.entity} {a.entity_id}",
                 layout.markup(esc(a.change or ""), s.cell),
                 layout.markup(esc(a.reason or "—"), s.cell)]
                for a in ctx.audit]  # fmt: skip
        heading: tuple[str, ...] = ("Seq", "At", "Actor", "Record", "What changed", "Reason")
        return [note(f"{len(ctx.audit)} audit events, in the order of the audit trail."),
                layout.table(heading, rows, widths(5, 19, 10, 11, 38, 17))]  # fmt: skip
    rows = [[str(a.seq), when(a.at), a.actor, a.action, f"{a.entity} {a.entity_id}",
             a.field or "—", a.old or "—", a.new or "—", a.reason or "—"]
            for a in ctx.audit]  # fmt: skip
    heading = ("Seq", "At", "Actor", "Action", "Record", "Field", "Old", "New", "Reason")
    return [note(f"{len(ctx.audit)} audit events, in the order of the audit trail."),
            layout.table(heading, rows, widths(5, 22, 11, 8, 9, 10, 11, 11, 13))]  # fmt: skip


def assumptions(ctx: Context) -> list[Any]:
    if not ctx.assumptions:
        return [note("None stated.")]
    return [para(f"• {a}", styles().body) for a in ctx.assumptions]


def review(ctx: Context) -> list[Any]:
    """What a reviewer must look at, topic by topic; "none" where there is nothing."""
    if not ctx.review:
        return [note("This revision was issued before records carried a review summary.")]
    s = styles()
    rows = []
    for t in ctx.review:
        if t.findings:
            body = layout.markup("<br/>".join(f"• {esc(f)}" for f in t.findings), s.cell)
            count = layout.markup(f"<b>{len(t.findings)}</b>", s.cell)
        else:
            body, count = layout.markup("none", s.cell), "0"
        rows.append([t.topic.capitalize(), count, body])
    return [layout.table(("Topic", "Found", "Findings"), rows, widths(24, 6, 70))]
