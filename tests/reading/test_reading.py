"""Reading workbooks the way people lay them out (contract: "Input workbook")."""

from __future__ import annotations

import datetime as dt
from pathlib import Path

import numpy as np
import pytest
from builders import BASE_HEADERS, item_row, weekly_history, write_workbook
from openpyxl import Workbook, load_workbook

from xlpolicy.contract import ITEM_COLUMNS, header_forms
from xlpolicy.problems import ProblemLog
from xlpolicy.reading import read_input
from xlpolicy.reading.cells import item_code, parse_number
from xlpolicy.reading.history import infer_period


def read(path: Path, **overrides):
    log = ProblemLog()
    data = read_input(path, overrides, log)
    return data, log


# --- cells --------------------------------------------------------------------------------


@pytest.mark.parametrize(
    "raw, expected",
    [
        (0.14, 0.14),
        ("14%", 0.14),
        (" 14 % ", 0.14),
        ("0.14", 0.14),
        ("1,250.5", 1250.5),
        ("\u00a012\u00a0", 12.0),
        (3, 3.0),
    ],
)
def test_parse_number_accepts_the_spellings_people_use(raw, expected):
    # contract: percentages as 0.14, 14% or the text "14%"
    x, why = parse_number(raw, rate=True)
    assert why is None
    assert x == pytest.approx(expected)


@pytest.mark.parametrize(
    "raw", ["n/a", "twelve", "12 units", "#N/A", True, dt.datetime(2024, 1, 1)]
)
def test_parse_number_reports_text_instead_of_blanking_it(raw):
    x, why = parse_number(raw)
    assert x is None and why


def test_percent_header_unit_turns_whole_numbers_into_fractions():
    # contract: a trailing unit in brackets; with "(%)" a plain 25 means 25 %.
    assert parse_number(25, rate=True, percent_unit=True)[0] == pytest.approx(0.25)
    # a cell formatted as percent already holds the fraction
    assert parse_number(0.25, rate=True, percent_unit=True, number_format="0%")[0] == 0.25


@pytest.mark.parametrize(
    "raw, code",
    [(123, "123"), (123.0, "123"), ("123", "123"), ("000123", "000123"), ("  AB-7 ", "AB-7")],
)
def test_item_codes_are_text(raw, code):
    assert item_code(raw) == code


def test_headers_match_loosely():
    # contract: "Lead time (days)" = "lead_time_days" = "LEAD TIME DAYS"
    col = next(c for c in ITEM_COLUMNS if c.key == "lead_time_days")
    for h in ("Lead time (days)", "lead_time_days", "LEAD TIME DAYS", "Lead-Time [days]"):
        base, full, _ = header_forms(h)
        assert base in col.names() or full in col.names(), h


@pytest.mark.parametrize(
    "gaps, period",
    [([7] * 10, "week"), ([1] * 30, "day"), ([31, 28, 31, 30, 31], "month"), ([3, 50, 11], None)],
)
def test_infer_period_from_date_spacing(gaps, period):
    d = dt.date(2024, 1, 1)
    dates = [d]
    for g in gaps:
        d = d + dt.timedelta(days=g)
        dates.append(d)
    assert infer_period(dates) == period


# --- whole sheets -------------------------------------------------------------------------


def test_header_row_found_below_title_rows_and_aliases(tmp_path):
    headers = [
        "SKU",
        "Item name",
        "Vendor",
        "Cost per unit ($)",
        "Ordering cost",
        "Carrying rate (%)",
        "Lead time (days)",
        "Service level",
    ]
    rows = [["000123", "Widget", "Acme", 2.5, 15, 20, 10, "97%"]]
    p = write_workbook(
        tmp_path / "w.xlsx",
        rows,
        headers=headers,
        history=weekly_history(["000123"]),
        title_rows=["Stock list for spring", ""],
    )
    data, log = read(p)
    assert data is not None, [x.message for x in log]
    df = data.items.df
    assert list(df["item"]) == ["000123"]
    assert data.items.header_row == 3
    assert df["holding_rate"].iat[0] == pytest.approx(0.20)  # "(%)" header: 20 means 20 %
    assert df["service_target"].iat[0] == pytest.approx(0.97)  # text "97%"
    assert df["unit_cost"].iat[0] == 2.5


def test_percent_formatted_cells(tmp_path):
    p = write_workbook(tmp_path / "w.xlsx", [item_row("A")], history=weekly_history(["A"]))
    wb = load_workbook(p)
    ws = wb["Items"]
    ws["F2"].number_format = "0%"
    ws["F2"].value = 0.3
    wb.save(p)
    data, _ = read(p)
    assert data.items.df["holding_rate"].iat[0] == pytest.approx(0.3)


