"""The archive copy of an approved batch record: PDF/A-3b with the record's JSON attached.

``to_pdfa`` turns the record's PDF (``ledger.records.pdf.render``) into a PDF/A-3b file
(ISO 19005-3:2012, level B): XMP metadata that identifies it and repeats the document info,
an sRGB output intent, and the record's machine-readable JSON embedded as ``record.json`` and
declared an associated file of the document (/AF, /AFRelationship /Data). The pages are not
touched, so the archive looks exactly like a print of the same copy. The file is saved
without object streams, so the document info's Keywords stay readable by
``ledger.records.pdf.stamp_of``, and with an /ID computed from the content, so the same
inputs give the same bytes and ``record verify`` can rebuild it.

``pdfa_problems`` checks what can be checked without a full validator (XMP identification,
output intent, embedded fonts, associated files, dates, actions, transparency and filters);
it is our own check, not a conformance certificate: bench/pdfa_validate.sh runs a real
validator on a demo archive.

pikepdf and Pillow are imported inside the functions: logbook commands must start fast.
"""

from __future__ import annotations

import hashlib
import io
import re
import xml.etree.ElementTree as ET
from collections.abc import Iterator
from datetime import UTC, datetime
from typing import TYPE_CHECKING, Any
from xml.sax.saxutils import escape

from ledger.canonical import canonical
from ledger.records.context import Context, to_record
from ledger.records.pdf import pdf_date, render

if TYPE_CHECKING:
    from ledger.records.copies import Copy
    from ledger.records.service import Issued

ATTACHMENT = "record.json"
MIME = "application/json"
ATTACHMENT_DESCRIPTION = (
    "The batch record revision as canonical JSON (sorted keys, UTF-8): its content, whose "
    "SHA-256 without 'signatures' is the revision hash the signatures bind to, and the "
    "signatures"
)
OUTPUT_CONDITION = "sRGB IEC61966-2.1"
# The ICC profile's header date (ICC.1:2010 §7.2.1). LittleCMS stamps the clock there; a
# fixed date keeps the profile, and so every archive, the same bytes from run to run.
ICC_DATE = (2026, 1, 1, 0, 0, 0)
# Where the archive says it is one (ISO 19005-3 §6.6.4); ``record verify`` looks for it.
PDFA_MARK = b"pdfaid:part"

_NS = {
    "x": "adobe:ns:meta/",
    "rdf": "http://www.w3.org/1999/02/22-rdf-syntax-ns#",
    "dc": "http://purl.org/dc/elements/1.1/",
    "xmp": "http://ns.adobe.com/xap/1.0/",
    "pdf": "http://ns.adobe.com/pdf/1.3/",
    "pdfaid": "http://www.aiim.org/pdfa/ns/id/",
}
# ISO 32000-1 §11.3.5, Table 136: the blend modes PDF/A-2 and -3 allow (ISO 19005-3 §6.2.10).
BLEND_MODES = frozenset((
    "/Normal", "/Compatible", "/Multiply", "/Screen", "/Overlay", "/Darken", "/Lighten",
    "/ColorDodge", "/ColorBurn", "/HardLight", "/SoftLight", "/Difference", "/Exclusion",
    "/Hue", "/Saturation", "/Color", "/Luminosity",
))  # fmt: skip
# ISO 19005-3 §6.6.1: actions a PDF/A file may not hold.
FORBIDDEN_ACTIONS = frozenset((
    "/Launch", "/Sound", "/Movie", "/ResetForm", "/ImportData", "/Hide", "/SetOCGState",
    "/Rendition", "/Trans", "/GoTo3DView", "/JavaScript",
))  # fmt: skip
FONT_FILES = ("/FontFile", "/FontFile2", "/FontFile3")


# --- building the archive ------------------------------------------------------------------


def record_json(ctx: Context) -> bytes:
    """The record's machine-readable form: the context with its signatures
    (``context.to_record``) as canonical JSON, UTF-8. Without ``signatures`` it is the
    content whose SHA-256 is the revision hash."""
    return canonical(to_record(ctx)).encode()


