"""One test per validation rule: severity, sheet, A1 cell and the key words of the message.

Each workbook is small and real (openpyxl); the rule under test is the only thing wrong
with it unless the test says otherwise.
"""

from __future__ import annotations

import datetime as dt
import zipfile
from pathlib import Path

import pytest
from builders import BASE_HEADERS, item_row, weekly_history, write_workbook
from openpyxl import Workbook, load_workbook

import xlpolicy
from xlpolicy.problems import Severity

GOOD = ("A1", "B2", "C3")


def problems_of(path: Path, **kw):
    return xlpolicy.check(path, **kw)


def only(problems, code):
    found = [p for p in problems if p.code == code]
    assert len(found) == 1, [(p.code, p.where(), p.message) for p in problems]
    return found[0]


def workbook_with(tmp_path: Path, rows, *, headers=BASE_HEADERS, codes=GOOD, **kw) -> Path:
    """The good items plus ``rows``; history for every code in ``codes``."""
    items = [item_row(c) for c in codes] + list(rows)
    kw.setdefault("history", weekly_history(list(codes) + [r[0] for r in rows if r and r[0]]))
    return write_workbook(tmp_path / "w.xlsx", items, headers=headers, **kw)


def planned_items(path: Path, **kw) -> set[str]:
    r = xlpolicy.analyse(path, **kw).results
    return set(r.loc[r["status"] != "skipped", "item"])


# --- the workbook as a whole (fatal: exit 1) ----------------------------------------------


def test_missing_items_sheet_is_fatal(tmp_path):
    wb = Workbook()
    wb.active.title = "Stuff"
    wb.save(tmp_path / "w.xlsx")
    p = only(problems_of(tmp_path / "w.xlsx"), "items-sheet-missing")
    assert p.severity is Severity.FATAL
    assert "no 'Items' sheet" in p.message and "'Stuff'" in p.message


def test_items_sheet_without_header_row_is_fatal(tmp_path):
    wb = Workbook()
    ws = wb.active
    ws.title = "Items"
    ws.append(["just", "some", "words"])
    wb.save(tmp_path / "w.xlsx")
    p = only(problems_of(tmp_path / "w.xlsx"), "items-no-header")
    assert p.severity is Severity.FATAL and p.sheet == "Items" and "header row" in p.message


def test_missing_required_column_is_fatal(tmp_path):
    headers = [h for h in BASE_HEADERS if h != "Unit cost"]
    rows = [[c, "x", "s", 20, 0.2, 14] for c in GOOD]
    p = write_workbook(
        tmp_path / "w.xlsx",
        rows,
        headers=headers,
        history=weekly_history(GOOD),
        title_rows=["Our items"],
    )
    prob = only(problems_of(p), "items-missing-column")
    assert prob.severity is Severity.FATAL
    assert prob.cell == "A2" and "'Unit cost'" in prob.message


def test_missing_order_cost_column_without_settings_default_is_fatal(tmp_path):
    headers = [h for h in BASE_HEADERS if h != "Order cost"]
    rows = [[c, "x", "s", 10, 0.2, 14] for c in GOOD]
    p = write_workbook(tmp_path / "w.xlsx", rows, headers=headers, history=weekly_history(GOOD))
    prob = only(problems_of(p), "items-missing-column")
    assert "'Order cost'" in prob.message and "Settings" in prob.message
    # ... and the same workbook is fine once Settings gives the default
    p2 = write_workbook(
        tmp_path / "w2.xlsx",
        rows,
        headers=headers,
        history=weekly_history(GOOD),
        settings={"Order cost": 25},
    )
    assert planned_items(p2) == set(GOOD)


@pytest.mark.parametrize(
    "content, name, code",
    [
        (b"item,cost\nA,1\n", "w.xlsx", "file-not-zip"),
        (b"", "w.xlsx", "file-empty"),
        (b"\xd0\xcf\x11\xe0" + b"\0" * 60, "w.xlsx", "file-not-zip"),
        (b"a,b\n", "w.csv", "file-type"),
    ],
)
def test_files_that_are_not_workbooks_are_fatal(tmp_path, content, name, code):
    (tmp_path / name).write_bytes(content)
    prob = only(problems_of(tmp_path / name), code)
    assert prob.severity is Severity.FATAL and name in prob.message


