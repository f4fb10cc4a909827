"""`log summarize` on logs written in the dialects skids use, with a mapping that has no
[file] table: the reader must detect each, and the actuals must agree with the simulator's
truth (tests/reference/skidsim.py: closed forms and scipy quadrature) within 0.5 %, as on
the plain CSV. The files are rewritten from the simulator's CSV by
tests/reference/dialect_writers.py, which uses only the csv module and xlsxwriter."""

from __future__ import annotations

import inspect
import json
from pathlib import Path

import pytest

from tests.reference import dialect_writers, skidsim
from tests.world import invoke

CASE = "pilot-dublin-dst-2s"  # local wall-clock times, a phase column, a degree column


@pytest.fixture(scope="module")
def generated(tmp_path_factory: pytest.TempPathFactory) -> skidsim.CasePaths:
    return skidsim.generate(CASE, 1, tmp_path_factory.mktemp("dialect-source"))


@pytest.mark.parametrize("dialect", list(dialect_writers.WRITERS))
def test_each_dialect_agrees_with_the_truth(
    dialect: str, generated: skidsim.CasePaths, tmp_path: Path
) -> None:
    spec = skidsim.case_spec(CASE, 1)
    header, rows = dialect_writers.read(generated.csv)
    units = {c.header: c.unit or "" for c in spec.fmt.columns}
    mapping = generated.mapping.read_text(encoding="utf-8")
    assert "[file]" not in mapping
    writer = dialect_writers.WRITERS[dialect]
    extra = {}
    wanted = inspect.signature(writer).parameters
    if "time_header" in wanted:
        extra["time_header"] = spec.fmt.time_header
    if "time_format" in wanted:
        extra["time_format"] = spec.fmt.time_format
    files, text = writer(tmp_path, header, rows, mapping, units, **extra)
    mapped = tmp_path / "mapping.toml"
    mapped.write_text(text, encoding="utf-8")
    rest = list(generated.args[generated.args.index("--mapping") + 2 :])
    result = invoke(["log", "summarize", *map(str, files), "--mapping", str(mapped), *rest])
    assert result.code == 0, result.stderr
    got = result.json()
    truth = json.loads(generated.truth.read_text(encoding="utf-8"))
    checks, _, _ = skidsim.compare(truth, got)
    assert {c.quantity for c in checks} >= set(skidsim.CHECKED)
    failed = [str(c) for c in checks if not c.ok]
    assert not failed, "\n".join(failed)
    assert got["rows"] == truth["rows"]
    # what was detected is reported with the file
    assert [f["name"] for f in got["files"]] == [f.name for f in files]
    detected = got["files"][0]["dialect"]["detected"]
    assert "header_line" in detected
