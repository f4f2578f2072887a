"""Shelf life: Q capped at the demand expected over the usable life.

Checks against the EOQ cost formula C(Q) = D S / Q + H Q / 2 (Harris 1913; common practice)
and a brute-force search over every allowed order quantity at or below the cap.
"""

from __future__ import annotations

import numpy as np
import pytest
from builders import BASE_HEADERS, write_workbook

import xlpolicy
from xlpolicy.contract import CYCLE_SERVICE
from xlpolicy.core.policy import PolicyInputs, compute_policy


def _inp(life, pack=1.0, moq=0.0, D=5200.0, breaks=None) -> PolicyInputs:
    n = len(life)
    full = np.ones(n)
    return PolicyInputs(
        annual_demand=D * full,
        demand_per_period=D / 52 * full,
        demand_sd_per_period=20.0 * full,
        lead_time_days=7.0 * full,
        lead_time_sd_days=0 * full,
        unit_cost=4.0 * full,
        order_cost=50.0 * full,
        holding_rate=0.25 * full,
        measure=np.array([CYCLE_SERVICE] * n, dtype=object),
        service_target=0.95 * full,
        shortage_cost=np.full(n, np.nan),
        pack_size=np.asarray(pack, dtype=float) * full,
        minimum_order=np.asarray(moq, dtype=float) * full,
        days_per_period=7.0,
        shelf_life_days=np.asarray(life, dtype=float),
        break_qty=None if breaks is None else np.tile(breaks[0], (n, 1)),
        break_price=None if breaks is None else np.tile(breaks[1], (n, 1)),
    )


def _eoq_cost(q, D=5200.0, S=50.0, H=0.25 * 4.0):
    return D * S / q + H * q / 2  # common practice: the EOQ cost curve


def test_cap_binds_and_costs_what_the_eoq_formula_says():
    # EOQ = sqrt(2 * 5200 * 50 / 1) = 721.1; 100 units a week; 21 days of life -> 300 units.
    pol = compute_policy(_inp([21.0, 70.0, np.nan])).reset_index(drop=True)
    assert pol.loc[0, "shelf_life_max_qty"] == 300 and pol.loc[0, "order_qty"] == 300
    assert pol.loc[0, "shelf_life_cost"] == pytest.approx(
        _eoq_cost(300) - _eoq_cost(721), rel=1e-12
    )
    # 70 days -> 1,000 units: the cap does not bind; no life: no cap, no cost
    assert pol.loc[1, "order_qty"] == 721 and pol.loc[1, "shelf_life_cost"] == 0
    assert pol.loc[2, "order_qty"] == 721 and np.isnan(pol.loc[2, "shelf_life_cost"])
    assert np.isnan(pol.loc[2, "shelf_life_max_qty"])


def test_capped_quantity_is_the_best_allowed_below_the_cap_brute_force():
    rng = np.random.default_rng(3)
    life = rng.uniform(3, 60, 200)
    pack = rng.choice([1.0, 6.0, 24.0, 50.0], 200)
    moq = rng.choice([0.0, 0.0, 100.0], 200)
    pol = compute_policy(_inp(life, pack, moq))
    for k in range(200):
        floor_q = pack[k] * max(1, np.ceil(moq[k] / pack[k]))
        cap = np.floor(100 * life[k] / 7 / pack[k] + 1e-9) * pack[k]
        qs = np.arange(floor_q, 2000 + pack[k], pack[k])
        allowed = qs[qs <= max(cap, floor_q)]
        best = allowed[np.argmin(_eoq_cost(allowed))]
        assert pol["order_qty"].iat[k] == best, k
        assert bool(pol["flag_shelf_life_below_minimum"].iat[k]) == (cap < floor_q)


def test_cap_with_price_breaks_brute_force():
    # breaks: 3.80 from 400 units, 3.60 from 1,000; life 35 days -> 500 units at most
    breaks = (np.array([400.0, 1000.0]), np.array([3.80, 3.60]))
    pol = compute_policy(_inp([35.0], breaks=breaks)).iloc[0]
    qs = np.arange(1, 501, dtype=float)
    price = np.where(qs >= 1000, 3.60, np.where(qs >= 400, 3.80, 4.0))
    tc = 5200 * 50 / qs + 0.25 * price * qs / 2 + 5200 * price
    assert pol["order_qty"] == qs[np.argmin(tc)]
    assert pol["unit_price"] == pytest.approx(price[np.argmin(tc)])
    # the cap's cost against the uncapped choice (1,000 at 3.60), on the same total curve
    free = 5200 * 50 / 1000 + 0.25 * 3.60 * 1000 / 2 + 5200 * 3.60
    assert pol["shelf_life_cost"] == pytest.approx(tc.min() - free, rel=1e-12)


HEADERS = [*BASE_HEADERS, "Annual demand", "Demand sd", "Pack size", "Shelf life (days)"]


def test_workbook_column_warning_and_output(tmp_path):
    items = [
        ["M1", "milk", "Dairy", 1.2, 15.0, 0.3, 2.0, 3650, 3.0, 1, 5],
        ["M2", "cream", "Dairy", 2.0, 15.0, 0.3, 2.0, 365, 1.0, 24, 10],
        ["M3", "cheese", "Dairy", 5.0, 15.0, 0.3, 2.0, 365, 1.0, 1, "soon"],
    ]
    path = write_workbook(tmp_path / "w.xlsx", items, headers=HEADERS)
    out = tmp_path / "o.xlsx"
    result = xlpolicy.plan(path, out)
    r = result.report.results.set_index("item")
    # M1: 10 a day, 5 days -> 50 units
    assert r.loc["M1", "order_qty"] == 50 and r.loc["M1", "shelf_life_cost"] > 0
    # M2: 1 a day x 10 days = 10 < one pack of 24: the smallest order, with a warning
    assert r.loc["M2", "order_qty"] == 24
    warn = [p for p in result.problems if p.code == "shelf-life-below-minimum"]
    assert len(warn) == 1 and warn[0].item == "M2"
    # M3: a bad cell skips the item and names the cell (column K, row 4)
    bad = [p for p in result.problems if p.code == "shelf_life_days-not-number"]
    assert len(bad) == 1 and bad[0].cell == "K4" and r.loc["M3", "status"] == "skipped"
    assert result.report.totals["shelf_life_cost"] == pytest.approx(np.nansum(r["shelf_life_cost"]))
    import openpyxl

    head = [c.value for c in openpyxl.load_workbook(out)["Policy"][1]]
    assert "Yearly cost of the shelf-life cap" in head
