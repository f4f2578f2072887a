"""The typed reader of a wide History (xlpolicy.reading.typed) against the general path.

The typed reader asks fastexcel for every quantity column as numbers, so it must show that
nothing is lost that way: each workbook here is read both ways (the module switch
``TYPED_HISTORY``, no mock) and the History (items, quantities, periods) and every problem
(severity, cell, item, value, message) must be the same. The bad cells sit past row 1,000,
where a reader guessing types from the first rows would turn them into blanks. Where the
typed reader cannot be exact (TRUE/FALSE cells, a date as an item code), it must step
aside, and the result is still the same.
"""

from __future__ import annotations

import datetime as dt
from pathlib import Path

import numpy as np
import pytest
from builders import item_row, write_workbook
from openpyxl import Workbook

import xlpolicy.reading as reading
from xlpolicy.problems import ProblemLog
from xlpolicy.reading import typed
from xlpolicy.reading.workbook import WorkbookFile

pytestmark = pytest.mark.skipif(not typed.available(), reason="fastexcel/pyarrow not installed")

N = 1200
WEEKS = 12


def _read(path: Path, typed_on: bool):
    saved = reading.TYPED_HISTORY
    reading.TYPED_HISTORY = typed_on
    try:
        log = ProblemLog()
        data = reading.read_input(path, {}, log)
    finally:
        reading.TYPED_HISTORY = saved
    problems = [
        (p.severity, p.sheet, p.cell, p.item, p.value, p.message, p.code) for p in log.problems
    ]
    return data, problems


def _typed_ran(path: Path) -> bool:
    """Whether the typed reader itself (not the general fallback) reads the History."""
    wb = WorkbookFile(path, ProblemLog())
    assert wb.open()
    try:
        return reading.typed_cells(wb, "History") is not None
    finally:
        wb.close()


def _same_both_ways(path: Path) -> list[tuple]:
    general, p_general = _read(path, False)
    fast, p_fast = _read(path, True)
    assert general is not None and fast is not None
    hg, hf = general.history, fast.history
    assert hf.items == hg.items
    assert np.array_equal(hf.matrix, hg.matrix, equal_nan=True)
    assert hf.labels == hg.labels and hf.period == hg.period
    assert hf.first_cell == hg.first_cell
    assert p_fast == p_general
    return p_fast


def _codes(n: int = N) -> list[str]:
    return [f"P{k:05d}" for k in range(1, n + 1)]


def _history(codes: list[str], seed: int = 5) -> dict[str, list]:
    rng = np.random.default_rng(seed)
    return {c: [int(x) for x in rng.poisson(4, WEEKS)] for c in codes}


def _wide_with(tmp_path: Path, n: int, row: int, week: int, value: object) -> Path:
    """A wide workbook of ``n`` items with ``value`` in item ``row``'s ``week`` (0-based)."""
    codes = _codes(n)
    hist = _history(codes)
    hist[codes[row]][week] = value
    return write_workbook(
        tmp_path / "w.xlsx", [item_row(c) for c in codes], history=hist, layout="wide"
    )


def test_a_clean_sheet_reads_the_same_and_the_typed_reader_ran(tmp_path: Path) -> None:
    codes = _codes()
    path = write_workbook(
        tmp_path / "w.xlsx", [item_row(c) for c in codes], history=_history(codes), layout="wide"
    )
    assert _typed_ran(path)
    assert _same_both_ways(path) == []


def test_every_kind_of_bad_cell_past_row_1000_is_reported_the_same(tmp_path: Path) -> None:
    codes = _codes()
    hist = _history(codes)
    bad = {
        1050: "n/a",
        1060: "n/a",
        1070: "1e3",
        1080: "1,250.5",
        1090: " 3 ",
        1100: "",
        1110: "#N/A",
        1120: dt.datetime(2024, 3, 1),
        1130: 'x"y\\z\né',
        1140: "5 units",
        1150: 2.5,
        1160: "  ",
        1170: "12",
        1180: "=1+1",
        1190: dt.timedelta(hours=5),
    }
    for k, v in bad.items():
        hist[codes[k]][3] = v
    path = write_workbook(
        tmp_path / "w.xlsx",
        [item_row(c) for c in codes[:-5]],
        history=hist,
        layout="wide",
        extra_history_rows=[
            [codes[10], *[1] * WEEKS],  # a second row for one item
            [None, 4, 5],  # quantities without a code
            ["  ", None, None],
        ],
    )  # nothing but spaces
    assert _typed_ran(path)
    problems = _same_both_ways(path)
    codes_found = {p[6] for p in problems}
    # (the five codes left out of Items, the duplicate and the row without a code)
    assert {
        "history-unknown-item",
        "history-duplicate-item",
        "history-item-missing",
        "history-quantity-not-number",
        "cell-uncalculated",
    } <= codes_found
    cells = {p[2] for p in problems}
    for k in (1050, 1060, 1110, 1120, 1130, 1140, 1180, 1190):  # E = the 4th week
        assert f"E{k + 2}" in cells


