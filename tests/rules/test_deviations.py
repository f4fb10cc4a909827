"""Deviation classes and what closing a deviation needs (ledger.rules.deviations)."""

from __future__ import annotations

import pytest

from ledger.rules.deviations import DEFAULT_CLASSES, closure_problems, parse_classes


def test_the_shipped_classes() -> None:
    assert DEFAULT_CLASSES == ("minor", "major", "critical")


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        ("minor,major,critical", ("minor", "major", "critical")),
        (" Low , Medium,HIGH ", ("low", "medium", "high")),
        ("class-1,class-2", ("class-1", "class-2")),
    ],
)
def test_site_words_are_parsed(text: str, expected: tuple[str, ...]) -> None:
    assert parse_classes(text) == expected


@pytest.mark.parametrize(
    ("text", "why"),
    [
        ("minor,,major", "an empty word"),
        ("minor,Minor", "a word given twice"),
        (",".join(f"c{i}" for i in range(11)), "at most 10"),
        ("minor,ma jor", "not a word"),
        ("x" * 33, "not a word"),
    ],
)
def test_bad_site_words_say_why(text: str, why: str) -> None:
    result = parse_classes(text)
    assert isinstance(result, str) and why in result


def test_a_closure_needs_a_class_and_an_impact() -> None:
    assert closure_problems("minor", "none", DEFAULT_CLASSES) == []
    both = closure_problems(None, None, DEFAULT_CLASSES)
    assert len(both) == 2 and "--class minor | major | critical" in both[0]
    assert "impact" in both[1]
    assert "not one of the site's" in closure_problems("tiny", "x", DEFAULT_CLASSES)[0]
    assert closure_problems("minor", "", DEFAULT_CLASSES) == [
        "it has no impact assessment (--impact)"
    ]
