"""Hand-built Reports for the sheet tests (test helper, not a test module).

The items, costs and names are invented for these tests only. Each planned item's numbers
are made self-consistent here with the trade's formulas (Silver, Pyke & Peterson 1998,
ch. 7: ordering D S / Q,
cycle holding i c Q / 2, safety holding i c (R - mu), shortage p D / Q n, purchase D c),
so a check that the sheets reproduce them can fail if the writer gets a formula wrong.
"""

from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd

from xlpolicy import contract
from xlpolicy.problems import Problem, Severity
from xlpolicy.report import REORDER_KEYS, TOTAL_KEYS, Report

RUN = dt.date(2031, 3, 14)
NAN = float("nan")

#: Keys the lead is adding to the contract; the tests carry them whether or not it has.
NEW_KEYS = (
    "abc_class",
    "current_order_qty",
    "current_reorder_point",
    "current_safety_stock",
    "current_cycle_service",
    "current_fill_rate",
    "current_units_short_per_cycle",
    "current_annual_ordering_cost",
    "current_annual_cycle_holding_cost",
    "current_annual_safety_holding_cost",
    "current_annual_shortage_cost",
    "current_annual_total_cost",
    "annual_saving",
)
COLUMNS = list(contract.ALL_RESULT_KEYS) + [
    k for k in NEW_KEYS if k not in contract.ALL_RESULT_KEYS
]


def item(**kw: object) -> dict:
    row: dict = {k: NAN for k in COLUMNS}
    row.update(
        {
            "description": None,
            "category": None,
            "supplier": None,
            "model": None,
            "service_measure": None,
            "demand_source": None,
            "abc_class": "",
        }
    )
    row.update(kw)
    return row


def _costs(
    D: float, Q: float, R: float, mu: float, S: float, i: float, c: float, p: float, n: float
) -> dict[str, float]:
    ordering = D / Q * S
    cycle = i * c * Q / 2
    safety = i * c * (R - mu)
    shortage = 0.0 if np.isnan(p) else p * D / Q * n
    return {
        "ordering": ordering,
        "cycle": cycle,
        "safety": safety,
        "shortage": shortage,
        "total": ordering + cycle + safety + shortage,
    }


def planned(
    code: str,
    status: str,
    supplier: str,
    unit_cost: float,
    q: float,
    r: float,
    position: float,
    current: tuple[float, float, float] | None = None,
    **kw: object,
) -> dict:
    """A planned item with self-consistent invented numbers.

    ``current``: today's (Q, R, expected units short per cycle), costed the same way.
    """
    demand = kw.pop("annual_demand", 520.0)
    p = kw.pop("shortage_cost", NAN)
    short = kw.pop("expected_units_short_per_cycle", 0.4)
    lt_mean, S, i = 14.0, 18.0, 0.22
    ss = r - lt_mean
    cost = _costs(demand, q, r, lt_mean, S, i, unit_cost, p, short)
    base = dict(
        item=code,
        status=status,
        supplier=supplier,
        model="normal",
        demand_source="history",
        history_periods=52,
        annual_demand=demand,
        demand_per_period=demand / 52,
        demand_sd_per_period=3.1,
        lead_time_days=7.0,
        lead_time_demand_mean=lt_mean,
        lead_time_demand_sd=4.4,
        service_measure="cycle service",
        service_target=0.95,
        order_qty=q,
        reorder_point=r,
        safety_stock=ss,
        cycle_service=0.957,
        fill_rate=max(0.0, 1 - short / q),
        orders_per_year=demand / q,
        annual_ordering_cost=cost["ordering"],
        annual_cycle_holding_cost=cost["cycle"],
        annual_safety_holding_cost=cost["safety"],
        annual_shortage_cost=cost["shortage"],
        annual_total_cost=cost["total"],
        unit_cost=unit_cost,
        unit_price=unit_cost,
        order_cost=S,
        holding_rate=i,
        shortage_cost=p,
        pack_size=1.0,
        minimum_order=NAN,
        eoq=float(np.sqrt(2 * demand * S / (i * unit_cost))),
        expected_units_short_per_cycle=short,
        annual_purchase_cost=demand * unit_cost,
        average_inventory_value=(q / 2 + max(ss, 0.0)) * unit_cost,
        inventory_position=position,
        order_now_qty=q if position <= r else 0.0,
    )
    if current is not None:
        cq, cr, cn = current
        cur = _costs(demand, cq, cr, lt_mean, S, i, unit_cost, p, cn)
        base.update(
            current_order_qty=cq,
            current_reorder_point=cr,
            current_safety_stock=cr - lt_mean,
            current_cycle_service=0.81,
            current_fill_rate=max(0.0, 1 - cn / cq),
            current_units_short_per_cycle=cn,
            current_annual_ordering_cost=cur["ordering"],
            current_annual_cycle_holding_cost=cur["cycle"],
            current_annual_safety_holding_cost=cur["safety"],
            current_annual_shortage_cost=cur["shortage"],
            current_annual_total_cost=cur["total"],
            annual_saving=cur["total"] - cost["total"],
        )
    base.update(kw)
    return item(**base)


