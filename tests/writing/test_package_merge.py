"""Package-level merge of generated sheets into a copy of the user's workbook.

Real files throughout: user workbooks built with openpyxl and xlsxwriter, the generated
workbook with xlsxwriter, the output read back with openpyxl and checked part by part.
Package rules checked here come from ECMA-376 Part 2 (Open Packaging Conventions): every
part has a content type (Default by extension or Override by name, 10.1.2), relationship
targets resolve relative to the source part (9.3), part names compare case-insensitively
(9.1.1). SpreadsheetML rules come from ECMA-376 Part 1 (18.2 workbook, 18.8 styles).
"""

from __future__ import annotations

import datetime as dt
import hashlib
import os
import posixpath
import re
import zipfile
from pathlib import Path
from urllib.parse import unquote

import openpyxl
import pytest
import xlsxwriter
from lxml import etree
from openpyxl.comments import Comment
from openpyxl.formatting.rule import CellIsRule
from openpyxl.styles import Font, PatternFill
from openpyxl.workbook.defined_name import DefinedName
from repo_paths import REPO

from xlpolicy.writing.atomic import atomic_output
from xlpolicy.writing.package import (
    GENERATED_MARK,
    CannotMerge,
    merge_generated_sheets,
    user_sheet_names,
)

MAIN = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"
PKG_REL = "http://schemas.openxmlformats.org/package/2006/relationships"
CT = "http://schemas.openxmlformats.org/package/2006/content-types"
DOC_REL = "http://schemas.openxmlformats.org/officeDocument/2006/relationships"
XLSX_OPTIONS = {"strings_to_formulas": False, "strings_to_urls": False, "strings_to_numbers": False}
MONEY = '"$"#,##0.00'
PERCENT = "0.0%"
# Parts the merge may rewrite; everything else must come through byte for byte.
ALLOWED_CHANGES = {
    "[Content_Types].xml",
    "xl/workbook.xml",
    "xl/_rels/workbook.xml.rels",
    "xl/styles.xml",
}


# --- fixtures: workbooks made with the real libraries -----------------------------------
def make_user_openpyxl(path: Path) -> Path:
    """A user's workbook: values, formulas, a comment, names, a date, styles, a merged range."""
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "Items"
    ws.append(["item", "unit cost", "lead time days", "received"])
    ws.append(["000123", 4.5, 7, dt.datetime(2024, 3, 1)])
    ws.append(["B-77", 12.25, 14, dt.datetime(2024, 5, 17)])
    ws["E2"] = "=B2*C2"
    ws["E3"] = "=SUM(B2:B3)"
    ws["A1"].font = Font(bold=True, color="FF0000")
    ws["B2"].fill = PatternFill("solid", fgColor="FFFF00")
    ws["B3"].number_format = "0.000"
    ws["D2"].number_format = "yyyy-mm-dd"  # openpyxl gives this custom format id 164
    ws["A2"].comment = Comment("check with the buyer", "planner")
    ws["G1"] = "notes"
    ws.merge_cells("G1:H1")
    ws.conditional_formatting.add(
        "C2:C3",
        CellIsRule(
            operator="greaterThan", formula=["10"], fill=PatternFill("solid", bgColor="00FF00")
        ),
    )
    wb.defined_names["main_cost"] = DefinedName("main_cost", attr_text="Items!$B$2")
    hist = wb.create_sheet("History")
    hist.append(["item", "period", "quantity"])
    for week in range(1, 5):
        hist.append(["000123", week, 10 + week])
    hist.defined_names["weeks"] = DefinedName("weeks", attr_text="History!$B$2:$B$5")
    wb.create_sheet("Settings").append(["service target", 0.95])
    wb.save(path)
    return path


def make_user_chart(path: Path) -> Path:
    """A user's workbook with a chart and a text box: parts openpyxl would drop on re-save."""
    wb = xlsxwriter.Workbook(str(path), XLSX_OPTIONS)
    ws = wb.add_worksheet("Sales")
    ws.write_row(0, 0, ["month", "units"])
    for i in range(6):
        ws.write_row(i + 1, 0, [f"M{i + 1}", 20 + 3 * i])
    chart = wb.add_chart({"type": "column"})
    chart.add_series({"categories": "=Sales!$A$2:$A$7", "values": "=Sales!$B$2:$B$7"})
    ws.insert_chart("D2", chart)
    ws.insert_textbox("D20", "Figures are units shipped, not ordered.")
    ws.write_comment("A1", "a user note")
    wb.close()
    return path


def make_user_xlsm(path: Path, vba: bytes) -> Path:
    """A macro-enabled workbook; the VBA project is a few dummy bytes."""
    bin_path = path.with_name("vbaProject.bin")
    bin_path.write_bytes(vba)
    wb = xlsxwriter.Workbook(str(path), XLSX_OPTIONS)
    ws = wb.add_worksheet("Items")
    ws.write_row(0, 0, ["item", "unit cost"])
    ws.write_row(1, 0, ["X1", 3.0])
    wb.add_vba_project(str(bin_path))
    wb.close()
    return path


