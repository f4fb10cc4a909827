"""Rewrite a simulator log (tests/reference/skidsim.py) the way other skids export it.

Independent of fluxledger: the csv module and xlsxwriter only. Each writer takes the
simulator's CSV (header and rows of text) and its mapping TOML, and returns the files it
wrote and a mapping for them that has no [file] table, so the reader must detect the
dialect itself. Values keep every digit the simulator wrote, so the truth is unchanged.
"""

from __future__ import annotations

import csv
from collections.abc import Callable
from datetime import datetime
from pathlib import Path

PREAMBLE = [
    "Export of run log",
    "Skid;TFF-PILOT-07",  # an invented skid
    "Operator;R. Okafor",  # an invented person
    "",
]
UNIT_TEXT = {"degC": "°C"}  # how the skid prints a unit in its units row

Rows = list[list[str]]


def read(path: Path) -> tuple[list[str], Rows]:
    with path.open(newline="", encoding="utf-8") as f:
        rows = list(csv.reader(f))
    return rows[0], rows[1:]


def _write(path: Path, header: list[str], rows: Rows, *, delimiter: str = ",",
           encoding: str = "utf-8", above: list[str] = (), units: list[str] | None = None
           ) -> Path:  # fmt: skip
    with path.open("w", newline="", encoding=encoding) as f:
        for line in above:
            f.write(line + "\r\n")
        w = csv.writer(f, delimiter=delimiter, lineterminator="\r\n")
        w.writerow(header)
        if units is not None:
            w.writerow(units)
        w.writerows(rows)
    return path


def _numeric_columns(header: list[str], rows: Rows) -> set[int]:
    def number(text: str) -> bool:
        try:
            float(text)
        except ValueError:
            return False
        return True

    return {i for i in range(len(header)) if rows and all(number(r[i]) for r in rows[:50])}


def semicolon_decimal_comma(out: Path, header: list[str], rows: Rows, mapping: str,
                            units: dict[str, str]) -> tuple[list[Path], str]:  # fmt: skip
    numeric = _numeric_columns(header, rows)
    shown = [[c.replace(".", ",") if i in numeric else c for i, c in enumerate(r)] for r in rows]
    return [_write(out / "semicolon.csv", header, shown, delimiter=";")], mapping


def cp1252_degree_sign(out: Path, header: list[str], rows: Rows, mapping: str,
                       units: dict[str, str]) -> tuple[list[Path], str]:  # fmt: skip
    old = next(h for h in header if h.startswith("Temp"))
    new = "Temp °C"
    renamed = [new if h == old else h for h in header]
    path = _write(out / "cp1252.csv", renamed, rows, encoding="cp1252")
    return [path], mapping.replace(f'"{old}"', f'"{new}"')


def utf16_bom(out: Path, header: list[str], rows: Rows, mapping: str,
              units: dict[str, str]) -> tuple[list[Path], str]:  # fmt: skip
    return [_write(out / "utf16.csv", header, rows, encoding="utf-16", delimiter="\t")], mapping


def preamble_and_units_row(out: Path, header: list[str], rows: Rows, mapping: str,
                           units: dict[str, str]) -> tuple[list[Path], str]:  # fmt: skip
    row = [UNIT_TEXT.get(units.get(h, ""), units.get(h, "")) for h in header]
    path = _write(out / "preamble.csv", header, rows, delimiter=";", above=PREAMBLE, units=row)
    return [path], mapping


def date_and_time_apart(out: Path, header: list[str], rows: Rows, mapping: str,
                        units: dict[str, str], time_header: str
                        ) -> tuple[list[Path], str]:  # fmt: skip
    i = header.index(time_header)
    split_header = ["Date", "Time", *[h for k, h in enumerate(header) if k != i]]
    split = [[*r[i].split(" ", 1), *[c for k, c in enumerate(r) if k != i]] for r in rows]
    text = mapping.replace(f'column = "{time_header}"', 'column = "Time"\ndate_column = "Date"')
    return [_write(out / "datetime.csv", split_header, split)], text


def workbook(out: Path, header: list[str], rows: Rows, mapping: str, units: dict[str, str],
             time_header: str, time_format: str) -> tuple[list[Path], str]:  # fmt: skip
    import xlsxwriter

    path = out / "log.xlsx"
    book = xlsxwriter.Workbook(str(path))
    sheet = book.add_worksheet("Run data")
    stamp = book.add_format({"num_format": "yyyy-mm-dd hh:mm:ss"})
    sheet.write_row(0, 0, ["Exported run data"])
    sheet.write_row(2, 0, header)
    numeric = _numeric_columns(header, rows)
    ti = header.index(time_header)
    for n, r in enumerate(rows, start=3):
        for k, c in enumerate(r):
            if k == ti:
                sheet.write_datetime(n, k, datetime.strptime(c, time_format), stamp)
            elif k in numeric:
                sheet.write_number(n, k, float(c))
            else:
                sheet.write_string(n, k, c)
    book.close()
    return [path], mapping


def two_files(out: Path, header: list[str], rows: Rows, mapping: str,
              units: dict[str, str]) -> tuple[list[Path], str]:  # fmt: skip
    k = len(rows) * 3 // 5
    first = _write(out / "part1.csv", header, rows[:k])
    second = _write(out / "part2.csv", header, rows[k:])
    return [first, second], mapping


Writer = Callable[..., tuple[list[Path], str]]
WRITERS: dict[str, Writer] = {
    "semicolon-decimal-comma": semicolon_decimal_comma,
    "cp1252-degree-sign": cp1252_degree_sign,
    "utf16-bom": utf16_bom,
    "preamble-units-row": preamble_and_units_row,
    "date-and-time-apart": date_and_time_apart,
    "workbook": workbook,
    "two-files": two_files,
}