@pytest.mark.parametrize("text", ["-5", "inf", "NaN"])
def test_text_that_reads_as_a_troubled_number_goes_the_general_way(
    tmp_path: Path, text: str
) -> None:
    """A negative or endless number typed as text is quoted as text in its message, which
    the typed reader cannot tell from a number: it steps aside, and the problem is the same."""
    path = _wide_with(tmp_path, 1050, 1030, 3, text)
    assert not _typed_ran(path)
    problems = _same_both_ways(path)
    assert [p[4] for p in problems if p[2] == "E1032"] == [text]


def test_a_negative_number_is_read_the_typed_way(tmp_path: Path) -> None:
    path = _wide_with(tmp_path, 1050, 1030, 3, -4)
    assert _typed_ran(path)
    problems = _same_both_ways(path)
    assert [(p[4], p[6]) for p in problems if p[2] == "E1032"] == [
        (-4, "history-quantity-negative")
    ]


def test_title_rows_a_blank_first_column_and_a_note_far_below(tmp_path: Path) -> None:
    codes = _codes(1100)
    wb = Workbook()
    items = wb.active
    items.title = "Items"
    items.append(["Item", "Unit cost", "Order cost", "Holding rate", "Lead time (days)"])
    for c in codes:
        items.append([c, 10, 20, 0.2, 14])
    hs = wb.create_sheet("History")
    hs["C1"] = "Weekly sales, exported"
    hs.append([])
    hs.append(
        [None, "Item", *[dt.datetime(2024, 1, 1) + dt.timedelta(weeks=k) for k in range(WEEKS)]]
    )
    rng = np.random.default_rng(2)
    for k, c in enumerate(codes):
        hs.append([None, c, *[int(x) for x in rng.poisson(3, WEEKS)]])
        if k == 1050:
            hs.append([])  # an empty row in the data
    hs.cell(row=2000, column=1, value="checked by stores")  # a note far below, column A
    path = tmp_path / "w.xlsx"
    wb.save(path)
    assert _typed_ran(path)
    _same_both_ways(path)


def test_numeric_codes_shown_zero_padded_stay_as_the_user_sees_them(tmp_path: Path) -> None:
    wb = Workbook()
    items = wb.active
    items.title = "Items"
    items.append(["Item", "Unit cost", "Order cost", "Holding rate", "Lead time (days)"])
    hs = wb.create_sheet("History")
    hs.append(["Item", *[dt.datetime(2024, 1, 1) + dt.timedelta(weeks=k) for k in range(6)]])
    for k in range(1, 1101):
        code = f"{k:06d}"
        items.append([code, 10, 20, 0.2, 14])
        cell_value: object = k if k % 3 else code  # a number shown as 000123, or text
        hs.append([cell_value, 1, 2, 3, 4, 5, 6])
        if k % 3:
            hs.cell(row=hs.max_row, column=1).number_format = "000000"
    hs.append([1101.0, 1, 1, 1, 1, 1, 1])  # a plain number: code "1101", not in Items
    path = tmp_path / "w.xlsx"
    wb.save(path)
    assert _typed_ran(path)
    problems = _same_both_ways(path)
    general, _ = _read(path, False)
    assert len(general.history.items) == 1100  # every zero-padded code was matched
    assert [p[3] for p in problems if p[6] == "history-unknown-item"] == ["1101"]


@pytest.mark.parametrize(
    "labels", [list(range(1, WEEKS + 1)), [f"W{k}" for k in range(1, WEEKS + 1)]]
)
def test_period_numbers_or_labels_as_headers(tmp_path: Path, labels: list) -> None:
    codes = _codes(1050)
    path = write_workbook(
        tmp_path / "w.xlsx",
        [item_row(c) for c in codes],
        history=_history(codes),
        layout="wide",
        labels=labels,
    )
    assert _typed_ran(path)
    _same_both_ways(path)


def test_true_false_cells_send_the_sheet_the_general_way(tmp_path: Path) -> None:
    """fastexcel would read TRUE as 1: the scan sees it and the typed reader steps aside."""
    path = _wide_with(tmp_path, 1050, 1020, 2, True)
    assert not _typed_ran(path)
    problems = _same_both_ways(path)
    assert any(p[2] == "D1022" and p[6] == "history-quantity-not-number" for p in problems)


def test_a_date_as_an_item_code_sends_the_sheet_the_general_way(tmp_path: Path) -> None:
    codes = _codes(1050)
    hist: dict = _history(codes)
    hist[dt.datetime(2024, 5, 1)] = [1] * WEEKS  # a date where a code belongs
    path = write_workbook(
        tmp_path / "w.xlsx", [item_row(c) for c in codes], history=hist, layout="wide"
    )
    assert not _typed_ran(path)
    _same_both_ways(path)