def test_missing_file_is_fatal(tmp_path):
    prob = only(problems_of(tmp_path / "nope.xlsx"), "file-missing")
    assert "does not exist" in prob.message


def test_no_usable_item_is_fatal(tmp_path):
    p = write_workbook(
        tmp_path / "w.xlsx", [item_row("A", cost="n/a")], history=weekly_history(["A"])
    )
    probs = problems_of(p)
    fatal = only(probs, "no-usable-item")
    assert fatal.severity is Severity.FATAL and "No item" in fatal.message
    assert only(probs, "unit_cost-not-number").cell == "D2"  # the reason is listed too


def test_history_without_readable_header_is_fatal(tmp_path):
    p = workbook_with(tmp_path, [])
    wb = load_workbook(p)
    wb.remove(wb["History"])
    hs = wb.create_sheet("History")
    hs.append(["what", "is", "this"])
    wb.save(p)
    prob = only(problems_of(p), "history-no-header")
    assert prob.severity is Severity.FATAL and prob.sheet == "History"


# --- bad cells in Items: the item is skipped, the run goes on ----------------------------


@pytest.mark.parametrize(
    "row, cell, code, words",
    [
        (item_row("X", cost="n/a"), "D5", "unit_cost-not-number", "'n/a' is text where a number"),
        (item_row("X", cost=0), "D5", "unit_cost-out-of-range", "more than 0"),
        (item_row("X", order=-5), "E5", "order_cost-out-of-range", "cannot be negative"),
        (item_row("X", rate=25), "F5", "holding_rate-out-of-range", "at most 1"),
        (item_row("X", lead=0), "G5", "lead_time_days-out-of-range", "more than 0 days"),
        (item_row("X", lead="two weeks"), "G5", "lead_time_days-not-number", "text where a number"),
        (item_row("X", cost=None), "D5", "unit_cost-missing", "is blank"),
    ],
)
def test_bad_item_cell_skips_the_item(tmp_path, row, cell, code, words):
    p = workbook_with(tmp_path, [row])
    prob = only(problems_of(p), code)
    assert prob.severity is Severity.ERROR
    assert (prob.sheet, prob.cell, prob.item) == ("Items", cell, "X")
    assert words in prob.message and "skipped" in prob.message
    assert planned_items(p) == set(GOOD)


@pytest.mark.parametrize(
    "header, value, code, words",
    [
        ("Lead time sd (days)", -1, "lead_time_sd_days-out-of-range", "cannot be negative"),
        ("Service target", 1.5, "service_target-out-of-range", "strictly between 0 and 1"),
        ("Service target", 0, "service_target-out-of-range", "strictly between 0 and 1"),
        ("Shortage cost", -2, "shortage_cost-out-of-range", "more than 0"),
        ("Pack size", 2.5, "pack_size-out-of-range", "whole number"),
        ("Minimum order", -1, "minimum_order-out-of-range", "cannot be negative"),
        ("Annual demand", -100, "annual_demand-out-of-range", "cannot be negative"),
    ],
)
def test_bad_optional_policy_cell_skips_the_item(tmp_path, header, value, code, words):
    headers = BASE_HEADERS + [header]
    rows = [item_row(c) + [None] for c in GOOD] + [item_row("X") + [value]]
    p = write_workbook(
        tmp_path / "w.xlsx", rows, headers=headers, history=weekly_history(list(GOOD) + ["X"])
    )
    prob = only(problems_of(p), code)
    assert (prob.severity, prob.cell, prob.item) == (Severity.ERROR, "H5", "X")
    assert words in prob.message
    assert planned_items(p) == set(GOOD)


