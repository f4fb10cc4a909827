"""Plain-text tables for the terminal: aligned columns, a rule under the header, and cells that
wrap (never cut) to fit the width.

The width is the terminal's (``COLUMNS`` when set, 80 when there is no terminal). Cells are
folded at spaces where they can be and inside a word only where one word is wider than its
column. Text arrives already made printable (ledger.cli.output.printable), so every
character is one column wide except the East Asian wide ones, which count two.
"""

from __future__ import annotations

import shutil
import unicodedata
from collections.abc import Sequence

GAP = "  "  # between columns
MIN_COLUMN = 6  # a column is never squeezed below this many characters (or its header word)


def width_of(text: str) -> int:
    """Columns the text takes on a terminal."""
    if text.isascii():
        return len(text)
    return sum(2 if unicodedata.east_asian_width(c) in "WF" else 1 for c in text)


def terminal_width() -> int:
    """The terminal's width in columns (COLUMNS, else the terminal, else 80)."""
    return max(20, shutil.get_terminal_size((80, 24)).columns)


def fold(text: str, width: int) -> list[str]:
    """``text`` in lines of at most ``width`` columns; its own line breaks are kept."""
    lines: list[str] = []
    for paragraph in text.split("\n"):
        line = ""
        for word in paragraph.split(" "):
            candidate = f"{line} {word}" if line else word
            if width_of(candidate) <= width:
                line = candidate
                continue
            if line:
                lines.append(line)
            while width_of(word) > width:  # one word wider than the column: break inside it
                cut = _cut(word, width)
                lines.append(word[:cut])
                word = word[cut:]
            line = word
        lines.append(line)
    return lines


def _cut(word: str, width: int) -> int:
    used = 0
    for i, c in enumerate(word):
        used += width_of(c)
        if used > width:
            return max(1, i)
    return len(word)


def _widths(
    header: Sequence[str], rows: Sequence[Sequence[str]], total: int, keep: Sequence[bool]
) -> list[int]:
    """Column widths that fit ``total``: each column as wide as its widest cell, then the
    widest columns narrowed in turn until the line fits (or every column is at its floor;
    a ``keep`` column, such as a time, is never narrowed)."""
    n = len(header)
    natural = [
        max([width_of(header[i])] + [max(map(width_of, r[i].split("\n"))) for r in rows])
        for i in range(n)
    ]
    floor = [
        natural[i] if keep[i] else min(natural[i], max(MIN_COLUMN, _longest_word(header[i])))
        for i in range(n)
    ]
    widths = list(natural)
    room = total - width_of(GAP) * (n - 1)
    while sum(widths) > room:
        wide = max(range(n), key=lambda i: widths[i] - floor[i])
        if widths[wide] <= floor[wide]:
            break
        widths[wide] -= 1
    return widths


def _longest_word(text: str) -> int:
    return max((width_of(w) for w in text.split()), default=0)


def _pad(text: str, width: int, right: bool) -> str:
    space = " " * max(0, width - width_of(text))
    return space + text if right else text + space


def grid(
    header: Sequence[str] | None,
    rows: Sequence[Sequence[str]],
    *,
    right: Sequence[bool] | None = None,
    keep: Sequence[bool] | None = None,
    width: int | None = None,
) -> list[str]:
    """The lines of a table. ``header`` None prints no header and no rule (a list of label and
    value rows); ``right`` marks the columns aligned right (numbers), ``keep`` those that are
    never wrapped (times)."""
    if not rows and header is None:
        return []
    n = len(header) if header is not None else len(rows[0])
    head = list(header) if header is not None else [""] * n
    align = list(right) if right is not None else [False] * n
    kept = list(keep) if keep is not None else [False] * n
    widths = _widths(head, rows, width or terminal_width(), kept)
    out: list[str] = []

    def emit(cells: Sequence[str], aligned: Sequence[bool]) -> None:
        folded = [fold(c, w) for c, w in zip(cells, widths, strict=True)]
        for k in range(max(len(f) for f in folded)):
            parts = [
                _pad(f[k] if k < len(f) else "", w, a)
                for f, w, a in zip(folded, widths, aligned, strict=True)
            ]
            out.append(GAP.join(parts).rstrip())

    if header is not None:
        emit(head, align)
        out.append(GAP.join("─" * w for w in widths))
    for row in rows:
        emit(row, align)
    return out
