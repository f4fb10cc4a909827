"""Run the CLI in-process through typer's runner, as sqlite-utils tests its CLI."""

from __future__ import annotations

import json
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import pytest

from tests.world import invoke


@dataclass
class Outcome:
    code: int
    stdout: str
    stderr: str
    exception: BaseException | None

    def json(self) -> dict[str, Any]:
        return json.loads(self.stdout)


def run(*args: str, input: str | None = None, env: dict[str, str] | None = None) -> Outcome:
    """One invocation of the cached click command (tests.world.invoke)."""
    r = invoke(list(args), input=input, env=env)
    # A SystemExit is how typer reports exit codes; anything else escaped as a traceback.
    return Outcome(r.code, r.stdout, r.stderr, r.exception)


@pytest.fixture
def cli() -> Callable[..., Outcome]:
    return run