def results() -> pd.DataFrame:
    rows = [
        planned(
            "000123",
            "ok",
            "Harbor Supplies",
            4.5,
            120.0,
            35.0,
            30.0,
            current=(300.0, 40.0, 0.2),
            description="=SUM(A1:A3) spare filter",
            category="+fast",
            abc_class="A",
        ),
        planned(
            "A-77",
            "warning",
            "Harbor Supplies",
            2.0,
            60.0,
            20.0,
            5.0,
            description="@x hook\x07 bracket",
            category="-slow",
            abc_class="B",
        ),
        item(
            item="B-9",
            status="skipped",
            description="-old stock",
            supplier="Kestrel Trading",
            category="Gaskets",
            current_order_qty=50.0,
            current_reorder_point=10.0,
        ),
        planned(
            "C-3",
            "ok",
            "Kestrel Trading",
            12.25,
            40.0,
            18.0,
            11.0,
            annual_demand=0.1 + 0.2,
            description="Valve seat",
            category="Gaskets",
            abc_class="C",
            current_order_qty=30.0,
        ),
        planned(
            "D-10",
            "ok",
            "Kestrel Trading",
            3.0,
            80.0,
            25.0,
            90.0,
            current=(60.0, 12.0, 3.1),
            description="Gasket, large",
            category="Gaskets",
            shortage_cost=6.5,
            expected_units_short_per_cycle=0.35,
            abc_class="A",
        ),
    ]
    return pd.DataFrame(rows, columns=COLUMNS)


def reorder_of(res: pd.DataFrame) -> pd.DataFrame:
    due = res[res["order_now_qty"] > 0].copy()
    due["on_hand"] = due["inventory_position"] - 4.0
    due["on_order"] = 6.0
    due["backordered"] = 2.0
    due["order_now_value"] = due["order_now_qty"] * due["unit_cost"]
    due = due.sort_values(["supplier", "item"])
    return due.reindex(columns=list(REORDER_KEYS)).reset_index(drop=True)


