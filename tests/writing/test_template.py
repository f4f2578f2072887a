"""The input template and the bundled demo workbooks.

These checks are structural: they hold the committed files to the contract in
xlpolicy/contract.py and to their generators, so the files cannot drift from the code.
"""

from __future__ import annotations

import re
import subprocess
import sys
from datetime import datetime
from pathlib import Path

import openpyxl
import pytest
from repo_paths import REPO

from xlpolicy import contract
from xlpolicy.template import EXAMPLE_PREFIX, TEMPLATE_FILE_NAME, write_template

ROOT = REPO
COMMITTED_TEMPLATE = ROOT / "templates" / TEMPLATE_FILE_NAME
EXAMPLES = ROOT / "examples"


def sheet_values(path: Path) -> dict[str, list[tuple]]:
    """Every sheet's cell values, row by row."""
    wb = openpyxl.load_workbook(path)
    return {ws.title: [tuple(r) for r in ws.iter_rows(values_only=True)] for ws in wb}


def column_for(header: object) -> list[str]:
    """Keys of the Items columns a header selects, by the contract's loose rule."""
    forms = contract.header_forms(header)
    return [c.key for c in contract.ITEM_COLUMNS if {forms[0], forms[1]} & c.names()]


@pytest.fixture(scope="module")
def template(tmp_path_factory: pytest.TempPathFactory) -> Path:
    path = tmp_path_factory.mktemp("template") / TEMPLATE_FILE_NAME
    write_template(path)
    return path


# ---------------------------------------------------------------------------
# Template
# ---------------------------------------------------------------------------


def test_committed_template_is_up_to_date(template: Path) -> None:
    fresh = sheet_values(template)
    committed = sheet_values(COMMITTED_TEMPLATE)
    assert (
        list(fresh)
        == list(committed)
        == ["Read me", "Items", "History", "Settings", "Price breaks"]
    )
    for name in fresh:
        assert fresh[name] == committed[name], (
            f"sheet {name!r} differs: run `python -m xlpolicy.template`"
        )


def test_template_is_deterministic(template: Path, tmp_path: Path) -> None:
    again = tmp_path / "again.xlsx"
    write_template(again)
    assert again.read_bytes() == template.read_bytes()


def test_items_headers_map_to_contract_columns(template: Path) -> None:
    ws = openpyxl.load_workbook(template)["Items"]
    headers = [c.value for c in ws[1]]
    keys = [column_for(h) for h in headers]
    assert all(len(k) == 1 for k in keys), list(zip(headers, keys, strict=True))
    found = [k[0] for k in keys]
    assert found == [c.key for c in contract.ITEM_COLUMNS]
    required = {c.key for c in contract.ITEM_COLUMNS if c.required != "no"}
    assert required <= set(found)


def test_items_headers_have_notes_and_required_are_marked(template: Path) -> None:
    ws = openpyxl.load_workbook(template)["Items"]
    for cell, column in zip(ws[1], contract.ITEM_COLUMNS, strict=True):
        assert cell.comment is not None and column.meaning in cell.comment.text
        marked = bool(cell.font.b) and cell.fill.fill_type == "solid"
        assert marked == (column.required != "no"), column.key


def test_template_example_rows_are_valid(template: Path) -> None:
    ws = openpyxl.load_workbook(template)["Items"]
    keys = [column_for(c.value)[0] for c in ws[1]]
    rows = [
        dict(zip(keys, r, strict=True))
        for r in ws.iter_rows(min_row=2, values_only=True)
        if any(v is not None for v in r)
    ]
    assert len(rows) == 3
    for row in rows:
        assert isinstance(row["item"], str) and row["item"]
        assert row["description"].startswith(EXAMPLE_PREFIX)
        assert isinstance(row["unit_cost"], (int, float)) and row["unit_cost"] > 0
        assert isinstance(row["lead_time_days"], (int, float)) and row["lead_time_days"] > 0
        assert 0 < row["service_target"] < 1
        assert 0 <= row["holding_rate"] <= 5
        assert row["order_cost"] >= 0
    history = openpyxl.load_workbook(template)["History"]
    assert [c.value for c in history[1]] == [c.title for c in contract.HISTORY_LONG_COLUMNS]
    codes = {r["item"] for r in rows}
    hist_rows = list(history.iter_rows(min_row=2, values_only=True))
    assert hist_rows
    for code, period, qty in hist_rows:
        assert code in codes
        assert isinstance(period, datetime) and period.weekday() == 0  # weekly, Mondays
        assert isinstance(qty, int) and qty >= 0
    # every example item has a demand source: History rows, or annual demand and sd
    with_history = {r[0] for r in hist_rows}
    for row in rows:
        assert row["item"] in with_history or (row["annual_demand"] and row["demand_sd"])