def srgb_profile() -> bytes:
    """An sRGB ICC profile (LittleCMS through Pillow) with a fixed header date."""
    from PIL import ImageCms

    data = bytearray(ImageCms.ImageCmsProfile(ImageCms.createProfile("sRGB")).tobytes())
    # ICC.1 §7.2.1: dateTimeNumber at bytes 24-35, six big-endian uInt16; the profile ID
    # (bytes 84-99) is zero, "not computed", so nothing else depends on these bytes.
    data[24:36] = b"".join(n.to_bytes(2, "big") for n in ICC_DATE)
    return bytes(data)


def _xmp_date(at: datetime) -> str:
    return at.astimezone(UTC).strftime("%Y-%m-%dT%H:%M:%S+00:00")


def _xmp(info: dict[str, str], title: str, issued: datetime) -> bytes:
    """The XMP packet: PDF/A-3B identification and the document info's values again."""

    def el(name: str, value: str) -> str:
        return f"<{name}>{escape(value)}</{name}>"

    def alt(name: str, value: str) -> str:
        return (f'<{name}><rdf:Alt><rdf:li xml:lang="x-default">{escape(value)}</rdf:li>'
                f"</rdf:Alt></{name}>")  # fmt: skip

    body = [
        el("pdfaid:part", "3"),
        el("pdfaid:conformance", "B"),
        alt("dc:title", title),
        el("dc:format", "application/pdf"),
        el("xmp:CreateDate", _xmp_date(issued)),
        el("xmp:ModifyDate", _xmp_date(issued)),
        el("xmp:MetadataDate", _xmp_date(issued)),
        el("pdf:Producer", info["/Producer"]),
    ]
    if "/Author" in info:
        body.append(f"<dc:creator><rdf:Seq><rdf:li>{escape(info['/Author'])}</rdf:li>"
                    "</rdf:Seq></dc:creator>")  # fmt: skip
    if "/Subject" in info:
        body.append(alt("dc:description", info["/Subject"]))
    if "/Creator" in info:
        body.append(el("xmp:CreatorTool", info["/Creator"]))
    if "/Keywords" in info:
        body.append(el("pdf:Keywords", info["/Keywords"]))
    namespaces = " ".join(f'xmlns:{k}="{v}"' for k, v in _NS.items() if k not in ("x", "rdf"))
    text = (
        '<?xpacket begin="\ufeff" id="W5M0MpCehiHzreSzNTczkc9d"?>\n'
        f'<x:xmpmeta xmlns:x="{_NS["x"]}">\n'
        f'<rdf:RDF xmlns:rdf="{_NS["rdf"]}">\n'
        f'<rdf:Description rdf:about="" {namespaces}>\n'
        + "\n".join(body)
        + "\n</rdf:Description>\n</rdf:RDF>\n</x:xmpmeta>\n"
        # Room for an editor to change the packet in place (XMP Part 1 §7.3.3).
        + (" " * 99 + "\n") * 20
        + '<?xpacket end="w"?>'
    )
    return text.encode()


