"""All-units quantity discounts: the core, against textbook examples and
an independent brute-force search over every allowed order quantity.

Method: Nahmias, Production and Operations Analysis (ch. 4, all-units discounts) and Chopra
& Meindl, Supply Chain Management (ch. 11, quantity discounts): the EOQ at each price, moved
up to the price's break when it lies below it, then the lowest total annual cost
D S / Q + i c Q / 2 + D c.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from xlpolicy.contract import FILL_RATE
from xlpolicy.core.discounts import all_units_order_qty, price_at
from xlpolicy.core.policy import PolicyInputs, compute_policy


def test_nahmias_trash_bags_from_memory():
    # Nahmias, Production and Operations Analysis, ch. 4, the all-units example (data from
    # memory): 600 bags a year, order cost 8, holding rate 20 %, 0.30 each below 500, 0.29
    # from 500, 0.28 from 1,000. By hand: EOQ at 0.30 = sqrt(2*600*8/0.06) = 400
    # (feasible), TC = 180 + 12 + 12 = 204; at 0.29 the EOQ (406.8) is below 500, so Q = 500,
    # TC = 174 + 9.6 + 14.5 = 198.1; at 0.28 the EOQ (414) is below 1,000, so Q = 1,000,
    # TC = 168 + 4.8 + 28 = 200.8. Best: 500 at 0.29.
    r = all_units_order_qty([600], [8], [0.2], [0.30], [[500, 1000]], [[0.29, 0.28]], [1], [0])
    assert r.order_qty[0] == 500
    assert r.unit_price[0] == pytest.approx(0.29)
    assert r.break_qty[0] == 500
    assert r.total_cost[0] == pytest.approx(198.1, abs=1e-9)
    assert r.plain_qty[0] == 400 and r.plain_cost[0] == pytest.approx(204.0, abs=1e-9)
    assert r.saving[0] == pytest.approx(5.9, abs=1e-9)


def test_chopra_meindl_vitamins_from_memory():
    # Chopra & Meindl, Supply Chain Management, ch. 11, the all-unit discount example (data
    # from memory): 10,000 bottles a month (120,000 a year), order cost 100, holding rate
    # 20 %, price 3.00 below 5,000, 2.96 from 5,000, 2.92 from 10,000. By hand: at 2.92 the
    # EOQ (6,411) is below 10,000, so Q = 10,000: TC = 1,200 + 2,920 + 350,400 = 354,520; at
    # 2.96 the EOQ 6,367 is feasible: TC = 358,969.4. Best: 10,000 at 2.92.
    r = all_units_order_qty(
        [120_000], [100], [0.2], [3.0], [[5000, 10_000]], [[2.96, 2.92]], [1], [0]
    )
    assert r.order_qty[0] == 10_000 and r.unit_price[0] == pytest.approx(2.92)
    assert r.total_cost[0] == pytest.approx(354_520.0, rel=1e-12)
    # the plain EOQ at 3.00 (6,325 after rounding) lands in the 2.96 range and pays 2.96
    assert r.plain_qty[0] == 6325
    assert r.plain_cost[0] == pytest.approx(
        120_000 * 100 / 6325 + 0.2 * 2.96 * 6325 / 2 + 120_000 * 2.96, rel=1e-12
    )


def _brute(D, S, i, c0, bq, bp, pack, moq, q_max):
    """Every allowed Q (whole packs, at least one pack and the minimum) up to q_max."""
    floor_q = pack * max(1, int(np.ceil(moq / pack)))
    qs = np.arange(floor_q, q_max + 1, pack, dtype=float)
    prices = np.full(qs.shape, c0)
    for q, p in sorted(zip(bq, bp, strict=True)):
        prices = np.where(qs >= q, p, prices)
    tc = D * S / qs + i * prices * qs / 2 + D * prices
    k = int(np.argmin(tc))
    return qs[k], prices[k], tc[k]


def test_brute_force_over_every_allowed_quantity():
    rng = np.random.default_rng(20261202)
    n, k = 300, 4
    D = rng.uniform(20, 5000, n)
    S = rng.uniform(1, 200, n)
    i = rng.uniform(0.1, 0.4, n)
    c0 = rng.uniform(1, 80, n)
    bq = np.sort(rng.integers(5, 3000, (n, k)).astype(float), axis=1)
    bp = c0[:, None] * np.cumprod(rng.uniform(0.9, 1.0, (n, k)), axis=1)
    drop = rng.random((n, k)) < 0.3  # items with fewer breaks (NaN padding)
    bq[drop], bp[drop] = np.nan, np.nan
    pack = rng.choice([1, 1, 5, 12, 24], n).astype(float)
    moq = rng.choice([0, 0, 10, 50, 100], n).astype(float)
    r = all_units_order_qty(D, S, i, c0, bq, bp, pack, moq)
    for j in range(n):
        keep = np.isfinite(bq[j])
        q_max = int(
            max(
                np.nanmax(bq[j], initial=0),
                np.sqrt(
                    2 * D[j] * S[j] / (i[j] * bp[j][keep].min() if keep.any() else i[j] * c0[j])
                ),
                moq[j],
            )
            * 3
            + 10 * pack[j]
        )
        q, p, tc = _brute(D[j], S[j], i[j], c0[j], bq[j][keep], bp[j][keep], pack[j], moq[j], q_max)
        assert r.total_cost[j] == pytest.approx(tc, rel=1e-12), j
        assert r.unit_price[j] == pytest.approx(
            price_at([r.order_qty[j]], [c0[j]], bq[j : j + 1], bp[j : j + 1])[0]
        )
        assert r.order_qty[j] % pack[j] == 0 and r.order_qty[j] >= moq[j]
        assert r.saving[j] >= 0


def test_price_at_all_units():
    q = np.array([[1, 99, 100, 250, 1000]], dtype=float)
    got = price_at(q, [5.0], [[100, 1000, np.nan]], [[4.5, 4.0, np.nan]])
    assert got.tolist() == [[5.0, 5.0, 4.5, 4.5, 4.0]]


def _inputs(breaks: bool, measure: str = FILL_RATE) -> PolicyInputs:
    one = np.ones(1)
    return PolicyInputs(
        annual_demand=np.array([600.0]),
        demand_per_period=np.array([600 / 52]),
        demand_sd_per_period=np.array([4.0]),
        lead_time_days=np.array([14.0]),
        lead_time_sd_days=np.zeros(1),
        unit_cost=np.array([0.30]),
        order_cost=np.array([8.0]),
        holding_rate=np.array([0.2]),
        measure=np.array([measure], dtype=object),
        service_target=np.array([0.98]),
        shortage_cost=np.full(1, np.nan),
        pack_size=one,
        minimum_order=np.zeros(1),
        days_per_period=7.0,
        break_qty=np.array([[500.0, 1000.0]]) if breaks else None,
        break_price=np.array([[0.29, 0.28]]) if breaks else None,
    )


def test_policy_uses_the_break_and_its_price():
    pol = compute_policy(_inputs(True)).iloc[0]
    assert pol["order_qty"] == 500 and pol["unit_price"] == pytest.approx(0.29)
    # holding and purchase at the discounted price
    assert pol["annual_cycle_holding_cost"] == pytest.approx(0.2 * 0.29 * 500 / 2)
    assert pol["annual_purchase_cost"] == pytest.approx(600 * 0.29)
    assert pol["discount_saving"] == pytest.approx(5.9, abs=1e-9)
    # the fill-rate reorder point follows from Q = 500: the smallest whole R with
    # 1 - sd * L((R - mu) / sd) / Q >= 98 %, L the standard normal loss (scipy.stats)
    mu, sd = pol["lead_time_demand_mean"], pol["lead_time_demand_sd"]
    r = np.arange(np.floor(mu - 4 * sd), np.ceil(mu + 4 * sd) + 1)
    z = (r - mu) / sd
    loss = sd * (stats.norm.pdf(z) - z * stats.norm.sf(z))
    assert pol["reorder_point"] == r[np.argmax(1 - loss / 500 >= 0.98)]
    plain = compute_policy(_inputs(False)).iloc[0]
    assert plain["order_qty"] == 400 and np.isnan(plain["discount_saving"])
    assert plain["reorder_point"] >= pol["reorder_point"]  # a larger Q needs less safety
