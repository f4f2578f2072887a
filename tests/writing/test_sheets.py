"""The generated sheets, CSV and JSON: written to real files and read back with openpyxl.

The data below are invented for these tests only. Outside references for what is checked:
- Cell types: ECMA-376 Part 1 (Office Open XML), 18.3.1.4 "c (Cell)": t="s" is a shared
  string; a formula is an <f> child. openpyxl reports these as data_type "s" and "f"
  (openpyxl docs, "Cell" API). From memory.
- Print setup: ECMA-376 Part 1, 18.3.1.63 pageSetup (orientation, fitToWidth, fitToHeight),
  18.3.1.65 sheetPr/pageSetUpPr fitToPage, and the _xlnm.Print_Titles defined name
  (18.2.6). From memory.
- Number format syntax (quoted literals, "%", "#,##0"): ECMA-376 Part 1, 18.8.31 numFmt.
  From memory.
- Header/footer codes &P (page) and &N (pages): ECMA-376 Part 1, 18.3.1.46 headerFooter.
  From memory.
- CSV: RFC 4180. JSON: RFC 8259 (no NaN literal, hence null).
Sums are recomputed in the tests from the invented inputs, independently of the writer.
"""

from __future__ import annotations

import datetime as dt
import json
import math
import re
from pathlib import Path

import openpyxl
import pandas as pd
import pytest
from sheet_eval import functions_in
from sheet_reports import COLUMNS, NAN, RUN, make_report
from sheet_reports import results as _results

from xlpolicy import contract
from xlpolicy.report import REORDER_KEYS, TOTAL_KEYS
from xlpolicy.writing.sheetkit import ALLOWED_FUNCTIONS
from xlpolicy.writing.sheets import (
    DEFAULT_SHEET_NAMES,
    OPTIONAL_SHEET_ORDER,
    SHEET_ORDER,
    clean_text,
    money_format,
    resolve_sheet_names,
    write_generated_workbook,
)
from xlpolicy.writing.tables import results_for_export, write_csv, write_json

GENERATED = ["Summary", "Reorder now", "Policy", "Today vs plan", "Warnings", "How it works"]


@pytest.fixture()
def written(tmp_path: Path):
    report = make_report()
    path = tmp_path / "out.xlsx"
    names = write_generated_workbook(path, report)
    wb = openpyxl.load_workbook(path)
    values = openpyxl.load_workbook(path, data_only=True)
    return report, names, wb, values, path


def _header(ws) -> list:
    return [c.value for c in ws[1]]


def _policy_cell(ws, item: str, title: str):
    header = _header(ws)
    col = header.index(title) + 1
    for row in ws.iter_rows(min_row=2):
        if row[0].value == item:
            return ws.cell(row=row[0].row, column=col)
    raise AssertionError(f"{item} not found")


def _sum_range(ws_values, ref: str) -> float:
    """Sum the numbers in an A1 range such as $Q$2:$Q$6 (read back, cached values)."""
    total = 0.0
    for row in ws_values[ref.replace("$", "")]:
        for cell in row:
            if isinstance(cell.value, (int, float)):
                total += cell.value
    return total


# ---------------------------------------------------------------------------
# Workbook
# ---------------------------------------------------------------------------


def test_sheet_names_and_reading_order(written):
    _, names, wb, _, _ = written
    assert names == GENERATED
    assert wb.sheetnames == names
    # every role has a default name (the api picks non-clashing names from these)
    assert set(DEFAULT_SHEET_NAMES) == set(SHEET_ORDER) | set(OPTIONAL_SHEET_ORDER)


def test_no_temporary_file_left(written):
    *_, path = written
    assert sorted(p.name for p in path.parent.iterdir()) == ["out.xlsx"]


