"""Summary breakdowns, top items and charts; read back from the real file.

Chart parts and their <c:f> range formulas: ECMA-376 Part 1, 21.2 (DrawingML charts),
c:cat / c:val / c:f (from memory). SUMIF/COUNTIF semantics: OpenFormula (ISO/IEC 26300-2),
re-evaluated by sheet_eval.py. Expected sums are recomputed here from the invented report.
"""

from __future__ import annotations

import re
import zipfile

import numpy as np
import openpyxl
import pytest
from lxml import etree
from sheet_eval import Evaluator, workbook_getter
from sheet_reports import make_report

from xlpolicy.writing.sheets import write_generated_workbook

C_NS = {"c": "http://schemas.openxmlformats.org/drawingml/2006/chart"}


@pytest.fixture()
def book(tmp_path):
    report = make_report()
    path = tmp_path / "out.xlsx"
    write_generated_workbook(path, report)
    return (
        report,
        path,
        openpyxl.load_workbook(path),
        openpyxl.load_workbook(path, data_only=True),
    )


def _table(ws, title):
    """Rows of a breakdown table: {group: row}, and the 'All' row."""
    start = next(r for r in range(1, ws.max_row + 1) if ws.cell(row=r, column=1).value == title)
    rows, r = {}, start + 2
    while ws.cell(row=r, column=1).value != "All":
        rows[ws.cell(row=r, column=1).value] = r
        r += 1
    return rows, r


def _col(ws, title_row, title):
    return next(c for c in range(1, 10) if ws.cell(row=title_row, column=c).value == title)


@pytest.mark.parametrize(
    "title,key",
    [("By category", "category"), ("By supplier", "supplier"), ("By ABC class", "abc_class")],
)
def test_breakdowns_are_live_and_add_up(book, title, key):
    report, _, wb, values = book
    ws, wv = wb["Summary"], values["Summary"]
    ev = Evaluator(workbook_getter(values), "Summary")
    rows, all_row = _table(ws, title)
    head = min(rows.values()) - 1
    res = report.results
    plan = res[res["status"] != "skipped"]
    groups = plan[key].fillna("")
    assert len(rows) == groups.nunique()
    cols = {
        t: _col(ws, head, t)
        for t in (
            "Items planned",
            "Annual purchase cost",
            "Average inventory value",
            "Annual holding cost",
            "Annual total cost",
            "Share of purchase cost",
        )
    }
    for name, r in rows.items():
        mask = groups == ("" if name.startswith("(no ") else name)
        expect = {
            "Items planned": float(mask.sum()),
            "Annual purchase cost": plan.loc[mask, "annual_purchase_cost"].sum(),
            "Average inventory value": plan.loc[mask, "average_inventory_value"].sum(),
            "Annual holding cost": (
                plan.loc[mask, "annual_cycle_holding_cost"].sum()
                + plan.loc[mask, "annual_safety_holding_cost"].sum()
            ),
            "Annual total cost": plan.loc[mask, "annual_total_cost"].sum(),
            "Share of purchase cost": (
                plan.loc[mask, "annual_purchase_cost"].sum() / plan["annual_purchase_cost"].sum()
            ),
        }
        for t, c in cols.items():
            assert wv.cell(row=r, column=c).value == pytest.approx(expect[t], rel=1e-12), (name, t)
            f = ws.cell(row=r, column=c).value
            if isinstance(f, str) and f.startswith("="):
                assert ev(f) == pytest.approx(expect[t], rel=1e-12), (name, t, f)
    for c in cols.values():  # the All row adds the groups
        f = ws.cell(row=all_row, column=c).value
        assert f.startswith("=SUM(")
        assert ev(f) == pytest.approx(wv.cell(row=all_row, column=c).value)
    total = wv.cell(row=all_row, column=cols["Annual total cost"]).value
    assert total == pytest.approx(report.totals["annual_total_cost"])


def test_every_breakdown_row_is_a_live_exact_match_formula(book):
    # "+fast" and "-slow" could be read as something else by a SUMIF criterion; the exact
    # match (EXACT inside SUMPRODUCT) reads no group name as a pattern, so every row,
    # those included, is live (breakdowns_are_live_and_add_up checks their values).
    _, _, wb, _ = book
    ws = wb["Summary"]
    rows, _ = _table(ws, "By category")
    head = min(rows.values()) - 1
    c = _col(ws, head, "Annual total cost")
    for name in ("Gaskets", "+fast", "-slow"):
        f = ws.cell(row=rows[name], column=c).value
        assert f.startswith("=SUMPRODUCT(--EXACT("), (name, f)
        n = ws.cell(row=rows[name], column=_col(ws, head, "Items planned")).value
        assert n.startswith("=SUMPRODUCT(") and '<>"skipped"' in n  # skipped B-9 not counted
        assert ws.cell(row=rows[name], column=1).data_type == "s"


