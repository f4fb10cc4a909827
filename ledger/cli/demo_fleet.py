"""The demo's fleet (sample_records/fleet_history.toml) as the command lines people type.

Each module's story (received, baseline flow, cycles with their recoveries, pressure holds,
storage, a pre-use test) becomes the ``test water``, ``test integrity``, ``use``, ``care``
commands an operator would enter, with ``{days_ago:N}`` activity times and ``{date_ago:N}``
dates; each run's skid log is simulated (``ledger.cli.demo_log``) and its commands filled
in with the run's times. Demo
data only: nothing here is a rule; the commands themselves are judged by the usual services.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime, timedelta
from pathlib import Path
from typing import Any

from ledger.cli.demo_log import Shape, simulate

PRESSURES = "--feed '4.6 psi' --retentate '4.2 psi'"
CLEAN = ("--agent 'sodium hydroxide' --concentration '0.5 mol/L' --temperature '25 degC' "
         "--contact-time '60 min' --reagent-lot NX-2606-02 --procedure CP-NAOH-05 "
         "--rinse-ph 7.2 --rinse-conductivity '1.5 uS/cm'")  # fmt: skip
OPERATOR = "op.brandt"
# Each run's log: 2.4 L concentrated to 600 mL, diafiltered, concentrated to 200 mL.
RUN_SHAPE = Shape(initial_l=2.4, df_l=0.6, final_l=0.2, tmp_step_s=3600.0, tmp_step_bar=0.04,
                  fouling=0.08, fouling_tau_s=5400.0)  # fmt: skip
SIGNED_ORDER = ("performed", "verified", "reviewed", "approved")


@dataclass(frozen=True)
class RunLog:
    """A fleet run's skid export (where it goes, its text) and the placeholders its commands
    use."""

    path: Path
    text: str
    values: dict[str, str]


def _temperature(serial: str, n: int) -> str:
    """Water temperatures that vary a little, as they do (19.6-20.6 degC), reproducibly."""
    wobble = (sum(map(ord, serial)) * 7 + n * 13) % 11
    return f"'{19.6 + wobble / 10:.1f} degC'"


def _at(days: float) -> str:
    return f"{{days_ago:{days:.3f}}}"


def module_steps(m: dict[str, Any], lots: dict[str, int]) -> list[dict[str, str]]:
    """The commands of one module's story, oldest first (``lots``: the next lot number of each
    product, shared by the fleet)."""
    serial, r = m["serial"], float(m["received"])
    out = [{"title": f"{serial}: {m['story']}", "user": OPERATOR,
            "command": f"module add {serial} --type {m['type']} --manufacturer-lot "
                       f"{m['manufacturer_lot']} --received {{date_ago:{r:g}}}"}]  # fmt: skip
    base = float(m["baseline_flow"])
    out.append({"user": OPERATOR, "command": f"test water {serial} --stage baseline {PRESSURES} "
                f"--flow '{base:.1f} mL/min' --temperature {_temperature(serial, 0)} "
                f"--activity-time {_at(r - 1)}"})  # fmt: skip
    out.append({"user": OPERATOR, "command": f"test integrity {serial} --start '15.00 psi' "
                f"--end '14.96 psi' --hold-time '5 min' "
                f"--activity-time {_at(r - 1.1)}"})  # fmt: skip
    holds = {int(k): v for k, v in m.get("integrity", {}).items()}
    product = m["product"]
    prefix = product.replace("-", "")
    for n, recovery in enumerate(m["recovery"], start=1):
        t = float(m["first_use"]) - (n - 1) * float(m["every"])
        lots[product] = lots.get(product, 100) + 1
        lot = f"{prefix}-26-{lots[product]:03d}"
        out += [
            {"user": OPERATOR, "command": f"use start {serial} --product {product} --lot {lot} "
             f"--activity-time {_at(t)}"},
            {"user": OPERATOR, "command": f"use end {serial} --activity-time {_at(t - 0.25)}"},
            {"user": OPERATOR, "command": f"care clean {serial} {CLEAN} "
             f"--activity-time {_at(t - 0.3)}"},
            {"user": OPERATOR, "command": f"test water {serial} --stage post-clean {PRESSURES} "
             f"--flow '{base * recovery:.1f} mL/min' --temperature {_temperature(serial, n)} "
             f"--activity-time {_at(t - 0.4)}"},
        ]  # fmt: skip
        if n in holds:
            out.append({"user": OPERATOR, "command": f"test integrity {serial} --start "
                        f"'15.00 psi' --end '{holds[n]}' --hold-time '5 min' "
                        f"--activity-time {_at(t - 0.45)}"})  # fmt: skip
    if "store" in m:
        out.append({"user": OPERATOR, "command": f"care store {serial} --solution '20 % ethanol' "
                    f"--activity-time {_at(float(m['store']))}"})  # fmt: skip
    if "pre_use" in m:
        p = m["pre_use"]
        out.append({"user": OPERATOR, "command": f"test water {serial} --stage pre-use "
                    f"{PRESSURES} --flow '{float(p['flow']):.1f} mL/min' --temperature "
                    f"{_temperature(serial, 99)} "
                    f"--activity-time {_at(float(p['days']))}"})  # fmt: skip
    return out


def run_log(run: dict[str, Any], out: Path, now: datetime) -> RunLog:
    """The run's 1 Hz skid export (to be written into OUT) and the times its commands use: the
    plan an hour before the start, each step signed at the end of its phase, verified three
    minutes later."""
    start = now - timedelta(days=float(run["start"]))
    log = simulate(start, step_s=1.0, seed=int(run["seed"]), pinch_s=None, shape=RUN_SHAPE)
    path = out / f"{run['lot'].lower()}_skid_export.csv"
    ends = log.phase_ends
    end = start + timedelta(seconds=max(ends.values()) + 60)
    values = {"run": str(run["run"]), "module": run["module"], "lot": run["lot"],
              "plan_at": (start - timedelta(hours=1)).isoformat(timespec="seconds"),
              "run_start": start.isoformat(timespec="seconds"),
              "run_end": end.isoformat(timespec="seconds")}  # fmt: skip
    phases = ("equilibrate", "concentrate", "diafilter", "concentrate_final", "recover")
    for n, phase in enumerate(phases, start=1):
        done = start + timedelta(seconds=ends[phase])
        values[f"step{n}_at"] = done.isoformat(timespec="seconds")
        values[f"step{n}_checked"] = (done + timedelta(minutes=3)).isoformat(timespec="seconds")
    return RunLog(path, "\n".join(log.lines) + "\n", values)


def run_steps(steps: list[dict[str, str]], signed: str) -> list[dict[str, str]]:
    """The run's commands, leaving out those after the signature it stops at."""
    reached = SIGNED_ORDER.index(signed)
    return [s for s in steps if SIGNED_ORDER.index(s.get("after", "performed")) <= reached]


def fleet_names(scenario: dict[str, Any]) -> set[str]:
    """The skid-export file names the fleet's runs write into the output folder."""
    return {f"{r['lot'].lower()}_skid_export.csv" for r in scenario.get("runs", [])}
