"""Breakdown rows match their group exactly, whatever characters its name holds.

Group names with characters that a SUMIF criterion can read as a wildcard, a regular
expression or an operator (. ( ) * ? ~ [ ] ^ $ +), next to names such a pattern would also
match, are planned; a cost input of one item is then edited in the output and LibreOffice
Calc recalculates the whole workbook. Every "By supplier" row must equal the sum, worked
out here in Python with exact text equality, of the recalculated Policy rows of that
supplier, and the edited item's row must have moved by what the edit implies (holding
cost is proportional to the holding rate: cycle stock i c Q / 2 plus safety stock
i c (R - mu), Silver, Pyke & Peterson 1998, ch. 5 and 7, from memory). Names are invented.
"""

from __future__ import annotations

import math

import pytest
from builders import item_row, weekly_history, write_workbook
from openpyxl import load_workbook
from test_libreoffice import SOFFICE, recalculated

import xlpolicy

pytestmark = pytest.mark.skipif(SOFFICE is None, reason="LibreOffice Calc is not installed")

# Pairs that a pattern would confuse: "." matches any character, "*" and "?" are
# wildcards, "(" ")" "[" "]" "^" "$" "+" are regular-expression syntax, "~" escapes.
SUPPLIERS = [
    "Rimrock Parts Co.",
    "Rimrock Parts Cox",
    "Delta (EU) GmbH",
    "Delta EU GmbH",
    "Star*",
    "Starling",
    "Who?",
    "Whom",
    "Tilde~Co",
    "[Bracket] Ltd",
    "Caret^Hat",
    "Dollar$",
    "Plus+One",
    "PlusOne",
    "acme",
    "Acme",
]


def _supplier_rows(ws):
    start = next(
        r for r in range(1, ws.max_row + 1) if ws.cell(row=r, column=1).value == "By supplier"
    )
    head = start + 1
    cols = {ws.cell(row=head, column=c).value: c for c in range(1, 10)}
    rows, r = {}, head + 1
    while ws.cell(row=r, column=1).value != "All":
        rows[ws.cell(row=r, column=1).value] = r
        r += 1
    return rows, cols


def test_exact_match_breakdowns_recalculate_after_an_edit(tmp_path):
    codes = [f"P{k:02d}" for k in range(len(SUPPLIERS))]
    items = [
        item_row(c, cost=5.0 + k, supplier=s)
        for k, (c, s) in enumerate(zip(codes, SUPPLIERS, strict=True))
    ]
    src = write_workbook(tmp_path / "suppliers.xlsx", items, history=weekly_history(codes))
    out = xlpolicy.plan(src, simulate=False).output

    wb = load_workbook(out)
    pol = wb["Policy"]
    head = {c.value: c.column for c in pol[1]}
    rows_summary, cols = _supplier_rows(wb["Summary"])
    hold_col = cols["Annual holding cost"]
    assert set(rows_summary) == set(SUPPLIERS)
    for name, r in rows_summary.items():  # every row is live
        assert str(wb["Summary"].cell(row=r, column=hold_col).value).startswith("="), name

    before = load_workbook(recalculated(out, tmp_path / "a"), data_only=True)
    # edit one input cell: the holding rate of the "Rimrock Parts Co." item, doubled
    target = next(
        r
        for r in range(2, pol.max_row + 1)
        if pol.cell(row=r, column=head["Supplier"]).value == "Rimrock Parts Co."
    )
    rate_cell = pol.cell(row=target, column=head["Holding rate (per year)"])
    old_rate = float(rate_cell.value)
    rate_cell.value = 2 * old_rate
    edited = tmp_path / "edited.xlsx"
    wb.save(edited)
    after = load_workbook(recalculated(edited, tmp_path / "b"), data_only=True)

    def check(book):
        p, s = book["Policy"], book["Summary"]
        by = {}
        for r in range(2, p.max_row + 1):
            name = p.cell(row=r, column=head["Supplier"]).value
            h = sum(
                float(p.cell(row=r, column=head[k]).value or 0.0)
                for k in ("Annual cycle stock holding cost", "Annual safety stock holding cost")
            )
            by[name] = by.get(name, 0.0) + h
        got = {n: float(s.cell(row=r, column=hold_col).value) for n, r in rows_summary.items()}
        for n in SUPPLIERS:
            assert math.isclose(got[n], by[n], rel_tol=1e-9, abs_tol=1e-9), (n, got[n], by[n])
        return got

    b, a = check(before), check(after)
    assert a["Rimrock Parts Co."] == pytest.approx(2 * b["Rimrock Parts Co."], rel=1e-9)
    for n in SUPPLIERS:
        if n != "Rimrock Parts Co.":
            assert a[n] == pytest.approx(b[n], rel=1e-12), n
