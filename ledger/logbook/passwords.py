"""The password policy: long enough once surrounding whitespace is stripped, not only
whitespace, and not one of the common passwords shipped in ledger/data/common_passwords.txt.

The list is every entry of 10 or more characters of the "passwords" frequency list of the
zxcvbn 4.5.0 package (PyPI, MIT licence; that list comes from the Xato password corpus),
lower-cased. Comparison is case-insensitive and ignores surrounding whitespace.
"""

from __future__ import annotations

from functools import cache
from importlib.resources import files

from ledger.errors import InputError

MIN_PASSWORD = 10  # characters, counted after stripping surrounding whitespace


@cache
def common_passwords() -> frozenset[str]:
    """The shipped list of common passwords, lower-cased."""
    text = files("ledger").joinpath("data/common_passwords.txt").read_text(encoding="utf-8")
    return frozenset(
        line.strip().lower() for line in text.splitlines() if line.strip() and line[0] != "#"
    )


def check_password(password: str) -> None:
    """Refuse (InputError, field ``password``) a password the policy does not allow."""
    core = password.strip()
    if not core:
        raise InputError(
            "the password is empty or only whitespace",
            field="password",
            value="(hidden)",
            expected=f"at least {MIN_PASSWORD} characters that are not whitespace",
        )
    if len(core) < MIN_PASSWORD:
        raise InputError(
            f"the password is {len(core)} characters long without surrounding whitespace",
            field="password",
            value="(hidden)",
            expected=f"at least {MIN_PASSWORD} characters",
        )
    if core.lower() in common_passwords():
        raise InputError(
            "the password is on the list of common passwords",
            field="password",
            value="(hidden)",
            expected="a password that is not among the commonly used ones",
        )
