"""The purchaser's reorder list and the owner's today-against-recommended comparison.

Rules checked (common practice for continuous review): order when the
inventory position (on hand + on order - backordered) is at or below the reorder point,
a whole number of order quantities that lifts the position above it. Today's policy is
costed with the same formulas as the recommended one (checked here against scipy.stats
for the normal model).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from builders import BASE_HEADERS, item_row, weekly_history, write_workbook
from scipy import stats

import xlpolicy

CODES = [f"I{k}" for k in range(12)]


@pytest.fixture(scope="module")
def report(tmp_path_factory):
    rng = np.random.default_rng(8)
    headers = BASE_HEADERS + [
        "On hand",
        "On order",
        "Backordered",
        "Current order qty",
        "Current reorder point",
    ]
    rows = []
    for k, code in enumerate(CODES):
        on_hand = int(rng.integers(0, 120))
        on_order = int(rng.choice([0, 0, 50]))
        back = int(rng.choice([0, 0, 0, 5]))
        current = [int(rng.integers(40, 300)), int(rng.integers(20, 90))] if k % 3 else [None, None]
        rows.append(item_row(code, lead=14) + [on_hand, on_order, back, *current])
    hist = weekly_history(CODES, weeks=70, mean=25, seed=9)
    path = write_workbook(
        tmp_path_factory.mktemp("r") / "w.xlsx", rows, headers=headers, history=hist
    )
    return xlpolicy.analyse(path)


def test_reorder_list_holds_exactly_the_items_at_or_below_their_reorder_point(report):
    r = report.results.set_index("item")
    position = r["inventory_position"]
    due = set(r.index[position <= r["reorder_point"]])
    assert set(report.reorder["item"]) == due
    assert 0 < len(due) < len(CODES)  # the data give both cases
    for _, row in report.reorder.iterrows():
        q, rop, pos, qty = (
            row["order_qty"],
            row["reorder_point"],
            row["inventory_position"],
            row["order_now_qty"],
        )
        assert row["inventory_position"] == row["on_hand"] + row["on_order"] - row["backordered"]
        k = qty / q
        assert k == int(k) and k >= 1  # a whole number of order quantities
        assert pos + qty > rop >= pos + qty - q  # the fewest that lift it above R
        assert row["order_now_value"] == pytest.approx(qty * row["unit_cost"])


def test_saving_is_current_minus_recommended_item_by_item(report):
    r = report.results
    have = r["current_order_qty"].notna() & r["current_reorder_point"].notna()
    assert have.sum() == 8
    np.testing.assert_allclose(
        r.loc[have, "annual_saving"],
        r.loc[have, "current_annual_total_cost"] - r.loc[have, "annual_total_cost"],
        rtol=1e-12,
    )
    assert r.loc[~have, "annual_saving"].isna().all()
    t = report.totals
    assert t["items_compared"] == 8
    assert t["annual_saving"] == pytest.approx(
        t["current_annual_total_cost"] - t["compared_recommended_annual_total_cost"]
    )


def test_current_policy_costed_like_the_recommended_one(report):
    r = report.results
    row = r[r["current_order_qty"].notna() & (r["model"] == "normal")].iloc[0]
    q, rop = row["current_order_qty"], row["current_reorder_point"]
    mu, sd = row["lead_time_demand_mean"], row["lead_time_demand_sd"]
    D, S, H = row["annual_demand"], row["order_cost"], row["holding_rate"] * row["unit_cost"]
    z = (rop - mu) / sd
    assert row["current_cycle_service"] == pytest.approx(stats.norm.cdf(z))
    short = sd * (stats.norm.pdf(z) - z * stats.norm.sf(z))  # normal loss function
    assert row["current_fill_rate"] == pytest.approx(1 - short / q)
    expected = D * S / q + H * q / 2 + H * (rop - mu)  # no shortage cost given
    assert row["current_annual_total_cost"] == pytest.approx(expected)
    assert math.isclose(row["annual_saving"], expected - row["annual_total_cost"], rel_tol=1e-9)


def test_abc_classes_cover_planned_items(report):
    r = report.results
    assert set(r["abc_class"]) <= {"A", "B", "C"}
    spend = r.groupby("abc_class")["annual_purchase_cost"].sum() / r["annual_purchase_cost"].sum()
    assert spend["A"] >= 0.8  # the first 80 % of spend, crossing item included
