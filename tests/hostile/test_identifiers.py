"""Hostile text against the identifier and free-text rules (ledger/rules/names.py): any text
is either returned clean, satisfying its rule, or refused with a LedgerError whose message
is one printable line of bounded length."""

from __future__ import annotations

import unicodedata

import pytest
from hypothesis import example, given
from hypothesis import strategies as st

from ledger.errors import InputError, LedgerError
from ledger.rules import names

# Unicode general categories no identifier may hold (Unicode Standard, chapter 4.5):
# controls, format characters, private use, surrogates, unassigned, and every separator.
NOT_IN_IDENTIFIERS = {"Cc", "Cf", "Co", "Cs", "Cn", "Zl", "Zp", "Zs"}

HOSTILE = [
    "QMB-\x000142",  # NUL
    "QMB-0142\n",  # trailing newline: stripped, the rest is clean
    "QMB-01\n42",
    "QMB-0142\x1b[2J\x1b[31m",  # clear screen, red
    "QMB-\u202e2410",  # right-to-left override
    "QMB-01\u200b42",  # zero-width space
    "QMB-0142\ufeff",  # byte-order mark
    "QMB-0142\ufe0f",  # variation selector
    "QMB-\u034f0142",  # combining grapheme joiner
    "QMB\u00a00142",  # no-break space
    "QMB 0142",
    "QM\u0412-0142",  # Cyrillic VE among Latin letters
    "QMB-\ue0000142",  # private use
    "ſerial-1",  # long s: folds to plain 's'
    "Q" * 100_000,
    "",
    "   ",
]


def _satisfies_identifier_rule(value: str) -> bool:
    return (
        0 < len(value) <= names.IDENTIFIER_LIMIT
        and unicodedata.is_normalized("NFC", value)
        and value.isprintable()
        and not any(ch.isspace() for ch in value)
        and not any(unicodedata.category(ch) in NOT_IN_IDENTIFIERS for ch in value)
    )


def _clean_message(err: LedgerError) -> None:
    text = str(err)
    assert text.isprintable(), repr(text)  # no control character, no line break
    assert len(text) < 600
    assert err.field


def _identifier_or_clean_error(text: str) -> None:
    try:
        value = names.identifier("serial", text, "the module's serial number")
    except InputError as err:
        _clean_message(err)
        assert err.field == "serial"
        return
    assert _satisfies_identifier_rule(value), repr(value)
    assert names.identifier("serial", value, "the serial") == value  # idempotent


@given(st.text())
@example("QMB-0142")
@example("qmb-0142")
def test_any_text_is_a_clean_identifier_or_a_clean_error(text: str) -> None:
    _identifier_or_clean_error(text)


# Serial-like pieces mixed with the characters an attacker would reach for.
SERIAL_LIKE = st.lists(
    st.one_of(
        st.sampled_from(["QMB", "-", "0142", "qmb", "Lot", " "]),
        st.characters(categories=["Cc", "Cf", "Co", "Zs", "Zl", "Zp", "Mn", "Lu", "Ll"]),
    ),
    max_size=12,
).map("".join)


@given(SERIAL_LIKE)
def test_serial_like_text_with_hostile_characters(text: str) -> None:
    _identifier_or_clean_error(text)


@given(st.text(alphabet=st.characters(codec="utf-8"), max_size=300))
def test_any_text_is_a_clean_name_or_a_clean_error(text: str) -> None:
    try:
        value = names.single_line("name", text, "the person's printed name")
    except InputError as err:
        _clean_message(err)
        return
    assert 0 < len(value) <= names.NAME_LIMIT and unicodedata.is_normalized("NFC", value)
    assert not any(unicodedata.category(ch) in {"Cc", "Cs", "Zl", "Zp"} for ch in value)
    assert names.single_line("name", value, "the name") == value


@given(st.text(max_size=3000))
@example("first line\r\nsecond line\tend")
def test_any_text_is_a_clean_note_or_a_clean_error(text: str) -> None:
    try:
        value = names.multi_line("note", text, "a note")
    except InputError as err:
        _clean_message(err)
        return
    assert 0 < len(value) <= names.TEXT_LIMIT and unicodedata.is_normalized("NFC", value)
    assert "\r" not in value
    assert all(ch in "\n\t" or unicodedata.category(ch) != "Cc" for ch in value)
    assert not any(0x202A <= ord(ch) <= 0x202E or 0x2066 <= ord(ch) <= 0x2069 for ch in value)


@pytest.mark.parametrize("text", HOSTILE, ids=repr)
def test_hostile_identifiers_are_refused_by_name(text: str) -> None:
    if text == "QMB-0142\n":
        assert names.identifier("serial", text, "the serial") == "QMB-0142"
        return
    with pytest.raises(InputError) as caught:
        names.identifier("serial", text, "the module's serial number")
    _clean_message(caught.value)
    message = str(caught.value)
    assert message.startswith("the serial ")
    assert "expected the module's serial number" in message
    assert "\x1b" not in message and "\u202e" not in message and "\u200b" not in message


def test_a_long_value_is_shown_cut_with_its_length() -> None:
    with pytest.raises(InputError) as caught:
        names.identifier("lot", "L" * 100_000, "the lot")
    assert "is 100000 characters long" in str(caught.value)
    assert len(str(caught.value)) < 300
    assert caught.value.value == repr("L" * names.SHOWN_LIMIT) + "… (100000 characters)"


def test_identifiers_are_nfc_and_compared_case_folded() -> None:
    decomposed = "Lo\u0301t-1"  # o + combining acute
    assert names.identifier("lot", decomposed, "the lot") == "Lót-1"
    assert names.fold("QMB-0142") == names.fold("qmb-0142")
    assert names.fold("LÓT-1") == names.fold(decomposed)
    assert names.fold("QMB-0142") != names.fold("QMB-0143")
    # The Kelvin sign is canonically the letter K (Unicode canonical decomposition), so NFC
    # makes the look-alike the same identifier.
    assert names.identifier("code", "HF-\u212a1", "a code") == "HF-K1"


def test_notes_keep_lines_and_tabs_but_names_do_not() -> None:
    assert names.multi_line("note", "  a\r\n\tb  ", "a note") == "a\n\tb"
    with pytest.raises(InputError, match="holds a line break"):
        names.single_line("title", "a\nb", "a title")
    with pytest.raises(InputError, match="holds a tab"):
        names.single_line("title", "a\tb", "a title")
    with pytest.raises(InputError, match="a text-direction override"):
        names.multi_line("reason", "ok \u202eKO", "a reason")
    with pytest.raises(InputError, match="is 201 characters long"):
        names.single_line("title", "t" * 201, "a title")
    assert names.multi_line("reason", "r" * 2000, "a reason") == "r" * 2000
