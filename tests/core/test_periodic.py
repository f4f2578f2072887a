"""Periodic review: order-up-to levels over the protection interval T + L.

References: Silver, Pyke & Peterson, Inventory Management and Production Planning and
Scheduling, 3rd ed., 1998, ch. 7 (the (R, S) system); Chopra & Meindl, Supply Chain
Management, ch. 12 (periodic review example, from memory); scipy.stats for the
distributions; brute force over whole levels.
"""

from __future__ import annotations

import numpy as np
import pytest
from builders import BASE_HEADERS, write_workbook
from scipy import stats

import xlpolicy
from xlpolicy.contract import CYCLE_SERVICE, FILL_RATE, SHORTAGE_COST
from xlpolicy.core.periodic import periodic_policy


def _pp(
    T,
    d,
    sd,
    L,
    measure,
    target,
    model="normal",
    p=np.nan,
    dpp=7.0,
    ppy=52.0,
    S=20.0,
    i=0.25,
    c=8.0,
    sL=0.0,
):
    return periodic_policy(
        [T], [d], [sd], [L], [sL], dpp, ppy, [S], [i], [c], measure, [target], [p], model=[model]
    ).iloc[0]


def test_chopra_meindl_order_up_to_level_from_memory():
    # Chopra & Meindl, Supply Chain Management, ch. 12, periodic review (data from memory):
    # weekly demand 2,500 with sd 500, lead time 2 weeks, review every 4 weeks, cycle service
    # 90 %. sigma over T + L = sqrt(6) x 500 = 1,224.7; safety stock = 1.2816 x 1,224.7 =
    # 1,569.6; order-up-to level = 6 x 2,500 + 1,569.6 = 16,569.6, i.e. 16,570 whole units.
    pol = _pp(28, 2500, 500, 14, CYCLE_SERVICE, 0.90)
    assert pol["protection_demand_mean"] == pytest.approx(15_000)
    assert pol["protection_demand_sd"] == pytest.approx(500 * np.sqrt(6))
    assert pol["order_up_to_level"] == 16_570
    # scipy.stats, independently: the smallest whole S with Phi((S - mu) / sigma) >= 0.90
    assert pol["order_up_to_level"] == np.ceil(stats.norm.ppf(0.90, 15_000, 500 * np.sqrt(6)))
    assert pol["cycle_service"] >= 0.90
    # an order every 4 weeks: 13 a year; the average order is 4 weeks of demand
    assert pol["orders_per_year"] == pytest.approx(13)
    assert pol["order_qty"] == pytest.approx(10_000)
    assert pol["annual_cycle_holding_cost"] == pytest.approx(0.25 * 8 * 10_000 / 2)
    assert pol["annual_ordering_cost"] == pytest.approx(20 * 13)
    assert pol["safety_stock"] == pytest.approx(16_570 - 15_000)


def test_poisson_level_against_scipy():
    # 3 a day, reviewed weekly, 5-day lead time: Poisson with mean 36 over T + L
    pol = _pp(7, 3.0, np.sqrt(3.0), 5, CYCLE_SERVICE, 0.97, model="poisson", dpp=1.0, ppy=365.0)
    assert pol["order_up_to_level"] == stats.poisson.ppf(0.97, 36)
    assert pol["cycle_service"] == pytest.approx(stats.poisson.cdf(pol["order_up_to_level"], 36))


def test_fill_rate_level_brute_force_with_scipy_loss():
    pol = _pp(14, 40, 12, 10, FILL_RATE, 0.99, sL=2.0)
    mu = 40 * 24 / 7
    sig = np.sqrt(24 / 7 * 12**2 + 40**2 * (2 / 7) ** 2)  # the SPP lead-time formula
    assert pol["protection_demand_sd"] == pytest.approx(sig)
    q_bar = 40 * 2
    s = np.arange(0, 400)
    z = (s - mu) / sig
    loss = sig * (stats.norm.pdf(z) - z * stats.norm.sf(z))  # E[(X - S)+], scipy.stats
    ok = 1 - loss / q_bar >= 0.99
    assert pol["order_up_to_level"] == s[np.argmax(ok)]
    assert pol["fill_rate"] == pytest.approx(1 - loss[np.argmax(ok)] / q_bar)