def test_every_formula_is_ours(written):
    # Only functions every spreadsheet program evaluates alike (OpenFormula, ISO/IEC
    # 26300-2) may appear; user text never becomes a formula.
    _, _, wb, _, _ = written
    seen = 0
    for ws in wb.worksheets:
        for row in ws.iter_rows():
            for cell in row:
                if cell.data_type == "f":
                    seen += 1
                    assert functions_in(str(cell.value)) <= ALLOWED_FUNCTIONS, cell.value
                    assert "HYPERLINK" not in str(cell.value)
                    assert "[" not in str(cell.value)  # no structured references
    assert seen > 50


# ---------------------------------------------------------------------------
# Policy
# ---------------------------------------------------------------------------


def test_policy_headers_in_plain_words(written):
    _, _, wb, _, _ = written
    header = _header(wb["Policy"])
    # what is read first leads; category and supplier follow in the audit columns
    assert header[:5] == ["Item", "Description", "Status", "Demand model", "Order quantity (units)"]
    assert "Category" in header and "Supplier" in header
    for title in (
        "Order quantity (units)",
        "Reorder point (units)",
        "Safety stock (units)",
        "Cycle service achieved",
        "Fill rate achieved",
        "Annual total cost",
        "Annual purchase cost",
        "Average inventory value",
        "Lead time (days)",
        "Service target",
        "Orders per year",
    ):
        assert title in header
    # Every result key has a column (none silently dropped).
    assert len(header) == len(COLUMNS) and len(set(header)) == len(header)


def test_one_row_per_item_and_codes_stay_text(written):
    report, _, wb, _, _ = written
    ws = wb["Policy"]
    items = [ws.cell(row=r, column=1) for r in range(2, ws.max_row + 1)]
    assert [c.value for c in items] == list(report.results["item"])
    assert items[0].value == "000123" and items[0].data_type == "s"


@pytest.mark.parametrize(
    "item,title,expected",
    [
        ("000123", "Description", "=SUM(A1:A3) spare filter"),
        ("000123", "Category", "+fast"),
        ("A-77", "Category", "-slow"),
        ("A-77", "Description", "@x hook bracket"),  # control character \x07 removed
        ("B-9", "Description", "-old stock"),
    ],
)
def test_formula_like_text_lands_as_text(written, item, title, expected):
    _, _, wb, _, _ = written
    cell = _policy_cell(wb["Policy"], item, title)
    assert cell.data_type == "s"
    assert cell.value == expected
    assert cell.quotePrefix  # stays text when the user edits the cell


def test_skipped_item_present_with_blank_numbers(written):
    _, _, wb, _, _ = written
    ws = wb["Policy"]
    assert _policy_cell(ws, "B-9", "Status").value == "skipped"
    q = _policy_cell(ws, "B-9", "Order quantity (units)")
    assert q.value is None and q.data_type != "e"  # blank, never an error value
    assert q.number_format == "#,##0"
    cost = _policy_cell(ws, "B-9", "Annual total cost")
    assert cost.value is None and "$" in cost.number_format


def test_number_formats(written):
    report, _, wb, values, _ = written
    ws = wb["Policy"]
    cost = _policy_cell(ws, "000123", "Annual total cost")
    assert "$" in cost.number_format and "0.00" in cost.number_format
    expected = report.results.loc[0, "annual_total_cost"]
    cached = _policy_cell(values["Policy"], "000123", "Annual total cost").value
    assert cached == pytest.approx(expected, rel=1e-15)  # unrounded value kept
    # service levels with two decimals: 99.96 % must not show as 100.0 %
    assert _policy_cell(ws, "000123", "Cycle service achieved").number_format == "0.00%"
    assert "%" in _policy_cell(ws, "000123", "Fill rate achieved").number_format
    assert _policy_cell(ws, "000123", "Reorder point (units)").number_format == "#,##0"
    assert _policy_cell(ws, "000123", "Annual demand (units)").number_format.endswith("0.00")