def make_generated(path: Path, scale: float = 1.0, extras: bool = False) -> Path:
    """Two generated sheets as the lead's writer makes them (xlsxwriter, text kept as text)."""
    wb = xlsxwriter.Workbook(str(path), XLSX_OPTIONS)
    bold = wb.add_format({"bold": True})
    money = wb.add_format({"num_format": MONEY})
    pct = wb.add_format({"num_format": PERCENT})
    red = wb.add_format({"font_color": "#FF0000"})
    ws = wb.add_worksheet("Policy")
    ws.write_row(0, 0, ["item", "order qty", "annual cost", "fill rate"], bold)
    rows = [
        ("000123", 40, 118.5, 0.975),
        ("B-77", 25, 260.0, 0.951),
        ("=not a formula", 5, 9.75, 0.9),
    ]
    for r, (item, qty, cost, fill) in enumerate(rows, start=1):
        ws.write_string(r, 0, item)
        ws.write_number(r, 1, qty * scale)
        ws.write_number(r, 2, cost * scale, money)
        ws.write_number(r, 3, fill, pct)
    ws.freeze_panes(1, 0)
    ws.autofilter(0, 0, len(rows), 3)
    ws.repeat_rows(0)
    ws.conditional_format(
        1, 3, len(rows), 3, {"type": "cell", "criteria": "<", "value": 0.95, "format": red}
    )
    ws.write_url(5, 0, "https://example.org/xlpolicy-help", string="how to read this")
    ws.set_column(2, 2, 14)
    tot = wb.add_worksheet("Totals")
    tot.write_string(0, 0, "total annual cost", bold)
    total = sum(c for _, _, c, _ in rows) * scale
    tot.write_formula(0, 1, "=SUM(Policy!C2:C4)", money, total)
    if extras:
        ws.write_comment("A2", "generated note")
        ws.write_rich_string("F1", "plain ", bold, "bold", " tail")
        chart = wb.add_chart({"type": "line"})
        chart.add_series({"values": "=Policy!$C$2:$C$4"})
        tot.insert_chart("D2", chart)
        tot.add_table(
            "A5:B7",
            {"name": "GeneratedTotals", "columns": [{"header": "what"}, {"header": "amount"}]},
        )
    wb.close()
    return path


# --- package checks ----------------------------------------------------------------------
def rels_name(part: str) -> str:
    d, b = posixpath.split(part)
    return posixpath.join(d, "_rels", b + ".rels")


def resolve(source: str, target: str) -> str:
    target = unquote(target)
    if target.startswith("/"):
        return posixpath.normpath(target[1:])
    return posixpath.normpath(posixpath.join(posixpath.dirname(source), target))


def check_package(path: Path) -> dict[str, bytes]:
    """Strict structural check of an OPC package; returns its parts.

    Every XML part is well-formed; every internal relationship target exists; every part has
    a content type and every Override names an existing part; every r:* attribute in a part
    names one of that part's relationships; sheet names and sheetIds are unique; defined
    names are scoped to existing sheets; at most one sheet tab is selected.
    """
    with zipfile.ZipFile(path) as zf:
        names = zf.namelist()
        parts = {n: zf.read(n) for n in names}
    assert len({n.lower() for n in names}) == len(names), "duplicate part names"
    lower = {n.lower(): n for n in names}
    trees = {}
    for name, data in parts.items():
        if name.endswith((".xml", ".rels", ".vml")):
            trees[name] = etree.fromstring(data)  # raises if not well-formed
    ct = trees["[Content_Types].xml"]
    defaults = {d.get("Extension").lower() for d in ct.findall(f"{{{CT}}}Default")}
    overrides = {o.get("PartName").lstrip("/").lower() for o in ct.findall(f"{{{CT}}}Override")}
    for o in overrides:
        assert o in lower, f"content type override for missing part {o}"
    for name in names:
        if name == "[Content_Types].xml" or name.endswith("/"):
            continue
        base = posixpath.basename(name)
        ext = base.rsplit(".", 1)[-1].lower() if "." in base else ""
        assert name.lower() in overrides or ext in defaults, f"no content type for {name}"
    for name in names:
        if not name.endswith(".rels"):
            continue
        d = posixpath.dirname(posixpath.dirname(name))
        source = posixpath.join(d, posixpath.basename(name)[: -len(".rels")])
        if source == ".rels" or posixpath.basename(name) == ".rels":
            source = ""
        ids = set()
        for rel in trees[name].iter(f"{{{PKG_REL}}}Relationship"):
            assert rel.get("Id") not in ids, f"duplicate rel id in {name}"
            ids.add(rel.get("Id"))
            if rel.get("TargetMode") == "External":
                continue
            target = resolve(source, rel.get("Target"))
            assert target.lower() in lower, f"{name}: target {target} missing"
        if source and source in trees:
            for el in trees[source].iter():
                for attr, value in el.attrib.items():
                    if attr.startswith(f"{{{DOC_REL}}}"):
                        assert value in ids, f"{source}: {attr}={value} has no relationship"
    # no orphans: every part is reachable from the package relationships
    reached, todo = set(), [""]
    while todo:
        part = todo.pop()
        if part in reached:
            continue
        reached.add(part)
        rels = lower.get(rels_name(part).lower())
        if rels is None:
            continue
        for rel in trees[rels].iter(f"{{{PKG_REL}}}Relationship"):
            if rel.get("TargetMode") != "External":
                todo.append(lower[resolve(part, rel.get("Target")).lower()])
    for name in names:
        if name != "[Content_Types].xml" and not name.endswith((".rels", "/")):
            assert name in reached, f"orphan part {name}"
    # workbook-level consistency
    wb = trees["xl/workbook.xml"]
    sheets = wb.findall(f"{{{MAIN}}}sheets/{{{MAIN}}}sheet")
    assert len({s.get("name").lower() for s in sheets}) == len(sheets)
    assert len({s.get("sheetId") for s in sheets}) == len(sheets)
    for dn in wb.iter(f"{{{MAIN}}}definedName"):
        if dn.get("localSheetId") is not None:
            assert 0 <= int(dn.get("localSheetId")) < len(sheets)
    selected = 0
    for name, tree in trees.items():
        if name.startswith("xl/worksheets/") and name.endswith(".xml"):
            selected += sum(
                1
                for v in tree.iter(f"{{{MAIN}}}sheetView")
                if v.get("tabSelected") in ("1", "true")
            )
    assert selected <= 1, "several tabs selected: Excel would group the sheets"
    return parts


