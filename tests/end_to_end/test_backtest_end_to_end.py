"""The back-test end to end: `xlpolicy plan --simulate` on real workbooks, read back.

The references: a lumpy item forced onto the normal model (its weekly demand is mostly 0
with rare large sales, far from normal) must be warned about; a steady Poisson item must
not; the numbers in the Policy sheet, the CSV and the warnings must be the same; the
simulated cycle service of the steady item is compared with the Poisson formula
(scipy.stats.poisson) within its band, widened by the sampling error of the 104 weeks the
promise is estimated from. The steady item's Poisson weeks are invented test data.
"""

from __future__ import annotations

import csv
import hashlib
import math
import zipfile
from pathlib import Path

import numpy as np
import pytest
from builders import BASE_HEADERS, item_row, write_workbook
from click.testing import CliRunner
from openpyxl import load_workbook
from scipy import stats
from test_simulate import lumpy_history

import xlpolicy
from xlpolicy.cli import main
from xlpolicy.contract import SIMULATION_RESULT_KEYS


def run(*args: object):
    return CliRunner().invoke(main, [str(a) for a in args], catch_exceptions=False)


def _shop(tmp_path: Path, settings: dict | None = None) -> Path:
    rng = np.random.default_rng(42)
    weeks = 416  # eight years (see test_simulate.lumpy_history)
    steady = [float(x) for x in rng.poisson(6.0, weeks)]
    headers = BASE_HEADERS + ["Demand model"]
    rows = [
        item_row("000777", cost=3.0, order=25, rate=0.25, lead=14) + [None],
        item_row("LMP-1", cost=10.0, order=20, rate=0.25, lead=14) + ["normal"],
    ]
    return write_workbook(
        tmp_path / "shop.xlsx",
        rows,
        headers=headers,
        history={"000777": steady, "LMP-1": list(lumpy_history(weeks))},
        settings=settings or {"Service target": "98%"},
    )


def test_plan_with_simulate_flags_the_lumpy_item_and_writes_the_columns(tmp_path):
    src = _shop(tmp_path)
    before = hashlib.sha256(src.read_bytes()).hexdigest()
    res = run("plan", src, "--simulate", "--replications", 150, "--csv", tmp_path / "p.csv")
    assert res.exit_code == 0, res.output
    assert hashlib.sha256(src.read_bytes()).hexdigest() == before
    assert "Meet their target in simulation" in res.output

    with open(tmp_path / "p.csv", newline="") as f:
        rows = {r["item"]: r for r in csv.DictReader(f)}
    steady, lumpy = rows["000777"], rows["LMP-1"]
    for r in (steady, lumpy):
        cs, lo, hi = (
            float(r[k])
            for k in (
                "simulated_cycle_service",
                "simulated_cycle_service_low",
                "simulated_cycle_service_high",
            )
        )
        assert 0 <= lo <= cs <= hi <= 1
        assert 0 <= float(r["simulated_fill_rate"]) <= 1
        assert r["simulation_source"] == "history, block bootstrap"
    assert lumpy["simulation_check"] == "short of promise"
    assert float(lumpy["simulated_cycle_service_high"]) < float(lumpy["cycle_service"])
    assert steady["simulation_check"] != "short of promise"

    # the steady item against the Poisson formula (Axsäter, Inventory Control, 3rd ed.
    # 2015, ch. 5): P(Poisson(d L) <= R), with d L estimated from 416 weeks, so the band is
    # widened by the promise's own sampling error (delta method on the estimated mean).
    d, L, R = float(steady["demand_per_period"]), 2.0, float(steady["reorder_point"])
    promised = stats.poisson.cdf(R, d * L)
    se_mean = math.sqrt(d / 416) * L
    slack = abs(stats.poisson.pmf(R, d * L)) * 2 * se_mean
    assert promised == pytest.approx(float(steady["cycle_service"]))
    assert float(steady["simulated_cycle_service_low"]) - slack <= promised
    assert promised <= float(steady["simulated_cycle_service_high"]) + slack

    wb = load_workbook(tmp_path / "shop-policy.xlsx")
    ws = wb["Policy"]
    header = [c.value for c in ws[1]]
    col = header.index("Back-test: cycle service") + 1
    items = [ws.cell(row=r, column=1).value for r in range(2, 4)]
    k = items.index("LMP-1") + 2
    assert ws.cell(row=k, column=col).value == pytest.approx(
        float(lumpy["simulated_cycle_service"])
    )
    check_col = header.index("Back-test: service against the promise") + 1
    assert ws.cell(row=k, column=check_col).value == "short of promise"

    warnings = [[c.value for c in row] for row in wb["Warnings"].iter_rows()]
    hits = [
        w
        for w in warnings
        if "LMP-1" in w
        and any(
            isinstance(v, str) and v.startswith("Back-test: simulated cycle service") for v in w
        )
    ]
    assert len(hits) == 1
    assert any(v == "A3" for v in hits[0])  # the item's cell in Items
    summary = " ".join(str(c.value) for row in wb["Summary"].iter_rows() for c in row if c.value)
    assert "Back-test: of 2 items simulated on their own demand" in summary
    assert "reach their service target" in summary
    # the lumpy item falls below its target: the reorder point that reaches it in the
    # simulation, and its extra holding cost as a live formula over the row
    r_t = float(lumpy["simulated_target_reorder_point"])
    assert r_t > float(lumpy["reorder_point"])
    extra = float(lumpy["simulated_target_extra_holding_cost"])
    assert extra == pytest.approx(
        float(lumpy["holding_rate"])
        * float(lumpy["unit_price"])
        * (r_t - float(lumpy["reorder_point"]))
    )
    assert "reaches the target" in " ".join(str(v) for v in hits[0])
    wbf = load_workbook(tmp_path / "shop-policy.xlsx", data_only=False)["Policy"]
    xcol = header.index("Back-test: extra yearly holding cost of that reorder point") + 1
    assert str(wbf.cell(row=k, column=xcol).value).startswith("=")
    method = " ".join(
        str(c.value) for row in wb["How it works"].iter_rows() for c in row if c.value
    )
    assert "simulated 150 times" in method


