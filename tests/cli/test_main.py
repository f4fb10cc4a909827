"""The entry point loads only the command group a command line names, and text options
skip typer's adapter without changing what a command receives or refuses."""

from __future__ import annotations

import subprocess
import sys

import pytest

from ledger.cli import main as entry
from tests.world import invoke


@pytest.mark.parametrize(
    ("argv", "named"),
    [
        (["module", "list", "--db", "x.db"], "module"),
        (["module-type", "add", "T"], "module-type"),
        (["fitness", "M-1"], "fitness"),
        (["--help"], None),
        (["--version"], None),
        ([], None),
        (["nosuch", "list"], None),
        (["-x", "module"], None),
    ],
)
def test_named_command(argv: list[str], named: str | None) -> None:
    assert entry.named_command(argv) == named


def test_a_named_group_alone_is_built() -> None:
    tree = entry.build("log")
    names = [info.name for info in tree.registered_groups]
    assert names == ["log"]
    assert tree.registered_commands == []


def test_the_whole_tree_holds_every_command() -> None:
    tree = entry.build()
    names = {c.name for c in tree.registered_commands} | {g.name for g in tree.registered_groups}
    assert names == set(entry.COMMANDS)


def _loaded(argv: list[str]) -> set[str]:
    code = (
        "import sys; sys.argv = ['fluxledger', *sys.argv[1:]]\n"
        "from ledger.cli.main import main\n"
        "try:\n    main()\nexcept SystemExit:\n    pass\n"
        "print(' '.join(m for m in sys.modules if m.startswith('ledger.cli.')))"
    )
    done = subprocess.run([sys.executable, "-c", code, *argv], capture_output=True, text=True)
    return set(done.stdout.split("\n")[-2].split())


def test_module_help_loads_no_other_group() -> None:
    loaded = _loaded(["module", "--help"])
    assert "ledger.cli.modules" in loaded
    assert not {"ledger.cli.runs", "ledger.cli.calc", "ledger.cli.demo"} & loaded


def test_text_option_passes_through_and_int_is_still_checked() -> None:
    # a str option reaches the command as typed (the calculator parses it and answers)
    good = invoke(["calc", "viscosity", "--temperature", "20 degC", "--json"])
    assert good.code == 0, good.stderr
    assert good.json()["command"]
    # an int argument keeps typer's own check: text is refused before the command runs
    bad = invoke(["run", "show", "abc"])
    assert bad.code == 2
    assert "integer" in bad.stderr
