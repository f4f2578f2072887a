"""Cell blocks (writing/bulk.py) write what xlsxwriter's own cell calls write.

Each check builds the same table twice in one workbook, once cell by cell with xlsxwriter's
public calls and once as a block, and reads both back with openpyxl (an independent reader)
and python-calamine: values, formulas, number formats, quote prefixes and text must agree.
Escaping rules: XML 1.0 (& < > in text) and ECMA-376 Part 1, 22.9.2.19 (a literal _xHHHH_
in a string is escaped as _x005F_xHHHH_).
"""

from __future__ import annotations

import zipfile
from pathlib import Path

import numpy as np
import openpyxl
import pytest
import xlsxwriter
from python_calamine import CalamineWorkbook

from xlpolicy.writing.bulk import ROW, BlockSheet, CellBlock
from xlpolicy.writing.package import merge_generated_sheets

TEXTS = [
    "000123",
    "plain",
    "a & b < c > d",
    "=1+1",
    "-dash",
    "@at",
    "  lead",
    "trail ",
    "two\nlines",
    "_x0041_ literal",
    "",
    None,
    "naïve – ünïcode",
    "+plus",
]
NUMBERS = [
    1.5,
    np.nan,
    0.1 + 0.2,
    -3.0,
    1e-12,
    123456789.125,
    np.inf,
    0.0,
    7.0,
    2.5e20,
    -0.5,
    42.0,
    np.nan,
    1 / 3,
]


def _sheets(path: Path) -> tuple[BlockSheet, BlockSheet, xlsxwriter.Workbook, dict]:
    wb = xlsxwriter.Workbook(
        str(path),
        {"strings_to_formulas": False, "strings_to_numbers": False, "strings_to_urls": False},
    )
    a = wb.add_worksheet("cells", worksheet_class=BlockSheet)
    b = wb.add_worksheet("block", worksheet_class=BlockSheet)
    fmts = {
        "text": wb.add_format({"num_format": "@", "bottom": 1}),
        "quoted": wb.add_format({"num_format": "@", "bottom": 1, "quote_prefix": True}),
        "money": wb.add_format({"num_format": '"$"#,##0.00'}),
        "pct": wb.add_format({"num_format": "0.00%", "bold": True}),
    }
    return a, b, wb, fmts


def _fill(a: BlockSheet, b: BlockSheet, fmts: dict, first: int) -> None:
    n = len(TEXTS)
    # Ordinary rows above and below the block on both sheets.
    for ws in (a, b):
        ws.write_string(0, 0, "title")
        ws.write_number(first + n + 1, 2, 99.0)
    cached = np.array([x * 2 if np.isfinite(x) else np.nan for x in NUMBERS])
    live = np.array([np.isfinite(x) and k % 3 != 0 for k, x in enumerate(NUMBERS)])
    for k in range(n):
        row = first + k
        t = TEXTS[k]
        if t:
            fmt = fmts["quoted"] if t[0] in "=+-@" else fmts["text"]
            a.write_string(row, 0, t, fmt)
        else:
            a.write_blank(row, 0, None, fmts["text"])
        x = NUMBERS[k]
        if np.isfinite(x):
            a.write_number(row, 1, x, fmts["money"])
        else:
            a.write_blank(row, 1, None, fmts["money"])
        if live[k]:
            a.write_formula(row, 3, f"=B{row + 1}*2", fmts["pct"], float(cached[k]))
        elif np.isfinite(x):
            a.write_number(row, 3, x, fmts["pct"])
        else:
            a.write_blank(row, 3, None, fmts["pct"])
    block = CellBlock(first, n)
    block.formulas(3, f"=B{ROW}*2", live, cached, fmts["pct"], otherwise=np.array(NUMBERS))
    block.texts(0, TEXTS, fmts["text"], fmts["quoted"])
    block.numbers(1, NUMBERS, fmts["money"])
    b.add_block(block)


def _value(v: object) -> object:
    # Numbers to 15 significant digits: xlsxwriter writes 16 ("%.16G": 0.3 for 0.1 + 0.2),
    # a block the shortest text that reads back as the same float (Python's repr).
    if isinstance(v, float):
        return float(f"{v:.15g}")
    # openpyxl does not decode ST_Xstring escapes (calamine and LibreOffice do, checked by
    # hand and below), so the escaped underscore is undone here for the comparison.
    return v.replace("_x005F_", "_") if isinstance(v, str) else v


def _cells(ws: openpyxl.worksheet.worksheet.Worksheet) -> list[tuple]:
    return [
        (c.coordinate, _value(c.value), c.number_format, bool(c.quotePrefix), c.font.b)
        for row in ws.iter_rows()
        for c in row
        if c.value is not None or c.has_style
    ]


