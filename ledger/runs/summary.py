"""``log summarize`` without a database: read a skid log with its mapping and compute its
actuals and excursions."""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path

from ledger.errors import InputError
from ledger.runs.actuals import Geometry, PhaseWindow, Summary, summarize
from ledger.runs.limits import load_limits
from ledger.runs.mapping import load_mapping
from ledger.runs.skidlog import read_logs


def summarize_file(
    file: str | Path | Sequence[str | Path],
    mapping: str | Path,
    *,
    limits: str | Path | None = None,
    geometry: Geometry | None = None,
    phases: Sequence[PhaseWindow] = (),
) -> tuple[Summary, bool]:
    """The summary of one log (one file, or several of one run read in order and joined),
    and whether limits were checked.

    An error in a file names that file (and line) and no field: a column or key that shares
    an option's name ("phase") must not be shown as that option.
    """
    try:
        ranges = load_limits(limits) if limits else []
        files = [file] if isinstance(file, str | Path) else list(file)
        log = read_logs(files, load_mapping(mapping), wait=False)
    except InputError as err:
        raise InputError(
            err.message, value=err.value, expected=err.expected, source=err.source, line=err.line
        ) from None
    return summarize(log, geometry or Geometry(), ranges, list(phases) or None), bool(ranges)
