"""Run the CLI in-process through typer's runner, as sqlite-utils tests its CLI."""

from __future__ import annotations

import json
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import pytest
from typer.testing import CliRunner

from ledger.cli.main import app


@dataclass
class Outcome:
    code: int
    stdout: str
    stderr: str
    exception: BaseException | None

    def json(self) -> dict[str, Any]:
        return json.loads(self.stdout)


@pytest.fixture
def cli() -> Callable[..., Outcome]:
    runner = CliRunner()

    def run(*args: str, input: str | None = None, env: dict[str, str] | None = None) -> Outcome:
        result = runner.invoke(app, list(args), input=input, env=env)
        # A SystemExit is how typer reports exit codes; anything else escaped as a traceback.
        exc = result.exception if not isinstance(result.exception, SystemExit) else None
        return Outcome(result.exit_code, result.stdout, result.stderr, exc)

    return run
