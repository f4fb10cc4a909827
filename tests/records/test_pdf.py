"""The batch-record PDF (ledger.records.pdf): what an auditor reads in it, checked with pypdf.

Text is extracted with pypdf and whitespace folded, so a cell that wraps still reads as one
phrase; the order of phrases is checked, not only their presence. Fonts are read from the
page and form-XObject resources; positions from pypdf's text visitor.
"""

from __future__ import annotations

import dataclasses
import hashlib
import io
import os
import re
import subprocess
import sys
from pathlib import Path
from typing import Any

import pytest
from pypdf import PdfReader

from ledger.records import context as c
from ledger.records import layout
from ledger.records.pdf import keywords, render, stamp_of, write_atomic
from tests.records.sample import sample_context

ROOT = Path(__file__).resolve().parents[2]
VERSION = "9.9.9-test"

# The standard-14 fonts a viewer supplies itself (ISO 32000-1 §9.6.2.2), never embedded.
STANDARD_14 = {
    "Courier", "Courier-Bold", "Courier-Oblique", "Courier-BoldOblique", "Helvetica",
    "Helvetica-Bold", "Helvetica-Oblique", "Helvetica-BoldOblique", "Times-Roman", "Times-Bold",
    "Times-Italic", "Times-BoldItalic", "Symbol", "ZapfDingbats",
}  # fmt: skip


# --- helpers -------------------------------------------------------------------------------


def reader(data: bytes) -> PdfReader:
    return PdfReader(io.BytesIO(data))


def flat(text: str) -> str:
    return " ".join(text.split())


def page_texts(data: bytes) -> list[str]:
    return [flat(p.extract_text()) for p in reader(data).pages]


def find_in_order(text: str, parts: list[str], start: int = 0) -> int:
    """The position after the last of ``parts`` found one after another in ``text``."""
    pos = start
    for part in parts:
        i = text.find(part, pos)
        assert i >= 0, f"{part!r} not found after position {pos}: {text[pos : pos + 160]!r}"
        pos = i + len(part)
    return pos


def between(text: str, first: str, last: str | None) -> str:
    i = text.index(first)
    return text[i : text.index(last, i) if last else len(text)]


def _fonts_of(resources: Any, where: str, seen: set[int], out: list[str]) -> None:
    if resources is None:
        return
    resources = resources.get_object()
    fonts = resources.get("/Font")
    for name, ref in (fonts.get_object() if fonts is not None else {}).items():
        font = ref.get_object()
        base = str(font.get("/BaseFont", "?"))
        if font.get("/Subtype") != "/TrueType":
            out.append(f"{where} {name}: {base} is {font.get('/Subtype')}, not TrueType")
        descriptor = font.get("/FontDescriptor")
        if descriptor is None or "/FontFile2" not in descriptor.get_object():
            out.append(f"{where} {name}: {base} has no embedded FontFile2")
        if base.lstrip("/").split("+")[-1] in STANDARD_14:
            out.append(f"{where} {name}: {base} is a standard-14 font")
    xobjects = resources.get("/XObject")
    for name, ref in (xobjects.get_object() if xobjects is not None else {}).items():
        obj = ref.get_object()
        if obj.get("/Subtype") == "/Form" and id(obj) not in seen:
            seen.add(id(obj))
            _fonts_of(obj.get("/Resources"), f"{where} form {name}", seen, out)


def font_problems(data: bytes) -> list[str]:
    """Every font of every page and form XObject that is not an embedded TrueType font, and
    every standard-14 BaseFont named anywhere in the raw file."""
    out: list[str] = []
    seen: set[int] = set()
    for i, page in enumerate(reader(data).pages, start=1):
        _fonts_of(page.get("/Resources"), f"page {i}", seen, out)
    for m in re.finditer(rb"/BaseFont\s*/([A-Za-z0-9+\-]+)", data):
        if m.group(1).decode().split("+")[-1] in STANDARD_14:
            out.append(f"raw file names BaseFont {m.group(1).decode()}")
    return out


def _mul(a: list[float], b: list[float]) -> list[float]:
    return [a[0] * b[0] + a[1] * b[2], a[0] * b[1] + a[1] * b[3],
            a[2] * b[0] + a[3] * b[2], a[2] * b[1] + a[3] * b[3],
            a[4] * b[0] + a[5] * b[2] + b[4], a[4] * b[1] + a[5] * b[3] + b[5]]  # fmt: skip


