"""The one exception family of fluxledger.

Every error a user can cause is a :class:`LedgerError`. It names the field (an option,
a column, a parameter), the value that was given and what was expected, so the CLI can
print one clear line and exit with the right code without a traceback.
"""

from __future__ import annotations


class LedgerError(Exception):
    """Base of all user-facing errors. ``exit_code`` follows DEVELOPERS.md."""

    exit_code = 2

    def __init__(
        self,
        message: str,
        *,
        field: str | None = None,
        value: object = None,
        expected: str | None = None,
        source: str | None = None,
        line: int | None = None,
        index: int | None = None,
    ) -> None:
        super().__init__(message)
        self.message = message
        self.field = field
        self.value = value
        self.expected = expected
        self.source = source
        self.line = line
        self.index = index  # position in a series, so a caller can name the file line

    def __str__(self) -> str:
        where = ""
        if self.source is not None:
            where = f"{self.source}:{self.line}: " if self.line is not None else f"{self.source}: "
        text = self.message
        if self.expected and self.expected not in text:
            text = f"{text}; expected {self.expected}"
        return where + text


class InputError(LedgerError):
    """A value the user gave is malformed, of the wrong unit or out of range (exit 2)."""

    exit_code = 2


class DomainError(InputError):
    """A physically meaningless or out-of-validity input reached a computation (exit 2)."""


class RefusedError(LedgerError):
    """A rule refuses the action: permission, sequence, locked record (exit 3)."""

    exit_code = 3


class TamperedError(LedgerError):
    """Stored data no longer matches the hash recorded for it: changed outside fluxledger
    (exit 1, as a verification that finds a problem)."""

    exit_code = 1


def out_of_range(field: str, value: object, expected: str) -> DomainError:
    """Build the standard message for a value outside its allowed range."""
    return DomainError(
        f"{field} = {value!r} is out of range; expected {expected}",
        field=field,
        value=value,
        expected=expected,
    )
