"""A small logbook for tests: a fresh database with one user per role and one module type,
driven through the CLI as its users would drive it. Names and values are invented."""

from __future__ import annotations

import gc
import itertools
import json
import os
import shutil
import sqlite3
import sys
import uuid
from collections.abc import Callable, Iterator, Mapping, Sequence
from contextlib import contextmanager
from dataclasses import dataclass
from functools import cache
from pathlib import Path
from typing import TYPE_CHECKING, Any

from sqlalchemy import Engine, func, select
from typer.testing import CliRunner

from ledger.cli.main import app

if TYPE_CHECKING:
    from typer._click import Command

SAMPLES = Path(__file__).resolve().parent.parent / "sample_records"

PASSWORDS = {
    "sysadm": "admin-pass-1",
    "eng.ray": "engineer-pass-1",
    "qa.lin": "quality-pass-1",
    "op.kim": "operator-pass-1",
}
ROLES = {"eng.ray": "engineer", "qa.lin": "qa", "op.kim": "operator"}
NAMES = {"eng.ray": "Ray Okafor", "qa.lin": "Lin Marchetti", "op.kim": "Kim Varga"}

TYPE_OPTIONS = [
    "--membrane", "mPES", "--pore-rating", "750 kDa", "--lumen-diameter", "0.5 mm",
    "--fibers", "120", "--length", "30 cm", "--area", "565 cm^2",
    "--decay-limit", "0.05 psi/min", "--test-pressure", "15 psi", "--reuse-limit", "3",
    "--storage-limit", "30 d", "--bubble-point-min", "40 psi", "--max-loading", "200 L/m^2",
]  # fmt: skip


PROCEDURE = [
    "care", "procedure", "add", "CP-NAOH-05", "--title", "0.5 M NaOH, 60 min, 25 degC",
    "--agent", "sodium hydroxide", "--concentration-min", "0.45 mol/L",
    "--concentration-max", "0.55 mol/L", "--temperature-min", "20 degC",
    "--temperature-max", "30 degC", "--contact-time-min", "60 min", "--rinse-ph-min", "5",
    "--rinse-ph-max", "8", "--rinse-conductivity-max", "2 uS/cm",
]  # fmt: skip


@dataclass
class Result:
    code: int
    stdout: str
    stderr: str
    exception: BaseException | None

    def json(self) -> Any:
        return json.loads(self.stdout)


@cache
def command() -> Command:
    """The click command of the app, built once: typer's runner rebuilds it on every call."""
    import typer.main

    return typer.main.get_command(app)


def invoke(
    args: Sequence[str], input: str | None = None, env: Mapping[str, str] | None = None
) -> Result:
    """Run the CLI in-process as typer's ``CliRunner.invoke`` does, on the cached command.

    The root callback still runs on every call (it forgets buffered stdin lines). A
    SystemExit is how the CLI reports its exit code; any other exception escaped as a
    traceback and is returned in ``exception``.
    """
    runner = CliRunner()
    cli = command()
    exception: BaseException | None = None
    code = 0
    with runner.isolation(input=input, env=env) as streams:
        try:
            cli.main(args=list(args), prog_name=runner.get_default_prog_name(cli))
        except SystemExit as exit_:
            status = exit_.code
            if status is None:
                status = 0
            if not isinstance(status, int):
                sys.stdout.write(f"{status}\n")
                status = 1
            code = status
        except Exception as exc:
            exception = exc
            code = 1
        finally:
            sys.stdout.flush()
            sys.stderr.flush()
            out, err = streams[0].getvalue(), streams[1].getvalue()
    return Result(code, _text(out, runner.charset), _text(err, runner.charset), exception)


@contextmanager
def one_click_command() -> Iterator[None]:
    """Make ``typer.main.get_command(app)`` return the cached command while inside.

    For code under test that builds the command for each step it runs in-process (the demo
    runs some eighty commands); other Typer apps are built as usual.
    """
    import typer.main

    command()  # built (and cached) with the real function, before it is replaced
    real = typer.main.get_command

    def get_command(typer_instance: Any) -> Command:
        return command() if typer_instance is app else real(typer_instance)

    typer.main.get_command = get_command
    try:
        yield
    finally:
        typer.main.get_command = real