def test_shortage_cost_level_brute_force():
    p = 30.0
    pol = _pp(7, 50, 15, 7, SHORTAGE_COST, np.nan, p=p)
    mu, sig = 100.0, 15 * np.sqrt(2)
    h, t_years = 0.25 * 8, 1 / 52
    s = np.arange(50, 200)
    z = (s - mu) / sig
    loss = sig * (stats.norm.pdf(z) - z * stats.norm.sf(z))
    cost = h * (s - mu) + p * loss / t_years  # holding + shortages a year (SPP ch. 7)
    assert pol["order_up_to_level"] == s[np.argmin(cost)]
    assert pol["annual_shortage_cost"] == pytest.approx(p * 52 * loss[np.argmin(cost)])


def test_longer_review_needs_a_higher_level():
    short = _pp(7, 40, 12, 10, CYCLE_SERVICE, 0.95)
    long = _pp(28, 40, 12, 10, CYCLE_SERVICE, 0.95)
    assert long["order_up_to_level"] > short["order_up_to_level"]
    assert long["safety_stock"] > short["safety_stock"]
    assert long["annual_ordering_cost"] < short["annual_ordering_cost"]


HEADERS = [
    *BASE_HEADERS,
    "Annual demand",
    "Demand sd",
    "Pack size",
    "On hand",
    "Review period (days)",
]


def test_workbook_column_setting_and_reorder(tmp_path):
    items = [
        ["W1", "a", "Acme", 5.0, 20.0, 0.2, 7.0, 2080, 10.0, 6, 10, None],
        ["W2", "b", "Acme", 5.0, 20.0, 0.2, 7.0, 2080, 10.0, 1, 10, 0],
        ["W3", "c", "Acme", 5.0, 20.0, 0.2, 7.0, 2080, 10.0, 1, 10, 28],
        ["W4", "d", "Acme", 5.0, 20.0, 0.2, 7.0, 2080, 10.0, 1, 10, -3],
    ]
    path = write_workbook(
        tmp_path / "w.xlsx",
        items,
        headers=HEADERS,
        settings={"Review period days": 14, "Demand model": "normal"},
    )
    report = xlpolicy.analyse(path)
    r = report.results.set_index("item")
    assert r.loc["W1", "review"] == "periodic" and r.loc["W1", "review_period_days"] == 14
    assert r.loc["W2", "review"] == "continuous" and np.isfinite(r.loc["W2", "reorder_point"])
    assert r.loc["W3", "review_period_days"] == 28
    assert np.isnan(r.loc["W1", "reorder_point"])
    # W1: 40 a week, T + L = 3 weeks -> mean 120, sd 10 sqrt(3); at the review, order up to S
    s = np.ceil(stats.norm.ppf(0.95, 120, 10 * np.sqrt(3)))
    assert r.loc["W1", "order_up_to_level"] == s
    assert r.loc["W1", "order_now_qty"] == np.ceil((s - 10) / 6) * 6  # whole packs of 6
    assert "W1" in set(report.reorder["item"])
    bad = [p for p in report.problems if p.code == "review_period_days-out-of-range"]
    assert len(bad) == 1 and bad[0].cell == "L5" and r.loc["W4", "status"] == "skipped"


def test_bad_review_setting_is_reported(tmp_path):
    items = [["W1", "a", "Acme", 5.0, 20.0, 0.2, 7.0, 2080, 10.0, 6, 10, None]]
    path = write_workbook(
        tmp_path / "w.xlsx", items, headers=HEADERS, settings={"Review period days": "weekly"}
    )
    p = [p for p in xlpolicy.check(path) if p.code == "setting-review_period_days"]
    assert len(p) == 1 and p[0].sheet == "Settings"


def test_simulated_review_cycles_match_the_service_achieved():
    # A day-by-day simulation of the (T, S) system with backorders (independent of the
    # formulas): Poisson demand 6 a day, review every 7 days, lead time 4 days.
    lam, T, L = 6.0, 7, 4
    pol = _pp(T, lam, np.sqrt(lam), L, FILL_RATE, 0.97, model="poisson", dpp=1.0, ppy=365.0)
    S = pol["order_up_to_level"]
    rng = np.random.default_rng(11)
    days = 7 * 6000
    demand = rng.poisson(lam, days)
    net, pipeline = S, {}
    short = 0.0
    ends = []  # net stock just before each order arrives
    for t in range(days):
        if t in pipeline:
            ends.append(net)
            net += pipeline.pop(t)
        if t % T == 0:
            position = net + sum(pipeline.values())
            pipeline[t + L] = S - position
        short += max(0.0, demand[t] - max(net, 0.0))
        net -= demand[t]
    fill = 1 - short / demand.sum()
    assert fill == pytest.approx(pol["fill_rate"], abs=0.005)
    no_stockout = np.mean(np.asarray(ends[10:]) >= 0)
    assert no_stockout == pytest.approx(pol["cycle_service"], abs=0.01)
