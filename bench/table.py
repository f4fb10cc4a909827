"""The one table `make bench` ends with: a row per figure, printed and written to a file.

Each benchmark returns ``Row`` objects; ``render`` prints them as plain text, ``markdown`` and
``as_json`` give the same rows for bench/latest.md and bench/latest.json, headed by the date
and the size of the machine (CPUs, memory, load average) the figures were measured on.
"""

from __future__ import annotations

import os
import platform
import subprocess
from dataclasses import asdict, dataclass
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

ROOT = Path(__file__).resolve().parent.parent


@dataclass
class Row:
    """One figure: what was measured, its value and baseline (same unit), the target, result.

    ``ok`` is True (meets), False (misses) or None (information only, or not measured).
    ``ratio`` is measured / baseline when both are known.
    """

    what: str
    measured: float | None
    unit: str
    baseline: float | None = None
    target: str = ""
    ok: bool | None = None
    note: str = ""
    status: str = ""  # "error" or "skipped" when there is no measured value

    @property
    def ratio(self) -> float | None:
        if self.measured is None or self.baseline is None or self.baseline == 0:
            return None
        return self.measured / self.baseline

    @property
    def result(self) -> str:
        if self.status:
            return self.status
        if self.ok is None:
            return "info" if self.target == "" else "-"
        return "meets" if self.ok else "MISSES"


def error_row(what: str, exc: BaseException) -> Row:
    """A row for a benchmark that could not run (the message's first line)."""
    first = (str(exc).strip().splitlines() or [type(exc).__name__])[0]
    return Row(what, None, "", status="ERROR", note=f"{type(exc).__name__}: {first[:160]}")


def skipped_row(what: str, why: str, target: str = "") -> Row:
    return Row(what, None, "", target=target, status="skipped", note=why)


def _number(value: float | None, unit: str) -> str:
    if value is None:
        return "-"
    if unit in ("rows/s",) or (unit == "" and float(value).is_integer()):
        return f"{value:,.0f} {unit}".strip()
    if abs(value) >= 100:
        return f"{value:,.0f} {unit}".strip()
    if abs(value) >= 10:
        return f"{value:.1f} {unit}".strip()
    return f"{value:.2f} {unit}".strip()


def cells(row: Row) -> list[str]:
    ratio = row.ratio
    return [
        row.what,
        _number(row.measured, row.unit),
        _number(row.baseline, row.unit),
        "-" if ratio is None else f"{ratio:.2f}x",
        row.target or "-",
        row.result,
    ]


HEADER = ["what (measured / baseline)", "measured", "baseline", "ratio", "target", "result"]


def machine() -> dict[str, Any]:
    """Date and size of this machine, and its load when asked."""
    mem_kib = 0
    try:
        with open("/proc/meminfo") as f:
            mem_kib = next(int(line.split()[1]) for line in f if line.startswith("MemTotal:"))
    except (OSError, StopIteration):
        pass
    try:
        cpus = len(os.sched_getaffinity(0))
    except AttributeError:
        cpus = os.cpu_count() or 0
    try:
        commit = subprocess.run(["git", "rev-parse", "--short", "HEAD"], cwd=ROOT, text=True,
                                capture_output=True, check=True).stdout.strip()  # fmt: skip
    except (OSError, subprocess.CalledProcessError):
        commit = "unknown"
    return {
        "date": datetime.now(UTC).strftime("%Y-%m-%d %H:%M UTC"),
        "cpus": cpus,
        "memory_gib": round(mem_kib / 1024**2, 1),
        "python": platform.python_version(),
        "platform": platform.platform(),
        "commit": commit,
        "load_average": [round(x, 2) for x in os.getloadavg()],
    }


def _describe(info: dict[str, Any], options: str) -> str:
    load = ", ".join(f"{x:.2f}" for x in info["load_average"])
    end = ", ".join(f"{x:.2f}" for x in info.get("load_average_end", []))
    cpus = max(info["cpus"], 1)
    # The benchmark itself keeps about one CPU busy, so the load at the end counts it.
    busy = info["load_average"][0] > 0.5 * cpus or info.get("load_average_end", [0])[0] > cpus
    return (
        f"{info['date']}; {info['cpus']} CPUs, {info['memory_gib']} GiB memory; Python "
        f"{info['python']} on {info['platform']}; commit {info['commit']} (plus uncommitted "
        f"changes, if any); load average (1, 5, 15 min) at start {load}"
        + (f", at end {end}" if end else "") + f"; options: {options or 'defaults'}"
        + ("; OTHER LOAD ON THE MACHINE: ratios are noisy" if busy else "")
    )  # fmt: skip


def render(rows: list[Row], info: dict[str, Any], options: str) -> str:
    """The plain-text table, with notes below it."""
    header = ["#", *HEADER]
    numbered = [[f"{i}*" if r.note else f"{i}", *cells(r)] for i, r in enumerate(rows, 1)]
    table = [header, *numbered]
    widths = [max(len(line[i]) for line in table) for i in range(len(header))]
    right = {2, 3, 4}

    def line(values: list[str]) -> str:
        return "  ".join(
            v.rjust(w) if i in right else v.ljust(w)
            for i, (v, w) in enumerate(zip(values, widths, strict=True))
        ).rstrip()

    rule = "  ".join("-" * w for w in widths)
    out = [f"fluxledger benchmarks, {_describe(info, options)}", rule, line(header), rule]
    out += [line(c) for c in table[1:]]
    out.append(rule)
    out += [f"{i}* {r.note}" for i, r in _noted(rows)]
    return "\n".join(out)


def _noted(rows: list[Row]) -> list[tuple[int, Row]]:
    return [(i, r) for i, r in enumerate(rows, 1) if r.note]


def markdown(rows: list[Row], info: dict[str, Any], options: str) -> str:
    """The same table in Markdown, for the README to quote."""

    def esc(text: str) -> str:
        return text.replace("|", "\\|")

    def what(text: str) -> str:  # a sub-row's indent survives Markdown as no-break spaces
        bare = text.lstrip(" ")
        return "&nbsp;" * 2 * (len(text) - len(bare)) + esc(bare)

    out = [
        "# Latest benchmark run",
        "",
        "Written by `make bench` (bench/run.py); every ratio is against a baseline measured in "
        "the same run on the same machine.",
        "",
        f"Measured {esc(_describe(info, options))}.",
        "",
        "| # | " + " | ".join(HEADER) + " |",
        "|---|" + "|".join("---:" if i in (1, 2, 3) else "---" for i in range(len(HEADER))) + "|",
    ]
    for i, row in enumerate(rows, 1):
        mark = f"{i}*" if row.note else str(i)
        first, *rest = cells(row)
        out.append(f"| {mark} | {what(first)} | " + " | ".join(esc(c) for c in rest) + " |")
    notes = _noted(rows)
    if notes:
        out += ["", "Notes:", ""]
        out += [f"- {i}* {esc(r.note)}" for i, r in notes]
    return "\n".join(out) + "\n"


def as_json(rows: list[Row], info: dict[str, Any], options: str) -> dict[str, Any]:
    return {
        "machine": info,
        "options": options,
        "rows": [{**asdict(r), "ratio": r.ratio, "result": r.result} for r in rows],
    }


__all__ = ["Row", "as_json", "error_row", "machine", "markdown", "render", "skipped_row"]
