"""A parsed template is kept by the SHA-256 of its bytes and shared: it must be immutable."""

from __future__ import annotations

import dataclasses
import hashlib

import pytest

from ledger.runs import template
from tests.runs.test_template import MINIMAL


def unique(tag: str) -> bytes:
    """MINIMAL with a comment that makes its bytes (and hash) new to the cache."""
    return f"# {tag}\n{MINIMAL}".encode()


def test_the_same_bytes_are_read_once(monkeypatch: pytest.MonkeyPatch) -> None:
    reads: list[str] = []
    real = template._Reader

    class Counting(real):  # type: ignore[misc, valid-type]
        def template(self, text: str, digest: str) -> template.Template:
            reads.append(digest)
            return super().template(text, digest)

    monkeypatch.setattr(template, "_Reader", Counting)
    raw = unique("read once")
    first = template.parse(raw, "a.toml")
    again = template.parse(raw, "a.toml")
    assert again is first
    assert reads == [hashlib.sha256(raw).hexdigest()]
    # Under another name (a run's stored copy, say) the same parsed parts, the new name.
    other = template.parse(raw, "T-1 v1")
    assert other.source == "T-1 v1" and first.source == "a.toml"
    assert other.parameters is first.parameters and other.sha256 == first.sha256
    assert len(reads) == 1
    # One byte more is another file.
    changed = template.parse(raw + b"\n", "a.toml")
    assert changed is not first and changed.sha256 != first.sha256
    assert len(reads) == 2


def test_a_shipped_template_loads_once() -> None:
    path = sorted(template.shipped_dir().glob("*.toml"))[0]
    assert template.load(path) is template.load(path)


def test_the_cached_template_cannot_be_changed_by_a_caller() -> None:
    t = template.parse(unique("immutable"), "t.toml")
    with pytest.raises(dataclasses.FrozenInstanceError):
        t.title = "changed"  # type: ignore[misc]
    with pytest.raises(TypeError):
        t.inputs["extra"] = t.inputs["initial_volume"]  # type: ignore[index]
    with pytest.raises(TypeError):
        t.signers["approved"] = ("operator",)  # type: ignore[index]
    for part in (t.parameters, t.steps, t.qc, t.notes, t.order, t.signatures):
        assert isinstance(part, tuple)
    with pytest.raises(dataclasses.FrozenInstanceError):
        t.parameters[0].unit = "L/min"  # type: ignore[misc]
    assert template.parse(unique("immutable"), "t.toml").signers == {
        "performed": ("operator", "engineer"),
        "approved": ("qa",),
    }


def test_the_cache_is_bounded() -> None:
    for i in range(template._CACHE_SIZE + 5):
        template.parse(unique(f"bounded {i}"), "t.toml")
    assert len(template._cache) == template._CACHE_SIZE
