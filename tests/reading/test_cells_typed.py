"""Cells as people type them: numbers as text with currency and separators, dates as text or
as bare day numbers, 1904-based workbooks, hidden rows and sheets, merged cells.

Each is either read as the user meant it or reported with the sheet (and cell) to fix.
Separator conventions (1,250.50 in English; 1.250,50 and 1 250,50 in much of Europe;
1'250.50 in Switzerland) are common practice in spreadsheet locales.
"""

from __future__ import annotations

import datetime as dt
from pathlib import Path

import pytest
from builders import BASE_HEADERS, item_row, weekly_history, write_workbook
from openpyxl import Workbook, load_workbook
from openpyxl.utils.datetime import CALENDAR_MAC_1904

import xlpolicy
from xlpolicy.reading.cells import parse_number, typed_periods

NBSP, NNBSP = "\u00a0", "\u202f"


@pytest.mark.parametrize(
    "text, value",
    [
        ("$12.50", 12.5),
        ("12,50 €", 12.5),
        (f"12,50{NBSP}€", 12.5),
        ("£1,250.00", 1250.0),
        ("EUR 12.50", 12.5),
        ("12.50 USD", 12.5),
        (f"1{NBSP}250,50", 1250.5),
        (f"1{NNBSP}250.50", 1250.5),
        ("1.250,50", 1250.5),
        ("1,250.50", 1250.5),
        ("1'250.50", 1250.5),
        ("€ 1.234.567,89", 1234567.89),
        ("12,5", 12.5),
        ("1,250", 1250.0),  # as a spreadsheet set to English reads it
        ("1.250.000", 1250000.0),
        ("(12.50)", -12.5),
        ("-$12.50", -12.5),
        ("$-12.50", -12.5),
        ("12.50-", -12.5),
        (" 3 ", 3.0),
        ("R$ 10,00", 10.0),
    ],
)
def test_numbers_typed_as_text_are_read(text, value):
    assert parse_number(text) == (pytest.approx(value), None)


@pytest.mark.parametrize(
    "text",
    [
        "abc",
        "12abc",
        "$",
        "--5",
        "(-5)",
        "1,2,3",
        "1.2.3",
        "12 boxes",
        "0x10",
        "nan",
        "inf",
        "1,25,0.5",
    ],
)
def test_text_that_is_not_a_number_stays_a_problem(text):
    x, why = parse_number(text)
    assert x is None and why == "text where a number belongs"


@pytest.mark.parametrize("text, rate", [("12%", 0.12), ("12,5 %", 0.125), (f"25{NBSP}%", 0.25)])
def test_percent_typed_as_text(text, rate):
    assert parse_number(text, rate=True) == (pytest.approx(rate), None)


def test_items_with_typed_numbers_are_planned_like_real_numbers(tmp_path):
    codes = ["A", "B", "C"]
    hist = weekly_history(codes)
    plain = write_workbook(
        tmp_path / "plain.xlsx",
        [item_row(c, cost=1250.5, order=12.5, rate=0.25) for c in codes],
        history=hist,
    )
    typed_rows = [
        ["A", "x", "s", "$1,250.50", "$12.50", "25%", "14"],
        ["B", "x", "s", f"1{NBSP}250,50 €", "12,50 €", "25 %", " 14 "],
        ["C", "x", "s", "EUR 1.250,50", "12,5", "0,25", "14,0"],
    ]
    typed = write_workbook(tmp_path / "typed.xlsx", typed_rows, history=hist)
    a, b = xlpolicy.analyse(plain), xlpolicy.analyse(typed)
    assert b.input_summary["items_planned"] == 3
    cols = ["item", "unit_cost", "order_qty", "reorder_point"]
    assert a.results[cols].equals(b.results[cols])


def _history_values(tmp_path: Path, name: str, periods: list) -> Path:
    codes = ["A", "B"]
    hist = weekly_history(codes, weeks=len(periods))
    return write_workbook(
        tmp_path / name, [item_row(c) for c in codes], history=hist, labels=periods
    )


def test_dates_typed_as_text_give_the_same_policy_as_real_dates(tmp_path):
    start = dt.datetime(2024, 1, 1)
    days = [start + dt.timedelta(weeks=k) for k in range(60)]
    real = xlpolicy.analyse(_history_values(tmp_path, "real.xlsx", days))
    for fmt in ("%d/%m/%Y", "%m/%d/%Y", "%d.%m.%Y", "%d %b %Y", "%b %d, %Y"):
        typed_path = _history_values(tmp_path, "typed.xlsx", [d.strftime(fmt) for d in days])
        typed = xlpolicy.analyse(typed_path)
        assert typed.input_summary["period"] == "week", fmt
        cols = ["item", "order_qty", "reorder_point", "safety_stock"]
        assert real.results[cols].equals(typed.results[cols]), fmt
        note = [p for p in typed.problems if p.code == "history-typed-dates-info"]
        assert note and note[0].sheet == "History", fmt


