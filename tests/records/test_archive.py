"""The archive copy (ledger.records.archive): PDF/A-3b with the record's JSON attached.

What PDF/A-3b asks is ISO 19005-3:2012 (recalled from memory, by clause): §6.6.2 XMP with
pdfaid:part 3 and conformance B, document info agreeing with XMP; §6.2.3 an output intent
with an ICC profile; §6.2.11 fonts embedded; §6.8 embedded files as associated files (/AF,
/AFRelationship, MIME type, /Params /ModDate); §6.1.3 the trailer /ID, no encryption; §6.6.1
no JavaScript or forbidden action; §6.2.10 transparency and blend modes; §6.1.7 no LZW.
The readers used here as outside parsers are pypdf (attachments, XMP) and pikepdf's own XMP
model; pikepdf.pdfa (whose rules are veraPDF's profiles) is a second validator where present.
Each check of ``pdfa_problems`` is shown failing on a PDF built to break it.
"""

from __future__ import annotations

import io
import json
from collections.abc import Callable
from datetime import UTC, datetime
from pathlib import Path

import pikepdf
import pytest
from pikepdf import Array, Dictionary, Name, String
from pypdf import PdfReader

from ledger.records import archive
from ledger.records.context import content_sha256
from ledger.records.copies import APPROVED, Copy
from ledger.records.pdf import render, stamp_of
from tests.records.sample import sample_context
from tests.world import World

ISSUED = datetime(2026, 11, 3, 10, 0, 7, tzinfo=UTC)
TITLE = "Batch record BR-000007 revision 2"
COPY = Copy(4, APPROVED, ("performed", "verified", "reviewed", "approved"), "archive")


@pytest.fixture(scope="module")
def plain() -> bytes:
    return render(sample_context(log_seconds=1800), software_version="0.test", issued=ISSUED,
                  copy=COPY)  # fmt: skip


@pytest.fixture(scope="module")
def made(plain: bytes) -> bytes:
    ctx = sample_context(log_seconds=1800)
    return archive.to_pdfa(plain, archive.record_json(ctx), title=TITLE, issued=ISSUED,
                           software="0.test")  # fmt: skip


def _edit(data: bytes, change: Callable[[pikepdf.Pdf], None], **save: object) -> bytes:
    with pikepdf.open(io.BytesIO(data)) as pdf:
        change(pdf)
        out = io.BytesIO()
        pdf.save(out, object_stream_mode=pikepdf.ObjectStreamMode.disable,
                 fix_metadata_version=False, preserve_pdfa=False, **save)  # type: ignore[arg-type]  # fmt: skip
        return out.getvalue()


def _xmp(pdf: pikepdf.Pdf, old: bytes, new: bytes) -> None:
    meta = pdf.Root.Metadata
    data = meta.read_bytes()
    assert old in data
    meta.write(data.replace(old, new))


# --- the archive itself --------------------------------------------------------------------


def test_the_archive_passes_every_check_the_plain_print_does_not(plain: bytes, made: bytes) -> None:
    assert archive.pdfa_problems(made) == []
    problems = archive.pdfa_problems(plain)
    assert any("no XMP metadata" in p for p in problems), problems
    assert any("no PDF/A output intent" in p for p in problems), problems


def test_same_inputs_give_the_same_bytes_and_another_date_other_bytes(
    plain: bytes, made: bytes
) -> None:
    ctx = sample_context(log_seconds=1800)
    again = archive.to_pdfa(plain, archive.record_json(ctx), title=TITLE, issued=ISSUED,
                            software="0.test")  # fmt: skip
    assert again == made
    later = archive.to_pdfa(plain, archive.record_json(ctx), title=TITLE,
                            issued=ISSUED.replace(second=8), software="0.test")  # fmt: skip
    assert later != made
    assert archive.srgb_profile() == archive.srgb_profile()


def test_the_pages_are_the_print_s_pages_and_the_stamp_reads_back(
    plain: bytes, made: bytes
) -> None:
    with pikepdf.open(io.BytesIO(plain)) as a, pikepdf.open(io.BytesIO(made)) as b:
        assert len(a.pages) == len(b.pages) > 1
        for pa, pb in zip(a.pages, b.pages, strict=True):
            assert pa.obj.Contents.read_bytes() == pb.obj.Contents.read_bytes()
            assert list(pa.mediabox) == list(pb.mediabox)
    texts = [[p.extract_text() for p in PdfReader(io.BytesIO(d)).pages] for d in (plain, made)]
    assert texts[0] == texts[1]
    # Keywords stay readable from the raw bytes, without a PDF parser.
    assert stamp_of(made) == stamp_of(plain)
    assert stamp_of(made) is not None and stamp_of(made)["copy"] == "4"  # type: ignore[index]
    assert archive.is_archive(made) and not archive.is_archive(plain)


