"""Canonical JSON: the one text form that record hashes, revision hashes and audit values use.

Sorted keys, no spaces, text as is (no \\u escapes); hash its UTF-8 bytes. NaN and infinity are
refused: JSON has no spelling for them, and a stored record never holds one, so one reaching a
hash is a bug upstream, named here by where it sits.
"""

from __future__ import annotations

import json
import math
from collections.abc import Iterable, Sequence
from json.encoder import encode_basestring as _text  # the encoder canonical's dumps uses
from typing import Any

# json.dumps(obj, **options) is JSONEncoder(**options).encode(obj); one encoder, made once,
# spares every call building its own (encode keeps no state between calls).
_ENCODER = json.JSONEncoder(
    sort_keys=True, separators=(",", ":"), ensure_ascii=False, allow_nan=False
)


class NotCanonicalError(ValueError):
    """A value canonical JSON refuses (NaN or infinity); ``path`` says where it sits."""

    def __init__(self, path: str, value: float) -> None:
        super().__init__(
            f"canonical JSON refuses {value!r} at {path}: stored records never hold NaN or "
            "infinity (a guard upstream should have refused it)"
        )
        self.path = path
        self.value = value


def canonical(obj: Any) -> str:
    """``obj`` as canonical JSON text; raises NotCanonicalError on NaN or infinity."""
    try:
        return _ENCODER.encode(obj)
    except ValueError:
        found = _non_finite(obj, "$")
        if found is None:
            raise
        raise NotCanonicalError(*found) from None


def _non_finite(obj: Any, path: str) -> tuple[str, float] | None:
    """The first NaN or infinity inside ``obj``: (its path, the value); None when none."""
    if isinstance(obj, float) and not math.isfinite(obj):
        return path, obj
    if isinstance(obj, dict):
        for key in sorted(obj, key=str):
            found = _non_finite(obj[key], f"{path}.{key}")
            if found:
                return found
    elif isinstance(obj, list | tuple):
        for i, item in enumerate(obj):
            found = _non_finite(item, f"{path}[{i}]")
            if found:
                return found
    return None


_float_text = float.__repr__  # what the json encoder writes for a float
_int_text = int.__repr__


def member(value: Any) -> str:
    """``canonical(value)``: a plain None, bool, int, finite float or str written by the very
    functions the encoder writes them with (float and int repr, its string escaping) without
    setting one up; anything else (and NaN or infinity) goes through ``canonical``."""
    kind = type(value)
    if kind is float:
        if value - value == 0.0:  # finite: inf − inf and NaN − NaN are NaN
            return _float_text(value)
    elif kind is str:
        return _text(value)
    elif kind is int:
        return _int_text(value)
    elif value is None:
        return "null"
    elif value is True:
        return "true"
    elif value is False:
        return "false"
    return canonical(value)


class Template:
    """Canonical JSON of many dicts with the same keys, the members whose value is the same in
    all of them encoded once: ``Template(fixed, names).dumps(values)`` is
    ``canonical({**fixed, **dict(zip(template.names, values))})`` byte for byte
    (tests/store/test_audit_bulk.py checks it over random dicts).

    ``names`` are the keys whose values vary; ``template.names`` holds them sorted, the order
    ``dumps`` takes the values in. Keys are text, as in every record.
    """

    def __init__(self, fixed: dict[str, Any], names: Iterable[str]) -> None:
        self.fixed = dict(fixed)
        self.names = tuple(sorted(names))
        if set(self.names) & set(self.fixed):
            raise ValueError("a key is both fixed and varying")
        pieces = []
        for key in sorted([*self.fixed, *self.names]):
            head = canonical(key).replace("%", "%%") + ":"
            if key in self.fixed:
                pieces.append(head + canonical(self.fixed[key]).replace("%", "%%"))
            else:
                pieces.append(head + "%s")
        self.format = "{" + ",".join(pieces) + "}"

    def dumps(self, values: Sequence[Any]) -> str:
        """The canonical JSON of the dict with ``values`` under ``self.names`` (in that order);
        NotCanonicalError, naming the key, on NaN or infinity."""
        try:
            return self.format % tuple(map(member, values))
        except NotCanonicalError:
            return canonical({**self.fixed, **dict(zip(self.names, values, strict=True))})
