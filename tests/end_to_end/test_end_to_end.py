"""End to end: the command line on real workbooks, the output read back with openpyxl.

The numbers are checked against an independent computation in the test itself (numpy for
the demand statistics, scipy.stats.norm for the quantiles, the EOQ formula of Harris 1913 /
Wilson 1934), not against values recorded from an earlier run.
"""

from __future__ import annotations

import csv
import hashlib
import json
import math
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from builders import BASE_HEADERS, item_row, weekly_history, write_workbook
from click.testing import CliRunner
from openpyxl import load_workbook
from repo_paths import REPO
from scipy.stats import norm

import xlpolicy
from xlpolicy.cli import main
from xlpolicy.contract import RESULT_KEYS, TEXT_RESULT_KEYS

GENERATED = [
    "Summary",
    "Reorder now",
    "Policy",
    "Today vs plan",
    "Warnings",
    "How it works",
    "Stock trace",
]  # the last: the back-test's, on by default for small catalogues


def run(*args: str):
    return CliRunner().invoke(main, [str(a) for a in args], catch_exceptions=False)


def digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def shop(tmp_path: Path, layout: str = "long", **kw) -> Path:
    headers = BASE_HEADERS + ["On hand", "Pack size"]
    rows = [
        item_row("000123", cost=4.0, order=30, rate=0.25, lead=14) + [5, 12],
        item_row("B-7", cost=12.5, order=30, rate=0.25, lead=7) + [500, None],
        item_row("C-9", cost=2.0, order=15, rate=0.3, lead=21) + [None, None],
    ]
    hist = weekly_history(["000123", "B-7", "C-9"], weeks=78, mean=25, seed=11)
    return write_workbook(
        tmp_path / "shop.xlsx",
        rows,
        headers=headers,
        history=hist,
        layout=layout,
        title_rows=["Corner store stock list", ""],
        history_title_rows=["Weekly sales"],
        settings={"Service target": "95%"},
        **kw,
    )


@pytest.mark.parametrize("layout", ["long", "wide"])
def test_plan_writes_policy_workbook_and_leaves_input_alone(tmp_path, layout):
    src = shop(tmp_path, layout)
    before = digest(src)
    res = run("plan", src, "--csv", tmp_path / "p.csv", "--json", tmp_path / "p.json")
    assert res.exit_code == 0, res.output
    assert digest(src) == before  # the user's workbook is never modified
    out = tmp_path / "shop-policy.xlsx"
    assert f"Wrote {out}" in res.output

    wb = load_workbook(out)
    assert wb.sheetnames == ["Items", "History", "Settings", *GENERATED]
    # the user's sheets are carried over with their values
    assert wb["Items"]["A1"].value == "Corner store stock list"
    assert wb["Items"]["A4"].value == "000123"

    # the per-item CSV carries the contract keys, in order, one row per item
    with open(tmp_path / "p.csv", newline="") as f:
        rows = list(csv.DictReader(f))
    assert list(rows[0].keys())[: len(RESULT_KEYS)] == list(RESULT_KEYS)
    assert [r["item"] for r in rows] == ["000123", "B-7", "C-9"]

    # independent computation of the first item's policy from the same history
    hist = np.array(weekly_history(["000123", "B-7", "C-9"], weeks=78, mean=25, seed=11)["000123"])
    d, s = hist.mean(), hist.std(ddof=1)  # sample sd (contract)
    r = {
        k: float(v) if v not in ("", None) and k not in TEXT_RESULT_KEYS else v
        for k, v in rows[0].items()
    }
    assert r["demand_per_period"] == pytest.approx(d)
    assert r["demand_sd_per_period"] == pytest.approx(s)
    D = d * 52
    assert r["annual_demand"] == pytest.approx(D)
    L = 14 / 7
    mu, sigma = d * L, s * math.sqrt(L)  # Silver, Pyke & Peterson 1998 ch. 7
    assert r["lead_time_demand_mean"] == pytest.approx(mu)
    assert r["lead_time_demand_sd"] == pytest.approx(sigma)
    eoq = math.sqrt(2 * D * 30 / (0.25 * 4.0))  # Harris 1913 / Wilson 1934
    q = r["order_qty"]
    assert q % 12 == 0 and abs(q - eoq) <= 12  # pack of 12, the nearer-cost pack multiple
    # cycle service 95 %: the smallest whole R with Phi((R - mu)/sigma) >= 0.95 (scipy.stats)
    rop = r["reorder_point"]
    assert rop == math.ceil(norm.ppf(0.95, mu, sigma))
    assert norm.cdf(rop, mu, sigma) >= 0.95 > norm.cdf(rop - 1, mu, sigma)
    assert r["safety_stock"] == pytest.approx(rop - mu)
    assert r["cycle_service"] == pytest.approx(norm.cdf(rop, mu, sigma))
    total = (
        r["annual_ordering_cost"]
        + r["annual_cycle_holding_cost"]
        + r["annual_safety_holding_cost"]
        + r["annual_shortage_cost"]
    )
    assert r["annual_total_cost"] == pytest.approx(total)

    # the Policy sheet shows the same numbers as the CSV
    ws = wb["Policy"]
    header = [c.value for c in ws[1]]
    qcol = next(i for i, h in enumerate(header) if h and h.startswith("Order quantity"))
    assert ws.cell(row=2, column=qcol + 1).value == q

    # item 000123 has 5 on hand, below its reorder point: it is on the reorder list
    reorder = [[c.value for c in row] for row in wb["Reorder now"].iter_rows()]
    assert any("000123" in row for row in reorder)
    assert not any("B-7" in row for row in reorder)  # 500 on hand is plenty

    data = json.loads((tmp_path / "p.json").read_text())
    assert [i["item"] for i in data["items"]] == ["000123", "B-7", "C-9"]
    assert data["items"][0]["order_qty"] == q