def _page_runs(page: Any) -> list[list[Any]]:
    """[matrix, left x, width, text] of each text run of one page (see ``text_spans``)."""
    from reportlab.pdfbase.pdfmetrics import stringWidth  # type: ignore[import-untyped]

    from ledger.records import fonts

    fonts.register()
    faces = {"BitstreamVeraSans-Roman": fonts.SANS, "BitstreamVeraSans-Bold": fonts.BOLD,
             "BitstreamVeraSans-Oblique": fonts.ITALIC,
             "BitstreamVeraSans-BoldOb": fonts.BOLD_ITALIC, "Helvetica": "Helvetica"}  # fmt: skip
    runs: list[list[Any]] = []

    def visit(text: str, cm: list[float], tm: list[float], fd: Any, size: float) -> None:
        if not text.strip() or fd is None:
            return
        m = _mul(tm, cm)
        key = tuple(round(v, 3) for v in m)
        face = faces[str(fd["/BaseFont"]).lstrip("/").split("+")[-1]]
        width = stringWidth(text.strip("\n"), face, size) * m[0]
        if runs and runs[-1][0] == key:
            runs[-1][2] += width
            runs[-1][3] += text
        else:
            runs.append([key, m[4], width, text])

    page.extract_text(visitor_text=visit)
    return runs


def text_spans(data: bytes) -> list[tuple[int, float, float, str]]:
    """(page, left x, right x, text) of every upright text run, in points.

    pypdf reports the text operations of one line at the line's start matrix, so runs with
    the same matrix form one span whose widths add up; widths come from the Vera faces the
    subset names point to. Rotated text (the draft watermark) is left out.
    """
    out: list[tuple[int, float, float, str]] = []
    for number, page in enumerate(reader(data).pages, start=1):
        out += [(number, x, x + w, t) for key, x, w, t in _page_runs(page)
                if abs(key[1]) < 1e-6 and abs(key[2]) < 1e-6]  # fmt: skip
    return out


def outside_margins(data: bytes) -> list[tuple[int, float, float, str]]:
    left, right = layout.MARGIN_X - 0.6, layout.PAGE_W - layout.MARGIN_X + 0.6
    return [s for s in text_spans(data) if s[1] < left or s[2] > right]


def _helvetica_pdf(x: float) -> bytes:
    """A bare reportlab page in the canvas's default font, with one text at ``x``."""
    from reportlab.pdfgen.canvas import Canvas  # type: ignore[import-untyped]

    buf = io.BytesIO()
    canv = Canvas(buf, invariant=1)
    canv.drawString(x, 400, "text in the default font that runs on")
    canv.showPage()
    canv.save()
    return buf.getvalue()


# --- fixtures ------------------------------------------------------------------------------


@pytest.fixture(scope="module")
def ctx() -> c.Context:
    return sample_context()


@pytest.fixture(scope="module")
def pdf(ctx: c.Context) -> bytes:
    return render(ctx, software_version=VERSION)


@pytest.fixture(scope="module")
def texts(pdf: bytes) -> list[str]:
    return page_texts(pdf)


@pytest.fixture(scope="module")
def text(texts: list[str]) -> str:
    return " ".join(texts)


@pytest.fixture(scope="module")
def long_pdf() -> bytes:
    return render(sample_context(checks=200, audit_rows=400), software_version=VERSION)


def _draft(ctx: c.Context) -> c.Context:
    return dataclasses.replace(ctx, header=dataclasses.replace(ctx.header, revision=0),
                               signatures=())  # fmt: skip


# --- the checkers themselves can fail --------------------------------------------------------


def test_font_checker_flags_a_standard_14_font() -> None:
    problems = font_problems(_helvetica_pdf(100))
    assert any("Helvetica" in p and "not TrueType" in p for p in problems)
    assert any("standard-14" in p for p in problems)


def test_margin_checker_flags_text_past_the_right_margin() -> None:
    assert outside_margins(_helvetica_pdf(100)) == []
    spans = outside_margins(_helvetica_pdf(450))
    assert spans and spans[0][2] > layout.PAGE_W - layout.MARGIN_X


# --- fonts -----------------------------------------------------------------------------------


def test_every_font_is_an_embedded_truetype_font(pdf: bytes, long_pdf: bytes) -> None:
    for data in (pdf, long_pdf, render(_draft(sample_context()), software_version=VERSION)):
        assert font_problems(data) == []
        resources: list[Any] = [p["/Resources"] for p in reader(data).pages]
        names = {str(f.get_object()["/BaseFont"]) for r in resources
                 for f in r["/Font"].values()}  # fmt: skip
        assert names and all("BitstreamVeraSans" in n for n in names)


