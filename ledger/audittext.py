"""Audit events in words a reviewer reads: a created record as one line of its fields with
their units, a changed field as old → new, a void with its reason.

Stored values are SI and carry their unit in the column name (``tmp_pa``, ``flow_m3_s``) or
in a sibling column (``concentration`` with ``concentration_unit``); they are shown in the
trade's units with at most six significant digits, so 499.99999999999994 mol/m³ reads
"0.5 mol/L". A value longer than ``MAX_VALUE`` characters is cut at a word boundary and says
where the whole value is (``audit show --json`` of that event). Pure: no database.
"""

from __future__ import annotations

import json
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
SPELLED = {"percent": "%", "degC": "°C", "L/(m^2*h)": "LMH", "L/(m^2*h*bar)": "LMH/bar",
           "m^2": "m²", "L/m^2": "L/m²", "g/m^2": "g/m²", "kg/m^3": "kg/m³"}  # fmt: skip
# Bookkeeping columns a reader does not need in the one-line summary of a created record.
QUIET = frozenset({"record_hash", "created_at", "created_by", "password_hash", "content",
                   "template_text", "mapping_text", "plan", "actuals"})  # fmt: skip
_SI_KIND = {k.si: name for name, k in units.KINDS.items() if k.si}


def number(x: float) -> str:
    """Six significant digits, no float artefacts: 0.30000000000000004 -> "0.3"."""
    return f"{x:.6g}"


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


def _quantity(value: float, kind: str) -> str:
    k = units.KINDS[kind]
    shown = units.from_si(value, kind)
    return f"{number(shown)} {SPELLED.get(k.display, k.display)}"


def value_text(field: str, value: Any, record: dict[str, Any] | None = None) -> str:
    """One stored value in words (``record`` gives its sibling columns, for ``X_unit``)."""
    if value is None:
        return "—"
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, int | float):
        unit = (record or {}).get(f"{field}_unit")
        if isinstance(unit, str) and unit in _SI_KIND:
            return _quantity(float(value), _SI_KIND[unit])
        kind = _kind_of(field)
        if kind is not None:
            return _quantity(float(value), kind)
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
) -> str:
    """An audit event's change in one readable line."""
    where = f"`fluxledger audit show --json`, event {seq}"
    if field is None:
        values = _decode(new)
        if isinstance(values, dict):
            shown = [
                f"{label(k)}: {value_text(k, v, values)}"
                for k, v in values.items()
                if k not in QUIET and v is not None and not k.endswith("_unit")
                and not (k.startswith("voided") or k == "void_reason")
            ]  # fmt: skip
            return _cut(f"{action}: " + "; ".join(shown), where)
        text = f"{action}" + (f": {values}" if values is not None else "")
        return _cut(text, where)
    before = value_text(field, _decode(old))
    after = value_text(field, _decode(new))
    if action == "void" and field == "void_reason":
        return _cut(f"voided: {after}", where)
    return _cut(f"{label(field)}: {before} → {after}", where)
