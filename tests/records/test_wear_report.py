"""ledger.records.wear_report without a database: targets are checked before anything is
drawn, and stacked drawings keep their sizes (the PNG is decoded back with Pillow)."""

from __future__ import annotations

import io
from pathlib import Path

import pytest
from PIL import Image
from reportlab.graphics.shapes import Drawing, Rect

from ledger.errors import InputError
from ledger.records import wear_report


def _box(w: float, h: float) -> Drawing:
    d = Drawing(w, h)
    d.add(Rect(0, 0, w, h, fillColor=None, strokeWidth=2))
    return d


def test_stacked_heights_add_up_and_png_has_that_size() -> None:
    d = wear_report.stacked([_box(200, 100), _box(150, 50)], gap=10)
    assert (d.width, d.height) == (200, 160)
    image = Image.open(io.BytesIO(wear_report.png_bytes(d, scale=2.0)))
    assert image.size == (400, 320)  # 2 pixels per point, as asked
    assert image.convert("L").getextrema()[0] < 100  # the frame is drawn


@pytest.mark.parametrize(
    ("name", "why"),
    [("", "empty"), ("a\x00b.png", "not a usable path"), ("x" * 5000, "not a usable path")],
)
def test_unusable_paths_are_refused(tmp_path: Path, name: str, why: str) -> None:
    with pytest.raises(InputError) as caught:
        wear_report.check_target(name, "png", overwrite=False)
    assert why in str(caught.value) and caught.value.field == "png"


def test_existing_files_and_folders(tmp_path: Path) -> None:
    taken = tmp_path / "taken.pdf"
    taken.write_bytes(b"keep")
    with pytest.raises(InputError, match="the file exists"):
        wear_report.check_target(taken, "pdf", overwrite=False)
    assert wear_report.check_target(taken, "pdf", overwrite=True) == taken
    with pytest.raises(InputError, match="directory"):
        wear_report.check_target(tmp_path, "pdf", overwrite=True)
    with pytest.raises(InputError, match="does not exist"):
        wear_report.check_target(tmp_path / "no" / "x.pdf", "pdf", overwrite=False)
    assert taken.read_bytes() == b"keep"
