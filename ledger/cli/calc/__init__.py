"""``fluxledger calc``: quick calculators for the bench. Each prints a table or ``--json``.

Every quantity option takes a number with its unit as typed ("20 psi", "250 mL/min",
"15 degC"); pressures are gauge unless the help says absolute. The science and pint are
imported inside each command so that ``fluxledger --help`` stays fast.
"""

from __future__ import annotations

import typer

from ledger.errors import InputError

app = typer.Typer(
    help="Quick calculators: viscosity, NWP, shear, diafiltration, concentration, integrity, "
    "gel-model optimum and reuse-life projection.",
    no_args_is_help=True,
    rich_markup_mode=None,
)

GAUGE = "Gauge pressure with unit, e.g. '20 psi', '1.4 bar', '138 kPa'."


def one_of(first: tuple[str, object], second: tuple[str, object]) -> None:
    given = [name for name, value in (first, second) if value is not None]
    if len(given) != 1:
        raise InputError(
            f"give exactly one of {first[0]} and {second[0]} (got {len(given)})",
            field=first[0],
            value=given,
            expected=f"either {first[0]} or {second[0]}",
        )


def together(purpose: str, *options: tuple[str, object]) -> bool:
    """True when all ``options`` are given, False when none is; refuse a partial set."""
    missing = [name for name, value in options if value is None]
    if len(missing) == len(options):
        return False
    if missing:
        given = [name for name, value in options if value is not None]
        raise InputError(
            f"{purpose} needs {', '.join(n for n, _ in options)} together; "
            f"{', '.join(given)} given without {', '.join(missing)}",
            field=missing[0],
            value=None,
            expected="all of them, or none",
        )
    return True


def typed_unit(text: str | None, kind: str | None = None) -> str | None:
    """The unit part of an option as typed ("0.1 psi/min" -> "psi/min"), to echo it back.

    With ``kind``, only a unit of that kind is returned (so a gas-flow limit does not set the
    unit in which a decay rate is shown).
    """
    from ledger import units

    if text is None:
        return None
    try:
        _, unit = units.split_number(text, field="", expected="")
        if kind is not None:
            units.to_si(1.0, unit, kind, field="")
    except InputError:
        return None
    return unit or None


# Importing the command modules registers their commands on `app`.
from ledger.cli.calc import gel, hydraulics, integrity, process, trending, water  # noqa: E402

__all__ = ["app", "gel", "hydraulics", "integrity", "process", "trending", "water"]