# --- content ---------------------------------------------------------------------------------


def test_header_block_names_the_record_and_its_versions(ctx: c.Context, texts: list[str]) -> None:
    h = ctx.header
    find_in_order(texts[0], [
        f"Batch record {h.record_id}", f"Revision {h.revision}", h.revision_reason,
        "Product", h.product, "Lot", h.lot, "Status at issue", "in review",
        "Module serial", h.module_serial, "Module type", h.module_type, "Module area",
        h.module_area, "Cycle on module", str(h.cycle), "Template ID", h.template_id,
        "Template version", h.template_version, "Planned by", h.planned_by,
        "Planned at", "2026-11-28 09:00:00 +00:00", "Started", "2026-11-28 10:00:00 +00:00",
        "Finished", "2026-11-28 12:00:00 +00:00", "Submitted", "2026-11-28 13:00:00 +00:00",
        "Template title", h.template_title, "Template SHA-256", h.template_sha256,
        "Content SHA-256", ctx.sha256(), "Skid log", str(h.skid_log),
    ])  # fmt: skip


def test_override_reason_is_printed_when_there_is_one(ctx: c.Context) -> None:
    reason = "NWP recovery 78 % below the minimum; QA agreed for a development lot"
    other = dataclasses.replace(ctx, header=dataclasses.replace(ctx.header, override_reason=reason))
    assert reason in page_texts(render(other, software_version=VERSION))[0]
    assert reason not in page_texts(render(ctx, software_version=VERSION))[0]


def test_sections_come_in_the_planned_order(text: str) -> None:
    find_in_order(text, [
        "Batch record BR-000007", "Cautions", "Planned against actual",
        "Excursions outside planned ranges", "QC results against specifications",
        "Deviations and their closure", "Procedure steps", "Skid-log charts", "Module history",
        "Audit trail excerpt", "Assumptions behind the actuals", "Signatures for revision 2",
        "Signatures of other revisions",
    ])  # fmt: skip


def test_every_check_row_reads_title_planned_actual_rule_verdict(ctx: c.Context,
                                                                 text: str) -> None:  # fmt: skip
    part = between(text, "Planned against actual", "Excursions outside planned ranges")
    pos = 0
    for row in ctx.checks:
        deviation = f"no. {row.deviation}" if row.deviation else ""
        pos = find_in_order(part, [row.title, row.name, row.planned, row.actual, row.rule,
                                   row.verdict, deviation], pos)  # fmt: skip
    assert "24 checks: 1 FAIL, 1 MISSING, 22 PASS." in part
    assert "no skid log imported" in part  # the note of check 2


def test_excursions_qc_and_deviations_are_printed(ctx: c.Context, text: str) -> None:
    e = ctx.excursions[0]
    find_in_order(
        between(text, "Excursions outside", "QC results"),
        [e.check, e.channel, e.phase or "", e.start, e.duration, e.worst, e.limit],
    )
    qc = between(text, "QC results against", "Deviations and")
    find_in_order(qc, ["Particle size (Z-average)", "60–100 nm", "78 nm", "DLS", "op.brandt",
                       "2026-11-28 12:30:00 +00:00", "PASS", "pH", "7.0–7.8", "not entered",
                       "MISSING"])  # fmt: skip
    d = ctx.deviations[0]
    find_in_order(
        between(text, "Deviations and", "Procedure steps"),
        [
            str(d.number),
            str(d.check),
            d.description,
            str(d.impact),
            d.recorded_by,
            "closed by",
            str(d.closed_by),
            "2026-11-28 12:50:00 +00:00",
            str(d.closure),
        ],
    )


def test_an_open_deviation_reads_open(ctx: c.Context) -> None:
    d = dataclasses.replace(ctx.deviations[0], closed_by=None, closed_at=None, closure=None)
    data = render(dataclasses.replace(ctx, deviations=(d,)), software_version=VERSION)
    part = between(" ".join(page_texts(data)), "Deviations and", "Procedure steps")
    assert "OPEN" in part and "closed by" not in part


def test_cautions_always_include_the_site_caution(ctx: c.Context, text: str) -> None:
    part = between(text, "Cautions", "Planned against actual")
    assert c.SITE_CAUTION in part and c.CAUSTIC_CAUTION in part
    bare = render(dataclasses.replace(ctx, cautions=()), software_version=VERSION)
    assert c.SITE_CAUTION in between(" ".join(page_texts(bare)), "Cautions", "Planned against")