def zip_parts(path: Path) -> tuple[list[str], dict[str, bytes]]:
    with zipfile.ZipFile(path) as zf:
        return zf.namelist(), {n: zf.read(n) for n in zf.namelist()}


def sha(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def workbook_root(path: Path) -> etree._Element:
    with zipfile.ZipFile(path) as zf:
        return etree.fromstring(zf.read("xl/workbook.xml"))


def assert_unchanged_parts(before: Path, after: Path) -> None:
    """Every original part not in ALLOWED_CHANGES is present, identical, in the same order."""
    names_in, parts_in = zip_parts(before)
    names_out, parts_out = zip_parts(after)
    for name in names_in:
        if name in ALLOWED_CHANGES:
            continue
        assert name in parts_out, f"{name} was dropped"
        assert parts_out[name] == parts_in[name], f"{name} changed"
    assert [n for n in names_out if n in parts_in] == names_in  # zip entry order kept


# --- tests -------------------------------------------------------------------------------
@pytest.fixture
def user_xlsx(tmp_path: Path) -> Path:
    return make_user_openpyxl(tmp_path / "stock.xlsx")


@pytest.fixture
def generated(tmp_path: Path) -> Path:
    return make_generated(tmp_path / "generated.xlsx")


def test_user_parts_kept_byte_for_byte(user_xlsx: Path, generated: Path, tmp_path: Path):
    out = tmp_path / "stock-policy.xlsx"
    result = merge_generated_sheets(user_xlsx, generated, out)
    assert result.sheet_names == ["Policy", "Totals"]
    assert result.replaced == []
    names_in, _ = zip_parts(user_xlsx)
    assert result.kept_parts == len([n for n in names_in if n not in ALLOWED_CHANGES])
    assert_unchanged_parts(user_xlsx, out)
    check_package(out)


def test_output_reads_back_with_openpyxl(user_xlsx: Path, generated: Path, tmp_path: Path):
    out = tmp_path / "stock-policy.xlsx"
    merge_generated_sheets(user_xlsx, generated, out)
    src = openpyxl.load_workbook(user_xlsx)
    got = openpyxl.load_workbook(out)
    assert got.sheetnames == ["Items", "History", "Settings", "Policy", "Totals"]
    assert user_sheet_names(out) == ["Items", "History", "Settings"]

    # the user's sheets: values, formulas, formats, fonts, fills, merges, comments, names
    for name in src.sheetnames:
        a, b = src[name], got[name]
        assert a.max_row == b.max_row and a.max_column == b.max_column
        for row_a, row_b in zip(a.iter_rows(), b.iter_rows(), strict=True):
            for ca, cb in zip(row_a, row_b, strict=True):
                assert cb.value == ca.value, (name, ca.coordinate)
                assert cb.number_format == ca.number_format, (name, ca.coordinate)
                assert cb.font.b == ca.font.b and cb.fill.fgColor.rgb == ca.fill.fgColor.rgb
    items = got["Items"]
    assert items["E2"].value == "=B2*C2"
    assert items["D2"].value == dt.datetime(2024, 3, 1)
    assert items["D2"].number_format == "yyyy-mm-dd"
    assert items["A1"].font.color.rgb == "00FF0000"
    assert items["A2"].comment.text == "check with the buyer"
    assert [str(r) for r in items.merged_cells.ranges] == ["G1:H1"]
    user_rule = items.conditional_formatting["C2:C3"][0]
    assert user_rule.dxf.fill.bgColor.rgb == "0000FF00"
    assert got.defined_names["main_cost"].attr_text == "Items!$B$2"
    assert got["History"].defined_names["weeks"].attr_text == "History!$B$2:$B$5"

    # the generated sheets: values, and the generated formats (proves the style remap:
    # the generated money format had id 164, the same id as the user's date format)
    pol = got["Policy"]
    assert [c.value for c in pol[1]] == ["item", "order qty", "annual cost", "fill rate"]
    assert all(c.font.b for c in pol[1])
    assert pol["A2"].value == "000123" and pol["A4"].value == "=not a formula"
    assert pol["A4"].data_type == "s"  # text stays text
    assert not pol["A2"].font.b
    assert pol["C2"].value == 118.5 and pol["C2"].number_format == MONEY
    assert pol["D3"].value == 0.951 and pol["D3"].number_format == PERCENT
    assert pol.freeze_panes == "A2"
    assert pol.auto_filter.ref == "A1:D4"
    assert pol.print_title_rows.replace("$", "") == "1:1"
    assert pol["A6"].hyperlink.target == "https://example.org/xlpolicy-help"
    rule = pol.conditional_formatting["D2:D4"][0]
    assert rule.dxf.font.color.rgb == "FFFF0000"  # the generated dxf, not the user's green
    assert pol.column_dimensions["C"].width == pytest.approx(14.7109375)
    tot = got["Totals"]
    assert tot["B1"].value == "=SUM(Policy!C2:C4)" and tot["B1"].number_format == MONEY
    assert tot["A1"].font.b
    cached = openpyxl.load_workbook(out, data_only=True)["Totals"]["B1"].value
    assert cached == pytest.approx(118.5 + 260.0 + 9.75)

    # print titles and the marks are scoped to the generated sheets' new positions
    root = workbook_root(out)
    scoped = {
        (dn.get("name"), dn.get("localSheetId")) for dn in root.iter(f"{{{MAIN}}}definedName")
    }
    assert ("_xlnm.Print_Titles", "3") in scoped
    assert ("_xlnm._FilterDatabase", "3") in scoped
    assert (GENERATED_MARK, "3") in scoped and (GENERATED_MARK, "4") in scoped
    assert ("weeks", "1") in scoped
    ids = [s.get("sheetId") for s in root.iter(f"{{{MAIN}}}sheet")]
    assert len(set(ids)) == len(ids)


def test_chart_and_drawing_parts_survive(tmp_path: Path):
    user = make_user_chart(tmp_path / "sales.xlsx")
    gen = make_generated(tmp_path / "generated.xlsx", extras=True)
    out = tmp_path / "sales-policy.xlsx"
    merge_generated_sheets(user, gen, out)
    assert_unchanged_parts(user, out)
    names_in, parts_in = zip_parts(user)
    names_out, parts_out = zip_parts(out)
    for name in (
        "xl/charts/chart1.xml",
        "xl/drawings/drawing1.xml",
        "xl/drawings/_rels/drawing1.xml.rels",
        "xl/drawings/vmlDrawing1.vml",
    ):
        assert parts_out[name] == parts_in[name]
    assert b"Figures are units shipped" in parts_out["xl/drawings/drawing1.xml"]
    # the generated chart, drawing and notes came along under new names
    assert len([n for n in names_out if n.startswith("xl/charts/chart")]) == 2
    assert len([n for n in names_out if n.endswith(".vml")]) == 2
    check_package(out)
    # VML shape ids must not repeat across sheets (legacy drawing blocks, o:idmap)
    blocks = []
    shapes = []
    for name in names_out:
        if name.endswith(".vml"):
            data = parts_out[name]
            blocks += re.findall(rb'idmap v:ext="edit" data="(\d+)"', data)
            shapes += re.findall(rb'<v:shape id="(_x0000_s\d+)"', data)
    assert len(blocks) == len(set(blocks)) == 2
    assert len(shapes) == len(set(shapes))
    # table ids are unique in a workbook (ECMA-376 Part 1, 18.5.1.2 table@id)
    got = openpyxl.load_workbook(out)
    assert "GeneratedTotals" in got["Totals"].tables
    assert got["Policy"]["A2"].comment.text.strip() == "generated note"
    assert str(got["Policy"]["F1"].value) == "plain bold tail"  # rich text, now inline
    assert got["Sales"]["B7"].value == 35


def test_xlsm_keeps_vba_project(tmp_path: Path):
    vba = b"\x01dummy VBA project bytes for a test\x00\xff"
    user = make_user_xlsm(tmp_path / "macros.xlsm", vba)
    gen = make_generated(tmp_path / "generated.xlsx")
    out = tmp_path / "macros-policy.xlsm"
    merge_generated_sheets(user, gen, out)
    _, parts = zip_parts(out)
    assert parts["xl/vbaProject.bin"] == vba
    ct = etree.fromstring(parts["[Content_Types].xml"])
    types = {o.get("PartName"): o.get("ContentType") for o in ct.iter(f"{{{CT}}}Override")}
    # macro-enabled main part content type ([MS-OFFMACRO2] / Excel's .xlsm format)
    assert types["/xl/workbook.xml"] == "application/vnd.ms-excel.sheet.macroEnabled.main+xml"
    rels = parts["xl/_rels/workbook.xml.rels"]
    assert b"vbaProject.bin" in rels
    assert_unchanged_parts(user, out)
    check_package(out)
    assert openpyxl.load_workbook(out).sheetnames == ["Items", "Policy", "Totals"]


def test_rerun_replaces_generated_sheets(user_xlsx: Path, generated: Path, tmp_path: Path):
    first = tmp_path / "first.xlsx"
    second = tmp_path / "second.xlsx"
    merge_generated_sheets(user_xlsx, generated, first)
    fresh = make_generated(tmp_path / "fresh.xlsx", scale=2.0)
    result = merge_generated_sheets(first, fresh, second)
    assert result.replaced == ["Policy", "Totals"]
    got = openpyxl.load_workbook(second)
    assert got.sheetnames == ["Items", "History", "Settings", "Policy", "Totals"]
    assert got["Policy"]["C2"].value == 237.0  # the fresh values
    names1, parts1 = zip_parts(first)
    names2, parts2 = zip_parts(second)
    assert sorted(names1) == sorted(names2)  # no stacked or orphaned parts
    # styles did not grow: the same records are found again instead of appended
    assert parts1["xl/styles.xml"] == parts2["xl/styles.xml"]
    root = workbook_root(second)
    marks = [
        dn.get("localSheetId")
        for dn in root.iter(f"{{{MAIN}}}definedName")
        if dn.get("name") == GENERATED_MARK
    ]
    assert marks == ["3", "4"]
    check_package(second)
    # a third run on the first output gives the same package again
    third = tmp_path / "third.xlsx"
    merge_generated_sheets(second, fresh, third)
    assert zip_parts(third)[1] == parts2


def test_rerun_removes_generated_charts_notes_tables(tmp_path: Path):
    user = make_user_chart(tmp_path / "sales.xlsx")
    gen = make_generated(tmp_path / "generated.xlsx", extras=True)
    first, second = tmp_path / "first.xlsx", tmp_path / "second.xlsx"
    merge_generated_sheets(user, gen, first)
    merge_generated_sheets(first, make_generated(tmp_path / "g2.xlsx", 3.0, True), second)
    assert sorted(zip_parts(first)[0]) == sorted(zip_parts(second)[0])
    check_package(second)
    assert openpyxl.load_workbook(second)["Policy"]["C2"].value == pytest.approx(355.5)


def add_calc_chain(src: Path, dst: Path, sheet_id: str) -> Path:
    """What Excel adds on save: a calculation chain naming formula cells by sheetId."""
    chain = (
        b'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\r\n<calcChain xmlns="'
        + MAIN.encode()
        + b'"><c r="B1" i="'
        + sheet_id.encode()
        + b'"/></calcChain>'
    )
    with zipfile.ZipFile(src) as zin, zipfile.ZipFile(dst, "w") as zout:
        for info in zin.infolist():
            data = zin.read(info)
            if info.filename == "xl/_rels/workbook.xml.rels":
                data = data.replace(
                    b"</Relationships>",
                    (
                        b'<Relationship Id="rId99" Type="'
                        + DOC_REL.encode()
                        + b'/calcChain" Target="calcChain.xml"/></Relationships>'
                    ),
                )
            if info.filename == "[Content_Types].xml":
                data = data.replace(
                    b"</Types>",
                    (
                        b'<Override PartName="/xl/calcChain.xml" ContentType="application/'
                        b'vnd.openxmlformats-officedocument.spreadsheetml.calcChain+xml"/></Types>'
                    ),
                )
            zout.writestr(info, data)
        zout.writestr("xl/calcChain.xml", chain)
    return dst


def test_rerun_drops_stale_calc_chain(user_xlsx: Path, generated: Path, tmp_path: Path):
    first = tmp_path / "first.xlsx"
    merge_generated_sheets(user_xlsx, generated, first)
    totals_id = [s.get("sheetId") for s in workbook_root(first).iter(f"{{{MAIN}}}sheet")][-1]
    saved = add_calc_chain(first, tmp_path / "saved.xlsx", totals_id)
    check_package(saved)
    out = tmp_path / "again.xlsx"
    merge_generated_sheets(saved, generated, out)
    names, parts = zip_parts(out)
    assert "xl/calcChain.xml" not in names  # Excel rebuilds it (ECMA-376 Part 1, 18.6)
    assert b"calcChain" not in parts["xl/_rels/workbook.xml.rels"]
    check_package(out)
    # on a first run the chain is left alone: it names only the user's sheets
    with_chain = add_calc_chain(user_xlsx, tmp_path / "chain.xlsx", "1")
    merge_generated_sheets(with_chain, generated, tmp_path / "kept.xlsx")
    assert (
        zip_parts(tmp_path / "kept.xlsx")[1]["xl/calcChain.xml"]
        == zip_parts(with_chain)[1]["xl/calcChain.xml"]
    )


def test_user_package_without_styles_part(tmp_path: Path, generated: Path):
    """Styles are optional in a package (ECMA-376 Part 1, 12.3.20); take the generated ones."""
    user = make_user_chart(tmp_path / "sales.xlsx")
    bare = tmp_path / "bare.xlsx"
    with zipfile.ZipFile(user) as zin, zipfile.ZipFile(bare, "w") as zout:
        for info in zin.infolist():
            data = zin.read(info)
            if info.filename == "xl/styles.xml":
                continue
            if info.filename == "xl/_rels/workbook.xml.rels":
                data = re.sub(rb'<Relationship [^>]*/styles"[^>]*/>', b"", data)
            if info.filename == "[Content_Types].xml":
                data = re.sub(rb'<Override PartName="/xl/styles.xml"[^>]*/>', b"", data)
            if info.filename.startswith("xl/worksheets/sheet"):
                data = re.sub(rb' s="\d+"', b"", data)
            zout.writestr(info, data)
    out = tmp_path / "out.xlsx"
    merge_generated_sheets(bare, generated, out)
    check_package(out)
    pol = openpyxl.load_workbook(out)["Policy"]
    assert pol["C2"].number_format == MONEY and pol["A1"].font.b


def test_rerun_after_user_moved_a_generated_sheet(user_xlsx: Path, generated: Path, tmp_path: Path):
    """The user re-saved the output with a generated sheet moved to the front."""
    first = tmp_path / "first.xlsx"
    merge_generated_sheets(user_xlsx, generated, first)
    edited = openpyxl.load_workbook(first)
    edited.move_sheet("Totals", offset=-4)
    edited.active = 0
    edited.save(tmp_path / "edited.xlsx")
    assert edited.sheetnames[0] == "Totals"
    assert user_sheet_names(tmp_path / "edited.xlsx") == ["Items", "History", "Settings"]
    out = tmp_path / "again.xlsx"
    result = merge_generated_sheets(tmp_path / "edited.xlsx", generated, out)
    assert sorted(result.replaced) == ["Policy", "Totals"]
    got = openpyxl.load_workbook(out)
    assert got.sheetnames == ["Items", "History", "Settings", "Policy", "Totals"]
    # the user's sheet-scoped name still points at History after the renumbering
    assert got["History"].defined_names["weeks"].attr_text == "History!$B$2:$B$5"
    view = workbook_root(out).find(f"{{{MAIN}}}bookViews/{{{MAIN}}}workbookView")
    assert view.get("activeTab") == "3"  # the active sheet was a generated one: its successor
    check_package(out)


def test_input_never_modified(user_xlsx: Path, generated: Path, tmp_path: Path):
    before = sha(user_xlsx)
    merge_generated_sheets(user_xlsx, generated, tmp_path / "out.xlsx")
    assert sha(user_xlsx) == before
    with pytest.raises(ValueError):
        merge_generated_sheets(user_xlsx, generated, user_xlsx)
    assert sha(user_xlsx) == before


def test_not_a_package_and_encrypted(tmp_path: Path, generated: Path):
    text = tmp_path / "notes.xlsx"
    text.write_text("item,cost\nA,1\n")
    # OLE2/CFB signature (MS-CFB 2.2): what an encrypted .xlsx or an old .xls starts with
    cfb = tmp_path / "locked.xlsx"
    cfb.write_bytes(bytes.fromhex("D0CF11E0A1B11AE1") + b"\x00" * 504)
    for bad in (text, cfb):
        with pytest.raises(CannotMerge) as info:
            merge_generated_sheets(bad, generated, tmp_path / "out.xlsx")
        assert "Traceback" not in str(info.value) and str(info.value)
        with pytest.raises(CannotMerge):
            user_sheet_names(bad)
    assert "encrypted" in str(pytest.raises(CannotMerge, user_sheet_names, cfb).value)
    assert not (tmp_path / "out.xlsx").exists()


def rewrite_member(src: Path, dst: Path, name: str, change) -> Path:
    with zipfile.ZipFile(src) as zin, zipfile.ZipFile(dst, "w") as zout:
        for info in zin.infolist():
            data = zin.read(info)
            zout.writestr(info, change(data) if info.filename == name else data)
    return dst


def test_strict_missing_and_broken_workbook_parts(user_xlsx: Path, generated: Path, tmp_path: Path):
    strict = rewrite_member(
        user_xlsx,
        tmp_path / "strict.xlsx",
        "_rels/.rels",
        lambda d: d.replace(
            b"http://schemas.openxmlformats.org/officeDocument/2006/relationships/officeDocument",
            b"http://purl.oclc.org/ooxml/officeDocument/relationships/officeDocument",
        ),
    )
    broken = rewrite_member(
        user_xlsx, tmp_path / "broken.xlsx", "xl/workbook.xml", lambda d: d[: len(d) // 2]
    )
    no_wb = rewrite_member(
        user_xlsx,
        tmp_path / "nowb.xlsx",
        "_rels/.rels",
        lambda d: d.replace(b"xl/workbook.xml", b"xl/missing.xml"),
    )
    for bad, word in ((strict, "Strict"), (broken, "workbook"), (no_wb, "workbook")):
        with pytest.raises(CannotMerge, match=word):
            merge_generated_sheets(bad, generated, tmp_path / "out.xlsx")
    assert not (tmp_path / "out.xlsx").exists()


def test_sheet_name_clash_is_refused(tmp_path: Path, generated: Path):
    wb = openpyxl.Workbook()
    wb.active.title = "policy"  # sheet names compare case-insensitively in Excel
    wb.save(tmp_path / "clash.xlsx")
    with pytest.raises(CannotMerge, match="'policy'"):
        merge_generated_sheets(tmp_path / "clash.xlsx", generated, tmp_path / "out.xlsx")


def test_atomic_output_failure_keeps_old_output(tmp_path: Path):
    target = tmp_path / "report.xlsx"
    target.write_bytes(b"old output")
    for exc in (RuntimeError("boom"), KeyboardInterrupt()):
        with pytest.raises(type(exc)), atomic_output(target) as tmp:
            assert tmp.parent == tmp_path and tmp.name.startswith(".")
            assert tmp.suffix == ".xlsx"
            tmp.write_bytes(b"half written")
            raise exc
        assert target.read_bytes() == b"old output"
        assert sorted(p.name for p in tmp_path.iterdir()) == ["report.xlsx"]
    with atomic_output(target) as tmp:
        tmp.write_bytes(b"new output")
    assert target.read_bytes() == b"new output"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["report.xlsx"]


def test_merge_failure_leaves_previous_output(user_xlsx: Path, tmp_path: Path):
    out = tmp_path / "stock-policy.xlsx"
    out.write_bytes(b"previous run")
    bad_generated = tmp_path / "gen.xlsx"
    bad_generated.write_bytes(b"not a zip")
    with pytest.raises(CannotMerge):
        merge_generated_sheets(user_xlsx, bad_generated, out)
    assert out.read_bytes() == b"previous run"
    assert sorted(p.name for p in tmp_path.iterdir()) == [
        "gen.xlsx",
        "stock-policy.xlsx",
        "stock.xlsx",
    ]


EXCEL_STYLE_WORKBOOK = (
    '<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\r\n'
    '<workbook xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main" '
    'xmlns:r="http://schemas.openxmlformats.org/officeDocument/2006/relationships" '
    'xmlns:mc="http://schemas.openxmlformats.org/markup-compatibility/2006" '
    'mc:Ignorable="x15 xr xr6 xr10 xr2" '
    'xmlns:x15="http://schemas.microsoft.com/office/spreadsheetml/2010/11/main" '
    'xmlns:xr="http://schemas.microsoft.com/office/spreadsheetml/2014/revision" '
    'xmlns:xr6="http://schemas.microsoft.com/office/spreadsheetml/2016/revision6" '
    'xmlns:xr10="http://schemas.microsoft.com/office/spreadsheetml/2016/revision10" '
    'xmlns:xr2="http://schemas.microsoft.com/office/spreadsheetml/2015/revision2">'
    '<fileVersion appName="xl" lastEdited="7" lowestEdited="7" rupBuild="27425"/>'
    '<workbookPr defaultThemeVersion="202300"/>'
    '<mc:AlternateContent xmlns:mc="http://schemas.openxmlformats.org/markup-compatibility/2006">'
    '<mc:Choice Requires="x15"><x15ac:absPath url="C:\\stock\\" '
    'xmlns:x15ac="http://schemas.microsoft.com/office/spreadsheetml/2010/11/ac"/>'
    "</mc:Choice></mc:AlternateContent>"
    '<xr:revisionPtr revIDLastSave="0" documentId="8_{0F1E2D3C-0000-4000-8000-0000000000AA}" '
    'xr6:coauthVersionLast="47" xr6:coauthVersionMax="47" '
    'xr10:uidLastSave="{00000000-0000-0000-0000-000000000000}"/>'
    '<bookViews><workbookView xWindow="-110" yWindow="-110" windowWidth="19420" '
    'windowHeight="10420" activeTab="1" xr2:uid="{9A8B7C6D-0000-4000-8000-0000000000BB}"/>'
    '</bookViews><sheets><sheet name="Items" sheetId="1" r:id="rId1"/>'
    '<sheet name="History" sheetId="2" r:id="rId2"/><sheet name="Settings" sheetId="3" '
    'r:id="rId3"/></sheets><calcPr calcId="191029"/><extLst><ext '
    'uri="{140A7094-0E35-4892-8432-C4D2E57EDEB5}" '
    'xmlns:x15="http://schemas.microsoft.com/office/spreadsheetml/2010/11/main">'
    '<x15:workbookPr chartTrackingRefBase="1"/></ext></extLst></workbook>'
)


def test_excel_style_markup_is_preserved(user_xlsx: Path, generated: Path, tmp_path: Path):
    """Prefixes, mc:Ignorable and Excel's extension elements survive the rewrite.

    ElementTree would rename the prefixes and leave mc:Ignorable naming prefixes that no
    longer exist, which Excel rejects (ECMA-376 Part 3, 10.1.1: Ignorable lists prefixes).
    """
    excelish = rewrite_member(
        user_xlsx,
        tmp_path / "excelish.xlsx",
        "xl/workbook.xml",
        lambda _: EXCEL_STYLE_WORKBOOK.encode(),
    )
    out = tmp_path / "out.xlsx"
    merge_generated_sheets(excelish, generated, out)
    data = zip_parts(out)[1]["xl/workbook.xml"]
    assert data.startswith(b'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>')
    for fragment in (
        b'mc:Ignorable="x15 xr xr6 xr10 xr2"',
        b"<x15ac:absPath",
        b"<xr:revisionPtr",
        b'xr2:uid="{9A8B7C6D',
        b"<x15:workbookPr",
    ):
        assert fragment in data
    root = etree.fromstring(data)
    order = [etree.QName(c).localname for c in root]
    # CT_Workbook child order (ECMA-376 Part 1, 18.2.27): sheets, definedNames, calcPr, extLst
    assert order.index("sheets") < order.index("definedNames") < order.index("calcPr")
    assert order[-1] == "extLst"
    assert root.find(f"{{{MAIN}}}bookViews/{{{MAIN}}}workbookView").get("activeTab") == "1"
    check_package(out)
    assert openpyxl.load_workbook(out).sheetnames[-2:] == ["Policy", "Totals"]


def _world_executable(path: str | None) -> bool:
    """True when any user may run ``path`` (every directory on the way searchable)."""
    if not path or not os.path.exists(path):
        return False
    real = Path(os.path.realpath(path))
    if not real.stat().st_mode & 0o001:
        return False
    return all(parent.stat().st_mode & 0o001 for parent in real.parents)


def test_output_locked_when_directory_not_writable():
    """A PermissionError on the output becomes OutputLocked with a plain message.

    Root may write anywhere, so as root the check runs in a child process as 'nobody'.
    """
    import shutil
    import subprocess
    import sys
    import tempfile

    atomic_file = REPO  # the repository's root: xlpolicy/ in it
    code = (
        "import sys, types\n"
        "from pathlib import Path\n"
        # the two modules alone (the package's __init__ needs numpy, which the system
        # interpreter an unprivileged user runs may lack): stand-in parent packages
        "for name, sub in (('xlpolicy', 'xlpolicy'), ('xlpolicy.writing', 'xlpolicy/writing')):\n"
        "    m = types.ModuleType(name); m.__path__ = [sys.argv[2] + '/' + sub]\n"
        "    sys.modules[name] = m\n"
        "from xlpolicy.writing import atomic as mod\n"
        "try:\n"
        "    with mod.atomic_output(Path(sys.argv[1]) / 'out.xlsx') as tmp:\n"
        "        tmp.write_bytes(b'x')\n"
        "except mod.OutputLocked as exc:\n"
        "    print('LOCKED', exc)\n"
    )
    kwargs = {}
    python = sys.executable
    if hasattr(os, "geteuid") and os.geteuid() == 0:
        kwargs["user"] = 65534
        python = next(
            (
                p
                for p in (sys.executable, shutil.which("python3"), "/usr/bin/python3")
                if _world_executable(p)
            ),
            None,
        )
        if python is None:
            pytest.skip("no interpreter that an unprivileged user may run")
    base = Path(tempfile.mkdtemp())
    try:
        base.chmod(0o755)
        locked = base / "locked"
        locked.mkdir()
        locked.chmod(0o555)
        env = {"PATH": os.environ.get("PATH", ""), "PYTHONDONTWRITEBYTECODE": "1"}
        run = subprocess.run(
            [python, "-c", code, str(locked), str(atomic_file)],
            capture_output=True,
            text=True,
            env=env,
            cwd=base,
            **kwargs,
        )
        assert "LOCKED" in run.stdout, run.stderr
        # the cause in plain words, with the real name (a full disk or a read-only file
        # would get their own advice; "close it" is for a file open in another program)
        assert "no permission" in run.stdout and str(locked / "out.xlsx") in run.stdout
        assert list(locked.iterdir()) == []
    finally:
        for p in sorted(base.rglob("*"), reverse=True):
            p.chmod(0o700)
            p.rmdir()
        base.rmdir()
