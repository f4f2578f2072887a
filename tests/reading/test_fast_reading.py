"""The fast .xlsx reader sees every bad cell, wherever it is, and keeps codes as text.

Fast readers that guess a column's type from its first rows (fastexcel from 1,000 rows,
polars from 100) turn a later stray "n/a" into a blank, and pandas turns "000123" into 123.
These tests put the trap past row 1,000 and check that the problem is still reported by
cell, and that the fast path gives exactly what the openpyxl path gives.
"""

from __future__ import annotations

import datetime as dt
from pathlib import Path

import numpy as np
import pytest
from builders import BASE_HEADERS, item_row, write_workbook
from openpyxl import Workbook

import xlpolicy
from xlpolicy.problems import ProblemLog
from xlpolicy.reading.workbook import WorkbookFile

pytest.importorskip("python_calamine")

N = 1500  # past the 1,000 rows a type-guessing reader looks at
WEEKS = 30


def _codes() -> list[str]:
    return [f"{k:06d}" for k in range(1, N + 1)]


def _history(seed: int = 3) -> dict[str, list]:
    rng = np.random.default_rng(seed)
    return {c: [int(x) for x in rng.poisson(6, WEEKS)] for c in _codes()}


def _both_ways(path: Path, sheet: str):
    """The sheet read by the fast path and by the openpyxl path."""
    fast = WorkbookFile(path, ProblemLog())
    assert fast.open()
    assert fast._fast is not None, "python-calamine should have opened the file"
    slow = WorkbookFile(path, ProblemLog())
    assert slow._open_openpyxl()
    slow._sheet_parts = fast._sheet_parts
    try:
        return fast.read(sheet), slow.read(sheet)
    finally:
        fast.close()
        slow.close()


def test_text_in_a_wide_history_past_row_1000_is_reported(tmp_path: Path) -> None:
    hist = _history()
    codes = _codes()
    hist[codes[1400]][5] = "n/a"  # sheet row 1402, column G
    hist[codes[1450]][0] = -3  # a return: counted as 0, reported
    path = write_workbook(
        tmp_path / "w.xlsx", [item_row(c) for c in codes], history=hist, layout="wide"
    )
    probs = xlpolicy.check(path)
    bad = [p for p in probs if p.code == "history-quantity-not-number"]
    assert [(p.sheet, p.cell, p.item, p.value) for p in bad] == [
        ("History", "G1402", "001401", "n/a")
    ]
    neg = [p for p in probs if p.code == "history-quantity-negative"]
    assert [(p.cell, p.value) for p in neg] == [("B1452", -3)]


def test_text_in_a_long_history_past_row_1000_is_reported(tmp_path: Path) -> None:
    codes = _codes()[:60]
    hist = {c: list(v) for c, v in list(_history().items())[:60]}  # 60 x 30 = 1,800 rows
    hist[codes[50]][10] = "n/a"  # row 2 + 50 * 30 + 10 = 1512, column C
    path = write_workbook(
        tmp_path / "w.xlsx", [item_row(c) for c in codes], history=hist, layout="long"
    )
    bad = [p for p in xlpolicy.check(path) if p.code == "history-quantity-not-number"]
    assert [(p.cell, p.item, p.value) for p in bad] == [("C1512", codes[50], "n/a")]


def test_text_in_items_past_row_1000_is_reported_and_codes_stay_text(tmp_path: Path) -> None:
    codes = _codes()
    rows = [item_row(c) for c in codes]
    rows[1200][3] = "n/a"  # Unit cost of the item in sheet row 1202 (column D)
    rows[1300][0] = "000123-B"  # text codes with leading zeros stay as written
    hist = _history()
    hist["000123-B"] = hist.pop(codes[1300])
    path = write_workbook(tmp_path / "w.xlsx", rows, history=hist, layout="wide")
    report = xlpolicy.analyse(path)
    bad = [p for p in report.problems if p.code == "unit_cost-not-number"]
    assert [(p.cell, p.item, p.value) for p in bad] == [("D1202", codes[1200], "n/a")]
    items = report.results["item"].tolist()
    assert items[1100] == "001101" and "000123-B" in items
    assert all(isinstance(c, str) for c in items)


def test_a_zero_padded_code_past_row_1000_matches_its_history(tmp_path: Path) -> None:
    """'000123' as text in both sheets, past row 1,000, is one item with its history."""
    codes = _codes()
    hist = _history()
    path = write_workbook(
        tmp_path / "w.xlsx", [item_row(c) for c in codes], history=hist, layout="wide"
    )
    report = xlpolicy.analyse(path)
    row = report.results.set_index("item").loc["001234"]
    # Sample mean of that item's 30 weeks (numpy, independent of the reader).
    assert row["demand_per_period"] == pytest.approx(np.mean(hist["001234"]))
    assert not [p for p in report.problems if p.code == "history-unknown-item"]


def test_fast_path_gives_what_openpyxl_gives(tmp_path: Path) -> None:
    """Values, their types, row numbers and the formats the checks read are the same."""
    wb = Workbook()
    ws = wb.active
    ws.title = "Items"
    ws.append(["A title row"])
    ws.append([])
    ws.append(BASE_HEADERS + ["Service target", "History start"])
    for k in range(1, 1200):
        ws.append([f"{k:06d}", "thing", "Acme", 10.5, 20, 0.2, 14, 0.95, None])
    ws.append(
        [123, "padded number", "Acme", "n/a", "#N/A", "25%", "", True, dt.datetime(2024, 3, 4)]
    )
    ws.cell(ws.max_row, 1).number_format = "000000"
    ws.cell(ws.max_row, 8).value = 0.9
    ws.cell(ws.max_row, 8).number_format = "0%"
    ws.append([])
    ws.append(["X9", None, None, 1e20, -0.0, 3.25, dt.time(10, 30), 7, "=1+1"])
    wb.save(tmp_path / "m.xlsx")
    fast, slow = _both_ways(tmp_path / "m.xlsx", "Items")
    assert fast.row_numbers == slow.row_numbers
    assert len(fast.rows) == len(slow.rows)
    for a, b in zip(fast.rows, slow.rows, strict=True):
        n = max(len(a), len(b))
        a = a + [None] * (n - len(a))
        b = b + [None] * (n - len(b))
        assert a == b
        assert [type(v) for v in a] == [type(v) for v in b]
    assert fast.uncalculated == slow.uncalculated == {"I1205"}
    # The formats that change a value's meaning reach the checks.
    k = fast.row_numbers.index(1203)
    assert fast.formats[k][0] == slow.formats[k][0] == "000000"
    assert fast.formats[k][7] == slow.formats[k][7] == "0%"
    assert fast.grid is not None and fast.grid.shape[0] == len(fast.rows)


def test_error_values_are_reported_not_blanked(tmp_path: Path) -> None:
    codes = ["P1", "P2"]
    rows = [item_row(c) for c in codes]
    rows[1][3] = "#DIV/0!"  # openpyxl stores this as an error cell (t="e")
    path = write_workbook(tmp_path / "w.xlsx", rows)
    bad = [p for p in xlpolicy.check(path) if p.code == "unit_cost-not-number"]
    assert [(p.cell, p.value) for p in bad] == [("D3", "#DIV/0!")]
    assert "spreadsheet error #DIV/0!" in bad[0].message