def test_caustic_caution_stands_beside_the_cleaning_step_only(ctx: c.Context, text: str) -> None:
    part = between(text, "Procedure steps", "Skid-log charts")
    flush = between(part, "Flush and equilibrate", "Diafilter into storage buffer")
    assert "caustic" not in flush
    # The cleaning row reads: title, text, the caution under them, then who signs. (The
    # sample is a context issued before version 3: one caustic caution for a cleaning step.)
    find_in_order(part, ["Clean after use", "Recirculate 0.5 mol/L NaOH", c.CAUSTIC_CAUTION,
                         "needs performed"])  # fmt: skip
    assert part.count(c.CAUSTIC_CAUTION) == 1
    cleanings = between(text, "Recent cleanings", "Audit trail excerpt")
    find_in_order(cleanings, [c.CAUSTIC_CAUTION, "NaOH", "0.5 mol/L", "25 °C", "60 min", "yes"])


def test_charts_section_names_the_series_and_what_was_drawn(text: str) -> None:
    part = between(text, "Skid-log charts", "Module history")
    find_in_order(part, ["TMP (bar)", "0:00", "1:30", "2:00", "time from start of log (h:mm)",
                         "concentrate", "diafilter", "concentrate_final",
                         "diafilter max 0.45 bar", "diafilter min 0.2 bar",
                         "400 time buckets (800 points drawn) from 7,200 samples",
                         "concentrate 0:00–0:40 · diafilter 0:40–1:20",
                         "Permeate flux (LMH)", "Retentate volume (L)"])  # fmt: skip


def test_plain_table_record_omits_the_charts(ctx: c.Context, pdf: bytes) -> None:
    plain = render(ctx, software_version=VERSION, charts=False)
    text = " ".join(page_texts(plain))
    assert "Charts omitted from this print" in text
    assert "diafilter max 0.45 bar" not in text and "alert 90 %" not in text
    assert len(plain) < len(pdf)
    assert "Charts omitted" not in " ".join(page_texts(pdf))


def test_module_history_excerpt(ctx: c.Context, text: str) -> None:
    part = between(text, "Module history", "Audit trail excerpt")
    find_in_order(part, ["Cycles completed: 5 of a reuse limit of 50",
                         "minimum 80 %, alert below 90 %", "Recent cycles", "QB117-26-001",
                         "QB117-26-005", "this run", "NWP recovery after cleaning",
                         "cycles completed", "minimum 80 %", "alert 90 %", "pass alert fail",
                         "620 LMH/bar at 20 °C", "100.0 %", "pass", "584 LMH/bar at 20 °C",
                         "88.0 %", "alert", "Last integrity test", "pressure decay",
                         "0.52 mbar/min", "≤ 1.2 mbar/min", "passed"])  # fmt: skip


def test_audit_excerpt_lists_every_event(ctx: c.Context, text: str) -> None:
    part = between(text, "Audit trail excerpt", "Assumptions behind")
    pos = 0
    for a in ctx.audit:
        pos = find_in_order(part, [str(a.seq), "2026-11-28 12:00:00 +00:00", a.actor, a.action,
                                   f"{a.entity} {a.entity_id}", str(a.field), str(a.old),
                                   str(a.new), str(a.reason)], pos)  # fmt: skip


def test_assumptions_are_printed(ctx: c.Context, text: str) -> None:
    assert ctx.assumptions[0] in between(text, "Assumptions behind", "Signatures for")


# --- signatures ------------------------------------------------------------------------------


def test_signature_of_this_revision_is_printed_in_full(ctx: c.Context, text: str) -> None:
    part = between(text, "Signatures for revision 2", "Signatures of other revisions")
    sig = next(s for s in ctx.signatures if s.revision == 2)
    find_in_order(part, ["Performed — signed for revision 2", "Printed name", sig.full_name,
                         "User ID", sig.login, "Role", sig.role, "Signed at",
                         "2026-11-29 09:05:00 +00:00", "Meaning", sig.meaning,
                         "Revision SHA-256", sig.revision_sha256])  # fmt: skip
    # The sample's signature carries a made-up hash, so the record says it does not match.
    assert "does NOT match the content SHA-256 of this revision" in part


def test_unsigned_meanings_show_empty_blocks_with_their_roles(ctx: c.Context, text: str) -> None:
    part = between(text, "Signatures for revision 2", "Signatures of other revisions")
    pos = 0
    for meaning in ("verified", "reviewed", "approved"):
        roles = ", ".join(ctx.signature_roles[meaning])
        pos = find_in_order(part, [f"{meaning.capitalize()} — not signed", "May be signed by",
                                   roles, "none for revision 2"], pos)  # fmt: skip
    assert part.count("not signed") == 3