def test_dates_stored_as_bare_day_numbers_are_read_as_dates(tmp_path):
    # a date cell that lost its format shows its day number: 45292 is 2024-01-01 in the
    # 1900 date system (ECMA-376 Part 1, 18.17.4.1; from memory: 1900-01-01 is day 1, with
    # the fictitious 1900-02-29, so day 0 is effectively 1899-12-30 for later dates)
    days = [45292 + 7 * k for k in range(60)]
    r = xlpolicy.analyse(_history_values(tmp_path, "serial.xlsx", days))
    assert r.input_summary["period"] == "week"
    note = [p for p in r.problems if p.code == "history-typed-dates-info"][0]
    assert "45292" in note.message and "2024-01-01" in note.message
    values, _, _ = typed_periods([45292])
    assert values[0] == dt.datetime(2024, 1, 1)


def test_ambiguous_day_month_text_is_reported_not_guessed(tmp_path):
    periods = [f"{m:02d}/01/2024" for m in range(1, 13)]  # day or month first? both <= 12
    r = xlpolicy.analyse(_history_values(tmp_path, "amb.xlsx", periods))
    warn = [p for p in r.problems if p.code == "history-typed-dates-warning"]
    assert warn and "could be day/month or month/day" in warn[0].message
    assert warn[0].sheet == "History"


def test_a_1904_based_workbook_reads_the_same_dates(tmp_path):
    # Mac Excel's 1904 date system stores dates 1,462 days lower (ECMA-376 Part 1,
    # 18.17.4.1); openpyxl converts with the workbook's epoch, so periods come out the same
    days = [dt.datetime(2024, 1, 1) + dt.timedelta(weeks=k) for k in range(60)]
    p1900 = _history_values(tmp_path, "d1900.xlsx", days)
    wb = load_workbook(p1900)
    wb.epoch = CALENDAR_MAC_1904
    p1904 = tmp_path / "d1904.xlsx"
    wb.save(p1904)
    import zipfile

    with zipfile.ZipFile(p1904) as zf:
        assert b"date1904" in zf.read("xl/workbook.xml")
    a, b = xlpolicy.analyse(p1900), xlpolicy.analyse(p1904)
    assert a.input_summary["period"] == b.input_summary["period"] == "week"
    assert a.results["reorder_point"].equals(b.results["reorder_point"])


def test_hidden_rows_are_read_with_a_warning_naming_them(tmp_path):
    p = write_workbook(
        tmp_path / "w.xlsx", [item_row(c) for c in "ABCD"], history=weekly_history(list("ABCD"))
    )
    wb = load_workbook(p)
    for r in (3, 4):
        wb["Items"].row_dimensions[r].hidden = True
    wb.save(p)
    r = xlpolicy.analyse(p)
    assert r.input_summary["items_planned"] == 4  # hidden items are planned too
    warn = [x for x in r.problems if x.code == "rows-hidden"]
    assert len(warn) == 1 and warn[0].sheet == "Items" and "(3-4)" in warn[0].message


def test_a_hidden_sheet_is_found_with_a_note(tmp_path):
    p = write_workbook(
        tmp_path / "w.xlsx", [item_row(c) for c in "AB"], history=weekly_history(list("AB"))
    )
    wb = load_workbook(p)
    wb.create_sheet("Cover", 0)
    wb["History"].sheet_state = "hidden"
    wb.active = 0
    wb.save(p)
    r = xlpolicy.analyse(p)
    assert r.input_summary["history_layout"] == "long"
    assert [x.sheet for x in r.problems if x.code == "sheet-hidden"] == ["History"]


def test_merged_cells_in_the_data_are_reported_by_range(tmp_path):
    p = write_workbook(
        tmp_path / "w.xlsx",
        [item_row(c, supplier="Acme") for c in "ABC"],
        history=weekly_history(list("ABC")),
    )
    wb = load_workbook(p)
    wb["Items"].merge_cells("C2:C4")  # one supplier typed once over three items
    wb.save(p)
    r = xlpolicy.analyse(p)
    warn = [x for x in r.problems if x.code == "cells-merged"]
    assert len(warn) == 1 and warn[0].cell == "C2" and "C2:C4" in warn[0].message
    assert r.input_summary["items_planned"] == 3


def test_a_merged_header_title_above_the_data_is_not_reported(tmp_path):
    wb = Workbook()
    ws = wb.active
    ws.title = "Items"
    ws.append(["Our items"])
    ws.merge_cells("A1:G1")  # one row: a title, not data
    ws.append(BASE_HEADERS)
    for c in "AB":
        ws.append(item_row(c))
    hs = wb.create_sheet("History")
    hs.append(["Item", "Period", "Quantity"])
    for c, qty in weekly_history(list("AB")).items():
        for k, q in enumerate(qty):
            hs.append([c, k + 1, q])
    wb.save(tmp_path / "w.xlsx")
    r = xlpolicy.analyse(tmp_path / "w.xlsx")
    assert not [x for x in r.problems if x.code == "cells-merged"]
