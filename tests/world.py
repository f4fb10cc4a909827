"""A small logbook for tests: a fresh database with one user per role and one module type,
driven through the CLI as its users would drive it. Names and values are invented."""

from __future__ import annotations

import json
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from sqlalchemy import Engine, func, select
from typer.testing import CliRunner

from ledger.cli.main import app

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


@dataclass
class World:
    url: str

    def cli(self, *args: str, input: str | None = None) -> Result:
        result = CliRunner().invoke(app, [*args, "--db", self.url], input=input)
        exc = result.exception if not isinstance(result.exception, SystemExit) else None
        return Result(result.exit_code, result.stdout, result.stderr, exc)

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
    for login, role in ROLES.items():
        w.ok(
            w.as_user(
                "sysadm",
                "user",
                "add",
                login,
                "--name",
                NAMES[login],
                "--role",
                role,
                extra=[PASSWORDS[login]],
            )
        )
    w.ok(w.as_user("eng.ray", "module-type", "add", "HF-750", *TYPE_OPTIONS))
    return w
