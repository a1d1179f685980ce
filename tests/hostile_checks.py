"""Checks shared by the hostile-input tests: live formulas in outputs, one-line errors.

A "live formula" is what a spreadsheet would run when the file is opened: an xlsx cell of
formula type, or a CSV cell starting with =, +, -, @, tab or carriage return that is not a
plain number (OWASP "CSV Injection" guidance; common practice, no standard).
"""
from __future__ import annotations

import csv
import re
from pathlib import Path

from openpyxl import load_workbook

_TRIGGERS = ("=", "+", "-", "@", "\t", "\r")
_NUMBER = re.compile(r"^[-+]?(\d+\.?\d*|\.\d+)([eE][-+]?\d+)?$")


def live_formulas(folder: Path) -> list[str]:
    """Every live formula in the xlsx and CSV files under ``folder``: 'file sheet!cell: text'."""
    found = []
    for path in sorted(Path(folder).rglob("*.xlsx")):
        wb = load_workbook(path)
        for ws in wb.worksheets:
            for row in ws.iter_rows():
                for cell in row:
                    if cell.data_type == "f":
                        found.append(f"{path.name} {ws.title}!{cell.coordinate}: {cell.value!r}")
    for path in sorted(Path(folder).rglob("*.csv")):
        with path.open(newline="", encoding="utf-8") as fh:
            for r, cells in enumerate(csv.reader(fh), start=1):
                for c, text in enumerate(cells, start=1):
                    if text.startswith(_TRIGGERS) and not _NUMBER.match(text):
                        found.append(f"{path.name} row {r} col {c}: {text!r}")
    return found


def error_lines(stderr: str) -> list[str]:
    """The 'dha: error:' lines of stderr."""
    return [ln for ln in stderr.splitlines() if ln.startswith("dha: error:")]


def assert_clean_failure(result, *needles: str) -> str:
    """Exit 1, no traceback, each error one line; returns the error text (lower case)."""
    err = result.stderr
    assert result.exit_code == 1, (result.exit_code, result.output, err)
    assert "Traceback" not in result.output and "Traceback" not in err, err
    lines = error_lines(err)
    assert lines, err
    text = "\n".join(lines).lower()
    for needle in needles:
        assert needle.lower() in text, (needle, text)
    return text
