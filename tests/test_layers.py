"""DEVELOPERS.md: imports point one way; science/ and rules/ stay pure; the CLI starts light."""

from __future__ import annotations

import ast
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
PURE = ["ledger/science", "ledger/rules"]
FORBIDDEN_IN_PURE = {"pandas", "pint", "sqlmodel", "sqlalchemy", "typer", "rich", "reportlab"}
FORBIDDEN_LEDGER = {"ledger.store", "ledger.logbook", "ledger.runs", "ledger.records", "ledger.cli",
                    "ledger.units", "ledger.pointsfile"}  # fmt: skip


def imported_modules(path: Path) -> set[str]:
    tree = ast.parse(path.read_text(encoding="utf-8"))
    names: set[str] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            names.update(alias.name for alias in node.names)
        elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
            names.add(node.module)
    return names


@pytest.mark.parametrize(
    "path", sorted(p for folder in PURE for p in (ROOT / folder).rglob("*.py")), ids=str
)
def test_pure_layers_import_nothing_above_them(path: Path) -> None:
    for name in imported_modules(path):
        top = name.split(".")[0]
        assert top not in FORBIDDEN_IN_PURE, f"{path.name} imports {name}"
        assert not any(name == f or name.startswith(f + ".") for f in FORBIDDEN_LEDGER), (
            f"{path.name} imports {name}"
        )


def _loaded_after(statement: str) -> set[str]:
    code = f"import sys; {statement}; print('\\n'.join(sorted(sys.modules)))"
    out = subprocess.run(
        [sys.executable, "-c", code], capture_output=True, text=True, check=True, cwd=ROOT
    )
    return set(out.stdout.split())


def test_science_loads_without_pandas_or_pint() -> None:
    mods = _loaded_after(
        "import ledger.science.water, ledger.science.permeability, ledger.science.hydraulics, "
        "ledger.science.concentration, ledger.science.integrity, ledger.science.gel, "
        "ledger.science.trending, ledger.science.fit"
    )
    assert not {"pandas", "pint", "sqlalchemy", "sqlmodel"} & mods


def test_cli_start_up_path_has_no_heavy_imports() -> None:
    # `fluxledger --help` must stay close to bare typer (DEVELOPERS.md): no numpy, pint, pandas.
    mods = _loaded_after("import ledger.cli.main")
    assert not {"numpy", "pint", "pandas", "scipy", "sqlalchemy", "reportlab"} & mods
    # Entries load with the command that uses them, not when the commands are registered.
    assert not {m for m in mods if m.startswith("ledger.entries.")} - {"ledger.entries.defaults"}


# Each layer may use the ones below it only (DEVELOPERS.md).
FRONT_ENDS = {"ledger.cli", "ledger.web"}
ABOVE = {
    "ledger/store": {"ledger.logbook", "ledger.runs", "ledger.records", "ledger.entries",
                     "ledger.rules", *FRONT_ENDS},
    "ledger/logbook": {"ledger.runs", "ledger.records", "ledger.entries", *FRONT_ENDS},
    "ledger/runs": {"ledger.records", "ledger.entries", *FRONT_ENDS},
    "ledger/records": {"ledger.entries", *FRONT_ENDS},
    "ledger/entries": FRONT_ENDS,
    # A front end holds no persistence: sessions, transactions and queries live in services.
    "ledger/cli": {"ledger.store", "sqlmodel", "sqlalchemy"},
    # The web pages also leave every rule to the services: no ledger.rules or ledger.science.
    "ledger/web": {"ledger.store", "sqlmodel", "sqlalchemy", "ledger.rules", "ledger.science",
                   "ledger.cli"},
    "migrations": {"ledger.logbook", "ledger.runs", "ledger.records", "ledger.entries",
                   "ledger.rules", "ledger.science", *FRONT_ENDS},
}  # fmt: skip


@pytest.mark.parametrize(
    ("path", "forbidden"),
    [(p, ABOVE[folder]) for folder in ABOVE for p in sorted((ROOT / folder).rglob("*.py"))],
    ids=lambda v: str(v) if isinstance(v, Path) else "",
)
def test_layers_import_only_downwards(path: Path, forbidden: set[str]) -> None:
    for name in imported_modules(path):
        assert not any(name == f or name.startswith(f + ".") for f in forbidden), (
            f"{path.relative_to(ROOT)} imports {name}"
        )


def test_logbook_commands_do_not_load_pandas_or_reportlab() -> None:
    mods = _loaded_after(
        "import ledger.logbook.waterflux, ledger.logbook.integrity, ledger.logbook.care, "
        "ledger.logbook.uses, ledger.logbook.fitness, ledger.store.audit"
    )
    assert not {"pandas", "reportlab", "scipy"} & mods


# What only the entry layer does: turn typed text into SI values, read users' files.
PARSERS = {"parse", "to_si", "split_number", "read_points", "parse_time", "read_log"}


@pytest.mark.parametrize(
    "path",
    sorted([*(ROOT / "ledger/cli").rglob("*.py"), *(ROOT / "ledger/web").rglob("*.py")]),
    ids=str,
)
def test_front_ends_leave_parsing_to_the_entry_layer(path: Path) -> None:
    tree = ast.parse(path.read_text(encoding="utf-8"))
    calls = {
        node.func.attr if isinstance(node.func, ast.Attribute) else getattr(node.func, "id", "")
        for node in ast.walk(tree)
        if isinstance(node, ast.Call)
    }
    imported = imported_modules(path)
    assert not {"ledger.units", "ledger.pointsfile", "ledger.logbook.times"} & imported, path
    assert not PARSERS & calls, f"{path.relative_to(ROOT)} calls {sorted(PARSERS & calls)}"


def test_no_code_cites_documents_outside_the_repository() -> None:
    for folder in ("ledger", "tests", "bench", "migrations"):
        for path in (ROOT / folder).rglob("*.py"):
            text = path.read_text(encoding="utf-8")
            assert "DESIGN" + " §" not in text and "DESIGN" + ".md" not in text, path