@pytest.mark.parametrize(
    "header, value, code",
    [
        ("On order", -3, "on_order-out-of-range"),
        ("On hand", "lots", "on_hand-not-number"),
        ("Backordered", -1, "backordered-out-of-range"),
    ],
)
def test_bad_stock_cell_is_a_warning_and_the_item_is_still_planned(tmp_path, header, value, code):
    headers = BASE_HEADERS + [header]
    rows = [item_row(c) + [None] for c in GOOD] + [item_row("X") + [value]]
    p = write_workbook(
        tmp_path / "w.xlsx", rows, headers=headers, history=weekly_history(list(GOOD) + ["X"])
    )
    prob = only(problems_of(p), code)
    assert (prob.severity, prob.cell, prob.item) == (Severity.WARNING, "H5", "X")
    assert "left out" in prob.message
    assert "X" in planned_items(p)


def test_duplicate_item_code(tmp_path):
    p = workbook_with(tmp_path, [item_row("B2", cost=99)])
    prob = only(problems_of(p), "item-duplicate")
    assert (prob.severity, prob.cell, prob.item) == (Severity.ERROR, "A5", "B2")
    assert "appears again (first in row 3)" in prob.message
    r = xlpolicy.analyse(p).results
    assert r.loc[r["item"] == "B2", "unit_cost"].tolist() == [10.0]  # the first row is kept


def test_row_without_item_code(tmp_path):
    p = workbook_with(tmp_path, [item_row(None)])
    prob = only(problems_of(p), "item-code-missing")
    assert (prob.severity, prob.cell) == (Severity.ERROR, "A5")
    assert "no item code" in prob.message


def test_blank_order_cost_without_default(tmp_path):
    p = workbook_with(tmp_path, [item_row("X", order=None)])
    prob = only(problems_of(p), "order_cost-missing")
    assert (prob.cell, prob.item) == ("E5", "X") and "Settings" in prob.message


def test_shortage_cost_measure_needs_a_shortage_cost(tmp_path):
    headers = BASE_HEADERS + ["Shortage cost"]
    rows = [item_row(c) + [30] for c in GOOD] + [item_row("X") + [None]]
    p = write_workbook(
        tmp_path / "w.xlsx", rows, headers=headers, history=weekly_history(list(GOOD) + ["X"])
    )
    prob = only(problems_of(p, service_measure="shortage cost"), "shortage_cost-missing")
    assert (prob.severity, prob.cell, prob.item) == (Severity.ERROR, "H5", "X")


def test_formula_without_saved_result(tmp_path):
    p = workbook_with(tmp_path, [item_row("X")])
    wb = load_workbook(p)
    wb["Items"]["D5"] = "=2*3"  # openpyxl saves no result for it
    wb.save(p)
    prob = only(problems_of(p), "cell-uncalculated")
    assert (prob.severity, prob.cell, prob.item) == (Severity.ERROR, "D5", "X")
    assert "no saved result" in prob.message


# --- History ------------------------------------------------------------------------------


def test_history_for_unknown_item(tmp_path):
    hist = weekly_history(list(GOOD) + ["ZZ"])
    p = workbook_with(tmp_path, [], history=hist)
    prob = only(problems_of(p), "history-unknown-item")
    assert (prob.severity, prob.sheet, prob.item) == (Severity.WARNING, "History", "ZZ")
    assert prob.cell == f"A{2 + 3 * 60}" and "not in the Items sheet" in prob.message


def test_history_quantity_that_is_text(tmp_path):
    p = workbook_with(tmp_path, [], extra_history_rows=[["A1", dt.datetime(2024, 1, 1), "few"]])
    prob = only(problems_of(p), "history-quantity-not-number")
    assert (prob.sheet, prob.cell, prob.item) == ("History", f"C{2 + 180}", "A1")
    assert "'few'" in prob.message and "left out" in prob.message
    assert planned_items(p) == set(GOOD)


def test_history_negative_quantity(tmp_path):
    p = workbook_with(tmp_path, [], extra_history_rows=[["B2", dt.datetime(2024, 1, 8), -4]])
    prob = only(problems_of(p), "history-quantity-negative")
    assert (prob.cell, prob.item) == (f"C{2 + 180}", "B2") and "counted as 0" in prob.message


