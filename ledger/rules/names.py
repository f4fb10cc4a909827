"""What identifiers and free text may hold (pure): one rule for each, as functions that return
the cleaned value or raise InputError naming the field, the value (escaped and shortened, so a
control character never reaches a terminal raw) and what is expected.

- An identifier (a serial, a type or procedure code, a lot, a product, a user ID) is Unicode
  NFC, at most 64 characters, printable, without spaces or invisible characters, without
  letters of two look-alike scripts (Latin, Greek, Cyrillic) and without a non-ASCII letter
  that case-folds to plain ASCII ('ſ', 'ß', 'ﬁ'). Two identifiers are the same when their
  ``fold`` keys are equal, so "qmb-0142" is the existing "QMB-0142".
- A name or title is one line of NFC text of at most 200 characters; a note or reason may have
  several lines and tabs, at most 2,000 characters. Neither holds other control characters,
  line or paragraph separators, or the bidirectional overrides that reorder what is shown.
Lengths count Unicode code points after NFC.
"""

from __future__ import annotations

import unicodedata

from ledger.errors import InputError

IDENTIFIER_LIMIT = 64
NAME_LIMIT = 200
TEXT_LIMIT = 2000
SHOWN_LIMIT = 40

IDENTIFIER_RULE = (
    f"at most {IDENTIFIER_LIMIT} printable characters, no spaces or invisible characters"
)

# Code points that render as nothing but are not of category Cf: Unicode's
# Default_Ignorable_Code_Point ranges outside Cf (recalled from DerivedCoreProperties.txt:
# combining grapheme joiner, Hangul fillers, Khmer inherent vowels, Mongolian and standard
# variation selectors) and the blank Braille pattern.
_INVISIBLE = (
    (0x034F, 0x034F),
    (0x115F, 0x1160),
    (0x17B4, 0x17B5),
    (0x180B, 0x180F),
    (0x2800, 0x2800),
    (0x3164, 0x3164),
    (0xFE00, 0xFE0F),
    (0xFFA0, 0xFFA0),
    (0xE0100, 0xE01EF),
)
# Embeddings, overrides and isolates change the order in which text is displayed.
_BIDI_CONTROLS = frozenset({*range(0x202A, 0x202F), *range(0x2066, 0x206A)})
_LOOKALIKE_SCRIPTS = ("LATIN", "GREEK", "CYRILLIC")
_CATEGORY_WORDS = {
    "Cc": "a control character",
    "Cf": "an invisible format character",
    "Co": "a private-use character",
    "Cs": "a lone surrogate",
    "Cn": "an unassigned code point",
    "Zl": "a line separator",
    "Zp": "a paragraph separator",
    "Zs": "a space",
}


def shown(value: object, limit: int = SHOWN_LIMIT) -> str:
    """``value`` as a message may print it: repr (every non-printable character escaped),
    cut after ``limit`` characters with the full length stated."""
    if isinstance(value, str) and len(value) > limit:
        return f"{value[:limit]!r}… ({len(value)} characters)"
    return repr(value)


def fold(value: str) -> str:
    """The key two identifiers are compared by: NFC of the case-folded NFC text."""
    return unicodedata.normalize("NFC", unicodedata.normalize("NFC", value).casefold())


def _label(field: str) -> str:
    return field.replace("_", " ")


def _code_point(ch: str) -> str:
    name = unicodedata.name(ch, "")
    return f"U+{ord(ch):04X}" + (f" {name}" if name else "")


def _invisible(ch: str) -> bool:
    cp = ord(ch)
    return any(low <= cp <= high for low, high in _INVISIBLE)


def _describe(ch: str) -> str:
    """What kind of unwanted character ``ch`` is, in words, with its code point."""
    category = unicodedata.category(ch)
    if ch == "\t":
        kind = "a tab"
    elif ch in "\n\r\v\f\x1c\x1d\x1e\x85":
        kind = "a line break"
    elif ord(ch) in _BIDI_CONTROLS:
        kind = "a text-direction override"
    elif ch.isspace():
        kind = _CATEGORY_WORDS.get(category, "a space")
    else:
        kind = _CATEGORY_WORDS.get(category, "an invisible character")
    return f"{kind} ({_code_point(ch)})"


def _fail(field: str, value: str, problem: str, expected: str) -> InputError:
    return InputError(f"the {_label(field)} {shown(value)} {problem}", field=field,
                      value=shown(value), expected=expected)  # fmt: skip


def _start(field: str, value: str | None, what: str, limit: int) -> str:
    """NFC without surrounding blanks; empty or too long raise."""
    if value is not None and not isinstance(value, str):
        raise TypeError(f"{field} must be text, not {type(value).__name__}")  # a bug
    text = unicodedata.normalize("NFC", value or "").strip()
    if not text:
        raise InputError(f"the {_label(field)} is empty", field=field, value=shown(value),
                         expected=what)  # fmt: skip
    if len(text) > limit:
        raise _fail(field, text, f"is {len(text)} characters long", f"{what}, at most {limit}")
    return text


def identifier(field: str, value: str | None, what: str) -> str:
    """``value`` as an identifier (see the module docstring), or InputError on ``field``.

    ``what`` says what belongs there, e.g. "the module's serial number".
    """
    expected = f"{what} ({IDENTIFIER_RULE})"
    text = _start(field, value, expected, IDENTIFIER_LIMIT)
    scripts: set[str] = set()
    for i, ch in enumerate(text, start=1):
        category = unicodedata.category(ch)
        if ch.isspace() or category in _CATEGORY_WORDS or _invisible(ch):
            raise _fail(field, text, f"holds {_describe(ch)} at position {i}", expected)
        if not ch.isascii() and ch.casefold().isascii():
            raise _fail(field, text, f"holds {ch!r} ({_code_point(ch)}), a variant of "
                        f"{ch.casefold()!r}; type {ch.casefold()!r} instead", expected)  # fmt: skip
        if category.startswith("L"):
            script = unicodedata.name(ch, "").split(" ")[0]
            if script in _LOOKALIKE_SCRIPTS:
                scripts.add(script)
    if len(scripts) > 1:
        mixed = " and ".join(s.title() for s in _LOOKALIKE_SCRIPTS if s in scripts)
        raise _fail(field, text, f"mixes {mixed} letters, which look alike",
                    f"{expected}, letters of one script")  # fmt: skip
    return text


def _text(field: str, value: str | None, what: str, limit: int, allowed: str) -> str:
    if value is not None and isinstance(value, str):
        value = value.replace("\r\n", "\n")
    text = _start(field, value, what, limit)
    for i, ch in enumerate(text, start=1):
        if ch in allowed:
            continue
        if unicodedata.category(ch) in ("Cc", "Cs", "Zl", "Zp") or ord(ch) in _BIDI_CONTROLS:
            raise _fail(field, text, f"holds {_describe(ch)} at position {i}", what)
    return text


def single_line(field: str, value: str | None, what: str, limit: int = NAME_LIMIT) -> str:
    """``value`` as a name or title: one line, no control characters, at most ``limit``."""
    expected = f"{what} (one line of at most {limit} characters, no control characters)"
    return _text(field, value, expected, limit, "")


def multi_line(field: str, value: str | None, what: str, limit: int = TEXT_LIMIT) -> str:
    """``value`` as a note or reason: lines and tabs allowed (CR LF becomes LF), no other
    control characters, at most ``limit``."""
    expected = f"{what} (at most {limit} characters; no control characters but line breaks)"
    return _text(field, value, expected, limit, "\n\t")