def test_numeric_item_code_in_items_matches_text_code_in_history(tmp_path):
    p = write_workbook(tmp_path / "w.xlsx", [item_row(123)], history={"123": [5, 6, 7, 8]})
    data, log = read(p)
    assert data.history.items == ["123"]
    assert not [x for x in log if x.code == "history-unknown-item"]


def test_long_history_gaps_count_as_zero_and_span_is_whole_sheet(tmp_path):
    hist = {"A": [4, 0, 0, 6, 2], "B": [1, 1, 1, 1, 1]}
    p = write_workbook(
        tmp_path / "w.xlsx", [item_row("A"), item_row("B")], history=hist, skip_zero_rows=True
    )
    data, _ = read(p)
    h = data.history
    assert h.layout == "long" and h.period == "week"
    assert h.matrix.shape == (2, 5)
    np.testing.assert_array_equal(h.matrix[h.index()["A"]], [4, 0, 0, 6, 2])


def test_long_history_adds_up_several_rows_for_one_period(tmp_path):
    # a list of sales transactions is a valid long history
    p = write_workbook(
        tmp_path / "w.xlsx",
        [item_row("A")],
        history={"A": [3, 4]},
        extra_history_rows=[["A", dt.datetime(2024, 1, 1), 2]],
    )
    data, _ = read(p)
    np.testing.assert_array_equal(data.history.matrix[0], [5, 4])


def test_wide_history_with_dates(tmp_path):
    hist = {"A": [4, None, 6], "B": [1, 2, 3]}
    p = write_workbook(
        tmp_path / "w.xlsx", [item_row("A"), item_row("B")], history=hist, layout="wide"
    )
    data, log = read(p)
    h = data.history
    assert h.layout == "wide" and h.period == "week"
    np.testing.assert_array_equal(h.matrix[h.index()["A"]], [4, 0, 6])  # empty cell = 0
    assert data.settings["sources"]["period"].startswith("inferred")


def test_wide_history_with_labels_uses_settings_period(tmp_path):
    hist = {"A": [4, 5, 6]}
    p = write_workbook(
        tmp_path / "w.xlsx",
        [item_row("A")],
        history=hist,
        layout="wide",
        labels=["Jan", "Feb", "Mar"],
        settings={"Period": "month"},
    )
    data, _ = read(p)
    assert data.history.period is None
    assert data.settings["period"] == "month"
    assert data.settings["periods_per_year"] == 12
    assert data.history.labels == ["Jan", "Feb", "Mar"]


def test_long_history_with_period_numbers_fills_missing_numbers(tmp_path):
    p = write_workbook(tmp_path / "w.xlsx", [item_row("A")], history={"A": [3, 9]}, labels=[1, 3])
    data, _ = read(p)
    np.testing.assert_array_equal(data.history.matrix[0], [3, 0, 9])
    assert data.history.labels == [1, 2, 3]


def test_daily_dates_summed_into_weeks_when_settings_ask(tmp_path):
    p = write_workbook(
        tmp_path / "w.xlsx",
        [item_row("A")],
        history={"A": [1] * 14},
        step_days=1,
        settings={"Period": "week"},
    )
    data, log = read(p)
    np.testing.assert_array_equal(data.history.matrix[0], [7, 7])
    assert any(x.code == "history-aggregated" for x in log)


def test_monthly_dates(tmp_path):
    p = write_workbook(
        tmp_path / "w.xlsx",
        [item_row("A")],
        history={"A": [5, 6, 7, 8]},
        labels=[dt.datetime(2024, m, 1) for m in (1, 2, 3, 4)],
    )
    data, _ = read(p)
    assert data.settings["period"] == "month"
    assert data.settings["days_per_period"] == pytest.approx(365 / 12)


def test_settings_sheet_defaults_and_sources(tmp_path):
    headers = BASE_HEADERS[:4] + ["Lead time (days)"]
    p = write_workbook(
        tmp_path / "w.xlsx",
        [["A", "x", "s", 3.0, 7]],
        headers=headers,
        history=weekly_history(["A"]),
        settings={
            "Holding rate": "22%",
            "Order cost": 12,
            "Service measure": "Fill rate",
            "Service target": 0.9,
            "Currency": "EUR",
        },
    )
    data, log = read(p)
    s = data.settings
    assert s["holding_rate"] == pytest.approx(0.22)
    assert s["order_cost"] == 12
    assert s["service_measure"] == "fill rate"
    assert s["currency"] == "EUR"
    assert s["sources"]["holding_rate"] == "Settings B2"
    df = data.items.df
    assert df["order_cost"].iat[0] == 12 and df["holding_rate"].iat[0] == pytest.approx(0.22)