def _text(data: bytes, charset: str) -> str:
    return data.decode(charset, "replace").replace("\r\n", "\n")


@dataclass
class World:
    url: str

    def cli(self, *args: str, input: str | None = None) -> Result:
        return invoke([*args, "--db", self.url], input=input)

    def as_user(self, user: str, *args: str, extra: list[str] | None = None) -> Result:
        """Run a write command as ``user``; ``extra`` are further stdin lines (new passwords)."""
        lines = [PASSWORDS.get(user, "wrong-password"), *(extra or [])]
        return self.cli(*args, "--user", user, "--password-stdin", input="\n".join(lines) + "\n")

    def engine(self) -> Engine:
        from ledger.store.engine import connect, resolve_url

        return connect(resolve_url(self.url))

    def snapshot(self) -> dict[str, Any]:
        """Row counts of every table and the audit-chain head: equal means nothing was written."""
        from sqlmodel import SQLModel

        import ledger.store.tables
        from ledger.store.registry import load_all

        load_all()
        engine = self.engine()
        out: dict[str, Any] = {}
        with engine.connect() as conn:
            for name, table in sorted(SQLModel.metadata.tables.items()):
                out[name] = conn.execute(select(func.count()).select_from(table)).scalar_one()
            head = conn.execute(
                select(ledger.store.tables.AuditHead.seq, ledger.store.tables.AuditHead.hash)  # type: ignore[call-overload]
            ).one()
            out["head"] = tuple(head)
        engine.dispose()
        return out

    # Common steps -------------------------------------------------------------------------

    def add_user(self, login: str, name: str, role: str, password: str) -> None:
        """As a site does it: the administrator adds the account with a temporary password and
        its owner then chooses their own (here ``password``; PASSWORDS must hold it)."""
        temporary = f"temporary-{login}-1"
        self.ok(self.as_user("sysadm", "user", "add", login, "--name", name, "--role", role,
                             extra=[temporary]))  # fmt: skip
        self.ok(self.cli("user", "passwd", login, "--user", login, "--password-stdin",
                         input=f"{temporary}\n{password}\n"))  # fmt: skip

    def add_module(self, serial: str = "QMB-0142") -> None:
        self.ok(self.as_user("op.kim", "module", "add", serial, "--type", "HF-750"))

    def baseline(self, serial: str = "QMB-0142", flow: str = "170 mL/min") -> Result:
        return self.water(serial, "baseline", flow)

    def water(self, serial: str, stage: str, flow: str, *more: str) -> Result:
        return self.as_user(
            "op.kim", "test", "water", serial, "--stage", stage, "--feed", "3.2 psi",
            "--retentate", "2.8 psi", "--flow", flow, "--temperature", "20 degC", *more,
        )  # fmt: skip

    def integrity(self, serial: str = "QMB-0142", end: str = "14.95 psi", *more: str) -> Result:
        return self.as_user(
            "op.kim", "test", "integrity", serial, "--start", "15 psi", "--end", end,
            "--hold-time", "5 min", *more,
        )  # fmt: skip

    def clean(self, serial: str = "QMB-0142", *more: str) -> Result:
        return self.as_user(
            "op.kim", "care", "clean", serial, "--agent", "sodium hydroxide",
            "--concentration", "0.5 mol/L", "--temperature", "25 degC", "--contact-time",
            "60 min", "--reagent-lot", "NX-2611-03", "--rinse-ph", "7.2",
            "--rinse-conductivity", "1.4 uS/cm", *more,
        )  # fmt: skip

    def wide_log_tolerance(self) -> None:
        """Let skid logs reach 6 h outside their run: test flows start a run now and import a
        log written for the two hours before (the rule itself is tested at its default)."""
        why = "test flow: the log is written for the hours before the run"
        self.ok(self.as_user("eng.ray", "run", "log-tolerance", "--tolerance", "6 h",
                             "--reason", why))  # fmt: skip

    def ready(self, serial: str = "QMB-0142") -> None:
        """Register a module and commission it (baseline + integrity): available."""
        self.add_module(serial)
        self.ok(self.baseline(serial))
        self.ok(self.integrity(serial))

    def cycle(
        self, serial: str = "QMB-0142", lot: str = "QB117-26-014", recovery_flow: str = "165 mL/min"
    ) -> Result:
        """Use, end, post-use test, clean and post-clean test; return the post-clean result."""
        self.ok(self.as_user("op.kim", "use", "start", serial, "--product", "QB-117", "--lot", lot))
        self.ok(self.as_user("op.kim", "use", "end", serial))
        self.ok(self.water(serial, "post-use", "90 mL/min"))
        self.ok(self.clean(serial))
        return self.water(serial, "post-clean", recovery_flow)

    def status(self, serial: str = "QMB-0142") -> str:
        shown = self.cli("module", "show", serial, "--json")
        self.ok(shown)
        return str(shown.json()["module"]["status"])

    @staticmethod
    def ok(result: Result) -> Result:
        assert result.code == 0, (result.code, result.stdout, result.stderr, result.exception)
        return result