def test_abc_rows_in_class_order(book):
    _, _, wb, _ = book
    rows, _ = _table(wb["Summary"], "By ABC class")
    assert list(rows) == ["A", "B", "C"]


def test_top_items_by_annual_total_cost(book):
    report, _, wb, values = book
    ws, wv = wb["Summary"], values["Summary"]
    ev = Evaluator(workbook_getter(values), "Summary")
    start = next(
        r
        for r in range(1, ws.max_row + 1)
        if str(ws.cell(row=r, column=1).value).startswith("The 4 items that cost most")
    )
    plan = report.results[report.results["status"] != "skipped"]
    expect = plan.sort_values("annual_total_cost", ascending=False, kind="stable")
    for k, (_, rec) in enumerate(expect.iterrows()):
        r = start + 2 + k
        assert ws.cell(row=r, column=1).value == k + 1
        assert ws.cell(row=r, column=2).value == rec["item"]
        f = ws.cell(row=r, column=7).value
        assert f.startswith("='Policy'!$")
        assert wv.cell(row=r, column=7).value == rec["annual_total_cost"]
        assert ev(f) == rec["annual_total_cost"]


def test_turns_and_compare_totals_are_formulas(book):
    report, _, wb, values = book
    ws, wv = wb["Summary"], values["Summary"]
    ev = Evaluator(workbook_getter(values), "Summary")
    rows = {}
    for r in range(1, ws.max_row + 1):
        rows.setdefault(ws.cell(row=r, column=1).value, r)
    f = ws.cell(row=rows["Inventory turns (per year)"], column=2).value
    assert re.fullmatch(r"=B\d+/B\d+", f)
    assert ev(f) == pytest.approx(report.totals["inventory_turns"], rel=1e-12)
    f = ws.cell(row=rows["Annual saving from the change"], column=2).value
    assert f.startswith("='Today vs plan'!$")
    assert wv.cell(row=rows["Annual saving from the change"], column=2).value == pytest.approx(
        report.totals["annual_saving"]
    )


def test_charts_exist_and_point_at_the_tables(book):
    report, path, wb, values = book
    wv = values["Summary"]
    with zipfile.ZipFile(path) as z:
        charts = sorted(n for n in z.namelist() if re.fullmatch(r"xl/charts/chart\d+\.xml", n))
        assert len(charts) == 2
        docs = [etree.fromstring(z.read(n)) for n in charts]
    by_kind = {}
    for doc in docs:
        kind = (
            "bar" if doc.find(".//c:barChart/c:barDir[@val='bar']", C_NS) is not None else "column"
        )
        by_kind[kind] = doc

    def refs(doc, tag):
        return [f.text for f in doc.iterfind(f".//c:ser/c:{tag}//c:f", C_NS)]

    def cells(ref):
        sheet, rng = ref.rsplit("!", 1)
        assert sheet == "Summary"
        return [c.value for row in wv[rng.replace("$", "")] for c in row]

    # annual cost by category: stacked bars of ordering, holding, shortage per category
    bar = by_kind["bar"]
    assert bar.find(".//c:grouping", C_NS).get("val") == "stacked"
    rows, _ = _table(wb["Summary"], "By category")
    assert all(cells(r) == list(rows) for r in refs(bar, "cat"))
    vals = refs(bar, "val")
    assert len(vals) == 3  # one item has a shortage cost, so the shortage series is drawn
    plan = report.results[report.results["status"] != "skipped"]
    ordering = cells(vals[0])
    assert sum(ordering) == pytest.approx(plan["annual_ordering_cost"].sum())
    # average inventory investment by ABC class
    col = by_kind["column"]
    assert cells(refs(col, "cat")[0]) == ["A", "B", "C"]
    inv = cells(refs(col, "val")[0])
    expect = plan.groupby("abc_class")["average_inventory_value"].sum()
    assert np.allclose(inv, [expect["A"], expect["B"], expect["C"]], rtol=1e-12)
