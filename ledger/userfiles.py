"""Files that users name (points files, skid logs, mappings, limits, templates): the path is
checked before it is opened, so a bad path or an unreadable file is an InputError naming the
field, never an OSError or a ValueError.

Refused: an empty path, a NUL character, a path over MAX_PATH bytes or a component over
MAX_NAME bytes (Linux PATH_MAX and NAME_MAX), no such file, a directory or anything but a
regular file, no permission, and a file over the caller's byte limit.
"""

from __future__ import annotations

import errno
import os
import stat
from pathlib import Path

from ledger.errors import InputError

MAX_PATH = 4096  # bytes in a path (PATH_MAX on Linux)
MAX_NAME = 255  # bytes in one path component (NAME_MAX on common file systems)
_SHOWN = 80  # characters of a long path shown in a message

_WHY = {
    errno.ENOENT: "no such file",
    errno.ENOTDIR: "a part of the path is not a directory",
    errno.EACCES: "permission denied",
    errno.EPERM: "permission denied",
    errno.EISDIR: "it is a directory",
    errno.ENAMETOOLONG: "the path is too long",
    errno.ELOOP: "too many symbolic links",
}


def _shown(text: str) -> str:
    return text if len(text) <= _SHOWN else "..." + text[-(_SHOWN - 3) :]


def _refuse(
    field: str, text: str, why: str, as_source: bool, expected: str = "the path of a readable file"
) -> InputError:
    if as_source:  # the error names the file as its source: "path: cannot read the file: ..."
        shown = text if len(text) <= MAX_NAME else _shown(text)
        return InputError(
            f"cannot read the {field}: {why}",
            field=field,
            value=text,
            expected=expected,
            source=shown,
        )
    return InputError(
        f"{field}: cannot read {_shown(text)!r}: {why}",
        field=field,
        value=text,
        expected=expected,
    )


def _size(n: int) -> str:
    for unit, factor in (("MiB", 1 << 20), ("KiB", 1 << 10)):
        if n >= factor:
            return f"{n / factor:.1f} {unit}"
    return f"{n} bytes"


def check_user_file(
    path: str | os.PathLike[str], field: str, max_bytes: int, *, as_source: bool = False
) -> Path:
    """The path as a Path once it names a readable regular file of at most ``max_bytes``.

    The InputError names ``field`` and the path; with ``as_source`` the path is its source
    (printed before the message, as for errors found inside the file).
    """
    text = os.fspath(path)

    def refuse(shown: str, why: str, expected: str = "the path of a readable file") -> InputError:
        return _refuse(field, shown, why, as_source, expected)

    if not text.strip():
        raise refuse(text, "the path is empty")
    if "\x00" in text:
        raise refuse(text.replace("\x00", "\\0"), "the path contains a NUL character")
    try:
        encoded = os.fsencode(text)
    except UnicodeEncodeError:  # a lone surrogate that no file system name can hold
        raise refuse(text.encode("utf-8", "backslashreplace").decode(), "no such file") from None
    if len(encoded) >= MAX_PATH:
        raise refuse(
            text,
            f"the path is {len(encoded)} bytes long",
            f"a path of at most {MAX_PATH - 1} bytes",
        )
    for part in encoded.split(b"/"):
        if len(part) > MAX_NAME:
            raise refuse(
                text,
                f"a part of the path is {len(part)} bytes long",
                f"at most {MAX_NAME} bytes between slashes",
            )
    try:
        info = os.stat(text)
    except OSError as exc:
        raise refuse(text, _WHY.get(exc.errno or 0, exc.strerror or str(exc))) from None
    if stat.S_ISDIR(info.st_mode):
        raise refuse(text, _WHY[errno.EISDIR])
    if not stat.S_ISREG(info.st_mode):
        raise refuse(text, "it is not a regular file")
    if info.st_size > max_bytes:
        raise refuse(
            text, f"the file is {_size(info.st_size)}", f"a file of at most {_size(max_bytes)}"
        )
    return Path(text)


def read_user_file(
    path: str | os.PathLike[str], field: str, max_bytes: int, *, as_source: bool = False
) -> bytes:
    """The bytes of the user's file at ``path``: every check of :func:`check_user_file`, and
    the size again as read (the file may grow in between)."""
    p = check_user_file(path, field, max_bytes, as_source=as_source)
    try:
        with p.open("rb") as f:
            data = f.read(max_bytes + 1)
    except OSError as exc:
        why = _WHY.get(exc.errno or 0, exc.strerror or str(exc))
        raise _refuse(field, str(p), why, as_source) from None
    if len(data) > max_bytes:
        raise _refuse(
            field, str(p), "the file grew while read", as_source, f"at most {_size(max_bytes)}"
        )
    return data