def build(url: str) -> World:
    """Initialise the database, add one user per role and the module type HF-750."""
    w = World(url)
    pw = PASSWORDS["sysadm"]
    w.ok(
        w.cli(
            "init", "--admin", "sysadm", "--name", "Ida Brandt", "--password-stdin", input=f"{pw}\n"
        )
    )
    if url.startswith("postgresql"):  # reads need a signed-in user there unless turned off
        w.ok(w.as_user("sysadm", "user", "reads-need-login", "off", "--reason", "test world"))
    for login, role in ROLES.items():
        w.add_user(login, NAMES[login], role, PASSWORDS[login])
    w.ok(w.as_user("eng.ray", "module-type", "add", "HF-750", *TYPE_OPTIONS))
    register_shipped_templates(w)
    return w


# The shipped templates are in force in every world from this time on, before any clock a
# test freezes, so runs planned at any test time find them (an approval entered late).
TEMPLATES_EFFECTIVE = "2026-01-01T00:00:00+00:00"


def register_shipped_templates(w: World) -> None:
    """The engineer submits every shipped template and QA approves each, in force from
    TEMPLATES_EFFECTIVE (the steps a site takes before planning runs on them)."""
    from ledger.runs.template import shipped_dir

    why = "test world: approved before any test's clock"
    for path in sorted(shipped_dir().glob("*.toml")):
        submitted = w.ok(w.as_user("eng.ray", "template", "submit", str(path), "--json")).json()
        version = submitted["version"]
        w.ok(w.as_user("qa.lin", "template", "approve", version["template"], version["version"],
                       "--effective-from", TEMPLATES_EFFECTIVE, "--late-reason", why))  # fmt: skip


# --- Built once, copied per test ------------------------------------------------------------

Recipe = Callable[[World, Path], None]
"""Steps that take a fresh world further; files they write go into the folder given."""

DB_FILE = "ledger.db"


@contextmanager
def cheap_hashes() -> Iterator[None]:
    """The tests' cheap argon2 setting (tests/conftest.py), for worlds built outside a test."""
    from argon2 import PasswordHasher

    import ledger.logbook.auth as auth

    cheap = PasswordHasher(time_cost=1, memory_cost=64, parallelism=1)
    saved = auth._hasher
    auth._hasher = lambda: cheap
    try:
        yield
    finally:
        auth._hasher = saved


def _settle_sqlite(path: Path) -> None:
    """Close what the CLI left open and fold the WAL into the file, so one file is the copy."""
    gc.collect()  # engines the commands made are closed when collected
    con = sqlite3.connect(path)
    try:
        con.execute("PRAGMA wal_checkpoint(TRUNCATE)")
        mode = con.execute("PRAGMA journal_mode = DELETE").fetchone()[0]
    finally:
        con.close()
    assert mode == "delete", f"{path} is still open elsewhere (journal mode {mode})"