def test_xmp_and_document_info_agree_read_by_outside_parsers(made: bytes) -> None:
    with pikepdf.open(io.BytesIO(made)) as pdf:
        meta = pdf.open_metadata()  # pikepdf's own XMP model, not our reader
        assert (meta["pdfaid:part"], meta["pdfaid:conformance"]) == ("3", "B")
        assert meta["dc:title"] == TITLE
        assert datetime.fromisoformat(meta["xmp:CreateDate"]) == ISSUED
        assert datetime.fromisoformat(meta["xmp:ModifyDate"]) == ISSUED
        assert meta["pdf:Producer"] == str(pdf.docinfo.Producer)
        assert str(pdf.docinfo.CreationDate) == "D:20261103100007+00'00'"
        assert pdf.pdf_version >= "1.7" and not pdf.is_encrypted
        assert len(pdf.trailer.ID) == 2
        intent = pdf.Root.OutputIntents[0]
        assert intent.S == Name.GTS_PDFA1 and intent.DestOutputProfile.N == 3
    reader = PdfReader(io.BytesIO(made))
    xmp = reader.xmp_metadata
    assert xmp is not None and xmp.dc_title == {"x-default": TITLE}


def test_the_output_intent_profile_is_srgb_by_pillow() -> None:
    from PIL import ImageCms

    data = archive.srgb_profile()
    profile = ImageCms.ImageCmsProfile(io.BytesIO(data))
    assert profile.profile.xcolor_space == "RGB "  # ICC.1 §7.2.6: data colour space
    assert "sRGB" in ImageCms.getProfileDescription(profile)
    assert data[36:40] == b"acsp"  # ICC.1 §7.2.9: profile file signature


def test_a_second_validator_approves_the_archive(made: bytes, tmp_path: Path) -> None:
    pytest.importorskip("jsonschema", reason="pikepdf.pdfa needs pikepdf[pdfa]")
    pdfa = pytest.importorskip("pikepdf.pdfa")
    path = tmp_path / "archive.pdf"
    path.write_bytes(made)
    report = pdfa.validate_written(path, "3b")
    assert report.passed, report.summary()
    other = tmp_path / "plain.pdf"
    other.write_bytes(render(sample_context(log_seconds=600), software_version="0.test"))
    assert not pdfa.validate_written(other, "3b").passed


# --- a real record -------------------------------------------------------------------------


def test_the_archive_of_an_approved_record_carries_its_json_and_signatures(
    approved_sqlite: World,
) -> None:
    from sqlmodel import Session

    from ledger import __version__
    from ledger.records.copies import meanings_of
    from ledger.records.service import approved_record

    with Session(approved_sqlite.engine()) as s:
        issued = approved_record(s, 1)
        assert issued.revision is not None
        copy = Copy(7, APPROVED, meanings_of(issued), "archive")
        data = archive.archive_copy(issued, copy, software_version=__version__)
        sha = issued.revision.sha256
        as_of = issued.revision.as_of.astimezone(UTC)
        ctx = issued.context
    assert archive.pdfa_problems(data) == []
    reader = PdfReader(io.BytesIO(data))
    attached = reader.attachments
    assert list(attached) == [archive.ATTACHMENT]
    (body,) = attached[archive.ATTACHMENT]
    assert body == archive.record_json(ctx)
    record = json.loads(body)
    assert [s["id"] for s in record["signatures"]] == [s.id for s in ctx.signatures]
    assert {s["meaning"] for s in record["signatures"]} >= set(ctx.required_signatures)
    # Without its signatures the attachment is the content the signatures bind to.
    del record["signatures"]
    assert content_sha256(record) == sha
    stamp = stamp_of(data)
    assert stamp is not None and stamp["sha256"] == sha and stamp["copy"] == "7"
    spec = reader.trailer["/Root"]["/AF"][0].get_object()
    assert spec["/AFRelationship"] == "/Data" and spec["/UF"] == archive.ATTACHMENT
    embedded = spec["/EF"]["/F"].get_object()
    assert embedded["/Subtype"] == "/application/json"
    assert embedded["/Params"]["/ModDate"] == as_of.strftime("D:%Y%m%d%H%M%S+00'00'")


def test_a_draft_is_never_archived() -> None:
    from ledger.records.service import Issued

    with pytest.raises(ValueError, match="draft"):
        archive.archive_copy(Issued(None, sample_context(log_seconds=600)), COPY,
                             software_version="0.test")  # fmt: skip


# --- every check fails on a PDF built to break it -----------------------------------------


