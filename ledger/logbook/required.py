"""Guards for what a record must carry: identifiers and text (by the rules of
``ledger.rules.names``), positive values, and identifiers that must be new."""

from __future__ import annotations

from collections.abc import Callable, Iterator
from contextlib import contextmanager
from typing import Any, Literal

from sqlalchemy import func
from sqlalchemy.exc import IntegrityError
from sqlmodel import Session, select

from ledger.errors import InputError
from ledger.rules import names
from ledger.store.engine import unique_violation
from ledger.store.tables import AuditHead

Kind = Literal["identifier", "name", "text"]

_RULES = {"identifier": names.identifier, "name": names.single_line, "text": names.multi_line}


def required(field: str, value: str | None, what: str, *, kind: Kind = "name") -> str:
    """``value`` cleaned by the rule of its ``kind``; InputError naming ``field`` when it is
    empty or breaks the rule.

    ``kind`` is "identifier" (serials, codes, lots, products, user IDs), "name" (one line:
    names, titles, agents) or "text" (several lines: notes, reasons). ``what`` says what
    belongs there, e.g. "the lot number of the cleaning solution".
    """
    return _RULES[kind](field, value, what)


def optional(field: str, value: str | None, what: str, *, kind: Kind = "text") -> str | None:
    """Like :func:`required`, but None or blank text gives None."""
    if value is None or not value.strip():
        return None
    return required(field, value, what, kind=kind)


def existing(session: Session, column: Any, value: str) -> str | None:
    """The stored value of the unique ``column`` that equals ``value`` ignoring case, or None.

    The lookup first takes the logbook's write lock (the audit-head row, which every write
    takes before its first audit event anyway), so of two writers adding "QMB-0142" and
    "qmb-0142" at once the second sees the first's row: the database's unique constraint
    alone is case-sensitive. An ASCII value is looked up with SQL ``lower()``, which folds
    ASCII alike on SQLite and PostgreSQL (and the identifier rule keeps out non-ASCII letters
    that fold to ASCII); a value with other letters is compared with Python's case folding
    over the column alone.
    """
    session.exec(select(AuditHead).where(AuditHead.id == 1).with_for_update()).first()
    query = select(column)
    if value.isascii():
        query = query.where(func.lower(column) == value.lower())
    key = names.fold(value)
    return next((found for found in session.exec(query) if names.fold(found) == key), None)


@contextmanager
def new_identifier(
    session: Session, column: Any, value: str, taken: Callable[[str], InputError]
) -> Iterator[None]:
    """Create a record under a new identifier inside this block: refused with ``taken(found)``
    when ``value`` is in ``column`` already, ignoring case, and with ``taken(value)`` when a
    concurrent writer wins the race to the unique constraint."""
    found = existing(session, column, value)
    if found is not None:
        raise taken(found)
    with unique(column.property.columns[0].table.name, column.key, taken(value)):
        yield


@contextmanager
def unique(table: str, column: str, error: InputError) -> Iterator[None]:
    """Raise ``error`` instead of the database's unique-constraint violation on ``column``:
    two writers that both found the identifier free answer like the one that came second."""
    try:
        yield
    except IntegrityError as exc:
        if not unique_violation(exc, table, column):
            raise
        raise error from None


def positive(
    field: str, value: float, what: str, *, label: str | None = None, index: int | None = None
) -> float:
    """``value`` if it is above zero; else InputError naming ``field`` (``label`` reads better
    in the message when the field name is terse; ``index`` is the point's row in a file)."""
    if not value > 0:
        raise InputError(f"the {label or field.replace('_', ' ')} must be positive", field=field,
                         value=value, expected=what, index=index)  # fmt: skip
    return value
