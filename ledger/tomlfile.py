"""Small TOML files that users write (skid mappings, limits, templates): read with a byte limit
and parsed with a guard on nesting, so a malformed or hostile file is an InputError naming the
file (and the line, when tomllib gives one), never a RecursionError.

tomllib is recursive: about 500 nested arrays or inline tables exhaust Python's stack, so a
RecursionError is caught, and a parsed document nested deeper than MAX_DEPTH is refused.
"""

from __future__ import annotations

import os
import re
import tomllib
from typing import Any

from ledger.errors import InputError
from ledger.userfiles import read_user_file

MAX_BYTES = 1 << 20  # 1 MiB: a mapping or a template is a few KiB
MAX_DEPTH = 32  # tables and arrays inside one another
_TOML_LINE = re.compile(r"\(at line (\d+), column (\d+)\)")


def _depth(value: object) -> int:
    """Nesting depth of parsed TOML (a scalar is 0), iterative so it cannot recurse."""
    deepest = 0
    stack: list[tuple[object, int]] = [(value, 0)]
    while stack:
        item, level = stack.pop()
        if isinstance(item, dict):
            children: list[Any] = list(item.values())
        elif isinstance(item, list):
            children = item
        else:
            continue
        deepest = max(deepest, level + 1)
        if level + 1 > MAX_DEPTH:
            break
        stack.extend((child, level + 1) for child in children)
    return deepest


def parse_toml(text: str, source: str, field: str, expected: str) -> dict[str, Any]:
    """TOML text as a dict; a syntax error names ``source`` and the line tomllib reports, and
    a document nested over MAX_DEPTH levels is refused."""
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        found = _TOML_LINE.search(str(exc))
        raise InputError(
            f"not valid TOML: {exc}",
            field=field,
            value=source,
            expected=expected,
            source=source,
            line=int(found.group(1)) if found else None,
        ) from None
    except RecursionError:
        data = None
    if data is None or _depth(data) > MAX_DEPTH:
        raise InputError(
            f"the TOML is nested more than {MAX_DEPTH} levels deep",
            field=field,
            value=source,
            expected=expected,
            source=source,
        )
    return data


def parse_toml_bytes(raw: bytes, source: str, field: str, expected: str) -> dict[str, Any]:
    """:func:`parse_toml` of UTF-8 bytes (a BOM is allowed); other bytes are an InputError."""
    return parse_toml(decode_utf8(raw, source, field, expected), source, field, expected)


def decode_utf8(raw: bytes, source: str, field: str, expected: str) -> str:
    """UTF-8 text of ``raw`` (with or without a BOM); an InputError naming ``source`` if not."""
    try:
        return raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = raw[: exc.start].count(b"\n") + 1
        raise InputError(
            f"the file is not UTF-8 text (byte {exc.start + 1}); save it as UTF-8",
            field=field,
            value=source,
            expected=expected,
            source=source,
            line=line,
        ) from None


def read_toml_text(
    path: str | os.PathLike[str], field: str, expected: str, max_bytes: int = MAX_BYTES
) -> str:
    """The UTF-8 text of the user's TOML file at ``path`` (checked path, at most
    ``max_bytes``); parse it with :func:`parse_toml`."""
    raw = read_user_file(path, field, max_bytes, as_source=True)
    return decode_utf8(raw, os.fspath(path), field, expected)


def load_toml(
    path: str | os.PathLike[str], field: str, expected: str, max_bytes: int = MAX_BYTES
) -> tuple[str, dict[str, Any]]:
    """Read and parse the user's TOML file at ``path``: its text and its data."""
    text = read_toml_text(path, field, expected, max_bytes)
    return text, parse_toml(text, os.fspath(path), field, expected)
