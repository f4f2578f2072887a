"""An owner's workbook, made without reading our contract, planned as it is.

The garden centre in owner_books.py is invented. The checks are arithmetic on the test's
own data: 2 weeks are 14 days; the lead-time demand is the demand per period times the lead
time in periods (Silver, Pyke & Peterson, Inventory Management and Production Planning and
Scheduling, 3rd ed., 1998, ch. 7); the EOQ is sqrt(2 D S / (i c)) (Harris 1913).
"""

from __future__ import annotations

import math
from pathlib import Path

import pytest
from builders import weekly_history, write_workbook
from click.testing import CliRunner
from openpyxl import Workbook, load_workbook
from owner_books import PLANTS, garden_centre, monthly_columns, stock_sheet, till_export

import xlpolicy
from xlpolicy.backtest import AUTO_MAX_ITEMS, DEFAULT_RUNS
from xlpolicy.cli import main
from xlpolicy.contract import CAUTION
from xlpolicy.problems import Problem, ProblemLog, Severity
from xlpolicy.reading import read_input


def cli(*args: object):
    return CliRunner().invoke(main, [str(a) for a in args], catch_exceptions=False)


def policy_rows(path: Path) -> dict[str, dict[str, object]]:
    ws = load_workbook(path, read_only=True, data_only=True)["Policy"]
    rows = list(ws.iter_rows(values_only=True))
    head = next(k for k, r in enumerate(rows) if r and "Item" in r)
    titles = rows[head]
    return {
        str(r[titles.index("Item")]): dict(zip(titles, r, strict=False))
        for r in rows[head + 1 :]
        if r and r[titles.index("Item")]
    }


def test_garden_centre_till_export_plans_without_renaming(tmp_path):
    src = tmp_path / "garden.xlsx"
    wb = Workbook()
    stock_sheet(wb)
    sold = till_export(wb)  # 182 days = 26 whole weeks of sale lines
    wb.save(src)
    out = tmp_path / "garden-policy.xlsx"
    run = cli("plan", src, "--no-simulate", "--no-curve", "-o", out)
    assert run.exit_code == 0, run.output
    text = run.output
    assert "Lead time read in weeks from 'Supplier lead time (weeks)'" in text
    assert "Holding rate read in per cent from 'Holding cost %'" in text
    assert "items from 'Stock list'; sales history from 'Sales'" in text
    assert "Columns not used: 'Notes'" in text
    assert "Columns not used: 'Time', 'Product', 'Till'" in text
    assert text.count("Caution:") == 1
    result = xlpolicy.plan(src, write_workbook=False, simulate=False, exchange_curve=False)
    df = result.report.results.set_index("item")
    for code, name, _, cost, weeks, _ in PLANTS:
        row = df.loc[code]
        assert row["lead_time_days"] == pytest.approx(7 * weeks)  # 2 weeks = 14 days
        assert row["holding_rate"] == pytest.approx(0.20)  # 20 under 'Holding cost %'
        assert row["description"] == name  # 'Product' is carried, not dropped
        assert row["demand_per_period"] == pytest.approx(sold[code] / 26)  # weekly totals
        assert row["lead_time_demand_mean"] == pytest.approx(row["demand_per_period"] * weeks)
        eoq = math.sqrt(2 * row["annual_demand"] * 12.5 / (0.20 * cost))
        assert row["eoq"] == pytest.approx(eoq, rel=1e-9)
    assert result.report.settings["period"] == "week"
    # the written workbook says the same
    rows = policy_rows(out)
    lead = next(k for k in rows["GC-101"] if k and str(k).lower().startswith("lead time"))
    assert rows["GC-101"][lead] == pytest.approx(14)
    wb = load_workbook(out)
    # the caution where people look: top of the Summary, in normal type; the printed list
    assert wb["Summary"]["A3"].value == CAUTION and not wb["Summary"]["A3"].font.i
    assert wb["Reorder now"]["A4"].value == CAUTION
    method = " ".join(str(c.value) for r in wb["How it works"].iter_rows() for c in r if c.value)
    assert "The items: the sheet 'Stock list' (found by its name)" in method
    assert "Lead time read in weeks from 'Supplier lead time (weeks)'" in method


