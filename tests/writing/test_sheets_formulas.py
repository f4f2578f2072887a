"""The Policy sheet's live formulas: cached results, re-evaluation, fallbacks, functions.

References: the cost formulas are the trade's (common practice; Harris 1913 / Wilson 1934 for
the EOQ; Silver, Pyke & Peterson 1998 for the (Q, R) costs and the fill rate
1 - n(R)/Q). xlsxwriter stores a formula's cached result in the cell's <v> element, which
openpyxl returns with data_only=True (openpyxl docs, "Simple usage"; from memory). The
formulas are re-evaluated by the small evaluator in sheet_eval.py, independent of the
writer, from the cells they name.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import openpyxl
import pytest
from builders import BASE_HEADERS, item_row, weekly_history, write_workbook
from sheet_eval import Evaluator, workbook_getter
from sheet_reports import header, make_report, row_of

import xlpolicy
from xlpolicy.writing.policy_sheet import FORMULAS, POLICY_COLUMNS
from xlpolicy.writing.sheets import write_generated_workbook

TITLE_TO_KEY = {c.title: c.key for c in POLICY_COLUMNS}
#: The formulas of a run without the back-test (its one formula needs its columns).
PLAN_FORMULAS = set(FORMULAS) - {"simulated_target_extra_holding_cost"}


def _write(tmp_path: Path, report, name: str = "out.xlsx"):
    path = tmp_path / name
    write_generated_workbook(path, report)
    return openpyxl.load_workbook(path), openpyxl.load_workbook(path, data_only=True)


def _policy_formulas(wb, values, report):
    """Every formula cell of Policy: (item, key, formula, cached, evaluated, reported)."""
    ws, wv = wb["Policy"], values["Policy"]
    keys = [TITLE_TO_KEY.get(t) for t in header(ws)]
    evaluate = Evaluator(workbook_getter(values), "Policy")
    res = report.results.reset_index(drop=True)
    out = []
    for r in range(2, ws.max_row + 1):
        for c, key in enumerate(keys, start=1):
            cell = ws.cell(row=r, column=c)
            if cell.data_type != "f":
                continue
            out.append(
                (
                    ws.cell(row=r, column=1).value,
                    key,
                    cell.value,
                    wv.cell(row=r, column=c).value,
                    evaluate(cell.value),
                    float(res.loc[r - 2, key]),
                )
            )
    return out


def test_every_policy_formula_caches_and_rebuilds_the_reports_number(tmp_path):
    report = make_report()
    wb, values = _write(tmp_path, report)
    found = _policy_formulas(wb, values, report)
    for item, key, formula, cached, evaluated, reported in found:
        assert cached == reported, (item, key)  # the cached result is the tool's number
        assert evaluated == pytest.approx(reported, rel=1e-9, abs=1e-12), (item, key, formula)
    # 4 planned items x 11 formula columns; the skipped item has none
    assert len(found) == 4 * len(PLAN_FORMULAS)
    assert {f[1] for f in found} == PLAN_FORMULAS
    assert "B-9" not in {f[0] for f in found}


def test_policy_formulas_recomputed_per_column(tmp_path):
    # The same numbers straight from the row's visible inputs (read back), column by column.
    report = make_report()
    wb, values = _write(tmp_path, report)
    wv = values["Policy"]
    cols = {TITLE_TO_KEY.get(t): k + 1 for k, t in enumerate(header(wb["Policy"]))}
    for code in ("000123", "A-77", "C-3", "D-10"):
        r = row_of(wv, code)
        v = {k: wv.cell(row=r, column=c).value for k, c in cols.items() if k}
        D, Q, R, mu = (
            v["annual_demand"],
            v["order_qty"],
            v["reorder_point"],
            v["lead_time_demand_mean"],
        )
        S, i, c, p, n = (
            v["order_cost"],
            v["holding_rate"],
            v["unit_cost"],
            v["shortage_cost"],
            v["expected_units_short_per_cycle"],
        )
        short = 0.0 if p is None else p * D / Q * n
        expect = {
            "safety_stock": R - mu,
            "orders_per_year": D / Q,
            "annual_ordering_cost": D * S / Q,
            "annual_cycle_holding_cost": i * c * Q / 2,
            "annual_safety_holding_cost": i * c * (R - mu),
            "annual_shortage_cost": short,
            "annual_total_cost": D * S / Q + i * c * Q / 2 + i * c * (R - mu) + short,
            "annual_purchase_cost": D * c,
            "average_inventory_value": c * (Q / 2 + max(R - mu, 0)),
            "fill_rate": max(0.0, 1 - n / Q),
            "eoq": math.sqrt(2 * D * S / (i * c)),
        }
        for key, value in expect.items():
            assert v[key] == pytest.approx(value, rel=1e-9, abs=1e-12), (code, key)
    # the one item with a shortage cost pays for its expected shortages
    assert wv.cell(row=row_of(wv, "D-10"), column=cols["annual_shortage_cost"]).value > 0


def test_a_number_no_formula_reproduces_is_written_as_a_value(tmp_path):
    report = make_report()
    res = report.results
    res.loc[0, "annual_ordering_cost"] += 0.5  # no longer D / Q x S
    wb, values = _write(tmp_path, report)
    ws = wb["Policy"]
    cols = {TITLE_TO_KEY.get(t): k + 1 for k, t in enumerate(header(ws))}
    r = row_of(ws, "000123")
    ordering = ws.cell(row=r, column=cols["annual_ordering_cost"])
    total = ws.cell(row=r, column=cols["annual_total_cost"])
    # ordering is now a plain value; the total still adds the four displayed cells and so
    # no longer equals the report's total either: both fall back, nothing else does
    assert ordering.data_type == "n" and ordering.value == res.loc[0, "annual_ordering_cost"]
    assert total.data_type == "n"
    fallbacks = [k for k in PLAN_FORMULAS if ws.cell(row=r, column=cols[k]).data_type != "f"]
    assert sorted(fallbacks) == ["annual_ordering_cost", "annual_total_cost"]
    found = _policy_formulas(wb, values, report)
    assert len(found) == 4 * len(PLAN_FORMULAS) - 2


def test_blank_shortage_cost_counts_as_none(tmp_path):
    # IF(p="",0,...) with p an empty cell gives 0 (OpenFormula: an empty cell equals "").
    report = make_report()
    wb, values = _write(tmp_path, report)
    ws = wb["Policy"]
    cols = {TITLE_TO_KEY.get(t): k + 1 for k, t in enumerate(header(ws))}
    r = row_of(ws, "000123")
    assert ws.cell(row=r, column=cols["shortage_cost"]).value is None
    f = ws.cell(row=r, column=cols["annual_shortage_cost"]).value
    assert f.startswith("=IF(") and '=""' in f
    assert Evaluator(workbook_getter(values), "Policy")(f) == 0.0


def test_header_notes_say_which_columns_are_values(tmp_path):
    wb, _ = _write(tmp_path, make_report())
    ws = wb["Policy"]
    titles = header(ws)
    for key in ("reorder_point", "cycle_service", "expected_units_short_per_cycle", "order_qty"):
        c = titles.index(next(col.title for col in POLICY_COLUMNS if col.key == key)) + 1
        assert "not a formula" in ws.cell(row=1, column=c).comment.text
    c = titles.index("Annual ordering cost") + 1
    assert "formula" in ws.cell(row=1, column=c).comment.text


def test_real_core_numbers_are_reproduced_by_the_formulas(tmp_path):
    # Numbers from the real planner (not hand-made): every planned item's formulas must
    # rebuild the core's numbers, with no fallback, including a shortage-cost item.
    headers = BASE_HEADERS + ["Shortage cost", "Pack size", "Category"]
    rows = [
        item_row("P1", cost=4.0, order=30, rate=0.25, lead=14) + [None, 12, "Filters"],
        item_row("P2", cost=12.5, order=22, rate=0.2, lead=7) + [3.5, None, "Filters"],
        item_row("P3", cost=2.0, order=15, rate=0.3, lead=21) + [None, None, "Seals"],
        item_row("P4", cost=7.0, order=40, rate=0.25, lead=10) + [1.0, 5, "Seals"],
    ]
    hist = weekly_history(["P1", "P2", "P3"], weeks=60, mean=25, seed=5)
    hist["P4"] = [float(x) for x in np.random.default_rng(3).poisson(1.2, 60)]  # slow mover
    src = write_workbook(tmp_path / "shop.xlsx", rows, headers=headers, history=hist)
    report = xlpolicy.analyse(src)
    wb, values = _write(tmp_path, report)
    found = _policy_formulas(wb, values, report)
    planned = int((report.results["status"] != "skipped").sum())
    assert planned == 4
    res = report.results
    ok = (res["status"] != "skipped").to_numpy()
    want = sum(
        int(np.isfinite(res[k].to_numpy(float)[ok]).sum()) for k in FORMULAS if k in res.columns
    )
    assert want >= planned * len(PLAN_FORMULAS)
    assert len(found) == want  # no fallback at all
    for item, key, formula, cached, evaluated, reported in found:
        assert cached == reported, (item, key)
        assert evaluated == pytest.approx(reported, rel=1e-9, abs=1e-9), (item, key, formula)


def test_periodic_review_rows_are_live_formulas_too(tmp_path):
    # Periodic review (T, S): safety stock = S - mean demand over T + L, its holding cost
    # H (S - mean), stock value c (Q/2 + safety stock) with Q the average order d T (Silver,
    # Pyke & Peterson 1998, ch. 7). Those rows get their own formulas, rebuilt and compared
    # like the others, so no periodic number that an input drives is left a value.
    headers = BASE_HEADERS + ["Shortage cost", "Review period days"]
    rows = [
        item_row("T1", cost=4.0, order=30, rate=0.25, lead=14) + [None, 14],
        item_row("T2", cost=12.5, order=22, rate=0.2, lead=7) + [3.5, 7],
        item_row("C3", cost=2.0, order=15, rate=0.3, lead=21) + [None, 0],
    ]
    hist = weekly_history(["T1", "T2", "C3"], weeks=60, mean=25, seed=5)
    src = write_workbook(tmp_path / "shop.xlsx", rows, headers=headers, history=hist)
    report = xlpolicy.analyse(src, simulate=False)
    assert list(report.results["review"]) == ["periodic", "periodic", "continuous"]
    wb, values = _write(tmp_path, report)
    found = _policy_formulas(wb, values, report)
    by_item: dict[str, set[str]] = {}
    for item, key, formula, cached, evaluated, reported in found:
        assert cached == reported, (item, key)
        assert evaluated == pytest.approx(reported, rel=1e-9, abs=1e-9), (item, key, formula)
        by_item.setdefault(item, set()).add(key)
    res = report.results.set_index("item")
    for item in ("T1", "T2", "C3"):
        # every formula column the row has a number in (periodic rows have no EOQ)
        want = {k for k in PLAN_FORMULAS if np.isfinite(float(res.at[item, k]))}
        assert "safety_stock" in want and "average_inventory_value" in want
        assert by_item[item] == want, (item, want - by_item[item])
    ws = wb["Policy"]
    col = header(ws).index("Safety stock (units)") + 1
    up_to = header(ws).index("Order-up-to level (units)") + 1
    letter = openpyxl.utils.get_column_letter(up_to)
    assert ws.cell(row=2, column=col).value.startswith(f"={letter}2-")