def test_template_settings_and_validation(template: Path) -> None:
    wb = openpyxl.load_workbook(template)
    ws = wb["Settings"]
    assert [c.value for c in ws[1]] == ["Setting", "Value", "What it means"]
    rows = list(ws.iter_rows(min_row=2, values_only=True))
    assert [r[0] for r in rows] == [s.title for s in contract.SETTINGS]
    for (_, value, meaning), setting in zip(rows, contract.SETTINGS, strict=True):
        assert value == setting.default
        assert meaning == setting.meaning
    lists = {
        str(dv.sqref): dv.formula1 for dv in ws.data_validations.dataValidation if dv.type == "list"
    }
    measures = ",".join(contract.SERVICE_MEASURES)
    assert lists == {"B2": '"day,week,month"', "B4": f'"{measures}"'}

    items = wb["Items"]
    by_col = {}
    for dv in items.data_validations.dataValidation:
        col = re.match(r"[A-Z]+", str(dv.sqref)).group(0)
        by_col[col] = dv
    headers = {column_for(c.value)[0]: c.column_letter for c in items[1]}
    target = by_col[headers["service_target"]]
    # OOXML: a missing operator means "between" (ECMA-376 Part 1, 18.3.1.32 dataValidation)
    assert target.type == "decimal" and target.operator in (None, "between")
    assert (float(target.formula1), float(target.formula2)) == (0.0001, 0.9999)
    assert by_col[headers["unit_cost"]].operator == "greaterThan"
    assert "item" not in {k for k, v in headers.items() if v in by_col}


def test_template_read_me_says_how_and_cautions(template: Path) -> None:
    lines = [r[0] for r in openpyxl.load_workbook(template)["Read me"].iter_rows(values_only=True)]
    assert 8 <= len(lines) <= 15
    text = " ".join(lines)
    assert "xlpolicy plan" in text
    assert EXAMPLE_PREFIX in text
    assert "do not replace the judgement of licensed staff" in text


# ---------------------------------------------------------------------------
# Demo workbooks
# ---------------------------------------------------------------------------


@pytest.fixture(scope="module")
def demo_dir(tmp_path_factory: pytest.TempPathFactory) -> Path:
    out = tmp_path_factory.mktemp("demo")
    subprocess.run(
        [sys.executable, str(EXAMPLES / "make_demo.py"), str(out)], check=True, capture_output=True
    )
    return out


@pytest.mark.parametrize("name", ["demo-shop.xlsx", "demo-wide.xlsx"])
def test_demo_is_reproducible(demo_dir: Path, name: str) -> None:
    fresh = sheet_values(demo_dir / name)
    committed = sheet_values(EXAMPLES / name)
    sheets = ["Items", "History", "Settings"] + (
        ["Price breaks"] if name == "demo-shop.xlsx" else []
    )
    assert list(fresh) == list(committed) == sheets
    for sheet in fresh:
        assert fresh[sheet] == committed[sheet], (
            f"{name}: sheet {sheet!r} differs: run `python examples/make_demo.py`"
        )


@pytest.mark.parametrize("name,header_row", [("demo-shop.xlsx", 3), ("demo-wide.xlsx", 1)])
def test_demo_headers_are_recognised(name: str, header_row: int) -> None:
    path = EXAMPLES / name
    assert path.stat().st_size < 200_000
    ws = openpyxl.load_workbook(path)["Items"]
    headers = [c.value for c in ws[header_row]]
    keys = [column_for(h) for h in headers]
    assert all(len(k) == 1 for k in keys), list(zip(headers, keys, strict=True))
    assert {c.key for c in contract.ITEM_COLUMNS if c.required == "yes"} <= {k[0] for k in keys}


def test_demo_shop_has_the_documented_content() -> None:
    wb = openpyxl.load_workbook(EXAMPLES / "demo-shop.xlsx")
    items, history = wb["Items"], wb["History"]
    # the planted mistakes sit where examples/README.md says
    assert items["E22"].value == "n/a" and items["A22"].value == "BR-130"
    assert items["J25"].value == 1.5 and items["A25"].value == "DT-203"
    assert items["H43"].value == -10 and items["A43"].value == "AC-231"
    assert items["A10"].value == items["A15"].value == "000421"
    for cell in ("A9838", "A10158", "A10562"):
        assert history[cell].value == "000422"
    readme = (EXAMPLES / "README.md").read_text(encoding="utf-8")
    for ref in ("Items!E22", "Items!J25", "Items!H43", "Items!A10", "Items!A15", "A9838"):
        assert ref in readme

    codes = [r[0] for r in items.iter_rows(min_row=4, values_only=True)]
    assert all(isinstance(c, str) for c in codes)
    assert 100 <= len(set(codes)) <= 200  # issue: a demo of 100 to 200 items
    assert "000422" not in codes

    rows = list(history.iter_rows(min_row=2, values_only=True))
    weeks = sorted({r[1] for r in rows})
    assert len(weeks) == 104 and all(w.weekday() == 0 for w in weeks)
    assert all((b - a).days == 7 for a, b in zip(weeks, weeks[1:], strict=False))
    per_item: dict[str, int] = {}
    for code, _, qty in rows:
        per_item[code] = per_item.get(code, 0) + 1
        assert isinstance(qty, int) and qty >= 0
    assert per_item["000429"] == 12  # the new item
    assert "DT-225" not in per_item and "TL-405" not in per_item  # annual demand instead
    # zero weeks are mostly left out, so some items have fewer rows than weeks
    assert min(per_item[c] for c in per_item if c not in ("000422", "000429")) < 104


def test_demo_wide_layout() -> None:
    wb = openpyxl.load_workbook(EXAMPLES / "demo-wide.xlsx")
    history = wb["History"]
    header = [c.value for c in history[1]]
    assert header[0] == "Item code" and len(header) == 53
    assert all(isinstance(d, datetime) and d.weekday() == 0 for d in header[1:])
    item_codes = {r[0] for r in wb["Items"].iter_rows(min_row=2, values_only=True)}
    hist_codes = {r[0] for r in history.iter_rows(min_row=2, values_only=True)}
    assert 8 <= len(item_codes) <= 10 and hist_codes == item_codes
