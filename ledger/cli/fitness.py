"""`fluxledger fitness SERIAL`: may this module be used again? FIT or NOT FIT, every reason."""

from __future__ import annotations

import typer

from ledger.cli.common import JSON_OPTION, guarded
from ledger.cli.session import DB_OPTION, read


@guarded
def fitness(
    serial: str = typer.Argument(..., help="Module serial."),
    product: str | None = typer.Option(None, "--product", help="The product you mean to run."),
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Fit-for-reuse verdict with every reason. Exit 0 when FIT, 1 when NOT FIT."""
    from ledger.cli.describe import fitness_report
    from ledger.logbook.fitness import fitness as judge

    v = read(db, lambda s: judge(s, serial, product))
    fitness_report(v, product).print(as_json)
    if not v.fit:
        raise typer.Exit(1)
