"""Reports printed by commands: a readable table on the terminal, or one JSON object.

JSON follows DEVELOPERS.md: every physical quantity is ``{"value": <number>, "unit": "<pint
unit>"}``, verdicts are strings, timestamps ISO 8601 with offset.
"""

from __future__ import annotations

import json
import math
import sys
from dataclasses import dataclass, field
from datetime import UTC, datetime
from typing import Any

from ledger import units

# Human spellings of display units; JSON keeps the pint spelling.
_HUMAN_UNITS = {
    "L/(m^2*h)": "LMH",
    "L/(m^2*h*bar)": "LMH/bar",
    "degC": "°C",
    "percent": "%",
    "m^2": "m²",
    "mPa*s": "mPa·s",
    "kg/m^3": "kg/m³",
    "L/m^2": "L/m²",
    "g/m^2": "g/m²",
    "um": "µm",
    "mm^2/s": "mm²/s",
}


@dataclass(frozen=True)
class Q:
    """An SI value of a physical kind, printed in ``unit`` (default: the kind's display unit);
    one a person typed has its text as typed in ``entered`` and is printed as typed."""

    value: float
    kind: str
    unit: str | None = None
    entered: str | None = None


def _number(x: float, digits: int = 4) -> str:
    if x == 0:
        return "0"
    if not math.isfinite(x):
        return str(x)
    x = float(f"{x:.{digits}g}")  # round to significant digits before choosing the layout
    if 1e-3 <= abs(x) < 1e6:
        magnitude = math.floor(math.log10(abs(x)))
        decimals = max(0, digits - 1 - magnitude)
        return f"{x:,.{decimals}f}"
    return f"{x:.{digits - 1}e}"


def printable(text: str) -> str:
    """``text`` with every control, format or other invisible character shown as an escape,
    so nothing stored (however it got there) can move the cursor or reorder what is shown."""
    if text.isprintable():
        return text
    return "".join(c if c.isprintable() or c == "\n" else f"\\u{ord(c):04x}" for c in text)


def human(value: Any) -> str:
    """Format one report value for the terminal."""
    if isinstance(value, Q) and value.entered:
        return printable(units.shown(value.value, value.kind, entered=value.entered))
    if isinstance(value, Q):
        shown = units.quantity(value.value, value.kind, value.unit)
        unit = _HUMAN_UNITS.get(shown["unit"], shown["unit"])
        return f"{_number(shown['value'])} {unit}"
    if isinstance(value, datetime):
        return value.astimezone(UTC).strftime("%Y-%m-%d %H:%M")
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, float):
        return str(int(value)) if value.is_integer() and abs(value) < 1e9 else _number(value)
    if isinstance(value, list | tuple):
        return ", ".join(human(v) for v in value)
    if value is None:
        return "—"
    return printable(str(value))


def plain(value: Any) -> Any:
    """Convert one report value to its JSON form."""
    if isinstance(value, Q):
        q = units.quantity(value.value, value.kind, value.unit)
        out = {"value": q["value"] if math.isfinite(q["value"]) else None, "unit": q["unit"]}
        return out | ({"entered": value.entered} if value.entered else {})
    if isinstance(value, datetime):
        return value.isoformat()
    if isinstance(value, float) and not math.isfinite(value):
        return None
    if isinstance(value, dict):
        return {k: plain(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [plain(v) for v in value]
    return value


@dataclass
class Section:
    """A titled list of (key, label, value) rows."""

    title: str
    rows: list[tuple[str, str, Any]] = field(default_factory=list)

    def add(self, key: str, value: Any, label: str | None = None) -> Section:
        """Add a row; ``label`` defaults to the key with spaces."""
        self.rows.append((key, label or key.replace("_", " "), value))
        return self


@dataclass
class Table:
    """A table of points: column keys with labels, and rows of values."""

    title: str
    columns: list[tuple[str, str]]
    rows: list[list[Any]] = field(default_factory=list)
    json_only: frozenset[str] = frozenset()  # columns left out of the terminal table


@dataclass
class Report:
    """What a command reports. ``verdict`` (if any) is a plain word such as PASS or FAIL."""

    command: str
    sections: list[Section] = field(default_factory=list)
    tables: list[Table] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)
    verdict: str | None = None

    def section(self, title: str) -> Section:
        """Start a new section and return it."""
        s = Section(title)
        self.sections.append(s)
        return s

    def to_json(self) -> dict[str, Any]:
        """The report as one JSON-ready object."""
        out: dict[str, Any] = {"command": self.command}
        if self.verdict is not None:
            out["verdict"] = self.verdict
        for s in self.sections:
            out[_key(s.title)] = {k: plain(v) for k, _, v in s.rows}
        for t in self.tables:
            out[_key(t.title)] = [
                {k: plain(v) for (k, _), v in zip(t.columns, row, strict=True)} for row in t.rows
            ]
        out["notes"] = list(dict.fromkeys(self.notes))
        return out

    def print(self, as_json: bool) -> None:
        """Print the report to stdout: JSON or plain-text tables (ledger.cli.textgrid)."""
        if as_json:
            sys.stdout.write(json.dumps(self.to_json(), indent=2, ensure_ascii=False) + "\n")
            return
        from ledger.cli.textgrid import fold, grid, terminal_width

        lines: list[str] = []
        for s in self.sections:
            lines.append(s.title)
            rows = [[label, _word(key, human(value))] for key, label, value in s.rows]
            lines.extend("  " + line for line in grid(None, rows, width=terminal_width() - 2))
            lines.append("")
        for t in self.tables:
            shown = [i for i, (key, _) in enumerate(t.columns) if key not in t.json_only]
            firsts = [next((r[i] for r in t.rows if r[i] is not None), None) for i in shown]
            lines.append(t.title)
            lines.extend(
                grid(
                    [t.columns[i][1] for i in shown],
                    [[_word(t.columns[i][0], human(row[i])) for i in shown] for row in t.rows],
                    # numbers right, text left; a time is never folded
                    right=[_numeric(f) for f in firsts],
                    keep=[isinstance(f, datetime) for f in firsts],
                )
            )
            lines.append("")
        if self.verdict is not None:
            lines.append(f"Verdict: {printable(self.verdict)}")
        for note in dict.fromkeys(self.notes):  # each note once, in its first place
            lines.extend(fold(f"note: {printable(note)}", terminal_width()))
        sys.stdout.write("\n".join(lines) + "\n")


# Columns whose values are stable identifiers in JSON ("on_hold") and words on a terminal.
WORD_KEYS = frozenset({"status", "status_before", "status_after", "stage", "new_status"})


def _word(key: str, text: str) -> str:
    """A status identifier as people read it: ``on_hold`` -> ``on hold``."""
    return text.replace("_", " ") if key in WORD_KEYS else text


def _numeric(value: Any) -> bool:
    return isinstance(value, Q | int | float) and not isinstance(value, bool)


def _key(title: str) -> str:
    return "_".join(title.lower().replace("-", " ").split())