def to_pdfa(pdf: bytes, record_json: bytes, *, title: str, issued: datetime,
            software: str) -> bytes:  # fmt: skip
    """``pdf`` (a fluxledger record, fonts embedded) as PDF/A-3b with ``record_json``
    attached as ``record.json`` (application/json, AFRelationship /Data). ``issued`` dates
    the document (info and XMP alike, to the second, UTC) and the attachment; ``title`` is
    the document title; ``software`` the fluxledger version that made it. Same inputs, same
    bytes."""
    import pikepdf
    from pikepdf import Array, Dictionary, Name, String

    date = pdf_date(issued)
    with pikepdf.open(io.BytesIO(pdf)) as doc:
        root = doc.Root
        for page in doc.pages:
            # reportlab writes an empty page transition on every page: presentation only.
            if "/Trans" in page.obj and not page.obj.Trans.keys():
                del page.obj["/Trans"]
        info = doc.trailer.get("/Info")
        if info is None:
            info = doc.make_indirect(Dictionary())
            doc.trailer.Info = info
        info.Title = String(title)
        info.CreationDate = String(date)
        info.ModDate = String(date)
        info.Creator = String(f"fluxledger {software}")
        info.Producer = String(f"fluxledger {software} (ReportLab, pikepdf)")
        values = {k: str(v) for k, v in info.items() if isinstance(v, String)}
        meta = doc.make_stream(_xmp(values, title, issued))
        meta.Type, meta.Subtype = Name.Metadata, Name.XML
        root.Metadata = meta

        icc = doc.make_stream(srgb_profile())
        icc.N = 3
        root.OutputIntents = Array([Dictionary(
            Type=Name.OutputIntent,
            S=Name.GTS_PDFA1,
            OutputConditionIdentifier=String(OUTPUT_CONDITION),
            Info=String(OUTPUT_CONDITION),
            RegistryName=String("http://www.color.org"),
            DestOutputProfile=icc,
        )])  # fmt: skip

        body = doc.make_stream(record_json)
        body.Type = Name.EmbeddedFile
        body.Subtype = Name("/" + MIME)
        body.Params = Dictionary(
            ModDate=String(date),
            CreationDate=String(date),
            Size=len(record_json),
            CheckSum=String(hashlib.md5(record_json, usedforsecurity=False).digest()),
        )
        spec = doc.make_indirect(Dictionary(
            Type=Name.Filespec,
            F=String(ATTACHMENT),
            UF=String(ATTACHMENT),
            Desc=String(ATTACHMENT_DESCRIPTION),
            AFRelationship=Name.Data,
            EF=Dictionary(F=body, UF=body),
        ))  # fmt: skip
        names = root.get("/Names")
        if names is None:
            names = root.Names = Dictionary()
        names.EmbeddedFiles = Dictionary(Names=Array([String(ATTACHMENT), spec]))
        root.AF = Array([spec])
        out = io.BytesIO()
        doc.save(
            out,
            preserve_pdfa=False,
            fix_metadata_version=False,
            min_version="1.7",
            object_stream_mode=pikepdf.ObjectStreamMode.disable,
            compress_streams=True,
            deterministic_id=True,
        )
    return out.getvalue()


def archive_pdf(ctx: Context, *, software_version: str, issued: datetime,
                copy: Copy | None = None) -> bytes:  # fmt: skip
    """The archive copy of the record ``ctx`` as rendered by ``render`` (with charts) for
    ``issued`` (the revision's ``as_of``) and ``copy``, made PDF/A-3b with the context and
    its signatures attached as ``record.json``. ``record verify`` rebuilds it this way."""
    h = ctx.header
    return to_pdfa(
        render(ctx, software_version=software_version, issued=issued, copy=copy),
        record_json(ctx),
        title=f"Batch record {h.record_id} revision {h.revision}",
        issued=issued,
        software=software_version,
    )


def archive_copy(issued: Issued, copy: Copy, *, software_version: str) -> bytes:
    """The archive bytes of an approved, issued revision (``service.approved_record``) as
    controlled copy ``copy``. Raises ValueError for a draft, which has no issue time, and
    when the result fails :func:`pdfa_problems` (a bug, never the user's input)."""
    if issued.revision is None:
        raise ValueError("a draft has no issue time and is never archived")
    data = archive_pdf(
        issued.context, software_version=software_version, issued=issued.revision.as_of,
        copy=copy,
    )  # fmt: skip
    problems = pdfa_problems(data)
    if problems:
        raise ValueError("the archive copy fails its PDF/A checks: " + "; ".join(problems))
    return data


def is_archive(pdf: bytes) -> bool:
    """True when the file says it is PDF/A (its XMP names a pdfaid part)."""
    return PDFA_MARK in pdf


# --- checking an archive -------------------------------------------------------------------


def _dict_like(obj: Any) -> bool:
    import pikepdf

    return isinstance(obj, pikepdf.Dictionary | pikepdf.Stream)


def _key(obj: Any) -> tuple[int, int] | int:
    return obj.objgen if obj.is_indirect else id(obj)


