"""The one canonical JSON (ledger.canonical) that record hashes, revision hashes and audit
values are taken of: its byte form, that it is the form the audit chain always used (so
existing databases still verify), and its refusal of NaN and infinity.

Sources: JSON text per RFC 8259 (no NaN or Infinity literals; strings may hold any Unicode
character unescaped); UTF-8 per RFC 3629.
"""

from __future__ import annotations

import json
import math
from typing import Any

import pytest

from ledger.canonical import NotCanonicalError, canonical

ORDINARY: list[Any] = [
    {"b": 1, "a": "µS/cm – 20 °C", "c": [1.0, 2.5e-10, -0.0, 3], "d": None, "e": True},
    {"entity": "water_flux_test", "content": {"nwp_m_s_pa": 2.9730375e-10, "points": [
        {"feed_pa": 22063.2, "flow_m3_s": 2.8333333333333335e-06}], "stage": "baseline"}},
    [1e300, 5e-324, 0.1, 123456789012345678901234567890, "ü\u2028", {"": {}}],
]  # fmt: skip


def _audit_chain_form(obj: Any) -> str:
    # How ledger/store/audit.py wrote the hash input of every record and event before the
    # canonical function moved to ledger/canonical.py; revision hashes used the same
    # json.dumps arguments, without allow_nan=False, and hashed the UTF-8 bytes.
    return json.dumps(
        obj, sort_keys=True, separators=(",", ":"), ensure_ascii=False, allow_nan=False
    )


@pytest.mark.parametrize("obj", ORDINARY)
def test_ordinary_data_gives_the_bytes_the_audit_chain_always_hashed(obj: Any) -> None:
    assert canonical(obj) == _audit_chain_form(obj)
    old_revision_bytes = json.dumps(
        obj, sort_keys=True, separators=(",", ":"), ensure_ascii=False
    ).encode()
    assert canonical(obj).encode() == old_revision_bytes


def test_sorted_keys_no_spaces_text_unescaped() -> None:
    text = canonical({"b": [1, 2], "a": {"y": "µ", "x": None}})
    assert text == '{"a":{"x":null,"y":"µ"},"b":[1,2]}'
    # Hashes are taken of the UTF-8 bytes: µ is the two bytes C2 B5 (RFC 3629).
    assert text.encode() == b'{"a":{"x":null,"y":"\xc2\xb5"},"b":[1,2]}'


@pytest.mark.parametrize(
    ("obj", "path"),
    [
        (math.nan, "$"),
        ({"points": [{"flow_m3_s": 1.0}, {"flow_m3_s": math.inf}]}, "$.points[1].flow_m3_s"),
        ({"a": 1.0, "z": [0.0, -math.inf]}, "$.z[1]"),
    ],
)
def test_nan_and_infinity_are_refused_naming_where(obj: Any, path: str) -> None:
    with pytest.raises(NotCanonicalError) as caught:
        canonical(obj)
    assert caught.value.path == path
    assert path in str(caught.value) and "NaN or infinity" in str(caught.value)


def test_revision_and_audit_hashes_refuse_nan_alike() -> None:
    from ledger.records.context import content_sha256
    from ledger.store import audit

    for hashing in (content_sha256, lambda v: audit.canonical(v)):
        with pytest.raises(NotCanonicalError, match=r"\$\.series\[0\]"):
            hashing({"series": [math.nan]})
    assert audit.canonical is canonical
