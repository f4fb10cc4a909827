"""Audit events in words a reviewer reads: a created record as one line of its fields with
their units, a changed field as old → new, a void with its reason.

Stored values are SI and carry their unit in the column name (``tmp_pa``, ``flow_m3_s``) or
in a sibling column (``concentration`` with ``concentration_unit``); they are shown in the
trade's units with at most six significant digits, so 499.99999999999994 mol/m³ reads
"0.5 mol/L". A value a person typed (the record's ``entered`` column) is shown as typed with
the SI value beside ("0.5 M (500 mol/m³)"); a computed one in the unit typed for its kind in
the same record, else the site's display unit, else the kind's (:func:`ledger.units.shown`).
A value longer than ``MAX_VALUE`` characters is cut at a word boundary and says
where the whole value is (``audit show --json`` of that event). Pure: no database.
"""

from __future__ import annotations

import json
from collections.abc import Mapping
from typing import Any

from ledger import units

MAX_VALUE = 600
# Column-name endings and the kind of quantity they hold (longest first).
SUFFIXES = (
    ("_m_s_pa", "permeability"),
    ("_kg_m3", "concentration"),
    ("_kg_m2", "areal_mass"),
    ("_m3_s", "flow"),
    ("_pa_s", "pressure_rate"),
    ("_s_m", "conductivity"),
    ("_per_m", "resistance"),
    ("_m_s", "flux"),
    ("_m3", "volume"),
    ("_m2", "area"),
    ("_pa", "pressure"),
    ("_k", "temperature"),
    ("_s", "time"),
)
# Bookkeeping columns a reader does not need in the one-line summary of a created record.
QUIET = frozenset({"record_hash", "created_at", "created_by", "password_hash", "content",
                   "template_text", "mapping_text", "plan", "actuals",
                   "entered"})  # fmt: skip
# Columns whose typed field has another name than the column without its SI ending.
ENTERED_ALIASES = {
    "integrity_test_pressure_pa": "test_pressure",
    "effective_length_m": "length",
    "lumen_diameter_m": "lumen_diameter",
    "max_volume_loading_m": "max_loading",
}
# Typed fields that are no column of their own (a water test's point, a decay's start and end).
ENTERED_KINDS = {"feed": "pressure", "retentate": "pressure", "permeate": "pressure",
                 "start": "pressure", "end": "pressure", "flow": "flow", "volume": "volume",
                 "time": "time"}  # fmt: skip
_SI_KIND = {k.si: name for name, k in units.KINDS.items() if k.si}


def number(x: float) -> str:
    """Six significant digits, no float artefacts: 0.30000000000000004 -> "0.3"."""
    return units.significant(x, 6)


def entered_key(column: str) -> str:
    """The typed field a column holds the value of: temperature_k -> "temperature"."""
    return ENTERED_ALIASES.get(column) or label(column).replace(" ", "_")


def typed_units(record: Mapping[str, Any]) -> dict[str, list[str]]:
    """Kind -> the units a person typed for quantities of that kind in ``record`` (a record's
    columns with its ``entered``), so that a computed TMP shows in the psi typed for feed."""
    entered = record.get("entered")
    if not isinstance(entered, dict):
        return {}
    kinds = dict(ENTERED_KINDS)
    for column in record:
        kind = kind_of(column, record)
        if kind is not None:
            kinds.setdefault(entered_key(column), kind)
    out: dict[str, list[str]] = {}
    for key, text in entered.items():
        unit = units.entered_unit(str(text)) if key in kinds else None
        if unit is not None:
            out.setdefault(kinds[key], []).append(unit)
    return out


def kind_of(column: str, record: Mapping[str, Any] | None = None) -> str | None:
    """The kind of quantity a stored column holds: by its ``X_unit`` sibling, else by its SI
    ending; None for other columns."""
    unit = (record or {}).get(f"{column}_unit")
    if isinstance(unit, str) and unit in _SI_KIND:
        return _SI_KIND[unit]
    return _kind_of(column)


def quantity_text(
    column: str,
    value: float,
    record: Mapping[str, Any] | None = None,
    site_units: Mapping[str, str] | None = None,
) -> str | None:
    """A stored quantity as people read it: as typed when the record's ``entered`` has it,
    else in the unit :func:`ledger.units.shown` picks; None if ``column`` is no quantity."""
    rec = record or {}
    entered = rec.get("entered")
    text = entered.get(entered_key(column)) if isinstance(entered, dict) else None
    kind = kind_of(column, rec)
    if kind is None:
        return str(text) if text else None
    typed = typed_units(rec).get(kind, [])
    return units.shown(float(value), kind, entered=text, site=site_units, typed=typed)


def _kind_of(field: str) -> str | None:
    if field == "points":
        return None
    for suffix, kind in SUFFIXES:
        if field.endswith(suffix):
            return kind
    return None


def label(field: str) -> str:
    """A column name as words, without its SI ending: contact_time_s -> "contact time"."""
    for suffix, _ in SUFFIXES:
        if field.endswith(suffix) and len(field) > len(suffix):
            field = field[: -len(suffix)]
            break
    return field.replace("_", " ")


def value_text(
    field: str,
    value: Any,
    record: dict[str, Any] | None = None,
    site_units: Mapping[str, str] | None = None,
) -> str:
    """One stored value in words (``record`` gives its sibling columns: ``X_unit`` and the
    text as typed in ``entered``)."""
    if value is None:
        return "—"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, int | float):
        text = quantity_text(field, float(value), record, site_units)
        if text is not None:
            return text
        return number(value) if isinstance(value, float) else str(value)
    if isinstance(value, list):
        return f"{len(value)} item" + ("" if len(value) == 1 else "s")
    if isinstance(value, dict):
        if set(value) == {"sha256"}:
            return f"file, SHA-256 {str(value['sha256'])[:12]}…"
        return f"{len(value)} fields"
    text = str(value)
    if len(text) > 19 and text[10:11] == "T" and ".000000" in text:
        text = text.replace(".000000", "")  # a stored time on the whole second
    return text


def _cut(text: str, where: str) -> str:
    if len(text) <= MAX_VALUE:
        return text
    head = text[:MAX_VALUE].rsplit(" ", 1)[0]
    return f"{head} … ({len(text):,} characters; the whole value: {where})"


def _decode(raw: str | None) -> Any:
    if raw is None:
        return None
    try:
        return json.loads(raw)
    except (ValueError, RecursionError):
        return raw


def describe(
    seq: int,
    action: str,
    field: str | None,
    old: str | None,
    new: str | None,
    reason: str | None = None,
    site_units: Mapping[str, str] | None = None,
) -> str:
    """An audit event's change in one readable line; ``site_units`` (kind -> unit) are the
    site's display units for values nobody typed."""
    where = f"`fluxledger audit show --json`, event {seq}"
    if field is None:
        values = _decode(new)
        if isinstance(values, dict):
            shown = [
                f"{label(k)}: {value_text(k, v, values, site_units)}"
                for k, v in values.items()
                if k not in QUIET and v is not None and not k.endswith("_unit")
                and not (k.startswith("voided") or k == "void_reason")
            ]  # fmt: skip
            return _cut(f"{action}: " + "; ".join(shown), where)
        text = f"{action}" + (f": {values}" if values is not None else "")
        return _cut(text, where)
    before = value_text(field, _decode(old), None, site_units)
    after = value_text(field, _decode(new), None, site_units)
    if action == "void" and field == "void_reason":
        return _cut(f"voided: {after}", where)
    return _cut(f"{label(field)}: {before} → {after}", where)