class _Postgres:
    """Whole databases of one server: build a template once, copy it per test."""

    def __init__(self, base: str) -> None:
        from sqlalchemy import create_engine, make_url
        from sqlalchemy.pool import NullPool

        from ledger.store.engine import resolve_url

        self.base = make_url(base)
        self.admin = create_engine(
            resolve_url(base), isolation_level="AUTOCOMMIT", poolclass=NullPool
        )
        worker = os.environ.get("PYTEST_XDIST_WORKER", "main")
        self.prefix = f"fl_{worker}_{uuid.uuid4().hex[:8]}"
        self.count = itertools.count(1)
        self.made: set[str] = set()  # dropped at the end, whatever happened to the tests

    def url(self, name: str) -> str:
        return self.base.set(database=name).render_as_string(hide_password=False)

    def new_name(self) -> str:
        return f"{self.prefix}_{next(self.count)}"

    def execute(self, sql: str, **params: object) -> None:
        from sqlalchemy import text

        with self.admin.connect() as conn:
            conn.execute(text(sql), params)

    def create(self, name: str, template: str | None = None) -> None:
        self.made.add(name)
        self.execute(f'CREATE DATABASE "{name}"' + (f' TEMPLATE "{template}"' if template else ""))

    def settle(self, name: str) -> None:
        """A template may have no connection when it is copied: end those the CLI left."""
        gc.collect()
        self.execute(
            "SELECT pg_terminate_backend(pid, 10000) FROM pg_stat_activity "
            "WHERE datname = :name AND pid <> pg_backend_pid()",
            name=name,
        )

    def drop(self, name: str) -> None:
        self.execute(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)')
        self.made.discard(name)


class Worlds:
    """One worker's worlds: each (backend, recipe) is built once, and every test gets a copy.

    SQLite: the built file is copied into the test's tmp_path. PostgreSQL: a database is made
    from the built one with CREATE DATABASE ... TEMPLATE and dropped after the test.
    Files a recipe wrote (skid logs) are copied into the test's tmp_path too.
    """

    def __init__(self, tmp: Any, postgres_url: str | None) -> None:
        self._tmp = tmp
        self._postgres_url = postgres_url
        self._pg: _Postgres | None = None
        self._built: dict[tuple[str, str], tuple[Path, str | None]] = {}

    def _postgres(self) -> _Postgres:
        if self._pg is None:
            assert self._postgres_url, "no PostgreSQL URL"
            self._pg = _Postgres(self._postgres_url)
        return self._pg

    def _template(self, backend: str, recipe: Recipe | None) -> tuple[Path, str | None]:
        key = (backend, "base" if recipe is None else f"{recipe.__module__}.{recipe.__qualname__}")
        if key in self._built:
            return self._built[key]
        folder = Path(self._tmp.mktemp(f"world-{backend}"))
        with cheap_hashes():
            if backend == "sqlite":
                db = folder / DB_FILE
                if recipe is None:
                    build(f"sqlite:///{db}")
                else:
                    base, _ = self._template(backend, None)
                    shutil.copyfile(base / DB_FILE, db)
                    recipe(World(f"sqlite:///{db}"), folder)
                _settle_sqlite(db)
                name = None
            else:
                pg = self._postgres()
                name = pg.new_name()
                if recipe is None:
                    pg.create(name)
                    build(pg.url(name))
                else:
                    base_folder, base_name = self._template(backend, None)
                    assert base_name is not None
                    pg.create(name, template=base_name)
                    for f in base_folder.iterdir():
                        shutil.copyfile(f, folder / f.name)
                    recipe(World(pg.url(name)), folder)
                pg.settle(name)
        self._built[key] = (folder, name)
        return folder, name

    @contextmanager
    def copy(self, backend: str, dest: Path, recipe: Recipe | None = None) -> Iterator[World]:
        """A world of the test's own in ``dest`` (its tmp_path), as ``recipe`` left it."""
        folder, template = self._template(backend, recipe)
        for f in folder.iterdir():
            shutil.copyfile(f, dest / f.name)
        if template is None:
            yield World(f"sqlite:///{dest / DB_FILE}")
            return
        pg = self._postgres()
        name = pg.new_name()
        pg.create(name, template=template)
        try:
            yield World(pg.url(name))
        finally:
            pg.drop(name)

    def close(self) -> None:
        if self._pg is None:
            return
        for name in sorted(self._pg.made):
            self._pg.drop(name)
        self._pg.admin.dispose()
