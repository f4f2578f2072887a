"""The cap and the exchange curve end to end: the command line on a real workbook, the
output read back with openpyxl, and one test per new Settings rule.

The cap is checked against the Policy sheet's own cells (average stock value summed
independently here), not against figures recorded from an earlier run.
"""

from __future__ import annotations

import json
import re
import zipfile
from pathlib import Path

import numpy as np
import pytest
from builders import BASE_HEADERS, item_row, weekly_history, write_workbook
from click.testing import CliRunner
from openpyxl import load_workbook

import xlpolicy
from xlpolicy.cli import main
from xlpolicy.problems import Severity

CODES = ["P-01", "P-02", "P-03", "P-04", "P-05", "P-06"]


def run(*args: object):
    return CliRunner().invoke(main, [str(a) for a in args], catch_exceptions=False)


def shop(tmp_path: Path, settings: dict | None = None, name: str = "shop.xlsx") -> Path:
    """Six invented items (test data only), two in packs, one with a minimum order."""
    headers = BASE_HEADERS + ["Pack size", "Minimum order"]
    rows = [
        item_row(c, cost=3.0 + 7 * k, order=25 + 5 * k, rate=0.25, lead=7 + 3 * k)
        + [6 if k % 3 == 1 else None, 40 if k == 2 else None]
        for k, c in enumerate(CODES)
    ]
    hist = weekly_history(CODES, weeks=70, mean=18, seed=21)
    return write_workbook(tmp_path / name, rows, headers=headers, history=hist, settings=settings)


def summary_rows(path: Path) -> list[list]:
    ws = load_workbook(path, data_only=True)["Summary"]
    return [[c.value for c in row] for row in ws.iter_rows()]


def block(rows: list[list], title: str) -> int:
    return next(k for k, r in enumerate(rows) if r and r[0] == title)


def policy_table(path: Path) -> dict[str, list]:
    ws = load_workbook(path, data_only=True)["Policy"]
    rows = [[c.value for c in row] for row in ws.iter_rows()]
    return {h: [r[j] for r in rows[1:]] for j, h in enumerate(rows[0]) if h}


def test_stock_budget_from_settings_is_met_in_the_written_workbook(tmp_path):
    free = xlpolicy.analyse(shop(tmp_path, name="free.xlsx"))
    budget = round(0.7 * free.totals["average_inventory_value"], 2)
    src = shop(tmp_path, {"Stock budget": budget})
    res = run("plan", src, "--json", tmp_path / "p.json")
    assert res.exit_code == 0, res.output
    assert "Yearly cost of keeping to the cap" in res.output
    out = tmp_path / "shop-policy.xlsx"

    # the Policy sheet's own cells: sum of unit cost x (Q/2 + max(safety stock, 0))
    pol = policy_table(out)
    q = np.array(pol["Order quantity (units)"], dtype=float)
    ss = np.array(pol["Safety stock (units)"], dtype=float)
    c = np.array(pol["Unit cost"], dtype=float)
    assert float(np.sum(c * (q / 2 + np.maximum(ss, 0)))) <= budget
    uncapped_q = np.array(pol["Without the cap: order quantity (units)"], dtype=float)
    assert np.all(q <= uncapped_q) and np.any(q < uncapped_q)
    assert np.array(pol["Average inventory value"], dtype=float).sum() <= budget

    rows = summary_rows(out)
    k = block(rows, "Limits across all items")
    cap_row = rows[k + 2]
    assert cap_row[0].startswith("Average stock value")
    assert cap_row[1] == pytest.approx(free.totals["average_inventory_value"])
    assert cap_row[2] <= cap_row[3] == pytest.approx(budget)
    text = " ".join(str(r[0]) for r in rows[k : k + 12] if r and r[0])
    assert "Each extra" in text and "of stock budget would save about" in text

    method = [
        c.value
        for row in load_workbook(out)["How it works"].iter_rows()
        for c in row
        if isinstance(c.value, str)
    ]
    k = method.index("Across all items")
    assert "Lagrangian relaxation" in method[k + 2] and "safety-critical" in method[k + 3]

    doc = json.loads((tmp_path / "p.json").read_text())
    cap = doc["portfolio"]["cap"]
    assert cap["binding"] and cap["feasible"] and cap["usage"] <= budget
    assert cap["cost_of_cap"] == pytest.approx(
        cap["annual_total_cost"] - cap["uncapped_annual_total_cost"]
    )
    assert cap["cost_of_cap"] > 0
    assert [i["order_qty"] for i in doc["items"]] == list(q)


def test_orders_cap_on_the_command_line(tmp_path):
    src = shop(tmp_path)
    free = xlpolicy.analyse(src)
    cap = 0.6 * free.totals["orders_per_year"]
    res = run("plan", src, "--orders-cap", f"{cap:.3f}", "--json", tmp_path / "p.json")
    assert res.exit_code == 0, res.output
    doc = json.loads((tmp_path / "p.json").read_text())
    orders = sum(i["annual_demand"] / i["order_qty"] for i in doc["items"])
    assert orders <= float(f"{cap:.3f}")
    assert doc["portfolio"]["cap"]["kind"] == "orders"
    assert doc["portfolio"]["cap"]["multiplier"] > 0


