"""The Price breaks sheet: reading, one test per validation rule, and the output.

The workbook numbers are invented test data; the expected order quantities are checked
against an independent brute force over every allowed quantity (as in test_core_discounts).
"""

from __future__ import annotations

import numpy as np
import openpyxl
import pytest
from builders import BASE_HEADERS, write_workbook

import xlpolicy

HEADERS = [*BASE_HEADERS, "Annual demand", "Demand sd", "Pack size"]


def _book(tmp_path, breaks, sheet="Price breaks", header=("Item", "Min qty", "Price")):
    items = [
        ["K1", "bolt", "Acme", 0.30, 8.0, 0.2, 14.0, 600, 4.0, None],
        ["K2", "nut", "Acme", 2.00, 30.0, 0.25, 7.0, 2000, 15.0, 10],
    ]
    path = write_workbook(tmp_path / "w.xlsx", items, headers=HEADERS)
    wb = openpyxl.load_workbook(path)
    ws = wb.create_sheet(sheet)
    ws.append(["Supplier price list"])  # a title row above the header
    ws.append(list(header))
    for row in breaks:
        ws.append(list(row))
    wb.save(path)
    return path


GOOD = [("K1", 500, 0.29), ("K1", 1000, 0.28), ("K2", 1000, 1.80)]


def _only(problems, code):
    found = [p for p in problems if p.code == code]
    assert len(found) == 1, [(p.code, p.where(), p.message) for p in problems]
    return found[0]


def test_breaks_are_read_loosely_and_used(tmp_path):
    path = _book(
        tmp_path,
        GOOD,
        sheet="quantity_discounts",
        header=("SKU", "From quantity (units)", "Unit price"),
    )
    report = xlpolicy.analyse(path)
    r = report.results.set_index("item")
    assert r.loc["K1", "order_qty"] == 500 and r.loc["K1", "unit_price"] == pytest.approx(0.29)
    assert r.loc["K1", "price_break_qty"] == 500
    # K2: brute force over whole packs of 10: base 2.00, from 1,000 units 1.80
    qs = np.arange(10, 5001, 10, dtype=float)
    price = np.where(qs >= 1000, 1.80, 2.00)
    tc = 2000 * 30 / qs + 0.25 * price * qs / 2 + 2000 * price
    assert r.loc["K2", "order_qty"] == qs[np.argmin(tc)]
    best = (
        r.loc["K2", "annual_ordering_cost"]
        + r.loc["K2", "annual_cycle_holding_cost"]
        + r.loc["K2", "annual_purchase_cost"]
    )
    assert best == pytest.approx(tc.min(), rel=1e-12)
    assert report.totals["discount_saving"] == pytest.approx(
        np.nansum(report.results["discount_saving"])
    )
    assert report.totals["items_with_price_breaks"] == 2


def test_policy_sheet_shows_the_break(tmp_path):
    path = _book(tmp_path, GOOD)
    out = tmp_path / "out.xlsx"
    xlpolicy.plan(path, out)
    ws = openpyxl.load_workbook(out)["Policy"]
    head = [c.value for c in ws[1]]
    for title in (
        "Unit price paid (after any price break)",
        "Price break used: from (units)",
        "Yearly saving of the price break over the plain EOQ",
    ):
        assert title in head
    # the cycle-holding formula names the price paid, not the Unit cost
    col = head.index("Annual cycle stock holding cost")
    price_col = head.index("Unit price paid (after any price break)")
    formula = ws.cell(row=2, column=col + 1).value
    letter = openpyxl.utils.get_column_letter(price_col + 1)
    assert isinstance(formula, str) and f"{letter}2" in formula


def test_bad_quantity_cell_is_reported_and_the_row_skipped(tmp_path):
    path = _book(tmp_path, [("K1", "lots", 0.29), ("K1", 1000, 0.28)])
    p = _only(xlpolicy.check(path), "price-break-min_qty-bad")
    assert p.sheet == "Price breaks" and p.cell == "B3" and p.item == "K1"
    r = xlpolicy.analyse(path).results.set_index("item")
    # the row left, 0.28 from 1,000: TC(1,000) = 168 + 4.8 + 28 = 200.8 < TC(400) = 204
    assert r.loc["K1", "price_break_qty"] == 1000 and r.loc["K1", "order_qty"] == 1000


def test_non_positive_price_is_reported(tmp_path):
    p = _only(xlpolicy.check(_book(tmp_path, [("K1", 500, 0)])), "price-break-unit_price-bad")
    assert p.cell == "C3" and "more than 0" in p.message


def test_unknown_item_is_reported(tmp_path):
    p = _only(xlpolicy.check(_book(tmp_path, [("ZZ", 500, 0.2)])), "price-break-item-unknown")
    assert p.cell == "A3" and "not in Items" in p.message


def test_missing_item_code_is_reported(tmp_path):
    p = _only(xlpolicy.check(_book(tmp_path, [(None, 500, 0.2)])), "price-break-item-missing")
    assert p.cell == "A3"


def test_duplicate_quantity_is_reported(tmp_path):
    p = _only(
        xlpolicy.check(_book(tmp_path, [("K1", 500, 0.29), ("K1", 500, 0.27)])),
        "price-break-duplicate",
    )
    assert p.cell == "B4" and "B3" in p.message


def test_price_not_below_unit_cost_is_reported(tmp_path):
    p = _only(xlpolicy.check(_book(tmp_path, [("K1", 500, 0.35)])), "price-break-not-cheaper")
    assert p.cell == "C3"


def test_sheet_without_the_headers_is_reported(tmp_path):
    path = _book(tmp_path, [("K1", 500)], header=("Item", "Quantity"))
    p = _only(xlpolicy.check(path), "price-breaks-no-header")
    assert p.sheet == "Price breaks"
    r = xlpolicy.analyse(path).results.set_index("item")
    assert r.loc["K1", "unit_price"] == pytest.approx(0.30)


def test_safety_stock_value_is_at_the_price_paid_and_live(tmp_path):
    # One basis for the stock values on the Summary: the price paid after a price break,
    # as the average inventory value uses (common practice: stock is valued at what it
    # cost). The total is a live formula over the Policy sheet.
    path = _book(tmp_path, GOOD)
    out = tmp_path / "out.xlsx"
    report = xlpolicy.plan(path, out, simulate=False).report
    r = report.results
    ss = np.maximum(r["safety_stock"].to_numpy(float), 0.0)
    want = float(np.nansum(ss * r["unit_price"].to_numpy(float)))
    assert (r["unit_price"] < r["unit_cost"]).any()  # a break is taken, so the bases differ
    assert report.totals["safety_stock_value"] == pytest.approx(want, rel=1e-12)
    ws = openpyxl.load_workbook(out)["Summary"]
    cell = next(
        row[1]
        for row in ws.iter_rows()
        if str(row[0].value).startswith("Safety stock value (at the price paid)")
    )
    assert str(cell.value).startswith("=SUMPRODUCT(")