def test_earlier_revision_signatures_are_listed_apart_and_not_counted(
    ctx: c.Context, text: str
) -> None:
    old = next(s for s in ctx.signatures if s.revision == 1)
    current = between(text, "Signatures for revision 2", "Signatures of other revisions")
    assert old.revision_sha256 not in current and "2026-11-28 13:05:00 +00:00" not in current
    others = between(text, "Signatures of other revisions", None)
    find_in_order(others, ["Revision 1", "belongs to revision 1, not counted for revision 2",
                           old.full_name, old.login, "2026-11-28 13:05:00 +00:00",
                           old.meaning, old.revision_sha256])  # fmt: skip


def test_a_signature_over_the_content_hash_reads_as_matching(ctx: c.Context) -> None:
    good = c.SignatureRow(20, 2, "reviewed", "eng.lindqvist", "Maja Lindqvist", "engineer",
                          "2026-11-29T10:00:00+01:00", ctx.sha256())  # fmt: skip
    data = render(ctx.with_signatures((*ctx.signatures, good)), software_version=VERSION)
    part = between(" ".join(page_texts(data)), "Signatures for revision 2", "Signatures of other")
    find_in_order(part, ["Reviewed — signed for revision 2", "Maja Lindqvist",
                         "2026-11-29 10:00:00 +01:00", "reviewed", ctx.sha256(),
                         "matches the content SHA-256 of this revision"])  # fmt: skip
    assert part.count("not signed") == 2


def test_hash_is_on_one_line_in_one_run(ctx: c.Context, pdf: bytes) -> None:
    runs = [t.strip() for _, _, _, t in text_spans(pdf)]
    for sig in ctx.signatures:
        assert sig.revision_sha256 in runs


# --- every page ------------------------------------------------------------------------------


def test_every_page_carries_the_footer(ctx: c.Context, texts: list[str]) -> None:
    short = ctx.sha256()[:12]
    foot = (f"BR-000007 · revision 2 · content {short} · template QB-MR-LNP-101 version 4 · "
            f"fluxledger {VERSION}")  # fmt: skip
    assert len(texts) >= 3
    for i, t in enumerate(texts, start=1):
        assert foot in t
        assert f"page {i} of {len(texts)}" in t
        assert c.TRUE_COPY in t
        assert "DRAFT" not in t


def test_draft_is_marked_on_every_page(ctx: c.Context) -> None:
    texts = page_texts(render(_draft(ctx), software_version=VERSION))
    assert all("DRAFT" in t for t in texts)
    assert "printed before the run was submitted" in texts[0]
    assert all("revision 0" in t for t in texts)


def test_long_tables_split_with_their_heading_repeated(long_pdf: bytes) -> None:
    texts = page_texts(long_pdf)
    check_head = "Check Phase Planned Actual Rule Verdict Deviation"
    audit_head = "Seq At Actor Action Record Field Old New Reason"
    assert sum(check_head in t for t in texts) >= 3
    assert sum(audit_head in t for t in texts) >= 3
    text = " ".join(texts)
    pos = 0
    for i in range(200):  # nothing lost where the table breaks
        pos = find_in_order(text, [f"Parameter number {i} with a long descriptive title"], pos)
    pos = text.index("Audit trail excerpt")
    for seq in range(100, 500):
        pos = find_in_order(text, [f"{seq} 2026-11-28 12:00:00 +00:00"], pos)
    assert all(f"page {i} of {len(texts)}" in t for i, t in enumerate(texts, start=1))


@pytest.mark.slow
def test_nothing_runs_past_the_margins(pdf: bytes, long_pdf: bytes, ctx: c.Context) -> None:
    assert outside_margins(pdf) == []
    assert outside_margins(long_pdf) == []
    # A title without a space to break at, a long rule and a long audit value still wrap.
    row = dataclasses.replace(ctx.checks[0], title="X" * 180, rule="within " + "9" * 90)
    audit = dataclasses.replace(ctx.audit[0], new='"' + "n" * 150 + '"')
    wide = dataclasses.replace(ctx, checks=(row, *ctx.checks[1:]), audit=(audit,))
    assert outside_margins(render(wide, software_version=VERSION)) == []


