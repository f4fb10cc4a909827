"""Deviations: their classification and what a closure needs (pure rules)."""

from __future__ import annotations

from collections.abc import Sequence

# The shipped classification words; a site may rename them (setting "deviation.classes").
DEFAULT_CLASSES = ("minor", "major", "critical")
CLASSES_SETTING = "deviation.classes"
MAX_CLASSES = 10
MAX_CLASS_LENGTH = 32
# Closing a deviation is a quality decision: only QA closes (engineers investigate).
CLOSERS = frozenset({"qa"})


def parse_classes(text: str) -> tuple[str, ...] | str:
    """The site's classification words from a comma-separated list, or why it is refused."""
    words = tuple(w.strip().lower() for w in text.split(","))
    if any(not w for w in words):
        return "an empty word; expected words separated by commas"
    if len(set(words)) != len(words):
        return "a word given twice"
    if len(words) > MAX_CLASSES:
        return f"{len(words)} words; expected at most {MAX_CLASSES}"
    long = [w for w in words if len(w) > MAX_CLASS_LENGTH or not w.replace("-", "").isalnum()]
    if long:
        return (f"{long[0]!r} is not a word of letters, digits and hyphens of at most "
                f"{MAX_CLASS_LENGTH} characters")  # fmt: skip
    return words


def closure_problems(
    classification: str | None, impact: str | None, classes: Sequence[str]
) -> list[str]:
    """Everything a deviation lacks before it can be closed (empty: it may be closed)."""
    out = []
    if classification is None:
        out.append(f"it has no classification (--class {' | '.join(classes)})")
    elif classification not in classes:
        out.append(f"its classification {classification!r} is not one of the site's: "
                   + ", ".join(classes))  # fmt: skip
    if not impact:
        out.append("it has no impact assessment (--impact)")
    return out
