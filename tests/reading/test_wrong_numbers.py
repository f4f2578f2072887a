"""No input value becomes a different number, and no code a different code, without a word.

The decimal mark of a typed number is settled by its column; yes/no cells reach the same
check from every reader; amounts that overflow never reach a total; implausible plans are
reported; codes come out as the user sees them. The files of the bad-input corpus
(tests/data/bad: decimal-comma-column, decimal-marks-mixed, huge-unit-cost,
implausible-inputs, yes-no-cells.ods, macro-in-xlsx) are run through the command line by
tests/end_to_end/test_bad_corpus.py; these tests look at the numbers themselves.
"""

from __future__ import annotations

import datetime as dt
import json
import math
import unicodedata
import zipfile
from pathlib import Path

import numpy as np
import pytest
from builders import item_row, simple_workbook, weekly_history, write_workbook
from hypothesis import given, settings
from hypothesis import strategies as st
from openpyxl import Workbook, load_workbook

import xlpolicy
from xlpolicy.contract import MAX_LEAD_TIME_DAYS, MAX_ORDER_YEARS, MAX_PLAN_AMOUNT
from xlpolicy.reading import decimals
from xlpolicy.reading.cells import parse_number, shown_date

BAD = Path(__file__).resolve().parents[1] / "data" / "bad"


# --- the decimal mark, settled by the column ------------------------------------------


@pytest.mark.parametrize(
    "text, mark",
    [
        ("4,50", decimals.COMMA),
        ("12,5", decimals.COMMA),
        ("1.234,50", decimals.COMMA),
        ("1234,567", decimals.COMMA),  # four digits before: not a thousands group
        ("1.234.567", decimals.COMMA),  # repeated dots are thousands separators
        ("4.50", decimals.POINT),
        ("1,234.50", decimals.POINT),
        ("1,234,567", decimals.POINT),
        ("€ 12.5", decimals.POINT),
        ("1.200", None),  # ambiguous: evidence of nothing
        ("1,200", None),
        ("12", None),
    ],
)
def test_what_one_typed_number_says_about_the_mark(text, mark):
    assert decimals.evidence(text) == mark


def _read(value: str, column: list[str]) -> float | None:
    conv = decimals.column_convention([(f"D{k}", v) for k, v in enumerate(column, 2)])
    typed, _, level = decimals.settle(value, conv)
    if level == "error":
        return None
    return parse_number(typed)[0]


def test_an_ambiguous_cell_is_read_by_its_column():
    assert _read("1.200", ["4,50", "12,75", "1.200"]) == 1200.0
    assert _read("1,200", ["4,50", "12,75", "1,200"]) == 1.2
    assert _read("1.200", ["4.50", "1.200"]) == 1.2
    assert _read("1,200", ["4.50", "1,200"]) == 1200.0
    assert _read("1.200", ["4.50", "12,75", "1.200"]) is None  # both marks: not guessed


def test_with_no_evidence_the_english_reading_is_kept_and_reported():
    conv = decimals.column_convention([("D2", "1,200")])
    typed, note, level = decimals.settle("1,200", conv)
    assert parse_number(typed)[0] == 1200.0 and level == "warning" and "1.2" in note


@settings(max_examples=60, deadline=None, derandomize=True)
@given(st.lists(st.integers(min_value=0, max_value=99_999_999), min_size=2, max_size=12))
def test_numbers_typed_with_the_decimal_comma_read_back_exactly(cents):
    # Each amount written as a German-style accountant would: 1.234,56 (dot thousands,
    # comma decimals). Whatever mix of ambiguous and plain cells results, the column reads
    # every one as written, given one cell with two decimals shows the mark.
    def typed(c: int) -> str:
        whole, frac = divmod(c, 100)
        return f"{whole:,}".replace(",", ".") + f",{frac:02d}"

    column = ["0,55", *(typed(c) for c in cents)]
    for c, text in zip(cents, column[1:], strict=True):
        assert _read(text, column) == pytest.approx(c / 100, abs=1e-9)


def test_a_csv_folder_settles_the_mark_by_column(tmp_path):
    folder = tmp_path / "shop"
    folder.mkdir()
    (folder / "Items.csv").write_text(
        "Item,Unit cost,Order cost,Holding rate,Lead time days\n"
        'A1,"4,50",20,0.2,14\nB2,"12,75",20,0.2,14\nC3,1.200,20,0.2,14\n'
    )
    hist = weekly_history(["A1", "B2", "C3"], weeks=30)
    (folder / "History.csv").write_text(
        "Item,Period,Quantity\n"
        + "".join(f"{c},w{k:02d},{q:g}\n" for c in hist for k, q in enumerate(hist[c]))
    )
    report = xlpolicy.analyse(folder, simulate=False)
    cost = report.results.set_index("item")["unit_cost"]
    assert cost["C3"] == 1200.0 and cost["A1"] == 4.5
    (note,) = [p for p in report.problems if p.code == "number-decimal-mark"]
    assert note.cell == "B4" and note.sheet == "Items.csv"


