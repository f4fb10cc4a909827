"""The I-MR chart's rule labels: on a series where several rules fire on neighbouring points
(the demo's wearing module showed labels written over each other), every label is placed
where it touches no other label and stays inside the plot. The limits come from
ledger.science.trending, whose values are checked against published tables in tests/science;
here only the drawing is checked."""

from __future__ import annotations

from typing import Any

from hypothesis import assume, given, settings
from hypothesis import strategies as st


def _labels(drawing: Any) -> list[tuple[float, float, float, float, str]]:
    from reportlab.graphics.shapes import Group, String
    from reportlab.pdfbase.pdfmetrics import stringWidth

    from ledger.records.wear_charts import ACCENT

    out = []

    def walk(node: Any, dx: float, dy: float) -> None:
        if isinstance(node, Group):
            t = node.transform
            for child in node.contents:
                walk(child, dx + t[4], dy + t[5])
        elif isinstance(node, String) and node.fillColor == ACCENT:
            w = stringWidth(node.text, node.fontName, node.fontSize)
            out.append((dx + node.x, dy + node.y, dx + node.x + w, dy + node.y + node.fontSize,
                        node.text))  # fmt: skip

    for item in drawing.contents:
        walk(item, 0.0, 0.0)
    return out


def _chart(values: list[float], signalled: list[int]) -> Any:
    from ledger.logbook.module_trend import Chart, Signal
    from ledger.records.wear_charts import control_chart
    from ledger.science import trending

    limits = trending.imr_limits(values[:4])
    rules = [("nelson", 1), ("nelson", 5), ("nelson", 6)]
    rules += [("western_electric", 1), ("western_electric", 2), ("western_electric", 3)]
    signals = tuple(
        Signal(rule_set, rule, "test", cycle, cycle)
        for cycle in signalled
        for rule_set, rule in rules
    )
    chart = Chart(4, limits, signals, None)
    return control_chart(list(range(len(values))), values, chart, "recovery", "%")


def _overlaps(boxes: list[tuple[float, float, float, float, str]]) -> list[tuple[str, str]]:
    return [
        (a[4], b[4])
        for i, a in enumerate(boxes)
        for b in boxes[i + 1 :]
        if a[0] < b[2] and b[0] < a[2] and a[1] < b[3] and b[1] < a[3]
    ]


def test_labels_of_neighbouring_signals_do_not_overlap() -> None:
    # The demo's QMB-0121 recovery (invented data): signals on cycles 0-3, 5, 8 and 9.
    values = [1.0, 0.994, 0.969, 0.955, 0.928, 0.914, 0.915, 0.902, 0.875, 0.861]
    boxes = _labels(_chart(values, [0, 1, 2, 3, 5, 8, 9]))
    assert len(boxes) == 7
    assert _overlaps(boxes) == []


@settings(max_examples=25, deadline=None)
@given(
    st.lists(st.floats(0.5, 1.05), min_size=6, max_size=14),
    st.data(),
)
def test_labels_never_overlap_when_there_is_room(values: list[float], data: Any) -> None:
    assume(max(values[:4]) - min(values[:4]) > 1e-6)  # limits need a baseline that varies
    signalled = data.draw(st.lists(st.integers(0, len(values) - 1), unique=True, max_size=4))
    boxes = _labels(_chart(values, sorted(signalled)))
    assert len(boxes) == len(signalled)
    assert _overlaps(boxes) == []