def test_garden_centre_monthly_columns_plans_without_renaming(tmp_path):
    src = garden_centre(tmp_path / "garden.xlsx", layout="monthly")
    log = ProblemLog()
    data = read_input(src, {}, log)
    assert data is not None and data.history is not None
    assert data.history.layout == "wide" and data.history.period == "month"
    assert data.settings["sheet_roles"]["History"] == "Monthly sales"
    result = xlpolicy.plan(src, write_workbook=False, simulate=False, exchange_curve=False)
    df = result.report.results.set_index("item")
    for code, _, _, _, weeks, _ in PLANTS:
        months = 7 * weeks / (365 / 12)  # the lead time in months
        row = df.loc[code]
        assert row["lead_time_days"] == pytest.approx(7 * weeks)
        assert row["lead_time_demand_mean"] == pytest.approx(row["demand_per_period"] * months)


def _two_sheets(path: Path, first: str, second: str) -> Path:
    wb = Workbook()
    stock_sheet(wb, first)
    wb.create_sheet(second)
    ws = wb[second]
    ws.append(["SKU", "Item name", "Buy price", "Delivery time (days)"])
    ws.append(["X1", "thing", 2.0, 5])
    wb.save(path)
    return path


def test_sheets_found_by_what_they_hold(tmp_path):
    wb = Workbook()
    stock_sheet(wb, "Things we sell")
    monthly_columns(wb)
    wb["Monthly sales"].title = "2024-25"
    wb.save(tmp_path / "w.xlsx")
    log = ProblemLog()
    data = read_input(tmp_path / "w.xlsx", {}, log)
    assert data is not None
    assert data.settings["sheet_roles"] == {"Items": "Things we sell", "History": "2024-25"}
    notes = {p.sheet: p.message for p in log if p.code == "read-as-sheet"}
    assert "item codes and unit costs" in notes["Things we sell"]
    assert "a column per period" in notes["2024-25"]


def test_two_sheets_that_could_be_the_item_list_are_refused(tmp_path):
    p = _two_sheets(tmp_path / "w.xlsx", "Garden", "Shop")
    log = ProblemLog()
    assert read_input(p, {}, log) is None
    fatal = next(x for x in log if x.severity is Severity.FATAL)
    assert fatal.code == "items-sheet-ambiguous"
    assert "'Garden'" in fatal.message and "'Shop'" in fatal.message


def test_no_sheet_that_could_be_the_item_list_names_what_each_lacked(tmp_path):
    wb = Workbook()
    wb.active.title = "Notes"
    wb.active.append(["Product code", "Colour"])
    wb.create_sheet("Sums").append(["Total", "Month"])
    wb.save(tmp_path / "w.xlsx")
    log = ProblemLog()
    assert read_input(tmp_path / "w.xlsx", {}, log) is None
    fatal = next(x for x in log if x.severity is Severity.FATAL)
    assert fatal.code == "items-sheet-missing"
    assert "'Notes': item codes but no unit cost" in fatal.message
    assert "'Sums': no column of item codes" in fatal.message


@pytest.mark.parametrize("names", [("items_", "ITEMS."), ("Stock list", "Products")])
def test_two_sheet_names_that_fit_one_role_are_refused(tmp_path, names):
    p = _two_sheets(tmp_path / "w.xlsx", *names)
    log = ProblemLog()
    assert read_input(p, {}, log) is None
    fatal = next(x for x in log if x.severity is Severity.FATAL)
    assert fatal.code == "sheet-names-ambiguous"
    assert all(f"'{n}'" in fatal.message for n in names)


def test_the_sheet_named_exactly_wins_and_the_other_is_named(tmp_path):
    p = _two_sheets(tmp_path / "w.xlsx", "items_", "Items")
    wb = load_workbook(p)
    ws = wb.create_sheet("Sales")
    ws.append(["Date", "SKU", "Units sold"])
    ws.append(["2025-01-06", "X1", 3])
    ws.append(["2025-01-13", "X1", 4])
    wb.save(p)
    log = ProblemLog()
    data = read_input(p, {"order_cost": 10.0, "holding_rate": 0.2}, log)
    assert data is not None and data.items.sheet == "Items"
    warn = next(x for x in log if x.code == "sheet-names-ambiguous")
    assert warn.severity is Severity.WARNING and "'items_'" in warn.message


