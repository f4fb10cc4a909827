"""What reaches the terminal: stored text never moves the cursor, reorders the line or turns
into rich markup; statuses read as words; long cells wrap instead of being cut."""

from __future__ import annotations

import pytest

from ledger.cli.output import Report, Table, human, printable


def test_control_and_format_characters_are_shown_as_escapes() -> None:
    assert printable("QMB-0142") == "QMB-0142"
    assert printable("QMB\x1b[31m-0142") == "QMB\\u001b[31m-0142"
    assert printable("QMB-01\u202e42") == "QMB-01\\u202e42"  # right-to-left override
    assert printable("QMB\u200b-0142") == "QMB\\u200b-0142"  # zero-width space
    assert human("a\x00b") == "a\\u0000b"


def test_stored_text_is_not_rich_markup(capsys: pytest.CaptureFixture[str]) -> None:
    report = Report("t")
    report.section("Module").add("serial", "[bold red]X[/bold red]")
    report.print(as_json=False)
    assert "[bold red]X[/bold red]" in capsys.readouterr().out


def test_status_words_on_the_terminal_and_identifiers_in_json(
    capsys: pytest.CaptureFixture[str],
) -> None:
    report = Report("t")
    report.section("Module").add("status", "on_hold")
    report.print(as_json=False)
    assert "on hold" in capsys.readouterr().out
    report.print(as_json=True)
    assert '"status": "on_hold"' in capsys.readouterr().out


def test_a_long_cell_wraps_instead_of_being_cut(capsys: pytest.CaptureFixture[str]) -> None:
    report = Report("t")
    limit = "0.05–0.45 bar, the validated range of the site's procedure CP-NAOH-05"
    table = Table("Limits", [("a", "a" * 30), ("b", "b" * 30), ("limit", "limit")])
    table.rows.append(["x" * 20, "y" * 20, limit])
    report.tables.append(table)
    report.print(as_json=False)
    out = capsys.readouterr().out
    assert "…" not in out
    assert "".join(out.split()).count("CP-NAOH-05") == 1
