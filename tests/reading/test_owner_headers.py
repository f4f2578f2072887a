"""Headers as owners write them: every alias, every unit, near misses, unused columns.

The workbooks here are invented; the checks are about reading. A lead time in weeks is
7 days a week and a month a twelfth of 365 days (calendar arithmetic); 5 working days to a
calendar week is common practice (a Monday-to-Friday supplier).
"""

from __future__ import annotations

from pathlib import Path

import pytest
from builders import weekly_history, write_workbook

from xlpolicy.contract import (
    HISTORY_LONG_COLUMNS,
    ITEM_COLUMNS,
    PERCENT_ONLY_ALIASES,
    PRICE_BREAK_COLUMNS,
    normalise,
)
from xlpolicy.problems import ProblemLog, Severity
from xlpolicy.reading import read_input
from xlpolicy.reading.headers import match, split_unit

SETS = {"items": ITEM_COLUMNS, "history": HISTORY_LONG_COLUMNS, "breaks": PRICE_BREAK_COLUMNS}
ALIASES = [
    (name, col.key, alias)
    for name, cols in SETS.items()
    for col in cols
    for alias in (col.title, *col.aliases)
]


@pytest.mark.parametrize("sheet, key, alias", ALIASES, ids=[f"{a[0]}:{a[2]}" for a in ALIASES])
def test_each_alias_selects_its_column(sheet, key, alias):
    assert match(alias, SETS[sheet])[0] == key
    assert match(alias.upper(), SETS[sheet])[0] == key  # case does not count
    assert match(f"  {alias.title()} ", SETS[sheet])[0] == key


@pytest.mark.parametrize("sheet", list(SETS))
def test_no_spelling_selects_two_columns(sheet):
    seen: dict[str, str] = {}
    for col in SETS[sheet]:
        for name in col.names():
            assert seen.setdefault(name, col.key) == col.key, (name, seen[name], col.key)


@pytest.mark.parametrize("alias", [a for names in PERCENT_ONLY_ALIASES.values() for a in names])
def test_percent_only_alias_needs_the_per_cent_unit(alias):
    assert match(alias, ITEM_COLUMNS)[0] is None  # may be money: not read
    assert match(f"{alias} (%)", ITEM_COLUMNS)[0] == "holding_rate"
    assert match(f"{alias} %", ITEM_COLUMNS)[0] == "holding_rate"


@pytest.mark.parametrize(
    "header, key, unit",
    [
        ("Supplier lead time (weeks)", "lead_time_days", "weeks"),
        ("Lead time (weeks)", "lead_time_days", "weeks"),
        ("Lead time weeks", "lead_time_days", "weeks"),
        ("Lead time in weeks", "lead_time_days", "weeks"),
        ("LT (wks)", "lead_time_days", "weeks"),
        ("Delivery time (days)", "lead_time_days", "days"),
        ("Lead time (months)", "lead_time_days", "months"),
        ("Lead time (working days)", "lead_time_days", "working days"),
        ("Lead time in business days", "lead_time_days", "working days"),
        ("Shelf life (months)", "shelf_life_days", "months"),
        ("Review period (weeks)", "review_period_days", "weeks"),
        ("Holding cost %", "holding_rate", "%"),
        ("Holding cost (%)", "holding_rate", "%"),
        ("Holding %", "holding_rate", "%"),
        ("Service level %", "service_target", "%"),
        ("Cost price (€)", "unit_cost", "€"),
        ("Cost EUR", "unit_cost", "EUR"),
        ("Cost each", "unit_cost", "units"),
    ],
)
def test_unit_in_header_is_found(header, key, unit):
    found, u = match(header, ITEM_COLUMNS)
    assert found == key and u.name == unit


def test_a_rate_over_time_is_not_a_length_of_time():
    base, unit = split_unit("Demand SD (per week)")
    assert base == "Demand SD" and unit.kind == "other"


def _items(tmp_path: Path, header: str, values: list, **kw) -> tuple:
    """A two-item workbook whose lead-time column has ``header`` and ``values``."""
    headers = ["Item", "Unit cost", "Order cost", "Holding rate", header]
    rows = [[c, 10, 20, 0.2, v] for c, v in zip(("A1", "B2"), values, strict=True)]
    p = write_workbook(
        tmp_path / "w.xlsx", rows, headers=headers, history=weekly_history(["A1", "B2"]), **kw
    )
    log = ProblemLog()
    return read_input(p, {}, log), log