def _resource_holders(doc: Any) -> Iterator[tuple[str, Any]]:
    """Every resource dictionary a page draws with: pages, their form XObjects, annotation
    appearance streams, Type 3 glyph procedures and tiling patterns, recursively; each once,
    with where it sits."""
    seen: set[Any] = set()
    todo: list[tuple[str, Any]] = []
    for n, page in enumerate(doc.pages, start=1):
        todo.append((f"page {n}", page.obj))
        for a, annot in enumerate(page.obj.get("/Annots", [])):
            ap = annot.get("/AP") if _dict_like(annot) else None
            if ap is None:
                continue
            for kind in ("/N", "/R", "/D"):
                state = ap.get(kind)
                if state is None:
                    continue
                streams = [state] if hasattr(state, "read_bytes") else list(state.values())
                todo += [(f"page {n} annotation {a + 1} appearance {kind}", s) for s in streams]
    while todo:
        where, holder = todo.pop()
        if not _dict_like(holder) or _key(holder) in seen:
            continue
        seen.add(_key(holder))
        yield where, holder
        res = holder.get("/Resources")
        if res is None or not _dict_like(res):
            continue
        for name, x in res.get("/XObject", {}).items():
            if x.get("/Subtype") == "/Form":
                todo.append((f"{where} form {name}", x))
        for name, font in res.get("/Font", {}).items():
            if font.get("/Subtype") == "/Type3":
                todo.append((f"{where} Type 3 font {name}", font))
        for name, pattern in res.get("/Pattern", {}).items():
            if _dict_like(pattern) and pattern.get("/PatternType") == 1:
                todo.append((f"{where} pattern {name}", pattern))


def _font_problems(doc: Any) -> list[str]:
    out: list[str] = []
    seen: set[Any] = set()
    for where, holder in _resource_holders(doc):
        res = holder.get("/Resources")
        fonts = res.get("/Font", {}) if res is not None and _dict_like(res) else {}
        for name, font in fonts.items():
            if not _dict_like(font) or _key(font) in seen:
                continue
            seen.add(_key(font))
            subtype = font.get("/Subtype")
            if subtype == "/Type3":
                continue  # its glyphs are content streams, checked as resources above
            base = str(font.get("/BaseFont", name))
            parts = [font]
            if subtype == "/Type0":
                parts = list(font.get("/DescendantFonts", []))
                if not parts:
                    out.append(f"font {base} ({where}) has no descendant font")
            for part in parts:
                fd = part.get("/FontDescriptor")
                if fd is None or not any(k in fd for k in FONT_FILES):
                    out.append(f"font {base} ({where}) is not embedded (no FontFile, FontFile2 "
                               "or FontFile3 in its font descriptor)")  # fmt: skip
    return out


def _xmp_values(doc: Any) -> tuple[dict[str, str], list[str]]:
    """The XMP properties by prefixed name (attribute or element form; a language
    alternative or a list gives its first item), and what was wrong reading them."""
    meta = doc.Root.get("/Metadata")
    if meta is None or not hasattr(meta, "read_bytes"):
        return {}, ["no XMP metadata stream in the catalog (/Metadata)"]
    try:
        root = ET.fromstring(meta.read_bytes())
    except ET.ParseError as exc:
        return {}, [f"the XMP metadata is not well-formed XML ({exc})"]
    prefix = {v: k for k, v in _NS.items()}
    out: dict[str, str] = {}

    def short(tag: str) -> str | None:
        ns, _, local = tag[1:].partition("}")
        return f"{prefix[ns]}:{local}" if ns in prefix else None

    for desc in root.iter(f"{{{_NS['rdf']}}}Description"):
        for attr, value in desc.attrib.items():
            if (name := short(attr)) is not None:
                out.setdefault(name, value)
        for child in desc:
            if (name := short(child.tag)) is None:
                continue
            item = next(child.iter(f"{{{_NS['rdf']}}}li"), None)
            text = item.text if item is not None else child.text
            out.setdefault(name, (text or "").strip())
    return out, []