def test_policy_frozen_filtered_and_tinted(written):
    _, _, wb, _, _ = written
    ws = wb["Policy"]
    assert ws.freeze_panes == "B2"
    assert ws.auto_filter.ref.startswith("A1:")
    status_letter = openpyxl.utils.get_column_letter(_header(ws).index("Status") + 1)
    formulas = [f for rng in ws.conditional_formatting for rule in rng.rules for f in rule.formula]
    assert f'${status_letter}2="skipped"' in formulas
    assert f'${status_letter}2="warning"' in formulas
    widths = [
        ws.column_dimensions[openpyxl.utils.get_column_letter(i)].width
        for i in range(1, ws.max_column + 1)
    ]
    assert all(8 <= w <= 46 for w in widths)


# ---------------------------------------------------------------------------
# Reorder now
# ---------------------------------------------------------------------------


def test_reorder_print_setup(written):
    _, _, wb, _, _ = written
    ws = wb["Reorder now"]
    assert ws.page_setup.orientation == "landscape"
    assert ws.sheet_properties.pageSetUpPr.fitToPage
    # fitToWidth defaults to 1 when absent (ECMA-376 18.3.1.63, from memory); 0 pages tall
    # means "as many as needed".
    assert int(ws.page_setup.fitToWidth or 1) == 1 and int(ws.page_setup.fitToHeight) == 0
    assert ws.print_title_rows and "5:" in ws.print_title_rows.replace("$", "")
    assert ws.print_area
    assert "&P" in ws.oddFooter.right.text and "&N" in ws.oddFooter.right.text
    assert RUN.isoformat() in ws.oddHeader.right.text
    assert RUN.isoformat() in ws["A1"].value
    assert ws.cell(row=5, column=10).value == "Quantity to order now (units)"


def test_reorder_grouped_with_subtotals(written):
    report, _, wb, values, _ = written
    ws, wv = wb["Reorder now"], values["Reorder now"]
    expected = report.reorder.groupby("supplier")["order_now_value"].sum()  # recomputed here
    subtotals = {}
    for r in range(1, ws.max_row + 1):
        label = ws.cell(row=r, column=11).value
        if isinstance(label, str) and label.startswith("Total for "):
            formula = ws.cell(row=r, column=12).value
            cached = wv.cell(row=r, column=12).value
            ref = re.fullmatch(r"=SUM\((L\d+:L\d+)\)", formula).group(1)
            assert _sum_range(wv, ref) == pytest.approx(cached)  # the range is the group
            subtotals[label.removeprefix("Total for ")] = cached
    assert subtotals.keys() == set(expected.index)
    for supplier, value in expected.items():
        assert subtotals[supplier] == pytest.approx(value, rel=1e-12)
    # Harbor Supplies has two items, Kestrel Trading one.
    items = [ws.cell(row=r, column=2).value for r in range(6, ws.max_row + 1)]
    assert [i for i in items if i] == ["000123", "A-77", "C-3"]
    # Grand total: the sum of all order values.
    grand = [
        r
        for r in range(1, ws.max_row + 1)
        if ws.cell(row=r, column=11).value == "Total to order now"
    ]
    assert len(grand) == 1
    assert wv.cell(row=grand[0], column=12).value == pytest.approx(expected.sum())
    assert "$" in ws.cell(row=grand[0], column=12).number_format


def test_reorder_empty_says_why(tmp_path):
    res = _results()
    empty = pd.DataFrame(columns=list(REORDER_KEYS))
    path = tmp_path / "a.xlsx"
    write_generated_workbook(path, make_report(reorder=empty))
    text = openpyxl.load_workbook(path)["Reorder now"]["A6"].value
    assert text.startswith("Nothing to order now")

    res["inventory_position"] = NAN
    write_generated_workbook(path, make_report(results=res, reorder=empty))
    text = openpyxl.load_workbook(path)["Reorder now"]["A6"].value
    assert "no stock figures" in text


# ---------------------------------------------------------------------------
# Warnings
# ---------------------------------------------------------------------------