# --- yes/no cells from every reader ------------------------------------------------------


def test_yes_no_cells_of_an_ods_are_reported_like_those_of_an_xlsx():
    report = xlpolicy.analyse(BAD / "yes-no-cells.ods", simulate=False)
    res = report.results.set_index("item")
    assert res.loc["BOLT-10", "status"] == "skipped"  # not planned at a cost of 1
    assert res.loc["CHAIN-7", "inventory_position"] != 0  # FALSE is not 0 units on the shelf
    codes = {(p.code, p.cell) for p in report.problems}
    assert ("unit_cost-not-number", "D2") in codes and ("on_hand-not-number", "H3") in codes


def test_yes_no_text_in_a_csv_folder_gets_the_same_message(tmp_path):
    folder = tmp_path / "shop"
    folder.mkdir()
    (folder / "Items.csv").write_text(
        "Item,Unit cost,Order cost,Holding rate,Lead time days,Annual demand,Demand sd\n"
        "A1,TRUE,20,0.2,14,500,3\nB2,10,20,0.2,14,500,3\n"
    )
    problems = xlpolicy.check(folder)
    (p,) = [p for p in problems if p.code == "unit_cost-not-number"]
    assert "yes/no value" in p.message and p.cell == "B2"


def test_the_yes_no_message_says_it_once(tmp_path):
    src = write_workbook(
        tmp_path / "w.xlsx",
        [item_row("A", cost=True), item_row("B")],
        history=weekly_history(["A", "B"], weeks=60),
    )
    messages = [p.message for p in xlpolicy.check(src)]
    (m,) = [m for m in messages if "yes/no" in m]
    assert m.startswith("Unit cost TRUE is a yes/no value, not a number.")
    assert not [m for m in messages if ". ." in m or ".." in m.replace("...", "")]


# --- overflow never reaches a total, and implausible plans are reported ----------------


def test_an_overflowing_item_is_left_out_of_every_total(tmp_path):
    out = tmp_path / "o.json"
    result = xlpolicy.plan(BAD / "huge-unit-cost.xlsx", tmp_path / "o.xlsx", json=out)
    totals = result.report.totals
    assert all(math.isfinite(v) for v in totals.values() if not math.isnan(v)), totals
    assert totals["annual_purchase_cost"] < MAX_PLAN_AMOUNT
    data = json.loads(out.read_text())
    assert None not in data["totals"].values()
    res = result.report.results.set_index("item")
    assert res.loc["BOLT-10", "status"] == "skipped"


def test_implausible_plans_are_warned_about_by_cell():
    report = xlpolicy.analyse(BAD / "implausible-inputs.xlsx", simulate=False)
    res = report.results.set_index("item")
    years = res.loc["BOLT-10", "order_qty"] / res.loc["BOLT-10", "annual_demand"]
    assert years > MAX_ORDER_YEARS  # the case is what it claims
    found = {p.code: p for p in report.problems}
    assert found["order-covers-years"].cell == "D2"
    assert found["lead-time-implausible"].cell == "G3"
    assert f"{MAX_LEAD_TIME_DAYS:,.0f}" in found["lead-time-implausible"].message


def test_an_ordinary_workbook_gets_no_plausibility_warning(tmp_path):
    report = xlpolicy.analyse(simple_workbook(tmp_path / "w.xlsx"), simulate=False)
    assert not {"order-covers-years", "lead-time-implausible", "item-amount-overflow"} & {
        p.code for p in report.problems
    }


# --- codes as the user sees them -----------------------------------------------------------


def test_composed_and_decomposed_codes_are_one_item(tmp_path):
    composed = unicodedata.normalize("NFC", "Café-7")
    decomposed = unicodedata.normalize("NFD", "Café-7")
    assert composed != decomposed
    hist = weekly_history(["X"], weeks=60)["X"]
    src = write_workbook(
        tmp_path / "w.xlsx",
        [item_row(composed), item_row("B")],
        history={decomposed: hist, "B": hist},
    )
    report = xlpolicy.analyse(src, simulate=False)
    assert "history-unknown-item" not in {p.code for p in report.problems}
    res = report.results.set_index("item")
    assert res.loc[composed, "demand_source"] == "history"
    assert composed in res.index  # the Items spelling, byte for byte


def test_a_date_cell_code_comes_out_as_shown(tmp_path):
    wb = Workbook()
    ws = wb.active
    ws.title = "Items"
    ws.append(["Item", "Unit cost", "Order cost", "Holding rate", "Lead time days"])
    ws.append([dt.datetime(2024, 1, 5), 10, 20, 0.2, 14])
    ws["A2"].number_format = "mm-dd-yy"
    ws.append(["B2", 10, 20, 0.2, 14])
    ws["F1"], ws["G1"] = "Annual demand", "Demand sd"
    ws["F2"], ws["G2"], ws["F3"], ws["G3"] = 500, 3, 500, 3
    wb.save(tmp_path / "w.xlsx")
    report = xlpolicy.analyse(tmp_path / "w.xlsx", simulate=False)
    # The fast reader keeps only the formats that change a number's meaning, so the code is
    # the date as a date (never 2024-01-05T00:00:00); a known format is rendered as shown.
    assert "2024-01-05" in set(report.results["item"])