def _pdf_datetime(text: str) -> datetime | None:
    """A PDF date (ISO 32000-1 §7.9.4) as an aware datetime; None when it is not one."""
    m = re.fullmatch(
        r"D:(\d{4})(\d{2})?(\d{2})?(\d{2})?(\d{2})?(\d{2})?(?:(Z)|([+-])(\d{2})'?(\d{2})?'?)?",
        text.strip(),
    )
    if m is None:
        return None
    y, mo, d, h, mi, s = (int(g) if g else dflt for g, dflt in zip(m.groups()[:6],
                                                                     (0, 1, 1, 0, 0, 0),
                                                                     strict=True))  # fmt: skip
    sign, oh, om = m.group(8), m.group(9), m.group(10)
    offset = 0 if sign is None else (1 if sign == "+" else -1) * (int(oh) * 60 + int(om or 0))
    from datetime import timedelta, timezone

    try:
        return datetime(y, mo, d, h, mi, s, tzinfo=timezone(timedelta(minutes=offset)))
    except ValueError:
        return None


def _xmp_datetime(text: str) -> datetime | None:
    try:
        at = datetime.fromisoformat(text.strip())
    except ValueError:
        return None
    return at if at.tzinfo is not None else at.replace(tzinfo=UTC)


def _metadata_problems(doc: Any) -> list[str]:
    xmp, out = _xmp_values(doc)
    if out:
        return out
    if xmp.get("pdfaid:part") != "3":
        out.append(f"XMP pdfaid:part is {xmp.get('pdfaid:part')!r}, not '3' (PDF/A-3)")
    if xmp.get("pdfaid:conformance") != "B":
        out.append(f"XMP pdfaid:conformance is {xmp.get('pdfaid:conformance')!r}, not 'B'")
    info = doc.trailer.get("/Info")
    info = info if info is not None and _dict_like(info) else {}
    for key, prop in (("/CreationDate", "xmp:CreateDate"), ("/ModDate", "xmp:ModifyDate")):
        if key not in info:
            continue
        shown = _pdf_datetime(str(info[key]))
        said = _xmp_datetime(xmp[prop]) if prop in xmp else None
        if shown is None:
            out.append(f"document info {key[1:]} {str(info[key])!r} is not a PDF date")
        elif said is None or said != shown:
            out.append(f"document info {key[1:]} {str(info[key])!r} does not agree with "
                       f"XMP {prop} {xmp.get(prop)!r}")  # fmt: skip
    for key, prop in (("/Title", "dc:title"), ("/Producer", "pdf:Producer"),
                      ("/Keywords", "pdf:Keywords"), ("/Creator", "xmp:CreatorTool"),
                      ("/Subject", "dc:description"), ("/Author", "dc:creator")):  # fmt: skip
        if key in info and xmp.get(prop) != str(info[key]):
            out.append(f"document info {key[1:]} {str(info[key])!r} does not agree with "
                       f"XMP {prop} {xmp.get(prop)!r}")  # fmt: skip
    return out


def _intent_problems(doc: Any) -> list[str]:
    intents = [i for i in doc.Root.get("/OutputIntents", []) if i.get("/S") == "/GTS_PDFA1"]
    if not intents:
        return ["no PDF/A output intent (/OutputIntents with /S /GTS_PDFA1)"]
    out = []
    profiles = set()
    for intent in intents:
        icc = intent.get("/DestOutputProfile")
        if icc is None or not hasattr(icc, "read_bytes"):
            out.append("the PDF/A output intent has no ICC profile (/DestOutputProfile)")
            continue
        data = icc.read_bytes()
        profiles.add(hashlib.sha256(data).hexdigest())
        space = data[16:20]
        if len(data) < 128 or data[36:40] != b"acsp":
            out.append("the output intent's ICC profile is not an ICC profile (no 'acsp')")
        elif icc.get("/N") != 3 or space != b"RGB ":
            out.append(f"the output intent's ICC profile has /N {icc.get('/N')} and colour "
                       f"space {space!r}: an RGB profile with /N 3 is expected")  # fmt: skip
    if len(profiles) > 1:
        out.append("the PDF/A output intents carry different ICC profiles")
    return out