def test_warnings_most_severe_first(written):
    _, _, wb, _, _ = written
    ws = wb["Warnings"]
    assert _header(ws) == ["Severity", "Sheet", "Cell", "Item", "Value found", "Message"]
    words = [ws.cell(row=r, column=1).value for r in range(2, ws.max_row + 1)]
    assert words == ["Fatal", "Error (skipped)", "Warning", "Warning", "Note"]
    # Stable within a severity: the order found.
    assert [ws.cell(row=r, column=4).value for r in (4, 5)] == ["A-77", "000123"]
    assert ws.cell(row=4, column=5).value == 0.5
    fatal_value = ws.cell(row=2, column=5)
    assert fatal_value.value == "=HYPERLINK(1)" and fatal_value.data_type == "s"
    fills = {ws.cell(row=r, column=1).fill.fgColor.rgb for r in (2, 3, 4, 6)}
    assert len(fills) == 4  # one tint per severity
    assert ws.freeze_panes == "A2"
    assert ws.auto_filter.ref == "A1:F6"
    assert ws.cell(row=2, column=6).alignment.wrap_text


def test_no_problems(tmp_path):
    path = tmp_path / "a.xlsx"
    write_generated_workbook(path, make_report(problems=[]))
    ws = openpyxl.load_workbook(path)["Warnings"]
    assert ws["A1"].value == "No problems found." and ws.max_row == 1


# ---------------------------------------------------------------------------
# Summary
# ---------------------------------------------------------------------------


def _summary_rows(ws) -> dict:
    """Column-A labels -> row, first occurrence (Totals come before 'What was read')."""
    out: dict = {}
    for r in range(1, ws.max_row + 1):
        v = ws.cell(row=r, column=1).value
        if v is not None and v not in out:
            out[v] = r
    return out


def test_summary_title_blocks_and_pointer(written):
    _, _, wb, _, _ = written
    ws = wb["Summary"]
    assert "harbor-stock.xlsx" in ws["A1"].value
    assert RUN.isoformat() in ws["A2"].value
    rows = _summary_rows(ws)
    for block in (
        "Totals for the planned items",
        "Items by status",
        "At a glance",
        "By ABC class",
        "By category",
        "By supplier",
        "What was read",
    ):
        assert block in rows
    assert rows["Totals for the planned items"] < rows["What was read"]
    text = " ".join(str(k) for k in rows)
    assert "'How it works'" in text and "safety-critical" in text
    assert ws.cell(row=rows["First period"], column=2).value == dt.datetime(2030, 1, 7)


def test_method_sheet_blocks_and_sources(written):
    _, _, wb, _, _ = written
    ws = wb["How it works"]
    rows = _summary_rows(ws)
    for block in (
        "The method, step by step",
        "How the demand model is chosen",
        "What the Policy sheet's columns are",
        "ABC classes",
        "Settings used",
        "Cautions",
    ):
        assert block in rows
    text = " ".join(str(k) for k in rows)
    for source in (
        "Harris 1913",
        "Wilson 1934",
        "Silver, Pyke & Peterson 1998",
        "Hadley & Whitin 1963",
    ):
        assert source in text
    assert "licensed staff and local rules" in text
    assert "80%" in text and "15%" in text  # the ABC cut-offs from the settings
    assert ws.cell(row=rows["Period"], column=3).value == "inferred from dates"
    assert "%" in ws.cell(row=rows["Service target"], column=2).number_format
    assert ws.cell(row=rows["ABC cut-offs"], column=2).value == "80% / 95%"


@pytest.mark.parametrize(
    "label,key",
    [
        ("Annual total cost (the four above)", "annual_total_cost"),
        ("Annual ordering cost", "annual_ordering_cost"),
        ("Average inventory value", "average_inventory_value"),
        ("Items planned", "items_planned"),
        ("Items skipped", "items_skipped"),
        ("Items to reorder now", "items_to_reorder"),
        ("Value to reorder now", "reorder_value"),
    ],
)
def test_summary_totals_are_live_formulas(written, label, key):
    report, _, wb, values, _ = written
    ws, wv = wb["Summary"], values["Summary"]
    row = _summary_rows(ws)[label]
    formula = ws.cell(row=row, column=2).value
    assert isinstance(formula, str) and formula.startswith("=")
    cached = wv.cell(row=row, column=2).value
    assert cached == pytest.approx(float(report.totals[key]), rel=1e-12)
    m = re.fullmatch(r"=SUM\('Policy'!(\$[A-Z]+\$\d+:\$[A-Z]+\$\d+)\)", formula)
    if m:  # re-evaluate the SUM over the cells read back from the Policy sheet
        assert _sum_range(values["Policy"], m.group(1)) == pytest.approx(cached, rel=1e-12)