def test_history_row_without_item(tmp_path):
    p = workbook_with(tmp_path, [], extra_history_rows=[[None, dt.datetime(2024, 1, 8), 4]])
    prob = only(problems_of(p), "history-item-missing")
    assert prob.cell == f"A{2 + 180}"


def test_history_period_that_is_not_a_date(tmp_path):
    p = workbook_with(tmp_path, [], extra_history_rows=[["C3", "sometime", 4]])
    prob = only(problems_of(p), "history-period-bad")
    assert (prob.cell, prob.value) == (f"B{2 + 180}", "sometime")


def test_item_with_neither_history_nor_figures(tmp_path):
    p = workbook_with(tmp_path, [item_row("X")], history=weekly_history(GOOD))
    prob = only(problems_of(p), "demand-missing")
    assert (prob.severity, prob.cell, prob.item) == (Severity.ERROR, "A5", "X")
    assert "annual demand" in prob.message


def test_zero_demand_is_skipped_with_a_warning(tmp_path):
    hist = weekly_history(GOOD) | {"X": [0] * 60}
    p = workbook_with(tmp_path, [item_row("X")], history=hist)
    prob = only(problems_of(p), "demand-zero")
    assert (prob.severity, prob.item) == (Severity.WARNING, "X")
    assert "No demand in 60 weeks" in prob.message
    assert "X" not in planned_items(p)


def test_single_period_history_is_too_short(tmp_path):
    p = workbook_with(
        tmp_path,
        [item_row("X")],
        history=weekly_history(GOOD),
        extra_history_rows=[["X", dt.datetime(2024, 1, 1), 5]],
    )
    # the span runs over the sheet's 60 weeks, so X has 60 periods: make a 1-period sheet
    wb = load_workbook(p)
    wb.remove(wb["History"])
    hs = wb.create_sheet("History")
    hs.append(["Item", "Period", "Quantity"])
    for c in (*GOOD, "X"):
        hs.append([c, dt.datetime(2024, 1, 1), 5])
    wb.save(p)
    probs = problems_of(p)
    assert {p.code for p in probs if p.severity is Severity.FATAL} == {"no-usable-item"}
    assert any(p.code == "history-too-short" and p.item == "X" for p in probs)


def test_short_history_warns(tmp_path):
    hist = weekly_history(GOOD, weeks=20)
    p = workbook_with(tmp_path, [], history=hist)
    probs = [p for p in problems_of(p) if p.code == "history-short"]
    assert {p.item for p in probs} == set(GOOD)
    assert "20 weeks" in probs[0].message


def test_new_item_history_counts_from_its_first_sale(tmp_path):
    # a new item's history starts at its first sale, so it is not drowned in zeros
    hist = weekly_history(GOOD) | {"N": [0] * 48 + [9] * 12}
    p = workbook_with(tmp_path, [item_row("N")], history=hist)
    probs = problems_of(p)
    note = only(probs, "history-new-item")
    assert (note.severity, note.item) == (Severity.INFO, "N")
    assert "week 49 of 60" in note.message
    assert only(probs, "history-short").item == "N"  # 12 weeks: a short history
    r = xlpolicy.analyse(p).results.set_index("item")
    assert r.at["N", "demand_per_period"] == 9 and r.at["N", "history_periods"] == 12


def test_demand_figures_without_sd_assume_poisson_spread(tmp_path):
    headers = BASE_HEADERS + ["Annual demand"]
    rows = [item_row(c) + [None] for c in GOOD] + [item_row("X") + [520]]
    p = write_workbook(tmp_path / "w.xlsx", rows, headers=headers, history=weekly_history(GOOD))
    prob = only(problems_of(p), "demand-sd-assumed")
    assert (prob.severity, prob.cell) == (Severity.WARNING, "H5")  # no sd column: the demand
    r = xlpolicy.analyse(p).results.set_index("item")
    # 520 a year over 52 weeks = 10 a week; Poisson sd = sqrt(10) (common practice)
    assert r.at["X", "demand_sd_per_period"] == pytest.approx(10**0.5)