def test_missing_glyphs_are_written_as_code_points(ctx: c.Context) -> None:
    step = dataclasses.replace(ctx.steps[0], text="Keep ΔP ≤ 0.2 bar → then ✓ the valve.")
    data = render(dataclasses.replace(ctx, steps=(step, *ctx.steps[1:])),
                  software_version=VERSION)  # fmt: skip
    assert "Keep ∆P ≤ 0.2 bar -> then [U+2713] the valve." in " ".join(page_texts(data))


# --- determinism, size, stamp ------------------------------------------------------------------


def test_same_context_same_bytes(ctx: c.Context, pdf: bytes) -> None:
    assert render(ctx, software_version=VERSION) == pdf
    assert render(ctx, software_version="9.9.10") != pdf


_CHILD = """
import hashlib, sys
sys.path.insert(0, {root!r})
from tests.records.sample import sample_context
from ledger.records.pdf import render
print(hashlib.sha256(render(sample_context(), software_version={version!r})).hexdigest())
"""


def test_same_bytes_in_a_fresh_process(pdf: bytes) -> None:
    env = {**os.environ, "PYTHONHASHSEED": "12345"}
    out = subprocess.run([sys.executable, "-c", _CHILD.format(root=str(ROOT), version=VERSION)],
                         capture_output=True, text=True, check=True, cwd=ROOT, env=env)  # fmt: skip
    assert out.stdout.strip() == hashlib.sha256(pdf).hexdigest()


def test_page_streams_are_compressed(pdf: bytes) -> None:
    for page in reader(pdf).pages:
        contents: Any = page["/Contents"].get_object()
        assert "/FlateDecode" in str(contents.get("/Filter"))


def test_a_day_long_record_stays_small() -> None:
    data = render(sample_context(log_seconds=86400), software_version=VERSION)
    assert len(data) < 400_000
    assert "from 86,400 samples" in " ".join(page_texts(data))


def test_stamp_round_trip(ctx: c.Context, pdf: bytes) -> None:
    assert stamp_of(pdf) == {"record": "BR-000007", "revision": "2", "sha256": ctx.sha256(),
                             "signatures": "11,14", "software": VERSION}  # fmt: skip
    meta = reader(pdf).metadata
    assert meta is not None
    assert meta.title == "Batch record BR-000007 revision 2"
    assert str(meta["/Keywords"]) == keywords(ctx, ctx.sha256(), VERSION)
    assert str(meta["/Keywords"]) == (
        f"fluxledger-record;record=BR-000007;revision=2;"
        f"sha256={ctx.sha256()};signatures=11,14;software={VERSION}"
    )


def test_stamp_survives_escapes_and_empty_signatures(ctx: c.Context) -> None:
    odd = "1.0 (dev) \\ build"
    data = render(ctx.with_signatures(()), software_version=odd)
    assert b"\\(dev\\)" in data  # written escaped, read back plain
    stamp = stamp_of(data)
    assert stamp is not None
    assert stamp["software"] == odd and stamp["signatures"] == ""


@pytest.mark.parametrize("raw", [
    b"%PDF-1.4 no info here",
    b"/Keywords (something else;record=1)",
    b"/Keywords (fluxledger-record;record=1;record=2)",
    b"/Keywords (fluxledger-record;norecord)",
])  # fmt: skip
def test_stamp_of_refuses_what_is_not_a_stamp(raw: bytes) -> None:
    assert stamp_of(raw) is None


def test_stamp_of_takes_the_first_keywords() -> None:
    raw = b"/Keywords (fluxledger-record;record=A\\051;revision=1) /Keywords (other)"
    assert stamp_of(raw) == {"record": "A)", "revision": "1"}


# --- write_atomic ----------------------------------------------------------------------------


def test_write_atomic_replaces_the_file_and_leaves_no_temporary(tmp_path: Path) -> None:
    target = tmp_path / "BR-000007-r2.pdf"
    target.write_bytes(b"old")
    write_atomic(target, b"%PDF new")
    assert target.read_bytes() == b"%PDF new"
    assert [p.name for p in tmp_path.iterdir()] == [target.name]


def test_write_atomic_keeps_the_old_file_when_the_rename_fails(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    target = tmp_path / "record.pdf"
    target.write_bytes(b"old")

    def fail(src: object, dst: object) -> None:
        raise OSError("disk gone")

    monkeypatch.setattr(os, "replace", fail)
    with pytest.raises(OSError, match="disk gone"):
        write_atomic(target, b"new")
    assert target.read_bytes() == b"old"
    assert [p.name for p in tmp_path.iterdir()] == ["record.pdf"]
