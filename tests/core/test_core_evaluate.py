"""evaluate_policy: service and costs of a given (Q, R), e.g. today's policy.

Checked against scipy.stats directly (cycle service = F(R), units short = E[(X - R)^+] by
summing the pmf) and for consistency with compute_policy on its own recommendations.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from xlpolicy.core.policy import PolicyInputs, compute_policy, evaluate_policy


def test_normal_policy_against_scipy():
    # mu 50, sigma 10, R 62, Q 100: cycle service Phi(1.2); units short sigma*G(1.2)
    out = evaluate_policy(
        [100], [62], [50], [10], ["normal"], [2600], [20], [0.5], [2.0], [4.0]
    ).iloc[0]
    assert out["cycle_service"] == pytest.approx(stats.norm.cdf(1.2))
    g = stats.norm.pdf(1.2) - 1.2 * stats.norm.sf(1.2)  # standard normal loss function
    assert out["units_short_per_cycle"] == pytest.approx(10 * g)
    assert out["fill_rate"] == pytest.approx(1 - 10 * g / 100)
    assert out["annual_ordering_cost"] == pytest.approx(2600 * 20 / 100)
    assert out["annual_cycle_holding_cost"] == pytest.approx(0.5 * 100 / 2)
    assert out["annual_safety_holding_cost"] == pytest.approx(0.5 * 12)
    assert out["annual_shortage_cost"] == pytest.approx(4.0 * 26 * 10 * g)


def test_poisson_policy_against_scipy():
    # Poisson mean 2, R 4: P(X <= 4) = 0.9473 (Poisson table, common practice)
    out = evaluate_policy(
        [10], [4], [2], [math.sqrt(2)], ["poisson"], [100], [5], [1], [4], [math.nan]
    ).iloc[0]
    assert out["cycle_service"] == pytest.approx(stats.poisson.cdf(4, 2))
    assert round(out["cycle_service"], 4) == 0.9473
    k = np.arange(0, 200)
    short = np.sum(np.maximum(k - 4, 0) * stats.poisson.pmf(k, 2))
    assert out["units_short_per_cycle"] == pytest.approx(short)
    assert out["annual_shortage_cost"] == 0  # no shortage cost given


def test_evaluating_the_recommendation_reproduces_it():
    rng = np.random.default_rng(5)
    n = 40
    one = np.ones(n)
    d = rng.uniform(0.5, 40, n)
    models = np.array(["normal", "poisson", "negative binomial", "gamma"] * 10, dtype=object)
    inp = PolicyInputs(
        annual_demand=d * 52,
        demand_per_period=d,
        demand_sd_per_period=np.sqrt(d) * 1.6,
        lead_time_days=rng.uniform(3, 30, n),
        lead_time_sd_days=0 * one,
        unit_cost=rng.uniform(1, 50, n),
        order_cost=rng.uniform(5, 40, n),
        holding_rate=0.25 * one,
        measure=np.full(n, "fill rate", dtype=object),
        service_target=0.97 * one,
        shortage_cost=rng.uniform(1, 20, n),
        pack_size=one,
        minimum_order=0 * one,
        days_per_period=7.0,
        model=models,
    )
    pol = compute_policy(inp)
    ev = evaluate_policy(
        pol["order_qty"],
        pol["reorder_point"],
        pol["lead_time_demand_mean"],
        pol["lead_time_demand_sd"],
        pol["model"],
        inp.annual_demand,
        inp.order_cost,
        inp.holding_rate * inp.unit_cost,
        inp.unit_cost,
        inp.shortage_cost,
    )
    for a, b in (
        ("cycle_service", "cycle_service"),
        ("fill_rate", "fill_rate"),
        ("units_short_per_cycle", "expected_units_short_per_cycle"),
        ("annual_total_cost", "annual_total_cost"),
    ):
        np.testing.assert_allclose(ev[a], pol[b], rtol=1e-12)


def test_missing_or_bad_policy_gives_nan():
    out = evaluate_policy(
        [np.nan, 0, 10],
        [5, 5, np.nan],
        [3, 3, 3],
        [1, 1, 1],
        ["", "normal", "poisson"],
        [100] * 3,
        [5] * 3,
        [1] * 3,
        [4] * 3,
        [np.nan] * 3,
    )
    assert out["annual_total_cost"].isna().all()


def test_rounding_penalty_is_the_cost_of_whole_packs_over_the_eoq():
    # At the EOQ the ordering + cycle holding cost is sqrt(2 D S H) (Harris 1913 / Wilson
    # 1934; common practice); the penalty of ordering Q instead is D S/Q + H Q/2 minus that.
    n = 3
    one = np.ones(n)
    D, S, c, i = 5200.0, 30.0, 4.0, 0.25
    pol = compute_policy(
        PolicyInputs(
            annual_demand=D * one,
            demand_per_period=100 * one,
            demand_sd_per_period=20 * one,
            lead_time_days=14 * one,
            lead_time_sd_days=0 * one,
            unit_cost=c * one,
            order_cost=S * one,
            holding_rate=i * one,
            measure=np.full(n, "cycle service", dtype=object),
            service_target=0.95 * one,
            shortage_cost=np.full(n, np.nan),
            pack_size=np.array([1.0, 48.0, 500.0]),
            minimum_order=0 * one,
            days_per_period=7.0,
        )
    )
    H = i * c
    best = math.sqrt(2 * D * S * H)
    expected = D * S / pol["order_qty"] + H * pol["order_qty"] / 2 - best
    np.testing.assert_allclose(pol["rounding_penalty"], expected, rtol=1e-9, atol=1e-9)
    assert pol["rounding_penalty"].iloc[0] < 0.01  # whole units: next to nothing
    assert pol["rounding_penalty"].iloc[2] > pol["rounding_penalty"].iloc[1] > 0