# --- Settings -----------------------------------------------------------------------------


def test_unknown_setting(tmp_path):
    p = workbook_with(tmp_path, [], settings={"Colour": "blue"})
    prob = only(problems_of(p), "setting-unknown")
    assert (prob.severity, prob.sheet, prob.cell) == (Severity.WARNING, "Settings", "A2")


@pytest.mark.parametrize(
    "name, value, code",
    [
        ("Service target", 3, "setting-service_target"),
        ("Service measure", "best", "setting-service_measure"),
        ("Period", "fortnight", "setting-period"),
        ("Holding rate", "lots", "setting-holding_rate"),
    ],
)
def test_bad_setting_value_falls_back_to_default(tmp_path, name, value, code):
    p = workbook_with(tmp_path, [], settings={name: value})
    prob = only(problems_of(p), code)
    assert (prob.severity, prob.cell) == (Severity.WARNING, "B2") and "default" in prob.message


def test_settings_period_contradicting_dates(tmp_path):
    p = workbook_with(tmp_path, [], settings={"Period": "day"})
    prob = only(problems_of(p), "history-period-mismatch")
    assert "weekly" in prob.message


# --- model doubts from the core ------------------------------------------------------------


def test_normal_model_forced_on_a_slow_mover_gets_a_warning(tmp_path):
    # Left to choose, a slow mover gets a count model; forced to normal, it gets a warning
    # that the normal shape is doubtful (sd/mean >= 0.5 or mean < 10: common practice).
    hist = weekly_history(GOOD) | {"S": [0, 1, 0, 0, 2, 0, 1, 0, 0, 1] * 6}
    p = workbook_with(
        tmp_path, [item_row("S", lead=7)], history=hist, settings={"Demand model": "normal"}
    )
    prob = only(problems_of(p), "normal-doubtful")
    assert (prob.severity, prob.item, prob.cell) == (Severity.WARNING, "S", "A5")
    r = xlpolicy.analyse(p).results.set_index("item")
    assert r.at["S", "status"] == "warning" and r.at["A1", "status"] == "ok"
    auto = workbook_with(tmp_path, [item_row("S", lead=7)], history=hist)
    assert not [x for x in problems_of(auto) if x.code == "normal-doubtful"]


def test_shortage_cost_too_low_for_any_safety_stock(tmp_path):
    # Hadley & Whitin 1963: no solution when Q H / (p D) >= 1; here p is tiny.
    headers = BASE_HEADERS + ["Shortage cost"]
    rows = [item_row(c) + [50] for c in GOOD] + [item_row("X", cost=100, rate=0.3) + [0.01]]
    p = write_workbook(
        tmp_path / "w.xlsx", rows, headers=headers, history=weekly_history(list(GOOD) + ["X"])
    )
    prob = only(problems_of(p, service_measure="shortage cost"), "no-safety-stock-pays")
    assert prob.item == "X" and "no safety stock" in prob.message


def test_check_does_not_write_anything(tmp_path):
    p = workbook_with(tmp_path, [item_row("X", cost="n/a")])
    before = sorted(tmp_path.iterdir())
    problems_of(p)
    assert sorted(tmp_path.iterdir()) == before


def test_problem_locations_are_real_cells(tmp_path):
    # every problem's cell holds the value it reports (spot check across rules)
    p = workbook_with(tmp_path, [item_row("X", cost="n/a"), item_row("Y", lead=-2)])
    ws = load_workbook(p)["Items"]
    for prob in problems_of(p):
        if prob.sheet == "Items" and prob.cell and prob.value is not None:
            assert ws[prob.cell].value == prob.value


def test_zip_that_is_not_a_workbook(tmp_path):
    with zipfile.ZipFile(tmp_path / "w.xlsx", "w") as z:
        z.writestr("hello.txt", "hi")
    prob = [p for p in problems_of(tmp_path / "w.xlsx") if p.severity is Severity.FATAL][0]
    assert "w.xlsx" in prob.message