def test_rerun_replaces_generated_sheets(tmp_path):
    src = shop(tmp_path)
    assert run("plan", src).exit_code == 0
    out = tmp_path / "shop-policy.xlsx"
    # planning the output again (it holds the generated sheets) does not stack copies
    res = run("plan", out, "-o", tmp_path / "again.xlsx")
    assert res.exit_code == 0, res.output
    assert load_workbook(tmp_path / "again.xlsx").sheetnames == [
        "Items",
        "History",
        "Settings",
        *GENERATED,
    ]
    # and re-running onto the same output replaces it
    assert run("plan", src).exit_code == 0
    assert load_workbook(out).sheetnames.count("Policy") == 1


def test_user_sheet_named_like_ours_is_kept(tmp_path):
    src = shop(tmp_path)
    wb = load_workbook(src)
    wb.create_sheet("Summary")["A1"] = "my own notes"
    wb.save(src)
    assert run("plan", src).exit_code == 0
    out = load_workbook(tmp_path / "shop-policy.xlsx")
    assert out["Summary"]["A1"].value == "my own notes"
    assert "Summary (2)" in out.sheetnames


def test_output_over_input_is_refused(tmp_path):
    src = shop(tmp_path)
    before = digest(src)
    res = run("plan", src, "-o", src)
    assert res.exit_code == 2 and "never writes over" in res.output
    assert digest(src) == before


def test_unusable_workbook_exits_1_without_traceback(tmp_path):
    bad = tmp_path / "notes.xlsx"
    bad.write_text("this is not a workbook")
    res = run("plan", bad)
    assert res.exit_code == 1
    assert "Traceback" not in res.output and "notes.xlsx" in res.output
    assert not (tmp_path / "notes-policy.xlsx").exists()


def test_bad_cells_are_reported_and_the_run_goes_on(tmp_path):
    rows = [item_row("A"), item_row("B", cost="n/a"), item_row("C", lead=-3)]
    src = write_workbook(tmp_path / "w.xlsx", rows, history=weekly_history(["A", "B", "C"]))
    res = run("plan", src)
    assert res.exit_code == 0
    assert "Items!D3 [B]" in res.output and "Items!G4 [C]" in res.output
    wb = load_workbook(tmp_path / "w-policy.xlsx")
    warnings = [[c.value for c in r] for r in wb["Warnings"].iter_rows(values_only=False)]
    cells = {row[2] for row in warnings[1:]}
    assert {"D3", "G4"} <= cells
    policy = {r[0].value: r for r in wb["Policy"].iter_rows(min_row=2)}
    header = [c.value for c in wb["Policy"][1]]
    status_col = header.index("Status")
    assert policy["A"][status_col].value == "ok"
    assert policy["B"][status_col].value == "skipped"


def test_check_reports_and_writes_nothing(tmp_path):
    rows = [item_row("A"), item_row("B", cost="n/a")]
    src = write_workbook(tmp_path / "w.xlsx", rows, history=weekly_history(["A", "B"]))
    before = sorted(p.name for p in tmp_path.iterdir())
    res = run("check", src)
    assert res.exit_code == 0
    assert "Items!D3" in res.output and "'n/a'" in res.output
    assert sorted(p.name for p in tmp_path.iterdir()) == before


def test_template_command_writes_a_workbook_that_plans(tmp_path):
    t = tmp_path / "t.xlsx"
    res = run("template", t)
    assert res.exit_code == 0 and t.exists()
    assert run("template", t).exit_code == 2  # exists: needs --force
    # the template, filled with its example rows, plans without error
    result = xlpolicy.plan(t)
    assert result.report.input_summary["items_skipped"] == 0
    assert not [p for p in result.problems if p.severity.value in ("fatal", "error")]
    # ... and says that the example rows are still there, by cell
    examples = [p for p in result.problems if p.code == "template-example-row"]
    assert [p.cell for p in examples] == ["B2", "B3", "B4"]


def test_usage_errors_exit_2(tmp_path):
    src = shop(tmp_path)
    assert run("plan", src, "--target", "1.5").exit_code == 2
    assert run("plan", src, "--measure", "best").exit_code == 2
    assert run("plan", src, "-o", tmp_path / "out.txt").exit_code == 2


