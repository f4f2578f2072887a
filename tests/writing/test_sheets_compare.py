"""The 'Today vs plan' sheet: today's policy against the recommended one.

Today's cost uses the same yearly cost formulas as the recommended one (Silver, Pyke &
Peterson 1998, ch. 7: ordering D S / Q, holding i c (Q/2 + R - mu), shortage p D / Q n); the
invented report in
sheet_reports.py costs today's policy with them independently of the writer.
"""

from __future__ import annotations

import openpyxl
import pytest
from sheet_eval import Evaluator, workbook_getter
from sheet_reports import make_report, results

from xlpolicy.writing.compare_sheet import COMPARE_COLUMNS, HEADER_ROW
from xlpolicy.writing.sheets import write_generated_workbook

SHEET = "Today vs plan"
COL = {c.key: k + 1 for k, c in enumerate(COMPARE_COLUMNS)}


def _write(tmp_path, report):
    path = tmp_path / "out.xlsx"
    write_generated_workbook(path, report)
    return openpyxl.load_workbook(path), openpyxl.load_workbook(path, data_only=True)


def _rows(ws):
    """Item rows (1-based) of the comparison table, and the total row."""
    first = HEADER_ROW + 2
    rows = []
    r = first
    while ws.cell(row=r, column=1).value and not str(ws.cell(row=r, column=1).value).startswith(
        "Total"
    ):
        rows.append(r)
        r += 1
    return rows, r


def test_only_items_with_both_current_figures(tmp_path):
    report = make_report()
    wb, _ = _write(tmp_path, report)
    ws = wb[SHEET]
    rows, total = _rows(ws)
    # C-3 gives no current reorder point; B-9 was skipped: neither is compared
    assert sorted(ws.cell(row=r, column=1).value for r in rows) == ["000123", "D-10"]
    assert ws.cell(row=total, column=1).value == "Total, 2 items"


def test_saving_current_and_recommended_per_item_and_in_total(tmp_path):
    report = make_report()
    wb, values = _write(tmp_path, report)
    ws, wv = wb[SHEET], values[SHEET]
    ev = Evaluator(workbook_getter(values), SHEET)
    res = report.results.set_index("item")
    rows, total = _rows(ws)
    sums = {"cur": 0.0, "rec": 0.0, "sav": 0.0}
    for r in rows:
        code = ws.cell(row=r, column=1).value
        cur_f = ws.cell(row=r, column=COL["current_annual_total_cost"]).value
        rec_f = ws.cell(row=r, column=COL["annual_total_cost"]).value
        sav_f = ws.cell(row=r, column=COL["annual_saving"]).value
        assert cur_f.startswith("=") and rec_f.startswith("='Policy'!")
        cur = wv.cell(row=r, column=COL["current_annual_total_cost"]).value
        rec = wv.cell(row=r, column=COL["annual_total_cost"]).value
        sav = wv.cell(row=r, column=COL["annual_saving"]).value
        assert cur == res.loc[code, "current_annual_total_cost"]
        assert rec == res.loc[code, "annual_total_cost"]
        assert sav == pytest.approx(cur - rec, rel=1e-12)
        # re-evaluated from this sheet's visible inputs (D, S, i, c, p, n, mu, Q, R)
        assert ev(cur_f) == pytest.approx(res.loc[code, "current_annual_total_cost"], rel=1e-9)
        assert ev(rec_f) == rec
        assert ev(sav_f) == pytest.approx(res.loc[code, "annual_saving"], rel=1e-9)
        sums["cur"] += cur
        sums["rec"] += rec
        sums["sav"] += sav
    for key, col in (
        ("cur", "current_annual_total_cost"),
        ("rec", "annual_total_cost"),
        ("sav", "annual_saving"),
    ):
        cell = ws.cell(row=total, column=COL[col])
        assert cell.value.startswith("=SUM(")
        assert wv.cell(row=total, column=COL[col]).value == pytest.approx(sums[key])
        assert ev(cell.value) == pytest.approx(sums[key])
    assert sums["sav"] == pytest.approx(report.totals["annual_saving"])
    assert "$" in ws.cell(row=rows[0], column=COL["annual_saving"]).number_format
    assert ws.cell(row=rows[0], column=COL["fill_rate"]).number_format == "0.00%"


def test_headline_says_what_the_change_saves(tmp_path):
    report = make_report()
    wb, _ = _write(tmp_path, report)
    line = wb[SHEET]["A2"].value
    saving = report.totals["annual_saving"]
    assert saving > 0
    assert line.startswith("Changing to the recommended policy for 2 items saves about $")
    assert f"${saving:,.0f}" in line
    summary = " ".join(str(c.value) for c in wb["Summary"]["A"] if c.value)
    assert "saves about" in summary  # the owner sees it on the Summary too


def test_headline_when_the_change_costs_more(tmp_path):
    res = results()
    for k in res.index[res["current_annual_total_cost"].notna()]:
        res.loc[k, "current_annual_total_cost"] = res.loc[k, "annual_total_cost"] - 10.0
        res.loc[k, "current_annual_ordering_cost"] -= 10.0
        res.loc[k, "annual_saving"] = -10.0
        res.loc[k, "current_fill_rate"] = 0.9
    wb, values = _write(tmp_path, make_report(results=res))
    line = wb[SHEET]["A2"].value
    assert "costs about $20.00 more a year" in line
    assert "but raises the share of demand met from the shelf from 90.00% to" in line
    # the rows no longer match today's formula: their cost is written as a value
    rows, _ = _rows(wb[SHEET])
    assert all(
        wb[SHEET].cell(row=r, column=COL["current_annual_total_cost"]).data_type == "n"
        for r in rows
    )


def test_no_current_figures_says_what_to_fill_in(tmp_path):
    res = results()
    res["current_order_qty"] = float("nan")
    wb, _ = _write(tmp_path, make_report(results=res))
    ws = wb[SHEET]
    assert ws.max_row == 2
    text = ws["A2"].value
    assert "Current order qty" in text and "Current reorder point" in text
