"""Canonical JSON: the one text form that record hashes, revision hashes and audit values use.

Sorted keys, no spaces, text as is (no \\u escapes); hash its UTF-8 bytes. NaN and infinity are
refused: JSON has no spelling for them, and a stored record never holds one, so one reaching a
hash is a bug upstream, named here by where it sits.
"""

from __future__ import annotations

import json
import math
from typing import Any


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
        return json.dumps(
            obj, sort_keys=True, separators=(",", ":"), ensure_ascii=False, allow_nan=False
        )
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
