"""The currency comes from the input's own number formats when Settings names none.

Number format codes per ECMA-376 Part 1, 18.8.31 (numFmts): locale tags "[$€-407]",
quoted literals and bare symbols (from memory). The workbooks are invented.
"""

from __future__ import annotations

from pathlib import Path

import openpyxl
import pytest
from builders import item_row, weekly_history, write_workbook

import xlpolicy
from xlpolicy.reading.currency import currency_of


@pytest.mark.parametrize(
    "fmt,want",
    [
        ('"$"#,##0.00', "$"),
        ("$#,##0.00", "$"),
        ("£#,##0", "£"),
        ("[$€-407] #,##0.00", "€"),
        ("#,##0.00 [$€-1809]", "€"),
        ("[$EUR] #,##0.00", "EUR"),
        ('#,##0.00" CHF"', "CHF"),
        ('"$"#,##0_);[Red]("$"#,##0)', "$"),
        ("#,##0.00", ""),
        ("0.00%", ""),
        ("General", ""),
        ('#,##0" units"', ""),
        ("[Red]#,##0", ""),
        ("000000", ""),
    ],
)
def test_currency_read_from_a_number_format(fmt, want):
    assert currency_of(fmt) == want


def _book(tmp_path: Path, formats: dict[str, str], settings=None) -> Path:
    codes = ["A1", "B2"]
    path = write_workbook(
        tmp_path / "w.xlsx",
        [item_row(c) for c in codes],
        history=weekly_history(codes),
        settings=settings,
    )
    wb = openpyxl.load_workbook(path)
    for cell, fmt in formats.items():
        wb["Items"][cell].number_format = fmt
    wb.save(path)
    return path


def test_one_currency_in_the_items_formats_is_used_and_said(tmp_path):
    src = _book(tmp_path, {"D2": "[$€-407] #,##0.00", "D3": "[$€-407] #,##0.00"})
    out = tmp_path / "out.xlsx"
    result = xlpolicy.plan(src, out, simulate=False)
    assert result.report.settings["currency"] == "€"
    note = [p for p in result.problems if p.code == "currency-from-format"]
    assert len(note) == 1 and note[0].sheet == "Items" and note[0].cell == "D2"
    ws = openpyxl.load_workbook(out)["Policy"]
    head = [c.value for c in ws[1]]
    fmt = ws.cell(row=2, column=head.index("Annual total cost") + 1).number_format
    assert "€" in fmt


def test_mixed_currencies_are_not_guessed_between(tmp_path):
    src = _book(tmp_path, {"D2": '"$"#,##0.00', "E2": '"£"#,##0.00'})
    report = xlpolicy.analyse(src, simulate=False)
    assert not report.settings.get("currency")
    assert [p.cell for p in report.problems if p.code == "currency-mixed"] == ["D2"]


def test_settings_currency_wins_over_the_formats(tmp_path):
    src = _book(tmp_path, {"D2": '"$"#,##0.00'}, settings={"Currency": "NZD"})
    report = xlpolicy.analyse(src, simulate=False)
    assert report.settings["currency"] == "NZD"
    assert not [p for p in report.problems if p.code.startswith("currency-")]
