"""Entry point of the ``fluxledger`` command. Heavy imports stay inside the commands.

A process runs one command, so ``main`` imports only the command group named on its command
line (``fluxledger module list`` loads ``ledger.cli.modules`` and nothing of ``runs`` or
``calc``); help, an unknown name or a bare ``fluxledger`` load every group. Importing ``app``
from here (the tests, the demo) gives the whole tree.
"""

from __future__ import annotations

import os
import sys
from collections.abc import Callable, Sequence
from importlib import import_module
from typing import Any

import typer

from ledger import __version__

HELP = (
    "Module history, fit-for-reuse decisions and batch records for hollow-fiber TFF.\n\n"
    "Acceptance limits come from your site's validated procedures and its quality unit; "
    "this tool supports their decisions and does not replace them."
)

# Command name -> (module under ledger.cli, attribute, "group" or "command"), in help order.
COMMANDS: dict[str, tuple[str, str, str]] = {
    "init": ("setup", "init", "command"),
    "module-type": ("modules", "types_app", "group"),
    "module": ("modules", "app", "group"),
    "test": ("logbook", "test_app", "group"),
    "care": ("logbook", "care_app", "group"),
    "use": ("logbook", "use_app", "group"),
    "void": ("logbook", "void", "command"),
    "fitness": ("fitness", "fitness", "command"),
    "audit": ("audit", "app", "group"),
    "backup": ("backup", "backup", "command"),
    "export": ("exports", "export", "command"),
    "load-export": ("exports", "load_export", "command"),
    "user": ("users", "app", "group"),
    "calc": ("calc", "app", "group"),
    "run": ("runs", "app", "group"),
    "log": ("logs", "app", "group"),
    "record": ("batch_record", "app", "group"),
    "skid": ("skids", "app", "group"),
    "template": ("templates", "app", "group"),
    "site": ("site", "app", "group"),
    "fleet": ("fleet", "fleet", "command"),
    "history": ("history", "history", "command"),
    "demo": ("demo", "demo", "command"),
    "serve": ("serve", "serve", "command"),
    "import-logbook": ("import_logbook", "import_logbook", "command"),
}


def _version(value: bool) -> None:
    if value:
        typer.echo(f"fluxledger {__version__}")
        raise typer.Exit()


def root(
    version: bool = typer.Option(
        False, "--version", callback=_version, is_eager=True, help="Print the version and exit."
    ),
) -> None:
    """Module history, fit-for-reuse decisions and batch records for hollow-fiber TFF."""
    from ledger.cli.session import reset_stdin

    reset_stdin()


def build(only: str | None = None) -> typer.Typer:
    """The command tree: every command, or only the one named ``only`` (a key of COMMANDS)."""
    from ledger.cli.coercion import install
    from ledger.cli.common import guarded

    install()
    tree = typer.Typer(
        name="fluxledger",
        help=HELP,
        no_args_is_help=True,
        pretty_exceptions_enable=False,
        rich_markup_mode=None,
        add_completion=False,
    )
    tree.callback()(root)
    for name, (module, attribute, kind) in COMMANDS.items():
        if only is not None and name != only:
            continue
        target: Any = getattr(import_module(f"ledger.cli.{module}"), attribute)
        if kind == "group":
            tree.add_typer(target, name=name)
        else:
            wrap: Callable[[Any], Any] = guarded if name == "demo" else (lambda f: f)
            tree.command(name)(wrap(target))
    return tree


def named_command(argv: Sequence[str]) -> str | None:
    """The command a command line names, when it names one of COMMANDS; None for help,
    --version, nothing or an unknown name (those need the whole tree)."""
    for token in argv:
        if token.startswith("-"):
            return None  # a root option (--help, --version) comes before any command
        return token if token in COMMANDS else None
    return None


_full: typer.Typer | None = None


def __getattr__(name: str) -> Any:
    """``app``: the whole command tree, built once on first use."""
    global _full
    if name == "app":
        if _full is None:
            _full = build()
        return _full
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def main() -> None:
    """Console-script entry point."""
    # The logbook uses no pydantic plugin; looking for them scans every installed
    # package's entry points (about 25 ms) when the first table class is made.
    os.environ.setdefault("PYDANTIC_DISABLE_PLUGINS", "1")
    build(named_command(sys.argv[1:]))(prog_name="fluxledger")


if __name__ == "__main__":  # pragma: no cover
    main()