def totals_of(res: pd.DataFrame, reorder: pd.DataFrame) -> dict:
    plan = res[res["status"] != "skipped"]
    t = {k: 0.0 for k in TOTAL_KEYS}
    for key, col in [
        ("annual_demand_units", "annual_demand"),
        ("annual_purchase_cost", "annual_purchase_cost"),
        ("annual_ordering_cost", "annual_ordering_cost"),
        ("annual_cycle_holding_cost", "annual_cycle_holding_cost"),
        ("annual_safety_holding_cost", "annual_safety_holding_cost"),
        ("annual_shortage_cost", "annual_shortage_cost"),
        ("annual_total_cost", "annual_total_cost"),
        ("average_inventory_value", "average_inventory_value"),
        ("orders_per_year", "orders_per_year"),
    ]:
        t[key] = float(plan[col].sum())
    t["items_planned"] = np.int64(len(plan))  # numpy type on purpose (JSON test)
    t["items_warning"] = int((res["status"] == "warning").sum())
    t["items_skipped"] = int((res["status"] == "skipped").sum())
    t["safety_stock_value"] = float((plan["safety_stock"] * plan["unit_cost"]).sum())
    t["inventory_turns"] = t["annual_purchase_cost"] / t["average_inventory_value"]
    t["items_to_reorder"] = len(reorder)
    t["reorder_value"] = float(reorder["order_now_value"].sum())
    compared = plan[plan["current_annual_total_cost"].notna()]
    t["items_compared"] = float(len(compared))
    t["current_annual_total_cost"] = float(compared["current_annual_total_cost"].sum())
    t["compared_recommended_annual_total_cost"] = float(compared["annual_total_cost"].sum())
    t["annual_saving"] = float(compared["annual_saving"].sum())
    return t


def problems() -> list[Problem]:
    return [
        Problem(Severity.INFO, "History", "", "", None, "History runs 52 weeks."),
        Problem(Severity.WARNING, "Items", "F3", "A-77", 0.5, "Lead time looks short."),
        Problem(Severity.FATAL, "Settings", "B2", "", "=HYPERLINK(1)", "Bad setting value."),
        Problem(Severity.ERROR, "Items", "E4", "B-9", "abc", "Unit cost is text: skipped."),
        Problem(Severity.WARNING, "History", "C9", "000123", -3, "Negative quantity."),
    ]


def make_report(**kw: object) -> Report:
    res = kw.pop("results", None)
    res = results() if res is None else res
    reorder = reorder_of(res) if "reorder" not in kw else kw.pop("reorder")
    settings = {
        "period": "week",
        "periods_per_year": 52.0,
        "service_measure": "cycle service",
        "service_target": 0.95,
        "holding_rate": 0.22,
        "order_cost": 18.0,
        "currency": "$",
        "days_per_period": 7.0,
        "abc_cutoffs": (0.8, 0.95),
        "sources": {
            "period": "inferred from dates",
            "periods_per_year": "default",
            "service_measure": "default",
            "service_target": "Settings",
            "holding_rate": "Settings",
            "order_cost": "Settings",
            "currency": "Settings",
            "days_per_period": "default",
        },
    }
    args = dict(
        results=res,
        reorder=reorder,
        problems=problems(),
        settings=settings,
        totals=totals_of(res, reorder) if len(res) else {k: 0 for k in TOTAL_KEYS},
        input_summary={
            "file": "harbor-stock.xlsx",
            "items_read": 5,
            "items_planned": 4,
            "items_skipped": 1,
            "history_layout": "long",
            "periods": 52,
            "first_period": dt.date(2030, 1, 7),
            "last_period": dt.date(2030, 12, 30),
        },
        source_name="harbor-stock.xlsx",
        run_date=RUN,
    )
    args.update(kw)
    return Report(**args)  # type: ignore[arg-type]


def header(ws) -> list:
    return [c.value for c in ws[1]]


def row_of(ws, code: str, first: int = 2, col: int = 1) -> int:
    for r in range(first, ws.max_row + 1):
        if ws.cell(row=r, column=col).value == code:
            return r
    raise AssertionError(f"{code} not found")


def label_rows(ws, after: str | None = None) -> dict:
    """Column-A labels of a sheet -> row (first occurrence after the ``after`` label)."""
    out: dict = {}
    seen = after is None
    for r in range(1, ws.max_row + 1):
        v = ws.cell(row=r, column=1).value
        if v == after:
            seen = True
            continue
        if seen and v is not None and v not in out:
            out[v] = r
    return out