@pytest.mark.parametrize(
    "header, days",
    [
        ("Lead time (weeks)", 14.0),  # 2 weeks = 14 days
        ("Supplier lead time (weeks)", 14.0),
        ("Lead time in weeks", 14.0),
        ("LT (wks)", 14.0),
        ("Lead time (days)", 2.0),
        ("Lead time", 2.0),
        ("Lead time (months)", 2 * 365 / 12),
        ("Lead time (working days)", 2 * 7 / 5),
    ],
)
def test_lead_time_unit_is_honoured(tmp_path, header, days):
    data, log = _items(tmp_path, header, [2, 2])
    got = data.items.df["lead_time_days"].tolist()
    assert got == pytest.approx([days, days])
    notes = [p for p in log if p.code == "read-as-unit"]
    if header == "Lead time (days)":  # days, as the contract has it: nothing to say
        assert not notes
    else:  # a conversion, or days assumed where the header names no unit: said
        assert notes and "Lead time read in" in notes[0].message


def test_console_note_names_the_header_and_the_conversion(tmp_path):
    _, log = _items(tmp_path, "Supplier lead time (weeks)", [2, 3])
    note = next(p for p in log if p.code == "read-as-unit")
    assert "Lead time read in weeks from 'Supplier lead time (weeks)'" in note.message
    assert "7 days" in note.message and note.cell == "E1"


@pytest.mark.parametrize(
    "cell, days",
    [("2 weeks", 14.0), ("10 days", 10.0), ("1 month", 365 / 12), ("5 working days", 7.0)],
)
def test_unit_in_a_cell_wins_over_the_header(tmp_path, cell, days):
    data, log = _items(tmp_path, "Lead time (days)", [cell, 4])
    assert data.items.df["lead_time_days"].tolist() == pytest.approx([days, 4.0])
    assert any(p.code == "read-as-cell-unit" and p.cell == "E2" for p in log)


def test_a_time_unit_in_a_cell_we_do_not_convert_is_refused(tmp_path):
    data, log = _items(tmp_path, "Lead time", ["36 hours", 4])
    bad = [p for p in log if p.cell == "E2" and p.severity is Severity.ERROR]
    assert bad and "hours" in bad[0].message
    assert not data.items.usable[0] and data.items.usable[1]


@pytest.mark.parametrize("header", ["Lead time (hours)", "Lead time (%)", "Lead time (EUR)"])
def test_a_unit_that_cannot_be_honoured_is_refused(tmp_path, header):
    data, log = _items(tmp_path, header, [2, 2])
    assert data is None
    fatal = [p for p in log if p.severity is Severity.FATAL]
    assert fatal[0].code == "header-unit-refused" and header in fatal[0].message


@pytest.mark.parametrize("header", ["Holding %", "Holding cost %", "Holding cost (%)"])
def test_twenty_under_a_per_cent_header_is_twenty_per_cent(tmp_path, header):
    headers = ["Item", "Unit cost", "Order cost", header, "Lead time"]
    p = write_workbook(
        tmp_path / "w.xlsx",
        [["A1", 10, 20, 20, 7], ["B2", 10, 20, 0.25, 7]],
        headers=headers,
        history=weekly_history(["A1", "B2"]),
    )
    log = ProblemLog()
    data = read_input(p, {}, log)
    assert data.items.df["holding_rate"].tolist() == pytest.approx([0.20, 0.25])
    assert any("20 means 20 %" in p.message for p in log)


def test_holding_cost_without_a_unit_is_named_not_guessed(tmp_path):
    headers = ["Item", "Unit cost", "Order cost", "Holding cost", "Lead time"]
    p = write_workbook(
        tmp_path / "w.xlsx",
        [["A1", 10, 20, 2.5, 7]],
        headers=headers,
        history=weekly_history(["A1"]),
    )
    log = ProblemLog()
    assert read_input(p, {}, log) is None  # no holding rate at all: fatal, and why
    hint = next(p for p in log if p.code == "header-hint")
    assert "'Holding cost (%)'" in hint.message