@pytest.mark.parametrize("first", [1, 3])
def test_block_reads_back_like_cell_calls(tmp_path: Path, first: int) -> None:
    path = tmp_path / "t.xlsx"
    a, b, wb, fmts = _sheets(path)
    _fill(a, b, fmts, first)
    wb.close()
    got = openpyxl.load_workbook(path)
    assert _cells(got["block"]) == _cells(got["cells"])
    # Formulas came through as formulas, and text that looks like one as text.
    f_cell = got["block"].cell(first + 3, 4)
    assert f_cell.value == f"=B{first + 3}*2"
    assert got["block"].cell(first + 4, 1).value == "=1+1"
    assert got["block"].cell(first + 4, 1).data_type == "s"
    # The cached values a non-recalculating reader sees (calamine reads <v>).
    cal = CalamineWorkbook.from_path(str(path))
    block_rows = cal.get_sheet_by_name("block").to_python()
    cell_rows = cal.get_sheet_by_name("cells").to_python()
    assert [[v if isinstance(v, str) else _value(v) for v in r] for r in block_rows] == [
        [v if isinstance(v, str) else _value(v) for v in r] for r in cell_rows
    ]
    # ...and the block's numbers are the floats themselves, to the last bit.
    assert block_rows[first + 2][1] == 0.1 + 0.2


def test_block_text_escaping_in_the_xml(tmp_path: Path) -> None:
    path = tmp_path / "t.xlsx"
    a, b, wb, fmts = _sheets(path)
    _fill(a, b, fmts, 1)
    wb.close()
    xml = zipfile.ZipFile(path).read("xl/worksheets/sheet2.xml").decode()
    assert "a &amp; b &lt; c &gt; d" in xml
    assert "_x005F_x0041_ literal" in xml  # ECMA-376 Part 1, 22.9.2.19
    assert '<t xml:space="preserve">  lead</t>' in xml
    cal = CalamineWorkbook.from_path(str(path)).get_sheet_by_name("block").to_python()
    assert cal[10][0] == "_x0041_ literal"


def test_ordinary_cells_on_block_rows_are_refused(tmp_path: Path) -> None:
    wb = xlsxwriter.Workbook(str(tmp_path / "t.xlsx"))
    ws = wb.add_worksheet("s", worksheet_class=BlockSheet)
    block = CellBlock(1, 3)
    block.numbers(0, [1.0, 2.0, 3.0], wb.add_format())
    ws.add_block(block)
    ws.write_number(2, 5, 1.0)
    with pytest.raises(ValueError, match="block's rows"):
        wb.close()


def test_column_lengths_are_checked() -> None:
    block = CellBlock(0, 3)
    with pytest.raises(ValueError):
        block.numbers(0, [1.0, 2.0], None)
    block.numbers(0, [1.0, 2.0, 3.0], None)
    with pytest.raises(ValueError, match="twice"):
        block.numbers(0, [1.0, 2.0, 3.0], None)


def test_many_rows_span_chunks(tmp_path: Path) -> None:
    """More rows than one render chunk: every row present once, in order."""
    n = 10_000
    path = tmp_path / "t.xlsx"
    wb = xlsxwriter.Workbook(str(path))
    ws = wb.add_worksheet("s", worksheet_class=BlockSheet)
    block = CellBlock(1, n)
    values = np.arange(n, dtype=float) * 0.5
    block.numbers(0, values, wb.add_format({"num_format": "0.0"}))
    block.formulas(1, f"=A{ROW}+1", np.ones(n, dtype=bool), values + 1, None)
    ws.write_string(0, 0, "x")
    ws.add_block(block)
    wb.close()
    rows = CalamineWorkbook.from_path(str(path)).get_sheet_by_name("s").to_python()
    assert len(rows) == n + 1
    assert [r[0] for r in rows[1:]] == values.tolist()
    assert [r[1] for r in rows[1:]] == (values + 1).tolist()
    ws2 = openpyxl.load_workbook(path, read_only=True)["s"]
    last = list(ws2.iter_rows(min_row=n + 1, max_row=n + 1, values_only=True))[0]
    assert last[1] == f"=A{n + 1}+1"


def test_deferred_block_rendered_by_the_merge(tmp_path: Path) -> None:
    """A deferred block comes out of the splice with the output's own style numbers."""
    user = tmp_path / "user.xlsx"
    uwb = openpyxl.Workbook()
    ws = uwb.active
    ws.title = "Items"
    ws["A1"] = "item"
    for k in range(30):  # the user's own styles come first in the merged styles part
        ws.cell(2, k + 1, k).number_format = "0." + "0" * (k % 6 + 1) + ";" + str(k)
    uwb.save(user)

    gen = tmp_path / "gen.xlsx"
    a, b, wb, fmts = _sheets(gen)
    _fill(a, b, fmts, 2)
    b.blocks[0].deferred_id = 0
    blocks = {0: b.blocks[0]}
    wb.close()
    assert b"<!--xlpolicy-block 0-->" in zipfile.ZipFile(gen).read("xl/worksheets/sheet2.xml")

    out = tmp_path / "out.xlsx"
    merge_generated_sheets(user, gen, out, blocks)
    got = openpyxl.load_workbook(out)
    assert _cells(got["block"]) == _cells(got["cells"])
    assert got["Items"]["B2"].number_format == ws["B2"].number_format

    with pytest.raises(Exception, match="not given|cannot"):
        merge_generated_sheets(user, gen, tmp_path / "out2.xlsx", {})