def test_without_simulate_the_back_test_columns_stay_out(tmp_path):
    src = _shop(tmp_path)
    res = run("plan", src, "--no-simulate", "--csv", tmp_path / "p.csv")
    assert res.exit_code == 0, res.output
    header = [c.value for c in load_workbook(tmp_path / "shop-policy.xlsx")["Policy"][1]]
    assert not any(str(h).startswith("Back-test") for h in header)
    with open(tmp_path / "p.csv", newline="") as f:
        row = next(csv.DictReader(f))
    assert all(row[k] == "" for k in SIMULATION_RESULT_KEYS)  # the CSV keeps its columns


def test_by_default_small_catalogues_are_back_tested_and_big_ones_told(tmp_path, monkeypatch):
    """Blank 'Simulation runs': 100 runs up to AUTO_MAX_ITEMS items, a note above it."""
    import xlpolicy.backtest as backtest

    src = _shop(tmp_path)
    report = xlpolicy.analyse(src)
    assert report.settings["simulation_runs"] == backtest.DEFAULT_RUNS
    assert report.results["simulated_cycle_service"].notna().any()
    monkeypatch.setattr(backtest, "AUTO_MAX_ITEMS", 1)
    big = xlpolicy.analyse(src)
    assert "simulated_cycle_service" not in big.results.columns
    assert any(p.code == "backtest-skipped" for p in big.problems)
    forced = xlpolicy.analyse(src, simulate=True)
    assert forced.results["simulated_cycle_service"].notna().any()


def test_simulation_runs_setting_turns_it_on_and_no_simulate_off(tmp_path):
    src = _shop(tmp_path, {"Service target": "95%", "Simulation runs": 40})
    report = xlpolicy.analyse(src)
    assert report.settings["simulation_runs"] == 40
    assert report.results["simulated_cycle_service"].notna().all()
    off = xlpolicy.analyse(src, simulate=False)
    assert "simulated_cycle_service" not in off.results.columns


