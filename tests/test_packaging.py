"""The wheel carries every package, the Alembic migrations included (pyproject lists them)."""

from __future__ import annotations

import tomllib
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def test_every_package_is_listed_in_pyproject() -> None:
    listed = set(tomllib.loads((ROOT / "pyproject.toml").read_text())["tool"]["setuptools"][
        "packages"])  # fmt: skip
    found = {
        ".".join(p.parent.relative_to(ROOT).parts) for p in (ROOT / "ledger").rglob("__init__.py")
    }
    found |= {"ledger.migrations", "ledger.migrations.versions", "ledger.templates"}
    assert listed == found


def test_migrations_map_to_the_top_level_folder() -> None:
    setuptools = tomllib.loads((ROOT / "pyproject.toml").read_text())["tool"]["setuptools"]
    assert setuptools["package-dir"] == {
        "ledger.migrations": "migrations",
        "ledger.migrations.versions": "migrations/versions",
        "ledger.templates": "templates",
    }
    assert list((ROOT / "templates").glob("*.toml")), "the shipped master-record templates"
    assert (ROOT / "migrations" / "__init__.py").is_file()
    assert (ROOT / "migrations" / "versions" / "__init__.py").is_file()
