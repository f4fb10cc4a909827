"""The README's examples run as written (docs checked by tests, as sqlite-utils does)."""

from __future__ import annotations

import re
import shlex
from pathlib import Path

import pytest
from typer.testing import CliRunner

from ledger.cli.main import app

ROOT = Path(__file__).resolve().parents[1]
README = (ROOT / "README.md").read_text(encoding="utf-8")
EXAMPLES = [
    line.strip()
    for block in re.findall(r"```sh\n(.*?)```", README, flags=re.S)
    for line in block.splitlines()
    if line.strip().startswith("fluxledger ")
]


def test_readme_has_examples() -> None:
    assert len(EXAMPLES) >= 9


@pytest.mark.parametrize("line", EXAMPLES)
def test_readme_example_runs(line: str, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.chdir(ROOT)
    result = CliRunner().invoke(app, shlex.split(line)[1:])
    assert result.exception is None or isinstance(result.exception, SystemExit)
    assert result.exit_code == 0, result.stderr


def test_readme_lists_every_calc_command() -> None:
    from typer.main import get_command

    from ledger.cli.calc import app as calc_app

    names = set(get_command(calc_app).commands)  # type: ignore[attr-defined]
    for name in names:
        assert f"`calc {name}`" in README, f"README does not describe calc {name}"


def test_readme_states_the_site_caution() -> None:
    assert "validated procedures" in README and "quality unit" in README
    assert "caustic" in README


SESSION = [
    line.strip()
    for block in re.findall(r"```shell\n(.*?)```", README, flags=re.S)
    for line in block.splitlines()
    if line.strip().startswith("fluxledger ")
]


def test_readme_first_session_runs_in_order(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    """The logbook walk-through, typed as shown; every prompt answered with one password."""
    assert len(SESSION) >= 10
    monkeypatch.chdir(ROOT)
    monkeypatch.setenv("FLUXLEDGER_DATABASE_URL", f"sqlite:///{tmp_path}/readme.db")
    runner = CliRunner()
    for line in SESSION:
        result = runner.invoke(app, shlex.split(line)[1:], input="readme-pass-1\n" * 3)
        assert result.exception is None or isinstance(result.exception, SystemExit), line
        assert result.exit_code == 0, (line, result.stdout, result.stderr)
    assert not (ROOT / "fluxledger.db").exists()


def test_readme_lists_every_logbook_command() -> None:
    from typer.main import get_command

    root = get_command(app)
    for name, command in root.commands.items():  # type: ignore[attr-defined]
        if name in ("calc", "demo"):
            continue
        subs = getattr(command, "commands", None)
        if subs:
            for sub in subs:
                assert sub in README.split(f"`{name} ")[1].split("`")[0], f"{name} {sub}"
        else:
            assert f"`{name}`" in README, f"README does not describe {name}"
