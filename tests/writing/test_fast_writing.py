"""Formulas stored directly are stored exactly as xlsxwriter's write_formula stores them."""

from __future__ import annotations

from pathlib import Path

import xlsxwriter

from xlpolicy.writing.sheetkit import write_formula

FORMULAS = [
    '=IF(K5="",0,K5*D5/Q5*N5)',
    "=SQRT(2*D7*S7/(I7*C7))",
    "=MAX(0,1-N2/Q2)",
    "=SUM(B2:B9)",
    "=A1+'Reorder now (2)'!B4",
    "=XLOOKUP(A1,B:B,C:C)",
    "=STDEV.S(A1:A9)",
    "={1,2}",
]


def _tables(path: Path, use_future: bool) -> tuple[list, list]:
    wb = xlsxwriter.Workbook(str(path), {"use_future_functions": use_future})
    a, b = wb.add_worksheet("a"), wb.add_worksheet("b")
    fmt = wb.add_format({"bold": True})
    for r, f in enumerate(FORMULAS):
        a.write_formula(r, 1, f, fmt, 1.5)
        write_formula(b, r, 1, f, fmt, 1.5)
    got = [(a.table[r][1], b.table[r][1]) for r in range(len(FORMULAS))]
    dims = [(ws.dim_rowmin, ws.dim_rowmax, ws.dim_colmin, ws.dim_colmax) for ws in (a, b)]
    wb.close()
    return got, dims


def test_direct_store_matches_write_formula(tmp_path: Path) -> None:
    for use_future in (False, True):
        got, dims = _tables(tmp_path / f"f{use_future}.xlsx", use_future)
        for ours, theirs in got:
            assert type(ours) is type(theirs)
            assert tuple(ours) == tuple(theirs)
        assert dims[0] == dims[1]
    # The future function really was rewritten in that mode, so the check above covers it.
    got, _ = _tables(tmp_path / "g.xlsx", True)
    assert got[6][1].formula.startswith("_xlfn.STDEV.S(")