def _own_words(path: Path, mapping_sheet: bool) -> Path:
    wb = Workbook()
    ws = wb.active
    ws.title = "Items"
    ws.append(["Ref", "What we pay", "Wait (wks)", "Order cost", "Holding rate"])
    ws.append(["A1", 10, 2, 20, 0.2])
    hist = weekly_history(["A1"])
    write = wb.create_sheet("History")
    write.append(["Ref", "Week", "Out"])
    import datetime as dt

    for k, q in enumerate(hist["A1"]):
        write.append(["A1", dt.datetime(2024, 1, 1) + dt.timedelta(days=7 * k), q])
    if mapping_sheet:
        m = wb.create_sheet("Column names")
        m.append(["Our column", "Your header"])
        m.append(["Unit cost", "What we pay"])
        m.append(["Lead time days", "Wait (wks)"])
        m.append(["Quantity", "Out"])
    wb.save(path)
    return path


def test_the_owners_column_names_in_a_sheet(tmp_path):
    p = _own_words(tmp_path / "w.xlsx", mapping_sheet=True)
    log = ProblemLog()
    data = read_input(p, {}, log)
    assert data is not None, [x.message for x in log]
    assert data.items.df["unit_cost"].tolist() == [10]
    assert data.items.df["lead_time_days"].tolist() == [14]  # the unit is still read
    assert sum(data.history.matrix[0]) == sum(weekly_history(["A1"])["A1"])
    assert any(x.code == "read-as-mapped" for x in log)


def test_the_owners_column_names_on_the_command_line(tmp_path):
    p = _own_words(tmp_path / "w.xlsx", mapping_sheet=False)
    run = cli("check", p)
    assert run.exit_code == 1 and "What we pay" in run.output  # listed among headers found
    run = cli(
        "check",
        p,
        "--column",
        "Unit cost=What we pay",
        "--column",
        "Lead time days=Wait (wks)",
        "--column",
        "Quantity=Out",
    )
    assert run.exit_code == 0, run.output
    assert "'What we pay' was read as Unit cost" in run.output
    assert "Next: 'xlpolicy plan" in run.output


def test_an_unknown_column_of_ours_in_the_mapping_is_reported(tmp_path):
    p = _own_words(tmp_path / "w.xlsx", mapping_sheet=True)
    wb = load_workbook(p)
    wb["Column names"].append(["Unit kost", "Price"])
    wb.save(p)
    log = ProblemLog()
    read_input(p, {}, log)
    bad = next(x for x in log if x.code == "column-map-unknown")
    assert "did you mean 'Unit cost'?" in bad.message and bad.cell == "A5"


def test_console_counts_and_locations(tmp_path, capsys):
    from xlpolicy.cli import _print_problems

    problems = [
        Problem(Severity.FATAL, "", "", "", None, "Nothing to read.", "x"),
        *[
            Problem(Severity.ERROR, "Items", f"A{k}", f"I{k}", None, "Same words.", "y")
            for k in range(2, 10)
        ],
        Problem(Severity.INFO, "Items", "B1", "", None, "A note.", "z"),
    ]
    _print_problems(problems, limit=1)
    out = capsys.readouterr().out
    assert "fatal   :" not in out and "fatal   Nothing to read." in out
    assert "Problems: 1 fatal, 8 errors, 1 note" in out
    assert "... and 9 more" in out
    _print_problems(problems)
    out = capsys.readouterr().out
    assert "(the same for 7 more: I3, I4, I5, I6, I7 ... and 2 more)" in out


def test_one_item_is_one_item(tmp_path):
    p = write_workbook(
        tmp_path / "w.xlsx",
        [["A1", "x", "s", 10, 20, 0.2, 7]],
        history=weekly_history(["A1"]),
    )
    run = cli("check", p, "--no-curve")
    assert "1 item;" in run.output and "1 items" not in run.output


def test_template_says_what_to_do_next(tmp_path):
    run = cli("template", tmp_path / "t.xlsx")
    assert run.exit_code == 0 and "Next:" in run.output and "xlpolicy check" in run.output


def test_the_demo_mistakes_are_planted_ones(tmp_path):
    from xlpolicy.demo import PLANTED

    demo = Path(__file__).resolve().parents[2] / "examples" / "demo-shop.xlsx"
    found = {(p.item, p.code) for p in xlpolicy.check(demo, simulate=False)}
    assert set(PLANTED) <= found


def test_plan_help_names_every_sheet_and_the_back_test_default():
    from xlpolicy.writing.sheets import DEFAULT_SHEET_NAMES

    text = " ".join(cli("plan", "--help").output.split())
    for name in DEFAULT_SHEET_NAMES.values():
        assert name in text, name
    assert f"({DEFAULT_RUNS} runs an item) for up to {AUTO_MAX_ITEMS:,} items" in text