def test_summary_money_formats(written):
    _, _, wb, _, _ = written
    ws = wb["Summary"]
    rows = _summary_rows(ws)
    assert "$" in ws.cell(row=rows["Annual total cost (the four above)"], column=2).number_format


def test_summary_total_that_does_not_match_is_written_plain(tmp_path):
    report = make_report()
    report.totals["annual_ordering_cost"] += 1.0  # no longer the column's sum
    path = tmp_path / "a.xlsx"
    write_generated_workbook(path, report)
    ws = openpyxl.load_workbook(path)["Summary"]
    cell = ws.cell(row=_summary_rows(ws)["Annual ordering cost"], column=2)
    assert cell.data_type == "n"
    assert cell.value == pytest.approx(report.totals["annual_ordering_cost"])


def test_renamed_sheets_are_quoted_in_formulas(tmp_path):
    path = tmp_path / "a.xlsx"
    names = write_generated_workbook(
        path, make_report(), {"policy": "Bob's plan", "reorder": "Order/today"}
    )
    assert names == [
        "Summary",
        "Ordertoday",
        "Bob's plan",
        "Today vs plan",
        "Warnings",
        "How it works",
    ]
    wb = openpyxl.load_workbook(path)
    ws = wb["Summary"]
    f = ws.cell(row=_summary_rows(ws)["Annual total cost (the four above)"], column=2).value
    assert f.startswith("=SUM('Bob''s plan'!$")
    f = ws.cell(row=_summary_rows(ws)["Value to reorder now"], column=2).value
    assert f.startswith("='Ordertoday'!$L$")


def test_sheet_name_rules():
    # Excel: at most 31 characters, none of []:*?/\, unique ignoring case (common practice,
    # from memory of Excel's rename dialog).
    names = resolve_sheet_names({"policy": "x" * 40, "summary": "X" * 40})
    assert len(names["policy"]) == 31 and names["policy"].lower() != names["summary"].lower()
    assert resolve_sheet_names(None) == {**DEFAULT_SHEET_NAMES}
    with pytest.raises(ValueError):
        resolve_sheet_names({"plan": "P"})


def test_money_format_and_text_cleaning():
    assert money_format("$") == '"$"#,##0.00'
    assert money_format("EUR") == '#,##0.00 "EUR"'
    assert money_format(None) == "#,##0.00"
    assert money_format(NAN) == "#,##0.00"
    assert clean_text("a\x00b\x1fc\td\r\ne") == "abc\td\ne"
    assert clean_text(123.0) == "123" and clean_text(NAN) is None


# ---------------------------------------------------------------------------
# CSV and JSON
# ---------------------------------------------------------------------------


def test_csv_round_trip(tmp_path):
    report = make_report()
    path = tmp_path / "items.csv"
    write_csv(path, report)
    first_line = path.read_text(encoding="utf-8").split("\n", 1)[0]
    assert first_line == ",".join(contract.ALL_RESULT_KEYS)
    back = pd.read_csv(path, dtype={"item": str}, encoding="utf-8")
    assert list(back.columns) == list(contract.ALL_RESULT_KEYS)
    assert list(back["item"]) == ["000123", "A-77", "B-9", "C-3", "D-10"]
    # Unrounded: 0.1 + 0.2 = 0.30000000000000004 in binary floating point (IEEE 754).
    assert back.loc[3, "annual_demand"] == 0.1 + 0.2
    # text a spreadsheet program would run gets a leading apostrophe (common practice
    # against formula injection, OWASP "CSV Injection"); the JSON keeps it exactly
    assert back.loc[0, "description"] == "'=SUM(A1:A3) spare filter"
    skipped = back[back["item"] == "B-9"].iloc[0]
    assert skipped["status"] == "skipped" and math.isnan(skipped["order_qty"])
    assert sorted(p.name for p in tmp_path.iterdir()) == ["items.csv"]


