"""Plain-text tables: every line fits the width, no character is lost or cut with an
ellipsis, numbers align right, and a time is never folded."""

from __future__ import annotations

from collections import Counter

from hypothesis import given, settings
from hypothesis import strategies as st

from ledger.cli.textgrid import fold, grid, width_of

WORDS = st.text(
    alphabet=st.characters(min_codepoint=33, max_codepoint=126), min_size=1, max_size=30
)
CELLS = st.lists(WORDS, min_size=1, max_size=8).map(" ".join)


@settings(max_examples=200, deadline=None)
@given(text=CELLS, width=st.integers(min_value=1, max_value=60))
def test_fold_fits_and_keeps_every_character(text: str, width: int) -> None:
    lines = fold(text, width)
    assert all(width_of(line) <= width for line in lines)
    assert "".join("".join(lines).split()) == "".join(text.split())


@settings(max_examples=100, deadline=None)
@given(
    rows=st.lists(st.lists(CELLS, min_size=3, max_size=3), min_size=1, max_size=6),
    width=st.integers(min_value=40, max_value=120),
)
def test_a_table_fits_its_width_and_keeps_every_cell(rows: list[list[str]], width: int) -> None:
    header = ["first", "second", "third"]
    lines = grid(header, rows, width=width)
    # three columns at their floor (6) and two gaps always fit 40 columns
    assert all(width_of(line) <= width for line in lines), lines
    # the body (after the header and its rule) holds exactly the cells' characters
    body = [line for line in lines[1:] if set(line) - {"─", " "}] if len(lines) > 1 else []
    shown = Counter("".join("".join(body).split()))
    assert shown == Counter("".join("".join(" ".join(r).split()) for r in rows))


def test_numbers_align_right_and_text_left() -> None:
    lines = grid(["name", "value"], [["a", "1.5"], ["long name", "12.25"]], right=[False, True])
    assert lines[0] == "name       value"
    assert lines[2] == "a            1.5"
    assert lines[3] == "long name  12.25"


def test_a_time_is_never_folded_even_when_the_line_is_too_narrow() -> None:
    when = "2026-12-03 14:05"
    lines = grid(["at", "what"], [[when, "word " * 20]], keep=[True, False], width=30)
    assert any(line.startswith(when) for line in lines)


def test_wide_characters_count_two_columns() -> None:
    assert width_of("ab") == 2
    assert width_of("漢字") == 4
    assert all(width_of(line) <= 5 for line in fold("漢字漢字漢字", 5))


def test_a_label_and_value_list_has_no_header_or_rule() -> None:
    lines = grid(None, [["serial", "M-1"], ["status", "on hold"]], width=40)
    assert lines == ["serial  M-1", "status  on hold"]