@pytest.mark.parametrize("value", ["lots", -5, 2.5, 1_000_000])
def test_a_bad_simulation_runs_value_is_reported_at_its_cell(tmp_path, value):
    src = _shop(tmp_path, {"Simulation runs": value})
    report = xlpolicy.analyse(src)
    bad = [p for p in report.problems if p.code == "setting-simulation_runs"]
    assert len(bad) == 1
    assert (bad[0].sheet, bad[0].cell) == ("Settings", "B2")
    assert "number" in bad[0].message  # text is reported by the reader, the rest here
    # Text is the reader's case: its default (blank: the back-test on for a small shop) is
    # used; a number out of range is the back-test's own, which then leaves it out.
    if isinstance(value, str):
        assert report.results["simulated_cycle_service"].notna().any()
    else:
        assert "simulated_cycle_service" not in report.results.columns


def test_replications_must_be_a_whole_number(tmp_path):
    src = _shop(tmp_path)
    res = CliRunner().invoke(main, ["plan", str(src), "--replications", "abc"])
    assert res.exit_code == 2
    assert "replications" in res.output


def _replay_by_hand(demand: list[float], q: float, r: float, lead: int) -> list[float]:
    """Brute force, from the rules in words: start with R + Q on hand and nothing on order;
    each period, take in what is due, sell (backordering what is short), and at the end,
    if the position is at or below R, order enough Qs to lift it above R, due `lead`
    periods later (after `lead` periods of demand). Returns the net stock per period."""
    net, due, out = r + q, {}, []
    for t, d in enumerate(demand):
        net += due.pop(t, 0.0)
        net -= d
        position = net + sum(due.values())
        if position <= r:
            k = math.floor((r - position) / q) + 1
            due[t + 1 + lead] = due.get(t + 1 + lead, 0.0) + k * q
        out.append(net)
    return out


def test_stock_trace_sheet_replays_the_history_as_by_hand(tmp_path):
    src = _shop(tmp_path)
    res = run("plan", src, "--simulate", "--replications", 30)
    assert res.exit_code == 0, res.output
    wb = load_workbook(tmp_path / "shop-policy.xlsx")
    assert wb.sheetnames[-1] == "Stock trace"
    ws = wb["Stock trace"]
    assert len(ws._charts) == 2  # one chart per item (two items here)
    rows = [[c.value for c in row] for row in ws.iter_rows()]
    heads = [k for k, row in enumerate(rows) if row[0] == "Period"]
    assert len(heads) == 2
    # printed: the second item starts a page (a break above its heading, 2 rows above
    # the table's header), so no break cuts through its chart
    assert [b.id for b in ws.row_breaks.brk] == [heads[1] - 2]
    # drawn with straight lines: the smoothing element written off in every series
    # (ECMA-376 Part 1, 21.2.2.194 smooth; a program may smooth a line without it)
    with zipfile.ZipFile(tmp_path / "shop-policy.xlsx") as z:
        charts = [n for n in z.namelist() if n.startswith("xl/charts/chart")]
        lines = [z.read(n).decode() for n in charts if b"<c:lineChart>" in z.read(n)]
    assert len(lines) == 2
    for xml in lines:
        assert xml.count('<c:smooth val="0"/>') == xml.count("<c:ser>") == 3
    report = xlpolicy.analyse(src, simulate=True, replications=30)
    res_items = report.results.set_index("item")
    hist = {"000777": None, "LMP-1": None}
    for k in heads:
        code = rows[k - 2][0]
        assert code in hist
        table = []
        for row in rows[k + 1 :]:
            if row[0] is None:
                break
            table.append(row)
        demand = [float(r[1]) for r in table]
        net = [float(r[2]) for r in table]
        q = float(res_items.at[code, "order_qty"])
        r = float(res_items.at[code, "reorder_point"])
        assert net == pytest.approx(_replay_by_hand(demand, q, r, 2))
        assert all(float(x[4]) % q == 0 for x in table)  # orders in whole order quantities


def test_lost_sales_option_reaches_the_simulation(tmp_path):
    src = _shop(tmp_path)
    back = xlpolicy.analyse(src, simulate=True, replications=30)
    lost = xlpolicy.analyse(src, simulate=True, replications=30, lost_sales=True)
    assert back.settings["simulation_unmet_demand"] == "backordered"
    assert lost.settings["simulation_unmet_demand"] == "lost"
    # lost sales never leave customers waiting, so the traced net stock stays at 0 or above
    assert all((it["net_stock"] >= 0).all() for it in lost.trace["items"])
    assert any((it["net_stock"] < 0).any() for it in back.trace["items"])