def test_results_for_export_adds_missing_keys_and_text_codes():
    res = _results().drop(columns=["eoq"])
    res["item"] = res["item"].astype(object)
    res.loc[4, "item"] = 123.0  # a code that was read as a number
    out = results_for_export(make_report(results=res))
    assert list(out.columns) == list(contract.ALL_RESULT_KEYS)
    assert out["eoq"].isna().all() and out.loc[4, "item"] == "123"


def test_json(tmp_path):
    report = make_report()
    path = tmp_path / "items.json"
    write_json(path, report)

    def refuse(name: str):
        raise AssertionError(f"non-standard JSON constant {name}")

    doc = json.loads(path.read_text(encoding="utf-8"), parse_constant=refuse)
    assert {"items", "problems", "settings", "totals"} <= doc.keys()
    assert [i["item"] for i in doc["items"]] == ["000123", "A-77", "B-9", "C-3", "D-10"]
    assert list(doc["items"][0]) == list(contract.ALL_RESULT_KEYS)
    skipped = doc["items"][2]
    assert skipped["order_qty"] is None and skipped["status"] == "skipped"
    assert doc["items"][3]["annual_demand"] == 0.1 + 0.2
    assert doc["totals"]["items_planned"] == 4 and isinstance(doc["totals"]["items_planned"], int)
    assert doc["problems"][0] == report.problems[0].as_dict()
    assert doc["settings"]["sources"]["period"] == "inferred from dates"
    assert doc["run_date"] == RUN.isoformat()
    assert doc["input_summary"]["first_period"] == "2030-01-07"


def test_nullable_and_infinite_numbers_become_blanks(tmp_path):
    # pandas nullable floats (pd.NA) and an infinity must give blank cells, empty CSV
    # fields and JSON nulls, never an error cell or an exception.
    res = _results()
    floats = [c for c in res.columns if pd.api.types.is_float_dtype(res[c])]
    res[floats] = res[floats].astype("Float64")
    res["eoq"] = res["eoq"].astype(float)
    res.loc[0, "eoq"] = math.inf
    report = make_report(results=res)
    write_generated_workbook(tmp_path / "a.xlsx", report)
    ws = openpyxl.load_workbook(tmp_path / "a.xlsx")["Policy"]
    eoq = _policy_cell(ws, "000123", "EOQ before rounding (units)")
    assert eoq.value is None and eoq.data_type != "e"
    assert _policy_cell(ws, "B-9", "Annual total cost").value is None
    write_csv(tmp_path / "a.csv", report)
    back = pd.read_csv(tmp_path / "a.csv", dtype={"item": str})
    assert math.isnan(back.loc[2, "order_qty"])
    write_json(tmp_path / "a.json", report)
    doc = json.loads((tmp_path / "a.json").read_text(encoding="utf-8"))
    assert doc["items"][0]["eoq"] is None and doc["items"][2]["order_qty"] is None


def test_no_items_at_all(tmp_path):
    empty = pd.DataFrame(columns=COLUMNS)
    report = make_report(
        results=empty,
        reorder=pd.DataFrame(columns=list(REORDER_KEYS)),
        totals={k: 0 for k in TOTAL_KEYS},
        input_summary={},
    )
    names = write_generated_workbook(tmp_path / "a.xlsx", report)
    wb = openpyxl.load_workbook(tmp_path / "a.xlsx")
    assert wb.sheetnames == names
    assert wb["Policy"]["A2"].value == "No items were read."
    assert "no stock figures" in wb["Reorder now"]["A6"].value
