"""Entry point of the ``fluxledger`` command. Heavy imports stay inside the commands."""

from __future__ import annotations

import typer

from ledger import __version__
from ledger.cli.common import guarded

app = typer.Typer(
    name="fluxledger",
    help=(
        "Module history, fit-for-reuse decisions and batch records for hollow-fiber TFF.\n\n"
        "Acceptance limits come from your site's validated procedures and its quality unit; "
        "this tool supports their decisions and does not replace them."
    ),
    no_args_is_help=True,
    pretty_exceptions_enable=False,
    rich_markup_mode=None,
    add_completion=False,
)


def _version(value: bool) -> None:
    if value:
        typer.echo(f"fluxledger {__version__}")
        raise typer.Exit()


@app.callback()
def root(
    version: bool = typer.Option(
        False, "--version", callback=_version, is_eager=True, help="Print the version and exit."
    ),
) -> None:
    """Module history, fit-for-reuse decisions and batch records for hollow-fiber TFF."""
    from ledger.cli.session import reset_stdin

    reset_stdin()


def _register() -> None:
    from ledger.cli import audit, calc, demo, fitness, logbook, modules, setup, users

    app.command("init")(setup.init)
    app.add_typer(modules.types_app, name="module-type")
    app.add_typer(modules.app, name="module")
    app.add_typer(logbook.test_app, name="test")
    app.add_typer(logbook.care_app, name="care")
    app.add_typer(logbook.use_app, name="use")
    app.command("void")(logbook.void)
    app.command("fitness")(fitness.fitness)
    app.add_typer(audit.app, name="audit")
    app.add_typer(users.app, name="user")
    app.add_typer(calc.app, name="calc")
    from ledger.cli import runs as run_commands

    app.add_typer(run_commands.app, name="run")
    from ledger.cli import logs

    app.add_typer(logs.app, name="log")
    from ledger.cli import batch_record

    app.add_typer(batch_record.app, name="record")
    app.command("demo")(guarded(demo.demo))


_register()


def main() -> None:
    """Console-script entry point."""
    app(prog_name="fluxledger")


if __name__ == "__main__":  # pragma: no cover
    main()