def _attachment_problems(doc: Any) -> list[str]:
    out = []
    listed = {_key(s) for s in doc.Root.get("/AF", []) if _dict_like(s)}

    def specs(node: Any) -> Iterator[Any]:
        names = node.get("/Names", [])
        yield from (names[i] for i in range(1, len(names), 2))
        for kid in node.get("/Kids", []):
            yield from specs(kid)

    tree = doc.Root.get("/Names", {}).get("/EmbeddedFiles")
    for spec in specs(tree) if tree is not None else ():
        name = str(spec.get("/UF", spec.get("/F", "?")))
        if "/AFRelationship" not in spec:
            out.append(f"embedded file {name} has no /AFRelationship")
        if _key(spec) not in listed:
            out.append(f"embedded file {name} is not listed in the catalog's /AF")
        if "/F" not in spec or "/UF" not in spec:
            out.append(f"embedded file {name} lacks /F or /UF in its file specification")
        body = spec.get("/EF", {}).get("/F")
        if body is None:
            out.append(f"embedded file {name} has no embedded file stream (/EF /F)")
            continue
        if "/Subtype" not in body:
            out.append(f"embedded file {name} has no MIME type (/Subtype)")
        if "/ModDate" not in body.get("/Params", {}):
            out.append(f"embedded file {name} has no modification date (/Params /ModDate)")
    return out


def _objects(doc: Any) -> Iterator[Any]:
    """Every dictionary and stream of the file: each indirect object, and the direct
    dictionaries nested in it (an action inside /AA inside a page)."""
    import pikepdf

    def inside(obj: Any) -> Iterator[Any]:
        values = obj.values() if _dict_like(obj) else obj
        for v in values:
            if isinstance(v, pikepdf.Object) and not v.is_indirect:
                if _dict_like(v):
                    yield v
                    yield from inside(v)
                elif isinstance(v, pikepdf.Array):
                    yield from inside(v)

    for obj in doc.objects:
        if _dict_like(obj):
            yield obj
            yield from inside(obj)
        elif isinstance(obj, pikepdf.Array):
            yield from inside(obj)


def _action_problems(doc: Any) -> list[str]:
    out = []
    root = doc.Root
    if "/JavaScript" in root.get("/Names", {}):
        out.append("the document holds JavaScript (/Names /JavaScript)")
    if "/AA" in root:
        out.append("the catalog has additional actions (/AA)")
    for obj in _objects(doc):
        if "/JS" in obj or obj.get("/S") == "/JavaScript":
            out.append(f"JavaScript action in object {obj.objgen if obj.is_indirect else ''}")
        elif obj.get("/S") in FORBIDDEN_ACTIONS and obj.get("/Type", "/Action") == "/Action":
            out.append(f"forbidden action {obj.get('/S')} in the file")
        if obj.get("/Type") == "/Page" and "/AA" in obj:
            out.append("a page has additional actions (/AA)")
    return sorted(set(out))


def _graphics_problems(doc: Any, has_intent: bool) -> list[str]:
    """Transparency, transfer functions, halftones, PostScript and filters."""
    import pikepdf

    out = set()
    transparent = False
    for obj in _objects(doc):
        if obj.get("/Type") == "/ExtGState" or any(k in obj for k in ("/BM", "/TR", "/HTP")):
            bm = obj.get("/BM")
            modes = list(bm) if isinstance(bm, pikepdf.Array) else [bm]
            for mode in (m for m in modes if m is not None):
                if str(mode) not in BLEND_MODES:
                    out.add(f"blend mode {mode} is not one of ISO 32000-1's standard modes")
                if str(mode) not in ("/Normal", "/Compatible"):
                    transparent = True
            if "/TR" in obj:
                out.add("a graphics state uses a transfer function (/TR)")
            if obj.get("/TR2", "/Default") != "/Default":
                out.add("a graphics state uses a transfer function (/TR2)")
            if "/HTP" in obj:
                out.add("a graphics state sets a halftone phase (/HTP)")
            for alpha in ("/CA", "/ca"):
                if alpha in obj and float(obj[alpha]) < 1.0:
                    transparent = True
            if obj.get("/SMask", "/None") != "/None":
                transparent = True
        if obj.get("/Subtype") == "/Image" and "/SMask" in obj:
            transparent = True
        if obj.get("/Subtype") == "/PS" or ("/PS" in obj and obj.get("/Subtype") == "/Form"):
            out.add("PostScript XObject")
        if obj.get("/Subtype") == "/Image" and obj.get("/Interpolate") is True:
            out.add("an image asks for interpolation (/Interpolate true)")
        if hasattr(obj, "read_bytes"):
            filters = obj.get("/Filter")
            names = list(filters) if isinstance(filters, pikepdf.Array) else [filters]
            for f in (n for n in names if n is not None):
                if str(f) in ("/LZWDecode", "/LZW", "/Crypt"):
                    out.add(f"a stream uses the {f} filter, which PDF/A does not allow")
    if transparent and not has_intent:
        for n, page in enumerate(doc.pages, start=1):
            if page.obj.get("/Group", {}).get("/CS") is None:
                out.add(f"page {n}: transparency without an output intent or a page group "
                        "colour space")  # fmt: skip
    return sorted(out)