def test_exchange_curve_table_and_chart_on_the_summary(tmp_path):
    src = shop(tmp_path)
    assert run("plan", src, "--json", tmp_path / "p.json").exit_code == 0
    out = tmp_path / "shop-policy.xlsx"
    rows = summary_rows(out)
    k = block(rows, "Exchange curve: safety stock against shortages")
    head = next(j for j in range(k, k + 5) if rows[j][0] == "Service target (Settings default)")
    table = []
    j = head + 1
    while rows[j][0] is not None:
        table.append(rows[j])
        j += 1
    inv = [r[1] for r in table]
    short = [r[2] for r in table]
    assert inv == sorted(inv) and short == sorted(short, reverse=True)
    today = [r for r in table if r[6] == "today's settings"]
    assert len(today) == 1 and today[0][0] == pytest.approx(0.95)
    doc = json.loads((tmp_path / "p.json").read_text())
    # today's point is the Summary's own safety stock value
    assert today[0][1] == pytest.approx(doc["totals"]["safety_stock_value"])
    with zipfile.ZipFile(out) as z:
        charts = [z.read(n).decode() for n in z.namelist() if "charts/chart" in n]
    scatter = [x for x in charts if "<c:scatterChart>" in x]
    assert len(scatter) == 1
    # the curve is drawn from the Summary's table: x = investment, y = units short, and
    # today's point is a series of its own on the table's marked row
    first, last, now = head + 2, j, head + 2 + table.index(today[0])
    refs = re.findall(r"<c:f>([^<]*)</c:f>", scatter[0])
    assert refs == [
        f"Summary!$B${first}:$B${last}",
        f"Summary!$C${first}:$C${last}",
        f"Summary!$B${now}",
        f"Summary!$C${now}",
    ]


def test_no_curve_leaves_it_out(tmp_path):
    src = shop(tmp_path)
    assert run("plan", src, "--no-curve", "--json", tmp_path / "p.json").exit_code == 0
    doc = json.loads((tmp_path / "p.json").read_text())
    assert "exchange_curve" not in doc["portfolio"]
    rows = summary_rows(tmp_path / "shop-policy.xlsx")
    assert not any(r and r[0] == "Exchange curve: safety stock against shortages" for r in rows)


def test_bad_cap_on_the_command_line_is_a_usage_error(tmp_path):
    res = run("plan", shop(tmp_path), "--budget", "-5")
    assert res.exit_code == 2 and "more than 0" in res.output


# --- Settings rules ---------------------------------------------------------------------


@pytest.mark.parametrize(
    "name, value, code",
    [
        ("Stock budget", -100, "setting-stock_budget"),
        ("Stock budget", "plenty", "setting-stock_budget"),
        ("Orders a year cap", 0, "setting-orders_cap"),
        ("Exchange curve", "perhaps", "setting-exchange_curve"),
    ],
)
def test_bad_portfolio_setting_falls_back_to_default(tmp_path, name, value, code):
    problems = xlpolicy.check(shop(tmp_path, {name: value}))
    found = [p for p in problems if p.code == code]
    assert len(found) == 1
    assert (found[0].severity, found[0].sheet, found[0].cell) == (
        Severity.WARNING,
        "Settings",
        "B2",
    )
    assert "default" in found[0].message


def test_both_caps_set_applies_the_budget_and_says_so(tmp_path):
    problems = xlpolicy.check(shop(tmp_path, {"Stock budget": 1e9, "Orders a year cap": 1e9}))
    found = [p for p in problems if p.code == "cap-both"]
    assert len(found) == 1 and found[0].cell == "B3"


def test_budget_the_targets_cannot_meet_is_reported(tmp_path):
    report = xlpolicy.analyse(shop(tmp_path, {"Stock budget": 1}))
    found = [p for p in report.problems if p.code == "cap-infeasible"]
    assert len(found) == 1 and found[0].cell == "B2"
    assert "cannot be met" in found[0].message
    assert not report.portfolio["cap"].feasible


def test_periodic_review_items_stay_outside_the_cap_and_the_curve(tmp_path):
    """A budget and the curve are worked out for continuous-review items only.

    References: the periodic item's policy must be what it is without any cap (its
    order-up-to level is set by its own rule, Silver, Pyke & Peterson 1998 ch. 7), and the
    budget must be met by the continuous items' own average stock (the cap's definition).
    """
    headers = BASE_HEADERS + ["Review period days"]
    rows = [
        item_row(c, cost=3.0 + 7 * k, order=25 + 5 * k, rate=0.25, lead=7 + 3 * k)
        + [14 if k == 0 else None]
        for k, c in enumerate(CODES)
    ]
    hist = weekly_history(CODES, weeks=70, mean=18, seed=21)
    src = write_workbook(tmp_path / "p.xlsx", rows, headers=headers, history=hist)
    free = xlpolicy.analyse(src).results.set_index("item")
    cont = free["review"] == "continuous"
    budget = 0.7 * float(free.loc[cont, "average_inventory_value"].sum())
    capped = xlpolicy.analyse(src, stock_budget=budget)
    res = capped.results.set_index("item")
    periodic = CODES[0]
    assert res.loc[periodic, "review"] == "periodic"
    for key in ("order_qty", "order_up_to_level", "average_inventory_value"):
        assert res.loc[periodic, key] == pytest.approx(free.loc[periodic, key])
    used = float(res.loc[cont, "average_inventory_value"].sum())
    # Met, and spent on the continuous items (not squeezed by the periodic item's stock).
    assert 0.97 * budget <= used <= budget * (1 + 1e-9)
    curve = capped.portfolio["exchange_curve"]
    assert int(curve["items"].max()) == int(cont.sum())
    assert any(p.code == "portfolio-periodic-left-out" for p in capped.problems)