def test_a_long_history_is_left_to_the_general_reader(tmp_path: Path) -> None:
    codes = _codes(20)
    path = write_workbook(
        tmp_path / "w.xlsx", [item_row(c) for c in codes], history=_history(codes), layout="long"
    )
    wb = WorkbookFile(path, ProblemLog())
    assert wb.open()
    try:
        from xlpolicy.reading.history import wide_header

        assert wide_header(wb.peek("History")) is None
    finally:
        wb.close()
    _same_both_ways(path)


@pytest.mark.parametrize(
    "text",
    [
        'a"b',
        "back\\slash",
        "new\nline",
        "tab\there",
        "ünïcødé ✓",
        "quote's",
        "\u200bzero width",
        "e\u0301",
    ],
)
def test_text_comes_back_exactly_through_the_converter_message(tmp_path: Path, text: str) -> None:
    """Text in a quantity cell is decoded from fastexcel's message; it must be exact, as
    the general path (python-calamine) gives it: the problem's value shows it."""
    path = _wide_with(tmp_path, 3, 1, 1, text)
    assert _typed_ran(path)
    problems = _same_both_ways(path)
    assert [p[4] for p in problems if p[2] == "C3"] == [text]


def test_hidden_rows_and_merged_cells_are_noted_the_same(tmp_path: Path) -> None:
    codes = _codes(1050)
    path = write_workbook(
        tmp_path / "w.xlsx", [item_row(c) for c in codes], history=_history(codes), layout="wide"
    )
    from openpyxl import load_workbook

    wb = load_workbook(path)
    hs = wb["History"]
    hs.row_dimensions[1030].hidden = True
    hs.merge_cells("C1040:C1042")
    wb.save(path)
    assert _typed_ran(path)
    problems = _same_both_ways(path)
    assert {"rows-hidden", "cells-merged"} <= {p[6] for p in problems}


def test_shared_strings_as_a_spreadsheet_program_writes_them(tmp_path: Path) -> None:
    """openpyxl writes text inline; Excel and xlsxwriter write a shared-strings table."""
    import xlsxwriter

    codes = _codes(1100)
    path = tmp_path / "w.xlsx"
    book = xlsxwriter.Workbook(str(path))
    items = book.add_worksheet("Items")
    items.write_row(0, 0, ["Item", "Unit cost", "Order cost", "Holding rate", "Lead time (days)"])
    hs = book.add_worksheet("History")
    date = book.add_format({"num_format": "yyyy-mm-dd"})
    hs.write_string(0, 0, "Item")
    for k in range(WEEKS):
        hs.write_datetime(0, k + 1, dt.datetime(2024, 1, 1) + dt.timedelta(weeks=k), date)
    rng = np.random.default_rng(4)
    for r, c in enumerate(codes, start=1):
        items.write_row(r, 0, [c, 10, 20, 0.2, 14])
        hs.write_string(r, 0, c)
        hs.write_row(r, 1, [int(x) for x in rng.poisson(3, WEEKS)])
    hs.write_string(1080, 5, "n/a")
    hs.write_number(1090, 6, -2)
    book.close()
    assert _typed_ran(path)
    problems = _same_both_ways(path)
    assert [p[2] for p in problems] == ["F1081", "G1091"]


def test_cells_written_without_their_reference_read_the_same(tmp_path: Path) -> None:
    """ECMA-376 lets a writer leave out a cell's r="B7" (its place follows from order).
    The scan cannot place such an error cell, so neither fast reader may guess: the
    result must equal openpyxl's, which counts cells in order."""
    import re
    import zipfile

    codes = _codes(1050)
    hist = _history(codes)
    hist[codes[1020]][2] = "#N/A"
    hist[codes[1030]][4] = "n/a"
    src = write_workbook(
        tmp_path / "w.xlsx", [item_row(c) for c in codes], history=hist, layout="wide"
    )
    path = tmp_path / "no-refs.xlsx"
    with zipfile.ZipFile(src) as zin, zipfile.ZipFile(path, "w", zipfile.ZIP_DEFLATED) as zout:
        for info in zin.infolist():
            data = zin.read(info)
            if info.filename == "xl/worksheets/sheet2.xml":
                data = re.sub(rb'<c r="[A-Z]+\d+"', b"<c", data)
            zout.writestr(info, data)
    problems = _same_both_ways(path)
    from openpyxl import load_workbook

    wb = load_workbook(path, read_only=True)
    assert wb["History"]["D1022"].value == "#N/A"  # (openpyxl places them by order)
    wb.close()
    assert [(p[2], p[4]) for p in problems] == [("D1022", "#N/A"), ("F1032", "n/a")]