def test_currency_in_a_header_is_shown_and_mixed_currencies_refused(tmp_path):
    headers = ["Item", "Cost price (€)", "Order cost (EUR)", "Holding rate", "Lead time"]
    p = write_workbook(
        tmp_path / "w.xlsx",
        [["A1", 10, 20, 0.2, 7]],
        headers=headers,
        history=weekly_history(["A1"]),
    )
    log = ProblemLog()
    data = read_input(p, {}, log)
    assert data.settings["currency"] == "€"
    headers[2] = "Order cost ($)"
    p = write_workbook(
        tmp_path / "x.xlsx",
        [["A1", 10, 20, 0.2, 7]],
        headers=headers,
        history=weekly_history(["A1"]),
    )
    log = ProblemLog()
    assert read_input(p, {}, log) is None
    assert any(p.code == "header-currency-mixed" for p in log)


def test_missing_column_lists_the_headers_found_and_the_nearest(tmp_path):
    headers = ["Code", "Cost pric", "Order cost", "Holding rate", "Lead time", "Total"]
    p = write_workbook(
        tmp_path / "w.xlsx",
        [["A1", 10, 20, 0.2, 7, 70]],
        headers=headers,
        history=weekly_history(["A1"]),
    )
    log = ProblemLog()
    assert read_input(p, {}, log) is None
    fatal = next(p for p in log if p.code == "items-missing-column")
    assert "'Unit cost'" in fatal.message
    assert "'Code', 'Cost pric', 'Order cost', 'Holding rate', 'Lead time', 'Total'" in (
        fatal.message
    )
    assert "Did you mean 'Cost pric' for 'Unit cost'?" in fatal.message
    assert "--column 'Unit cost=your header'" in fatal.message


def test_history_missing_column_lists_the_headers_found(tmp_path):
    p = write_workbook(tmp_path / "w.xlsx", [["A1", "x", "s", 10, 20, 0.2, 7]])
    from openpyxl import load_workbook

    wb = load_workbook(p)
    hs = wb.create_sheet("History")
    hs.append(["Product code", "Date", "Takings"])
    hs.append(["A1", "2025-01-06", 40])
    wb.save(p)
    log = ProblemLog()
    assert read_input(p, {}, log) is None
    fatal = next(p for p in log if p.severity is Severity.FATAL)
    assert fatal.code == "history-missing-column"
    assert "'Quantity'" in fatal.message and "'Takings'" in fatal.message


def test_unused_columns_are_listed_once(tmp_path):
    headers = ["Item", "Product", "Unit cost", "Order cost", "Holding rate", "Lead time"]
    headers += ["Shelf", "Total"]
    p = write_workbook(
        tmp_path / "w.xlsx",
        [["A1", "Rake", 10, 20, 0.2, 7, "B4", 70]],
        headers=headers,
        history=weekly_history(["A1"]),
    )
    log = ProblemLog()
    data = read_input(p, {}, log)
    assert data.items.df["description"].tolist() == ["Rake"]  # 'Product' is the name
    notes = [p for p in log if p.code == "read-as-unused"]
    assert len(notes) == 1 and "Columns not used: 'Shelf', 'Total'" in notes[0].message


def test_two_columns_for_one_thing_are_reported(tmp_path):
    headers = ["Item", "Unit cost", "Cost price", "Order cost", "Holding rate", "Lead time"]
    p = write_workbook(
        tmp_path / "w.xlsx",
        [["A1", 10, 11, 20, 0.2, 7]],
        headers=headers,
        history=weekly_history(["A1"]),
    )
    log = ProblemLog()
    data = read_input(p, {}, log)
    dup = next(p for p in log if p.code == "header-duplicate")
    assert "'Unit cost' (B1)" in dup.message and "'Cost price' (C1)" in dup.message
    assert data.items.df["unit_cost"].tolist() == [10]
    assert normalise("Cost price") in {normalise(a) for a in ITEM_COLUMNS[4].aliases}


def test_the_workbook_guide_lists_every_header_word():
    """docs/workbook.md is written for owners; it must not fall behind the contract."""
    guide = (Path(__file__).resolve().parents[2] / "docs" / "workbook.md").read_text(
        encoding="utf-8"
    )
    for cols in (ITEM_COLUMNS, HISTORY_LONG_COLUMNS[1:]):
        for col in cols:
            row = next(line for line in guide.splitlines() if line.startswith(f"| {col.title} |"))
            for alias in col.aliases:
                assert alias in row or normalise(alias) == normalise(col.title), alias