def test_command_line_overrides_beat_settings(tmp_path):
    p = write_workbook(
        tmp_path / "w.xlsx",
        [item_row("A")],
        history=weekly_history(["A"]),
        settings={"Service target": 0.9},
    )
    data, _ = read(p, service_target=0.99)
    assert data.settings["service_target"] == 0.99
    assert data.settings["sources"]["service_target"] == "command line"


def test_sheet_names_match_loosely(tmp_path):
    p = write_workbook(tmp_path / "w.xlsx", [item_row("A")], history=weekly_history(["A"]))
    wb = load_workbook(p)
    wb["Items"].title = "ITEMS "
    wb["History"].title = "Sales history"
    wb.save(p)
    data, _ = read(p)
    assert data is not None and data.history is not None


def test_formula_values_are_read_not_formulas(tmp_path):
    # A workbook saved by a spreadsheet program holds both the formula and its result;
    # openpyxl writes no result, so build the part by hand: a cell with <f> and <v>.
    import zipfile

    p = write_workbook(tmp_path / "w.xlsx", [item_row("A")], history=weekly_history(["A"]))
    q = tmp_path / "f.xlsx"
    with zipfile.ZipFile(p) as zin, zipfile.ZipFile(q, "w") as zout:
        for info in zin.infolist():
            data = zin.read(info.filename)
            if info.filename == "xl/worksheets/sheet1.xml":
                data = data.replace(
                    b'<c r="D2" t="n"><v>10</v></c>', b'<c r="D2"><f>5*2.5</f><v>12.5</v></c>'
                )
                assert b"12.5" in data
            zout.writestr(info, data)
    data, _ = read(q)
    assert data.items.df["unit_cost"].iat[0] == 12.5


def test_empty_rows_inside_items_are_ignored(tmp_path):
    wb = Workbook()
    ws = wb.active
    ws.title = "Items"
    ws.append(BASE_HEADERS)
    ws.append(item_row("A"))
    ws.append([])
    ws.append(item_row("B"))
    hs = wb.create_sheet("History")
    hs.append(["Item", "Period", "Quantity"])
    for k in range(3):
        hs.append(["A", k + 1, 5])
        hs.append(["B", k + 1, 5])
    wb.save(tmp_path / "w.xlsx")
    data, log = read(tmp_path / "w.xlsx")
    assert list(data.items.df["item"]) == ["A", "B"]
    assert list(data.items.df["row"]) == [2, 4]


def test_zero_padded_number_codes_read_as_shown(tmp_path):
    # a code typed as 417 but shown as 000417 (cell format "000000") is the code on the label
    p = write_workbook(tmp_path / "w.xlsx", [item_row(417)], history={"417": [5, 6, 7]})
    wb = load_workbook(p)
    wb["Items"]["A2"].number_format = "000000"
    for row in wb["History"].iter_rows(min_row=2, max_col=1):
        row[0].value = 417
        row[0].number_format = "000000"
    wb.save(p)
    data, log = read(p)
    assert list(data.items.df["item"]) == ["000417"]
    assert data.history.items == ["000417"]


def test_empty_history_sheet_counts_as_absent(tmp_path):
    headers = BASE_HEADERS + ["Annual demand", "Demand sd"]
    p = write_workbook(tmp_path / "w.xlsx", [item_row("A") + [520, 3]], headers=headers)
    wb = load_workbook(p)
    wb.create_sheet("History")  # left empty
    wb.save(p)
    data, log = read(p)
    assert data is not None and data.history is None
    assert any(x.code == "history-empty" for x in log)


def test_daily_history_becomes_weekly_when_lead_times_are_long(tmp_path):
    # 10 weeks of daily sales, lead time 14 days: weekly totals are used (a steadier sd)
    p = write_workbook(
        tmp_path / "w.xlsx",
        [item_row("A", lead=14)],
        history={"A": [1, 2, 3, 0, 0, 5, 4] * 10 + [9, 9]},
        step_days=1,
    )
    data, log = read(p)
    assert data.settings["period"] == "week"
    assert data.history.matrix.shape == (1, 10)
    np.testing.assert_array_equal(data.history.matrix[0], [15] * 10)
    assert any(x.code == "history-aggregated" and "2 day(s)" in x.message for x in log)


def test_daily_history_stays_daily_for_short_lead_times(tmp_path):
    p = write_workbook(
        tmp_path / "w.xlsx",
        [item_row("A", lead=3)],
        history={"A": [1, 2, 3, 0, 0, 5, 4] * 10},
        step_days=1,
    )
    data, _ = read(p)
    assert data.settings["period"] == "day" and data.history.matrix.shape == (1, 70)