@pytest.mark.parametrize(
    "fmt, shown",
    [
        ("", "2024-01-05"),
        ("General", "2024-01-05"),
        ("mm-dd-yy", "01-05-24"),
        ("d/m/yyyy", "5/1/2024"),
        ("[$-409]mmmm d, yyyy;@", "January 5, 2024"),
        ("dd.mm.yyyy hh:mm", "05.01.2024 14:07"),
        ("m/d/yyyy h:mm AM/PM", "1/5/2024 2:07 PM"),
        ('"Week" d', "Week 5"),
    ],
)
def test_a_date_is_shown_as_its_number_format_says(fmt, shown):
    # the displays are those of the format codes of ECMA-376 Part 1, 18.8.31 (numFmts)
    when = dt.datetime(2024, 1, 5, 14, 7) if "h" in fmt else dt.datetime(2024, 1, 5)
    assert shown_date(when, fmt) == shown


def test_a_csv_code_of_minus_zero_stays_as_typed(tmp_path):
    folder = tmp_path / "shop"
    folder.mkdir()
    (folder / "Items.csv").write_text(
        "Item,Unit cost,Order cost,Holding rate,Lead time days,Annual demand,Demand sd\n"
        "-0,10,20,0.2,14,500,3\n12.0,10,20,0.2,14,500,3\n0,10,20,0.2,14,500,3\n"
    )
    report = xlpolicy.analyse(folder, simulate=False)
    assert list(report.results["item"]) == ["-0", "12.0", "0"]
    assert report.input_summary["items_planned"] == 3


# --- a macro-enabled package named .xlsx -------------------------------------------------


def test_a_macro_enabled_xlsx_gives_an_xlsm_that_declares_it(tmp_path):
    src = tmp_path / "shop.xlsx"
    src.write_bytes((BAD / "macro-in-xlsx.xlsx").read_bytes())
    result = xlpolicy.plan(src, simulate=False)
    assert result.output == tmp_path / "shop-policy.xlsm" and result.output.exists()
    assert not (tmp_path / "shop-policy.xlsx").exists()
    assert result.problems[0].code == "output-macro-enabled"
    with zipfile.ZipFile(result.output) as zf:
        assert b"macroEnabled.main+xml" in zf.read("[Content_Types].xml")
    load_workbook(result.output, keep_vba=True)  # opens
    with pytest.raises(xlpolicy.api.UsageError, match="holds macros"):
        xlpolicy.plan(src, tmp_path / "other.xlsx")


def test_no_numpy_warning_is_printed(tmp_path):
    import subprocess
    import sys

    proc = subprocess.run(
        [sys.executable, "-m", "xlpolicy", "check", str(BAD / "huge-unit-cost.xlsx")],
        capture_output=True,
        text=True,
        timeout=300,
        cwd=Path(xlpolicy.__file__).resolve().parent.parent,
    )
    assert "Warning" not in proc.stderr and "overflow encountered" not in proc.stderr
    assert np.isfinite(MAX_PLAN_AMOUNT)


def test_an_ambiguous_setting_is_reported(tmp_path):
    src = simple_workbook(tmp_path / "w.xlsx", settings={"Order cost": "1.200"})
    (p,) = [p for p in xlpolicy.check(src) if p.code == "number-decimal-mark"]
    assert p.sheet == "Settings" and p.cell == "B2" and "1200" in p.message


def test_one_code_in_two_unicode_forms_in_items_is_a_duplicate(tmp_path):
    composed = unicodedata.normalize("NFC", "Café-7")
    decomposed = unicodedata.normalize("NFD", "Café-7")
    src = write_workbook(
        tmp_path / "w.xlsx",
        [item_row(composed), item_row(decomposed)],
        history=weekly_history([composed], weeks=60),
    )
    (p,) = [p for p in xlpolicy.check(src) if p.code == "item-duplicate"]
    assert p.cell == "A3"


def test_an_ambiguous_history_quantity_is_reported(tmp_path):
    hist = weekly_history(["A", "B"], weeks=60)
    hist["A"][5] = "1.200"  # typed as text: 1.2 units, or twelve hundred?
    src = write_workbook(tmp_path / "w.xlsx", [item_row("A"), item_row("B")], history=hist)
    (p,) = [p for p in xlpolicy.check(src) if p.code == "number-decimal-mark"]
    assert p.sheet == "History" and p.cell == "C7" and "1200" in p.message