def _helvetica_record() -> bytes:
    """A page drawn in reportlab's default font, Helvetica: a standard-14 font, not embedded."""
    from reportlab.pdfgen import canvas

    buf = io.BytesIO()
    c = canvas.Canvas(buf, invariant=1)
    c.drawString(72, 720, "Batch record BR-000042 (test document)")
    c.showPage()
    c.save()
    return archive.to_pdfa(buf.getvalue(), b"{}", title="test", issued=ISSUED, software="0.test")


def _helvetica(pdf: pikepdf.Pdf) -> Dictionary:
    return pdf.make_indirect(Dictionary(Type=Name.Font, Subtype=Name.Type1,
                                        BaseFont=Name.Helvetica))  # fmt: skip


def _form_with_helvetica(pdf: pikepdf.Pdf) -> None:
    form = pdf.make_stream(b"BT /H 9 Tf (x) Tj ET", Type=Name.XObject, Subtype=Name.Form,
                           BBox=[0, 0, 10, 10],
                           Resources=Dictionary(Font=Dictionary(H=_helvetica(pdf))))  # fmt: skip
    res = pdf.pages[0].obj.Resources
    res.XObject = Dictionary(Fx=form)


def _annotation_with_helvetica(pdf: pikepdf.Pdf) -> None:
    look = pdf.make_stream(b"BT /H 9 Tf (x) Tj ET", Type=Name.XObject, Subtype=Name.Form,
                           BBox=[0, 0, 10, 10],
                           Resources=Dictionary(Font=Dictionary(H=_helvetica(pdf))))  # fmt: skip
    annot = Dictionary(Type=Name.Annot, Subtype=Name.Square, Rect=[0, 0, 10, 10], F=4,
                       AP=Dictionary(N=look))  # fmt: skip
    pdf.pages[0].obj.Annots = pdf.make_indirect(Array([pdf.make_indirect(annot)]))


def _spec(pdf: pikepdf.Pdf) -> Dictionary:
    return pdf.Root.AF[0]


def _no_mod_date(pdf: pikepdf.Pdf) -> None:
    del _spec(pdf).EF.F.Params["/ModDate"]


def _no_mime(pdf: pikepdf.Pdf) -> None:
    del _spec(pdf).EF.F["/Subtype"]


def _graphics_state(pdf: pikepdf.Pdf, **entries: object) -> None:
    res = pdf.pages[0].obj.Resources
    res.ExtGState = Dictionary(Gx=pdf.make_indirect(Dictionary(Type=Name.ExtGState, **entries)))


def _lzw(pdf: pikepdf.Pdf) -> None:
    # LZW of the empty string (ISO 32000-1 §7.4.4): clear-table code, then end-of-data.
    stream = pdf.make_stream(b"", Type=Name.XObject, Subtype=Name.Form, BBox=[0, 0, 1, 1])
    stream.write(b"\x80\x40\x40", filter=Name.LZWDecode)  # already encoded
    pdf.pages[0].obj.Resources.XObject = Dictionary(Lz=stream)


def _cmyk(pdf: pikepdf.Pdf) -> None:
    page = pdf.pages[0]
    page.contents_add(pdf.make_stream(b"0 0 0 1 k 0 0 5 5 re f"), prepend=False)


def _transparent_without_intent(pdf: pikepdf.Pdf) -> None:
    _graphics_state(pdf, ca=0.5)
    del pdf.Root["/OutputIntents"]


