"""`history --pdf/--png` and `fleet --pdf/--png`: the wear reports as files.

What is checked is what a reader relies on: the PDF text (extracted with pypdf, a PyPI
reader independent of reportlab) carries the same projection numbers as `history --json`,
the fleet PDF is one page naming every module, the PNG is a real image (decoded by Pillow)
with something drawn on it, and no file is replaced without --overwrite — with both targets
checked before either is written.
"""

from __future__ import annotations

import io
from pathlib import Path

import pytest
from PIL import Image
from pypdf import PdfReader

from tests.world import World

pytestmark = pytest.mark.sqlite_only

FLOWS = (166.0, 160.0, 153.0)  # mL/min after each cleaning (reuse limit 3); baseline 170


def _text(path: Path) -> str:
    return " ".join((page.extract_text() or "") for page in PdfReader(path).pages)


def _drawn(path: Path) -> Image.Image:
    image = Image.open(io.BytesIO(path.read_bytes()))
    assert image.format == "PNG"
    image.load()
    grey = image.convert("L")
    lo, hi = grey.getextrema()
    assert lo < 100 < hi  # dark ink on a light ground, not a blank page
    return image


def test_history_pdf_and_png_carry_the_projection(sqlite_world: World, tmp_path: Path) -> None:
    w = sqlite_world
    w.ready("QMB-0101")
    for flow in FLOWS:
        w.ok(w.cycle("QMB-0101", recovery_flow=f"{flow:g} mL/min"))
    pdf, png = tmp_path / "h.pdf", tmp_path / "h.png"
    out = w.ok(w.cli("history", "QMB-0101", "--pdf", str(pdf), "--png", str(png), "--json"))
    life = out.json()["life_projection"]
    assert life["status"] == "projected"

    text = _text(pdf)
    assert "QMB-0101" in text
    for key in ("point_estimate_cycle", "bound_cycle", "cycles_left"):
        assert f"{life[key]:.4g}" in text, key
    assert "validated procedures" in text  # the site's note, as on every record
    image = _drawn(png)
    assert image.width > 800 and image.height > 1000  # three charts stacked, 144 dpi


def test_fleet_pdf_is_one_page_with_every_module(sqlite_world: World, tmp_path: Path) -> None:
    w = sqlite_world
    w.ready("QMB-0101")
    w.ok(w.cycle("QMB-0101", recovery_flow="160 mL/min"))
    w.add_module("QMB-0202")
    pdf, png = tmp_path / "f.pdf", tmp_path / "f.png"
    w.ok(w.cli("fleet", "--pdf", str(pdf), "--png", str(png)))
    assert len(PdfReader(pdf).pages) == 1
    text = _text(pdf)
    assert "QMB-0101" in text and "QMB-0202" in text
    assert "NOT FIT" in text  # the commissioning module
    _drawn(png)


def test_no_file_is_replaced_without_overwrite(sqlite_world: World, tmp_path: Path) -> None:
    w = sqlite_world
    w.ready("QMB-0101")
    pdf, png = tmp_path / "f.pdf", tmp_path / "f.png"
    png.write_bytes(b"mine")
    refused = w.cli("fleet", "--pdf", str(pdf), "--png", str(png))
    assert refused.code == 2 and refused.exception is None
    assert "--png" in refused.stderr and "--overwrite" in refused.stderr
    assert png.read_bytes() == b"mine"
    assert not pdf.exists()  # checked before anything was written

    w.ok(w.cli("fleet", "--pdf", str(pdf), "--png", str(png), "--overwrite"))
    _drawn(png)

    folder = w.cli("history", "QMB-0101", "--pdf", str(tmp_path / "no-such" / "h.pdf"))
    assert folder.code == 2 and "does not exist" in folder.stderr
