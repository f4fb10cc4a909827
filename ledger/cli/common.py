"""What every command shares: the --json option and the one place that reports user errors."""

from __future__ import annotations

import functools
import re
from collections.abc import Callable
from typing import Any, TypeVar

import typer

from ledger.errors import LedgerError
from ledger.rules.names import shown

JSON_OPTION = typer.Option(
    False, "--json", help="Print one JSON object (quantities as value and unit) instead of tables."
)


def quantity_option(default: Any, *flags: str, help: str) -> Any:
    """An option that takes a number with its unit ("20 psi"), shown as QUANTITY in help."""
    return typer.Option(default, *flags, help=help, metavar="QUANTITY")


F = TypeVar("F", bound=Callable[..., Any])


# Fields that are positional arguments on the command line: their messages name them already.
POSITIONAL = frozenset({"serial", "login", "kind", "record_id", "code", "run", "number", "file"})
# Options whose raw value may hold a secret (a database URL with its password).
UNECHOED = frozenset({"db"})


def explain(err: LedgerError, options: dict[str, Any]) -> str:
    """One line naming the option (when the error's field is one), the value and the rule.

    ``options`` are the command's keyword arguments; an error whose field is one of them is
    shown with that option's flag (our options are always spelled ``--field-name``).
    """
    text = str(err)
    if not err.field or text.startswith("--") or err.field in POSITIONAL | UNECHOED:
        return text
    # Science parameters may carry an SI suffix ("test_pressure_pa"); try shorter names too.
    parts = err.field.split("_")
    for end in range(len(parts), 0, -1):
        name = "_".join(parts[:end])
        if name in options:
            flag = f"--{name.replace('_', '-')}"
            if re.search(re.escape(flag) + r"(?![\w-])", text):
                return text  # the message names the option already
            return f"{flag} {shown(options[name])}: {text}"
    return text


def guarded(fn: F) -> F:
    """Turn a LedgerError into one line on stderr and its exit code (no traceback)."""

    @functools.wraps(fn)
    def wrapper(*args: Any, **kwargs: Any) -> Any:
        try:
            return fn(*args, **kwargs)
        except LedgerError as err:
            typer.echo(f"error: {explain(err, kwargs)}", err=True)
            raise typer.Exit(err.exit_code) from None

    return wrapper  # type: ignore[return-value]
