"""Signature blocks of a batch record (21 CFR 11.50: printed name, date and time, meaning).

One block per meaning the template requires, for the signatures of *this* revision; each
shows the full 64-hex revision hash it signed on one line. A meaning not yet signed shows an
empty block with the roles that may sign it. Signatures of other revisions are listed on their
own, marked with their revision, and count for nothing here.
"""

from __future__ import annotations

from typing import Any

from reportlab.platypus import KeepTogether, Spacer, Table, TableStyle  # type: ignore[import-untyped]

from ledger.records import fonts, layout
from ledger.records.context import Context, SignatureRow
from ledger.records.layout import esc, styles, when

_LW = 0.17 * layout.FRAME_W
_VW = layout.FRAME_W / 2 - _LW
_UNSIGNED_EDGE = layout.colors.Color(0.55, 0.55, 0.60)


def _block(rows: list[list[object]], dashed: bool) -> Any:
    t = Table(rows, colWidths=[_LW, _VW, _LW, _VW], hAlign="LEFT")
    commands: list[tuple[Any, ...]] = [
        ("FONT", (0, 0), (-1, -1), fonts.SANS, 7.6, 9.5),
        ("VALIGN", (0, 0), (-1, -1), "TOP"),
        ("SPAN", (0, 0), (-1, 0)),
        ("BACKGROUND", (0, 0), (-1, 0), layout.HEAD_BG),
        ("LEFTPADDING", (0, 0), (-1, -1), layout.PAD),
        ("RIGHTPADDING", (0, 0), (-1, -1), layout.PAD),
        ("TOPPADDING", (0, 0), (-1, -1), 2),
        ("BOTTOMPADDING", (0, 0), (-1, -1), 2),
        ("TEXTCOLOR", (0, 1), (0, -1), layout.MUTED),
        ("TEXTCOLOR", (2, 1), (2, -1), layout.MUTED),
    ]
    for i, row in enumerate(rows[1:], start=1):
        if row[2] == "" and row[3] == "":
            commands.append(("SPAN", (1, i), (3, i)))
    if dashed:
        commands.append(("BOX", (0, 0), (-1, -1), 0.8, _UNSIGNED_EDGE, None, (3, 2)))
    else:
        commands += [("BOX", (0, 0), (-1, -1), 1.0, layout.INK),
                     ("LINEBELOW", (0, 0), (-1, 0), 0.5, layout.INK)]  # fmt: skip
    t.setStyle(TableStyle(commands))
    return KeepTogether([t, Spacer(1, 6)])


def _title(text: str) -> Any:
    return layout.markup(text, styles().body.clone("sig", spaceAfter=0))


def _hash(text: str) -> Any:
    return layout.markup(esc(text), styles().mono.clone("sigmono", fontSize=7.6, leading=9.5))


def signed_block(sig: SignatureRow, title: str, match: bool | None) -> Any:
    """A signature as given: who, role, when (with offset), meaning and the hash signed."""
    rows: list[list[object]] = [
        [_title(title), "", "", ""],
        ["Printed name", layout.cell(sig.full_name, _VW), "User ID", layout.cell(sig.login, _VW)],
        ["Role", layout.cell(sig.role, _VW), "Signed at", when(sig.signed_at)],
        ["Meaning", sig.meaning, "Signature no.", str(sig.id)],
        ["Signed revision", f"revision {sig.revision}", "", ""],
        ["Revision SHA-256", _hash(sig.revision_sha256), "", ""],
    ]
    if match is not None:
        rows.append(["", layout.cell(
            "matches the content SHA-256 of this revision" if match else
            "does NOT match the content SHA-256 of this revision", 3 * _VW), "", ""])  # fmt: skip
    return _block(rows, dashed=False)


def unsigned_block(meaning: str, roles: tuple[str, ...], revision: int) -> Any:
    rows: list[list[object]] = [
        [_title(f"<b>{esc(meaning.capitalize())}</b> — not signed"), "", "", ""],
        ["Meaning", meaning, "", ""],
        ["May be signed by", layout.cell(", ".join(roles) or "no role named", 3 * _VW), "", ""],
        ["Signature", f"none for revision {revision}", "", ""],
    ]
    return _block(rows, dashed=True)


def current(ctx: Context, content: str) -> list[Any]:
    """The blocks of this revision, one per required meaning, in the template's order;
    ``content`` is the revision's content SHA-256 that each signed hash is compared with."""
    rev = ctx.header.revision
    mine = [s for s in ctx.signatures if s.revision == rev]
    out: list[Any] = []
    for meaning in ctx.required_signatures:
        given = [s for s in mine if s.meaning == meaning]
        for sig in given:
            title = f"<b>{esc(meaning.capitalize())}</b> — signed for revision {rev}"
            out.append(signed_block(sig, title, sig.revision_sha256 == content))
        if not given:
            out.append(unsigned_block(meaning, ctx.signature_roles.get(meaning, ()), rev))
    for sig in mine:
        if sig.meaning not in ctx.required_signatures:
            title = (f"<b>{esc(sig.meaning.capitalize())}</b> — signed for revision {rev} "
                     "(a meaning this template does not require)")  # fmt: skip
            out.append(signed_block(sig, title, sig.revision_sha256 == content))
    return out


def others(ctx: Context) -> list[Any]:
    """Signatures of other revisions, each marked with its revision; empty when none."""
    rev = ctx.header.revision
    out: list[Any] = []
    for sig in ctx.signatures:
        if sig.revision == rev:
            continue
        title = (f"<b>Revision {sig.revision}</b> · {esc(sig.meaning)} — belongs to revision "
                 f"{sig.revision}, not counted for revision {rev}")  # fmt: skip
        out.append(signed_block(sig, title, None))
    return out