def _colour_problems(doc: Any) -> list[str]:
    """Device colour a PDF/A-3 file with an RGB output intent may not use: DeviceCMYK (in
    colour-space resources, images and the content operators k, K)."""
    import pikepdf

    out = set()
    for where, holder in _resource_holders(doc):
        res = holder.get("/Resources")
        if res is not None and _dict_like(res):
            for name, x in res.get("/XObject", {}).items():
                if x.get("/Subtype") == "/Image" and x.get("/ColorSpace") == "/DeviceCMYK":
                    out.add(f"image {name} ({where}) is DeviceCMYK under an RGB output intent")
            for name, cs in res.get("/ColorSpace", {}).items():
                if cs == "/DeviceCMYK":
                    out.add(f"colour space {name} ({where}) is DeviceCMYK")
        try:
            ops = pikepdf.parse_content_stream(holder)
        except (pikepdf.PdfError, TypeError, ValueError):
            continue
        if any(str(one.operator) in ("k", "K") for one in ops):
            out.add(f"{where} paints in DeviceCMYK (k/K) under an RGB output intent")
    return sorted(out)


def _file_problems(pdf: bytes) -> list[str]:
    out = []
    if re.match(rb"%PDF-[12]\.\d\r?\n", pdf) is None:
        out.append("the file does not start with a %PDF-n.m header")
    else:
        second = pdf.split(b"\n", 2)[1] if pdf.count(b"\n") >= 2 else b""
        if not (second.startswith(b"%") and sum(b > 127 for b in second[1:5]) == 4):
            out.append("the header is not followed by a comment of four bytes above 127")
    tail = pdf.rstrip(b"\r\n")
    if not tail.endswith(b"%%EOF"):
        out.append("data follows the last %%EOF")
    return out


def pdfa_problems(pdf: bytes) -> list[str]:
    """What keeps ``pdf`` from PDF/A-3b by the checks this module automates, one sentence
    each; an empty list means it passes them all. Checked: the file header and end; no
    encryption; a trailer /ID; XMP identification (part 3, conformance B) and the document
    info agreeing with XMP (dates compared as instants); a /GTS_PDFA1 output intent with an
    RGB ICC profile of /N 3; every font embedded (pages, form XObjects, annotation
    appearances, Type 3 glyphs, patterns); every embedded file with /AFRelationship, in the
    catalog's /AF, /F and /UF, MIME type and /Params /ModDate; no JavaScript or forbidden
    action; standard blend modes, no transfer functions or halftone phase, transparency only
    with an output intent or a page group colour space; no LZW or Crypt filter, no PostScript,
    no interpolated image; no DeviceCMYK under the RGB intent."""
    import pikepdf

    problems = _file_problems(pdf)
    try:
        doc = pikepdf.open(io.BytesIO(pdf))
    except pikepdf.PasswordError:
        return [*problems, "the file is encrypted"]
    except pikepdf.PdfError as exc:
        return [*problems, f"the file cannot be read as PDF ({exc})"]
    with doc:
        if doc.is_encrypted or "/Encrypt" in doc.trailer:
            problems.append("the file is encrypted")
        ids = doc.trailer.get("/ID")
        if ids is None or len(ids) != 2:
            problems.append("the trailer has no /ID")
        problems += _metadata_problems(doc)
        intent = _intent_problems(doc)
        problems += intent
        problems += _font_problems(doc)
        problems += _attachment_problems(doc)
        problems += _action_problems(doc)
        problems += _graphics_problems(doc, has_intent=not intent)
        problems += _colour_problems(doc)
    return problems