def test_measure_override_changes_the_policy(tmp_path):
    headers = BASE_HEADERS + ["Shortage cost"]
    rows = [item_row(c) + [40] for c in ("A", "B")]
    src = write_workbook(
        tmp_path / "w.xlsx", rows, headers=headers, history=weekly_history(["A", "B"])
    )
    for measure in ("cycle service", "fill rate", "shortage cost"):
        res = run("plan", src, "--measure", measure, "--json", tmp_path / "p.json")
        assert res.exit_code == 0, res.output
        items = json.loads((tmp_path / "p.json").read_text())["items"]
        assert {i["service_measure"] for i in items} == {measure}
        assert all(i["reorder_point"] is not None for i in items)


def test_python_module_entry_point_runs_the_demo(tmp_path):
    demo = tmp_path / "demo.xlsx"
    demo.write_bytes((REPO / "examples" / "demo-shop.xlsx").read_bytes())
    proc = subprocess.run(
        [sys.executable, "-m", "xlpolicy", "plan", str(demo), "-q"],
        capture_output=True,
        text=True,
    )
    assert proc.returncode == 0, proc.stderr
    out = tmp_path / "demo-policy.xlsx"
    assert proc.stdout.strip() == str(out)
    wb = load_workbook(out, read_only=True)
    # the demo has seasonal items, so their Year ahead sheet comes before the trace
    assert wb.sheetnames[-8:] == [*GENERATED[:-1], "Year ahead", "Stock trace"]


def test_macro_workbook_keeps_its_macros(tmp_path):
    # An .xlsm written by xlsxwriter with a (dummy) VBA part: the output is an .xlsm whose
    # vbaProject.bin is byte for byte the input's (macros are never dropped or run).
    import zipfile

    import xlsxwriter

    vba = tmp_path / "vbaProject.bin"
    vba.write_bytes(b"\xd0\xcf\x11\xe0" + bytes(range(256)) * 4)
    src = tmp_path / "m.xlsm"
    wb = xlsxwriter.Workbook(str(src))
    ws = wb.add_worksheet("Items")
    ws.write_row(0, 0, BASE_HEADERS)
    ws.write_row(1, 0, item_row("A"))
    hs = wb.add_worksheet("History")
    hs.write_row(0, 0, ["Item", "Period", "Quantity"])
    for k, q in enumerate(weekly_history(["A"], weeks=30)["A"]):
        hs.write_row(k + 1, 0, ["A", k + 1, q])
    wb.add_vba_project(str(vba))
    wb.close()
    before = digest(src)
    res = run("plan", src)
    assert res.exit_code == 0, res.output
    out = tmp_path / "m-policy.xlsm"
    with zipfile.ZipFile(src) as a, zipfile.ZipFile(out) as b:
        assert b.read("xl/vbaProject.bin") == a.read("xl/vbaProject.bin")
        assert b"macroEnabled" in b.read("[Content_Types].xml")
    assert digest(src) == before
    assert run("plan", src, "-o", tmp_path / "m.xlsx").exit_code == 2  # would drop macros


def test_standalone_output_when_the_package_cannot_take_new_sheets(tmp_path):
    # The fallback path: if the user's file cannot be extended part by part, the generated
    # sheets go to a workbook of their own and the first warning says why.
    from xlpolicy.api import write_policy_workbook

    report = xlpolicy.analyse(shop(tmp_path))
    odd = tmp_path / "odd.xlsx"
    odd.write_bytes(b"not a zip package")
    out, standalone, sheets = write_policy_workbook(odd, tmp_path / "odd-policy.xlsx", report)
    assert standalone and sheets == GENERATED
    assert load_workbook(out).sheetnames == GENERATED
    assert report.problems[0].code == "output-standalone"
    assert "workbook of their own" in report.problems[0].message


def test_demo_command_runs_end_to_end_with_its_planted_mistakes(tmp_path):
    # examples/README.md lists the deliberate mistakes and what the tool must say of each
    res = run("demo", tmp_path / "d")
    assert res.exit_code == 0, res.output
    assert (tmp_path / "d" / "demo-shop-policy.xlsx").exists()
    for where in (
        "Items!E22 [BR-130]",
        "Items!A15 [000421]",
        "Items!J25 [DT-203]",
        "Items!H43 [AC-231]",
        "History!A9838 [000422]",
    ):
        assert where in res.output
    problems = {
        (p.sheet, p.cell, p.code) for p in xlpolicy.check(tmp_path / "d" / "demo-shop.xlsx")
    }
    assert {
        ("Items", "E22", "unit_cost-not-number"),
        ("Items", "A15", "item-duplicate"),
        ("Items", "J25", "service_target-out-of-range"),
        ("Items", "H43", "lead_time_days-out-of-range"),
        ("History", "A9838", "history-unknown-item"),
    } <= problems