BREAKERS: dict[str, tuple[Callable[[bytes], bytes], str]] = {
    "pdfaid part": (lambda d: _edit(d, lambda p: _xmp(p, b"part>3<", b"part>2<")),
                    "pdfaid:part is '2'"),
    "pdfaid conformance": (lambda d: _edit(d, lambda p: _xmp(p, b"conformance>B<",
                                                             b"conformance>U<")),
                           "pdfaid:conformance is 'U'"),
    "XMP not XML": (lambda d: _edit(d, lambda p: p.Root.Metadata.write(b"<x:xmpmeta")),
                    "not well-formed XML"),
    "no XMP": (lambda d: _edit(d, lambda p: p.Root.__delitem__("/Metadata")),
               "no XMP metadata"),
    "ModDate disagrees": (lambda d: _edit(d, lambda p: setattr(
        p.docinfo, "ModDate", String("D:20261103110007+00'00'"))), "ModDate"),
    "CreationDate another instant": (lambda d: _edit(d, lambda p: setattr(
        p.docinfo, "CreationDate", String("D:20261103110007+02'00'"))), "CreationDate"),
    "Title disagrees": (lambda d: _edit(d, lambda p: setattr(p.docinfo, "Title",
                                                             String("other"))), "Title"),
    "no output intent": (lambda d: _edit(d, lambda p: p.Root.__delitem__("/OutputIntents")),
                         "no PDF/A output intent"),
    "intent without profile": (lambda d: _edit(d, lambda p: p.Root.OutputIntents[0]
                                               .__delitem__("/DestOutputProfile")),
                               "has no ICC profile"),
    "profile N 4": (lambda d: _edit(d, lambda p: setattr(
        p.Root.OutputIntents[0].DestOutputProfile, "N", 4)), "/N 4"),
    "Helvetica by reportlab's default": (lambda d: _helvetica_record(), "is not embedded"),
    "Helvetica in a form XObject": (lambda d: _edit(d, _form_with_helvetica),
                                    "form /Fx) is not embedded"),
    "Helvetica in an annotation appearance": (lambda d: _edit(d, _annotation_with_helvetica),
                                              "appearance /N) is not embedded"),
    "font file removed": (lambda d: _edit(d, lambda p: [
        f.FontDescriptor.__delitem__("/FontFile2") for f in p.pages[0].Resources.Font.values()
    ]), "is not embedded"),
    "encrypted": (lambda d: _edit(d, lambda p: None,
                                  encryption=pikepdf.Encryption(owner="owner-9", user="")),
                  "the file is encrypted"),
    "no AFRelationship": (lambda d: _edit(d, lambda p: _spec(p).__delitem__("/AFRelationship")),
                          "has no /AFRelationship"),
    "not in /AF": (lambda d: _edit(d, lambda p: p.Root.__setitem__("/AF", Array())),
                   "not listed in the catalog's /AF"),
    "no UF": (lambda d: _edit(d, lambda p: _spec(p).__delitem__("/UF")), "lacks /F or /UF"),
    "no ModDate": (lambda d: _edit(d, _no_mod_date), "/Params /ModDate"),
    "no MIME type": (lambda d: _edit(d, _no_mime), "no MIME type"),
    "JavaScript open action": (lambda d: _edit(d, lambda p: p.Root.__setitem__(
        "/OpenAction", Dictionary(S=Name.JavaScript, JS=String("app.alert(1)")))), "JavaScript"),
    "JavaScript name tree": (lambda d: _edit(d, lambda p: p.Root.Names.__setitem__(
        "/JavaScript", Dictionary(Names=Array()))), "(/Names /JavaScript)"),
    "launch action on a page": (lambda d: _edit(d, lambda p: p.pages[0].obj.__setitem__(
        "/AA", Dictionary(O=Dictionary(Type=Name.Action, S=Name.Launch, F=String("x.exe"))))),
        "forbidden action /Launch"),
    "catalog additional actions": (lambda d: _edit(d, lambda p: p.Root.__setitem__(
        "/AA", Dictionary())), "the catalog has additional actions"),
    "blend mode": (lambda d: _edit(d, lambda p: _graphics_state(p, BM=Name("/Dodgy"))),
                   "blend mode /Dodgy"),
    "transfer function": (lambda d: _edit(d, lambda p: _graphics_state(p, TR=Name.Identity)),
                          "transfer function (/TR)"),
    "halftone phase": (lambda d: _edit(d, lambda p: _graphics_state(p, HTP=[0, 0])),
                       "halftone phase"),
    "transparency without an intent": (lambda d: _edit(d, _transparent_without_intent),
                                       "transparency without an output intent"),
    "LZW filter": (lambda d: _edit(d, _lzw, stream_decode_level=pikepdf.StreamDecodeLevel.none,
                                   compress_streams=False), "LZWDecode filter"),
    "DeviceCMYK paint": (lambda d: _edit(d, _cmyk), "DeviceCMYK (k/K)"),
    "no trailer ID": (lambda d: d.replace(b"/ID [", b"/XD ["), "the trailer has no /ID"),
    "no binary comment": (lambda d: d[:9] + b"%abcd" + d[14:],
                          "comment of four bytes above 127"),
    "data after EOF": (lambda d: d + b"\nappended\n", "data follows the last %%EOF"),
}  # fmt: skip


@pytest.mark.parametrize("name", list(BREAKERS))
def test_each_check_fails_on_a_pdf_built_to_break_it(made: bytes, name: str) -> None:
    breaker, expected = BREAKERS[name]
    broken = breaker(made)
    assert broken != made
    problems = archive.pdfa_problems(broken)
    assert any(expected in p for p in problems), (name, problems)


def test_dates_are_compared_as_instants(made: bytes) -> None:
    # 12:00:07 at +02:00 is 10:00:07 UTC, the XMP date: the same instant in another zone.
    same = _edit(made, lambda p: setattr(p.docinfo, "CreationDate",
                                         String("D:20261103120007+02'00'")))  # fmt: skip
    assert archive.pdfa_problems(same) == []
