"""Guards for text that a record must carry (names, lots, reasons)."""

from __future__ import annotations

from ledger.errors import InputError


def required(field: str, value: str | None, what: str) -> str:
    """``value`` without surrounding blanks; InputError naming ``field`` when it is empty.

    ``what`` says what belongs there, e.g. "the lot number of the cleaning solution".
    """
    text = (value or "").strip()
    if not text:
        raise InputError(f"the {field.replace('_', ' ')} is empty", field=field, value=value,
                         expected=what)  # fmt: skip
    return text


def positive(
    field: str, value: float, what: str, *, label: str | None = None, index: int | None = None
) -> float:
    """``value`` if it is above zero; else InputError naming ``field`` (``label`` reads better
    in the message when the field name is terse; ``index`` is the point's row in a file)."""
    if not value > 0:
        raise InputError(f"the {label or field.replace('_', ' ')} must be positive", field=field,
                         value=value, expected=what, index=index)  # fmt: skip
    return value
