"""``fluxledger calc``: quick calculators for the bench. Each prints a table or ``--json``.

Every quantity option takes a number with its unit as typed ("20 psi", "250 mL/min",
"15 degC"); pressures are gauge unless the help says absolute. Each command hands its
options to its entry (``ledger.entries.calc``), which parses and checks them into SI. The
science and pint are imported inside each command so that ``fluxledger --help`` stays fast.
"""

from __future__ import annotations

import typer

app = typer.Typer(
    help="Quick calculators: viscosity, NWP, shear, diafiltration, concentration, integrity, "
    "gel-model optimum and reuse-life projection.",
    no_args_is_help=True,
    rich_markup_mode=None,
)

GAUGE = "Gauge pressure with unit, e.g. '20 psi', '1.4 bar', '138 kPa'."


# Importing the command modules registers their commands on `app`.
from ledger.cli.calc import gel, hydraulics, integrity, process, trending, water  # noqa: E402

__all__ = ["app", "gel", "hydraulics", "integrity", "process", "trending", "water"]
