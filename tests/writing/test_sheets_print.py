"""Print setup, frozen panes and formats of the sheets people print; Warnings links; the
reorder list holding exactly the report's items.

Print setup: ECMA-376 Part 1, 18.3.1.63 pageSetup (orientation, fitToWidth, fitToHeight),
18.3.1.65 pageSetUpPr fitToPage, the _xlnm.Print_Titles defined name (18.2.6); internal
hyperlinks: 18.3.1.47 hyperlink with a location and no relationship. From memory.
"""

from __future__ import annotations

import openpyxl
import pytest
from sheet_reports import header, make_report

from xlpolicy.writing.sheets import write_generated_workbook


def _write(tmp_path, **kw):
    path = tmp_path / "out.xlsx"
    report = make_report()
    write_generated_workbook(path, report, **kw)
    return report, openpyxl.load_workbook(path)


# Policy prints its first-read columns one page wide; the audit columns are collapsed in
# an outline, and hidden columns do not print.
@pytest.mark.parametrize(
    "sheet,titles,frozen,fit",
    [
        ("Policy", "1:1", "B2", True),
        ("Reorder now", "5:5", "A6", True),
        ("Warnings", "1:1", "A2", True),
        ("Today vs plan", "5:5", "B6", True),
    ],
)
def test_print_setup_and_frozen_headers(tmp_path, sheet, titles, frozen, fit):
    _, wb = _write(tmp_path)
    ws = wb[sheet]
    assert ws.page_setup.orientation == "landscape"
    if fit:
        assert ws.sheet_properties.pageSetUpPr.fitToPage
        assert int(ws.page_setup.fitToWidth or 1) == 1 and int(ws.page_setup.fitToHeight) == 0
    else:
        assert not ws.sheet_properties.pageSetUpPr.fitToPage
        assert ws.print_title_cols.replace("$", "") == "A:A"
    assert ws.print_title_rows.replace("$", "") == titles
    assert ws.print_area
    assert "&P" in ws.oddFooter.right.text and "2031-03-14" in ws.oddHeader.right.text
    assert ws.freeze_panes == frozen


def test_policy_number_formats(tmp_path):
    _, wb = _write(tmp_path)
    ws = wb["Policy"]
    fmt = {t: ws.cell(row=2, column=k + 1).number_format for k, t in enumerate(header(ws))}
    assert fmt["Order quantity (units)"] == "#,##0"
    assert fmt["Annual total cost"] == '"$"#,##0.00'
    assert fmt["Fill rate achieved"] == "0.00%" and fmt["Holding rate (per year)"] == "0.00%"
    assert ws.auto_filter.ref.startswith("A1:")


def test_warnings_link_to_the_input_cells(tmp_path):
    report, wb = _write(tmp_path)
    ws = wb["Warnings"]
    links = {}
    for r in range(2, ws.max_row + 1):
        cell = ws.cell(row=r, column=3)
        if cell.hyperlink is not None:
            links[cell.value] = cell.hyperlink.location
    assert links == {
        "B2": "'Settings'!B2",
        "E4": "'Items'!E4",
        "F3": "'Items'!F3",
        "C9": "'History'!C9",
    }
    # a problem with no cell has no link
    assert ws.cell(row=ws.max_row, column=3).hyperlink is None
    assert "$" in wb["Reorder now"].cell(row=7, column=12).number_format


def test_warnings_plain_text_for_a_standalone_output(tmp_path):
    _, wb = _write(tmp_path, link_to_input=False)
    ws = wb["Warnings"]
    cells = [ws.cell(row=r, column=3) for r in range(2, ws.max_row + 1)]
    assert all(c.hyperlink is None for c in cells)
    assert {c.value for c in cells} >= {"F3", "E4"}
    assert all(c.data_type == "s" for c in cells if c.value)


def test_reorder_holds_exactly_the_reorder_list(tmp_path):
    report, wb = _write(tmp_path)
    ws = wb["Reorder now"]
    listed = []
    for r in range(6, ws.max_row + 1):
        qty = ws.cell(row=r, column=10).value
        if isinstance(qty, (int, float)):
            listed.append((ws.cell(row=r, column=2).value, qty))
    expect = list(zip(report.reorder["item"], report.reorder["order_now_qty"], strict=True))
    assert sorted(listed) == sorted(expect)
    labels = [ws.cell(row=r, column=1).value for r in range(1, ws.max_row + 1)]
    assert "Approved by" in labels and "Order numbers" in labels
    last = max(r for r in range(1, ws.max_row + 1) if ws.cell(row=r, column=1).value)
    # after the order value (column L): the ABC class, centred, and the order-up-to level
    # only where an item on the list is on periodic review
    periodic = report.reorder["order_up_to_level"].notna().any()
    assert ws.print_area.endswith(f"${'N' if periodic else 'M'}${last}")
    assert ws.cell(row=5, column=13).value == "ABC class"
    assert ws.cell(row=5, column=14).value == (
        "Periodic review: order up to (units)" if periodic else None
    )
    assert ws.cell(row=7, column=13).alignment.horizontal == "center"


def test_policy_audit_columns_are_an_outline_collapsed_behind_the_first_read_ones(tmp_path):
    from xlpolicy.writing.policy_sheet import FIRST_READ, POLICY_COLUMNS

    _, wb = _write(tmp_path)
    ws = wb["Policy"]
    titles = {c.title: c.key for c in POLICY_COLUMNS}
    keys = [titles.get(t) for t in header(ws)]
    front = [k for k in keys if k in FIRST_READ]
    assert keys[: len(front)] == front  # the first-read columns come first
    assert "annual_total_cost" in front and "order_qty" in front
    dims = {}  # column number -> its <col> element (one may span several columns)
    for d in ws.column_dimensions.values():
        for c in range(d.min, d.max + 1):
            dims[c] = d
    for k, key in enumerate(keys):
        d = dims.get(k + 1)
        if key in FIRST_READ:
            assert d is None or not d.hidden, key
        else:
            assert d is not None and d.hidden and d.outline_level == 1, key
