"""The fonts of the batch-record PDF: reportlab's shipped Bitstream Vera TTFs, embedded.

A record must look the same wherever it is opened, so it uses no standard-14 font (those are
not embedded and a viewer substitutes its own). The Vera faces ship inside reportlab
(reportlab/fonts), so every machine with the same reportlab draws the same glyphs. reportlab 4
and 5 ship no Vera Sans Mono; when a ``VeraMono*.ttf`` is not there, ``MONO`` is the regular
face (hashes then print in the proportional face, still on one line).
"""

from __future__ import annotations

import os
from functools import cache

import reportlab  # type: ignore[import-untyped]
from reportlab.lib.fonts import addMapping  # type: ignore[import-untyped]
from reportlab.pdfbase import pdfmetrics  # type: ignore[import-untyped]
from reportlab.pdfbase.ttfonts import TTFont  # type: ignore[import-untyped]

FAMILY = "FluxSans"
SANS = "FluxSans"
BOLD = "FluxSans-Bold"
ITALIC = "FluxSans-Italic"
BOLD_ITALIC = "FluxSans-BoldItalic"
MONO_FACE = "FluxMono"

_FACES = {SANS: "Vera.ttf", BOLD: "VeraBd.ttf", ITALIC: "VeraIt.ttf", BOLD_ITALIC: "VeraBI.ttf"}
_MONO_FILES = ("VeraMono.ttf", "VeraMono-Roman.ttf")


def font_dir() -> str:
    """The folder of the TTFs reportlab ships."""
    return os.path.join(os.path.dirname(reportlab.__file__), "fonts")


def _mono_file() -> str | None:
    for name in _MONO_FILES:
        path = os.path.join(font_dir(), name)
        if os.path.isfile(path):
            return path
    return None


@cache
def register() -> str:
    """Register the Vera faces under our family names (once per process); the mono face name.

    Returns the name to use for fixed-width text (hashes): ``FluxMono`` when reportlab ships a
    Vera Sans Mono, else the regular face.
    """
    registered = set(pdfmetrics.getRegisteredFontNames())
    for name, filename in _FACES.items():
        if name not in registered:
            pdfmetrics.registerFont(TTFont(name, os.path.join(font_dir(), filename)))
    pdfmetrics.registerFontFamily(FAMILY, normal=SANS, bold=BOLD, italic=ITALIC,
                                  boldItalic=BOLD_ITALIC)  # fmt: skip
    # Paragraph markup (<b>, <i>) looks faces up through this table.
    for bold, italic, face in ((0, 0, SANS), (1, 0, BOLD), (0, 1, ITALIC), (1, 1, BOLD_ITALIC)):
        addMapping(FAMILY, bold, italic, face)
    mono = _mono_file()
    if mono is None:
        return SANS
    if MONO_FACE not in registered:
        pdfmetrics.registerFont(TTFont(MONO_FACE, mono))
    return MONO_FACE


@cache
def covered() -> frozenset[int]:
    """The code points the regular face has a glyph for (the other faces cover the same)."""
    register()
    font = pdfmetrics.getFont(SANS)
    return frozenset(font.face.charToGlyph)


def embedded_names() -> tuple[str, ...]:
    """Every face name a record may use."""
    mono = register()
    return (*_FACES, *(() if mono == SANS else (mono,)))
