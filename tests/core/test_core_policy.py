"""(Q, R) policies checked against hand computation, textbook examples, scipy and simulation."""

from __future__ import annotations

import math
import warnings

import numpy as np
import pandas as pd
import pytest
from scipy import optimize, stats

import xlpolicy.core.policy as policy_mod
from xlpolicy.contract import SERVICE_MEASURES
from xlpolicy.core.demand import lead_time_demand
from xlpolicy.core.policy import (
    POLICY_COLUMNS,
    PolicyInputs,
    compute_policy,
    order_cost_terms,
    round_order_qty,
)

MONTH = 365.0 / 12.0


def make_inputs(n: int = 1, **over: object) -> PolicyInputs:
    """Inputs for n items; any field may be overridden by a scalar or an array."""
    base: dict[str, object] = {
        "annual_demand": 1200.0,
        "demand_per_period": 100.0,
        "demand_sd_per_period": 30.0,
        "lead_time_days": 14.0,
        "lead_time_sd_days": 0.0,
        "unit_cost": 10.0,
        "order_cost": 60.0,
        "holding_rate": 0.25,
        "measure": "cycle service",
        "service_target": 0.95,
        "shortage_cost": np.nan,
        "pack_size": 1.0,
        "minimum_order": 0.0,
    }
    base.update({k: v for k, v in over.items() if k != "days_per_period"})
    cols: dict[str, np.ndarray] = {}
    for key, val in base.items():
        if key == "measure":
            cols[key] = np.broadcast_to(np.asarray(val, dtype=object), (n,)).copy()
        else:
            cols[key] = np.broadcast_to(np.asarray(val, dtype=float), (n,)).copy()
    return PolicyInputs(**cols, days_per_period=float(over.get("days_per_period", 7.0)))


def normal_es(r: np.ndarray, mu: np.ndarray, sigma: np.ndarray) -> np.ndarray:
    """E[(X - r)^+] for X ~ N(mu, sigma^2) from scipy.stats: sigma (phi(z) - z (1 - Phi(z)))."""
    z = (r - mu) / sigma
    return sigma * (stats.norm.pdf(z) - z * stats.norm.sf(z))


def hw_cost(
    q: float, r: float, D: float, S: float, H: float, p: float, mu: float, sigma: float
) -> float:
    """Expected annual cost with backorders, Hadley & Whitin (1963) / Nahmias (Q, R) chapter.

    Scalar, with the loss function written out from math.erfc (fast inside scipy.optimize).
    """
    z = (r - mu) / sigma
    pdf = math.exp(-z * z / 2) / math.sqrt(2 * math.pi)
    es = sigma * (pdf - z * 0.5 * math.erfc(z / math.sqrt(2)))
    return D * S / q + H * (q / 2 + r - mu) + p * D / q * es


# ---------------------------------------------------------------------------------------
# EOQ and rounding
# ---------------------------------------------------------------------------------------


def test_output_columns_and_row_order() -> None:
    inp = make_inputs(3, annual_demand=np.array([1200.0, 50.0, 9000.0]))
    out = compute_policy(inp)
    assert list(out.columns) == list(POLICY_COLUMNS)
    assert isinstance(out, pd.DataFrame) and len(out) == 3
    np.testing.assert_array_equal(out["annual_demand"], [1200.0, 50.0, 9000.0])
    assert (out["model"] == "normal").all()
    for flag in [c for c in POLICY_COLUMNS if c.startswith("flag_")]:
        assert out[flag].dtype == bool


def test_eoq_hand_example_and_cost_balance() -> None:
    # computed by hand: D = 1200/yr, S = 60, H = 0.25 * 10 = 2.5 -> Q* = sqrt(144000/2.5) = 240
    out = compute_policy(make_inputs())
    assert out["eoq"][0] == pytest.approx(240.0, rel=1e-12)
    assert out["order_qty"][0] == 240.0
    # at the EOQ ordering cost equals cycle-stock holding cost (common practice): 300 each
    assert out["annual_ordering_cost"][0] == pytest.approx(300.0)
    assert out["annual_cycle_holding_cost"][0] == pytest.approx(300.0)
    assert out["orders_per_year"][0] == pytest.approx(5.0)
    assert out["annual_purchase_cost"][0] == pytest.approx(12000.0)
    assert out["rounding_cost_ratio"][0] == pytest.approx(1.0)


def test_rounding_the_eoq_finds_the_cheapest_allowed_quantity_by_brute_force() -> None:
    rng = np.random.default_rng(7)
    k = 400
    pack = rng.integers(1, 40, k).astype(float)
    moq = np.where(rng.random(k) < 0.3, rng.uniform(0, 300, k), 0.0)
    D = rng.uniform(10, 5000, k)
    S = rng.uniform(0, 100, k)
    H = rng.uniform(0.1, 20, k)
    eoq = np.sqrt(2 * D * S / H)  # Harris 1913 / Wilson 1934
    got = round_order_qty(eoq, pack, moq, D, S, H)
    for j in range(k):  # brute force over every allowed quantity up to well past the EOQ
        allowed = [m * pack[j] for m in range(1, 2000) if m * pack[j] >= moq[j]]
        best = min(D[j] * S[j] / a + H[j] * a / 2 for a in allowed)
        cost_got = D[j] * S[j] / got[j] + H[j] * got[j] / 2
        assert cost_got <= best * (1 + 1e-12) + 1e-12
        assert got[j] % pack[j] == 0 and got[j] >= moq[j] and got[j] >= pack[j]


def test_rounding_any_q_takes_the_cheaper_neighbour() -> None:
    rng = np.random.default_rng(17)
    k = 400
    q = rng.uniform(0.0, 500.0, k)
    pack = rng.integers(1, 40, k).astype(float)
    moq = np.where(rng.random(k) < 0.3, rng.uniform(0, 300, k), 0.0)
    D, S, H = rng.uniform(10, 5000, k), rng.uniform(0, 100, k), rng.uniform(0.1, 20, k)
    got = round_order_qty(q, pack, moq, D, S, H)
    for j in range(k):
        floor_q = max(pack[j], math.ceil(moq[j] / pack[j]) * pack[j])
        near = {
            max(math.floor(q[j] / pack[j]) * pack[j], floor_q),
            max(math.ceil(q[j] / pack[j]) * pack[j], floor_q),
        }
        assert got[j] in near
        assert D[j] * S[j] / got[j] + H[j] * got[j] / 2 == min(
            D[j] * S[j] / a + H[j] * a / 2 for a in near
        )


def test_minimum_order_raises_q_to_a_pack_multiple() -> None:
    # by hand: EOQ 240 is below the minimum 500; with cases of 12 the first allowed is 42*12 = 504
    out = compute_policy(make_inputs(minimum_order=500.0, pack_size=12.0))
    assert out["eoq"][0] == pytest.approx(240.0)
    assert out["order_qty"][0] == 504.0


def test_rounding_cost_ratio_is_the_textbook_identity() -> None:
    rng = np.random.default_rng(11)
    k = 60
    inp = make_inputs(
        k,
        annual_demand=rng.uniform(100, 20000, k),
        order_cost=rng.uniform(5, 200, k),
        pack_size=rng.integers(1, 50, k).astype(float),
        minimum_order=rng.uniform(0, 400, k),
        measure=np.array(list(SERVICE_MEASURES) * (k // 3), dtype=object),
        shortage_cost=rng.uniform(5, 50, k),
        service_target=rng.uniform(0.8, 0.995, k),
    )
    out = compute_policy(inp)
    # Silver, Pyke & Peterson (1998): cost(Q)/cost(Q*) = (Q/Q* + Q*/Q) / 2. For service items
    # Q* is the EOQ; for shortage-cost items it is the continuous (Q, R) optimum, whose
    # "order cost" includes the expected shortage cost per order.
    svc = out["service_measure"] != "shortage cost"
    q, qs = out["order_qty"][svc], out["eoq"][svc]
    np.testing.assert_allclose(out["rounding_cost_ratio"][svc], (q / qs + qs / q) / 2, rtol=1e-10)
    assert (out["rounding_cost_ratio"] >= 1 - 1e-12).all()


def test_zero_order_cost_orders_the_smallest_allowed_quantity() -> None:
    out = compute_policy(
        make_inputs(
            2, order_cost=0.0, pack_size=np.array([6.0, 6.0]), minimum_order=np.array([0.0, 20.0])
        )
    )
    np.testing.assert_array_equal(out["eoq"], [0.0, 0.0])
    np.testing.assert_array_equal(out["order_qty"], [6.0, 24.0])
    assert np.isnan(out["rounding_cost_ratio"]).all()  # cost(Q*) is 0: the ratio is undefined


# ---------------------------------------------------------------------------------------
# Service targets
# ---------------------------------------------------------------------------------------


def test_chopra_meindl_cycle_service_example() -> None:
    # Chopra & Meindl, safety inventory chapter (from memory): weekly demand 2500, sd 500,
    # lead time 2 weeks, CSL 0.90 -> safety inventory NORMSINV(0.9) * 707 = about 906.
    out = compute_policy(
        make_inputs(
            annual_demand=2500.0 * 52,
            demand_per_period=2500.0,
            demand_sd_per_period=500.0,
            lead_time_days=14.0,
            service_target=0.90,
            days_per_period=7.0,
        )
    )
    sigma_l = 500.0 * np.sqrt(2.0)
    assert out["lead_time_demand_sd"][0] == pytest.approx(sigma_l)
    # independent: scipy.stats.norm.ppf, rounded up to a whole unit
    r_ref = math.ceil(stats.norm.ppf(0.90, 5000.0, sigma_l))
    assert out["reorder_point"][0] == r_ref == 5907
    assert abs(out["safety_stock"][0] - 906) <= 1  # textbook figure, from memory
    assert out["cycle_service"][0] == pytest.approx(stats.norm.cdf(5907, 5000.0, sigma_l))


def test_nahmias_fill_rate_example() -> None:
    # Nahmias, (Q, R) chapter, Harvey's Specialty Shop (from memory): 6-month lead-time demand
    # mean 100, sd 25; D = 200/yr, S = $50, c = $10, i = 20 %, so EOQ = 100. A 98 % fill rate
    # with Q = EOQ needs n(R) = 0.02 * 100 = 2 = 25 G(z), z about 1.02, R about 126.
    out = compute_policy(
        make_inputs(
            annual_demand=200.0,
            demand_per_period=200.0 / 12,
            demand_sd_per_period=25 / np.sqrt(6),
            lead_time_days=6 * MONTH,
            unit_cost=10.0,
            order_cost=50.0,
            holding_rate=0.2,
            measure="fill rate",
            service_target=0.98,
            days_per_period=MONTH,
        )
    )
    assert out["lead_time_demand_mean"][0] == pytest.approx(100.0)
    assert out["lead_time_demand_sd"][0] == pytest.approx(25.0)
    assert out["order_qty"][0] == 100.0
    assert out["reorder_point"][0] == 126.0  # textbook figure, from memory
    # independent: scipy.stats loss function; R is the smallest whole unit meeting 98 %
    r = out["reorder_point"][0]
    assert 1 - normal_es(r, 100.0, 25.0) / 100.0 >= 0.98
    assert 1 - normal_es(r - 1, 100.0, 25.0) / 100.0 < 0.98


def test_cycle_service_reorder_point_is_the_smallest_that_meets_target() -> None:
    rng = np.random.default_rng(3)
    k = 300
    d = rng.uniform(0.5, 200, k)
    inp = make_inputs(
        k,
        annual_demand=d * 52,
        demand_per_period=d,
        demand_sd_per_period=rng.uniform(0, 80, k),
        lead_time_days=rng.uniform(1, 60, k),
        lead_time_sd_days=rng.uniform(0, 6, k),
        service_target=rng.uniform(0.5, 0.999, k),
    )
    out = compute_policy(inp)
    mu, sg = out["lead_time_demand_mean"], out["lead_time_demand_sd"]
    r, t = out["reorder_point"], out["service_target"]
    pos = sg > 0
    # scipy.stats.norm.cdf is the reference
    assert (stats.norm.cdf(r[pos], mu[pos], sg[pos]) >= t[pos] - 1e-12).all()
    assert (stats.norm.cdf(r[pos] - 1, mu[pos], sg[pos]) < t[pos]).all()
    assert (r == np.round(r)).all()


def test_fill_rate_reorder_point_is_the_smallest_that_meets_target() -> None:
    rng = np.random.default_rng(4)
    k = 300
    d = rng.uniform(0.5, 200, k)
    inp = make_inputs(
        k,
        annual_demand=d * 52,
        demand_per_period=d,
        demand_sd_per_period=rng.uniform(1, 80, k),
        lead_time_days=rng.uniform(1, 60, k),
        lead_time_sd_days=rng.uniform(0, 6, k),
        order_cost=rng.uniform(1, 150, k),
        pack_size=rng.integers(1, 12, k).astype(float),
        measure="fill rate",
        service_target=rng.uniform(0.8, 0.999, k),
    )
    out = compute_policy(inp)
    mu, sg = out["lead_time_demand_mean"].to_numpy(), out["lead_time_demand_sd"].to_numpy()
    r, q = out["reorder_point"].to_numpy(), out["order_qty"].to_numpy()
    t = out["service_target"].to_numpy()
    # scipy.stats loss function is the reference
    achieved = 1 - normal_es(r, mu, sg) / q
    assert (achieved >= t - 1e-12).all()
    np.testing.assert_allclose(out["fill_rate"], achieved, rtol=1e-10)
    not_floored = ~out["flag_reorder_point_floored"].to_numpy() & (r > 0)
    below = 1 - normal_es(r - 1, mu, sg) / q
    assert (below[not_floored] < t[not_floored]).all()


def test_zero_sd_gives_deterministic_reorder_points() -> None:
    # demand known exactly: 10 a day for 7 days = 70 in the lead time (by hand)
    out = compute_policy(
        make_inputs(
            3,
            annual_demand=3650.0,
            demand_per_period=10.0,
            demand_sd_per_period=0.0,
            lead_time_days=7.0,
            days_per_period=1.0,
            order_cost=1.0,
            minimum_order=100.0,
            measure=np.array(["cycle service", "fill rate", "cycle service"], dtype=object),
            service_target=np.array([0.99, 0.95, 0.5]),
        )
    )
    np.testing.assert_array_equal(out["lead_time_demand_sd"], [0.0, 0.0, 0.0])
    np.testing.assert_array_equal(out["order_qty"], [100.0, 100.0, 100.0])
    # cycle service: R = 70 whatever the target; fill rate: 70 - (1 - 0.95) * 100 = 65
    np.testing.assert_array_equal(out["reorder_point"], [70.0, 65.0, 70.0])
    assert out["fill_rate"][1] == pytest.approx(0.95)
    assert out["cycle_service"][0] == 1.0


def test_zero_sd_ignores_float_noise_in_lead_time_demand() -> None:
    out = compute_policy(
        make_inputs(
            demand_per_period=10.0 / 7.0,
            demand_sd_per_period=0.0,
            lead_time_days=7.0,
            days_per_period=1.0,
        )
    )
    assert out["reorder_point"][0] == 10.0  # 10/7 a day for 7 days is 10, not 11


def test_reorder_point_below_zero_is_floored_and_flagged() -> None:
    # a low target on a small, variable item puts mu + z sigma below zero
    out = compute_policy(
        make_inputs(
            2,
            demand_per_period=1.0,
            demand_sd_per_period=4.0,
            lead_time_days=7.0,
            service_target=np.array([0.1, 0.95]),
        )
    )
    assert out["reorder_point"][0] == 0.0 and out["flag_reorder_point_floored"][0]
    assert not out["flag_reorder_point_floored"][1]
    assert out["flag_normal_doubtful"].all()  # mu_L = 1 < 10 and sd/mean >= 0.5


# ---------------------------------------------------------------------------------------
# Shortage cost
# ---------------------------------------------------------------------------------------

HARVEY = {
    "annual_demand": 200.0,
    "demand_per_period": 200.0 / 12,
    "demand_sd_per_period": 25 / np.sqrt(6),
    "lead_time_days": 6 * MONTH,
    "unit_cost": 10.0,
    "order_cost": 50.0,
    "holding_rate": 0.2,
    "measure": "shortage cost",
    "service_target": np.nan,
    "shortage_cost": 25.0,
    "days_per_period": MONTH,
}


def test_nahmias_shortage_cost_example() -> None:
    # Nahmias, (Q, R) chapter, Harvey's Specialty Shop (from memory): D = 200/yr, h = $2,
    # K = $50, p = $25 per jar short, lead-time demand N(100, 25^2): Q = 110, R = 143.
    out = compute_policy(make_inputs(**HARVEY))
    assert out["order_qty"][0] == 110.0  # from memory
    assert out["reorder_point"][0] == 143.0  # from memory
    D, S, H, p, mu, sg = 200.0, 50.0, 2.0, 25.0, 100.0, 25.0

    # independent: scipy.optimize minimising the Hadley-Whitin expected annual cost
    res = optimize.minimize(
        lambda x: hw_cost(x[0], x[1], D, S, H, p, mu, sg),
        x0=[100, 130],
        method="Nelder-Mead",
        options={"xatol": 1e-9, "fatol": 1e-12, "maxiter": 5000},
    )
    q_star, r_star = res.x
    assert out["order_qty"][0] in (math.floor(q_star), math.ceil(q_star))
    assert out["reorder_point"][0] in (math.floor(r_star), math.ceil(r_star))
    # rounding ratio against the continuous optimum (Silver, Pyke & Peterson identity)
    q = out["order_qty"][0]
    assert out["rounding_cost_ratio"][0] == pytest.approx((q / q_star + q_star / q) / 2, rel=1e-6)
    # and the whole-unit pair is the best on a brute-force grid of whole (Q, R)
    grid = min(
        hw_cost(qq, rr, D, S, H, p, mu, sg) for qq in range(90, 131) for rr in range(125, 161)
    )
    assert out["annual_total_cost"][0] == pytest.approx(grid, rel=1e-9)
    assert out["annual_total_cost"][0] == pytest.approx(
        hw_cost(110, 143, D, S, H, p, mu, sg), rel=1e-12
    )


def test_shortage_cost_matches_scipy_optimum_on_random_items() -> None:
    rng = np.random.default_rng(8)
    k = 25
    d = rng.uniform(5, 100, k)
    sd = rng.uniform(1, 40, k)
    inp = make_inputs(
        k,
        annual_demand=d * 52,
        demand_per_period=d,
        demand_sd_per_period=sd,
        lead_time_days=rng.uniform(7, 42, k),
        unit_cost=rng.uniform(1, 50, k),
        order_cost=rng.uniform(0, 80, k),
        measure="shortage cost",
        shortage_cost=rng.uniform(5, 100, k),
    )
    out = compute_policy(inp)
    checked = 0
    for j in range(k):
        row = out.iloc[j]
        if row["flag_no_safety_stock_pays"]:
            continue
        checked += 1
        D, S = row["annual_demand"], inp.order_cost[j]
        H = inp.holding_rate[j] * inp.unit_cost[j]
        p, mu, sg = inp.shortage_cost[j], row["lead_time_demand_mean"], row["lead_time_demand_sd"]

        def f(x: np.ndarray, D=D, S=S, H=H, p=p, mu=mu, sg=sg) -> float:
            return hw_cost(x[0], x[1], D, S, H, p, mu, sg)

        q_eoq = max(np.sqrt(2 * D * S / H), 1.0)
        x0 = [q_eoq, float(stats.norm.isf(min(q_eoq * H / (p * D), 0.5), mu, sg))]
        res = optimize.minimize(
            f, x0=x0, method="Nelder-Mead", options={"xatol": 1e-8, "fatol": 1e-11, "maxiter": 4000}
        )
        # scipy's continuous optimum lower-bounds the whole-unit cost, and ours is close to it
        ours = f(np.array([row["order_qty"], row["reorder_point"]]))
        assert ours >= res.fun - 1e-7 * abs(res.fun)
        assert ours <= res.fun * 1.01 + 1.0
        assert abs(row["reorder_point"] - res.x[1]) <= 1.0 + 1e-6
    assert checked >= 20


def test_no_safety_stock_pays_when_shortage_is_cheap() -> None:
    # Harvey's data with p = $0.50: Q H / (p D) = 100 * 2 / (0.5 * 200) = 2 >= 1 (by hand)
    out = compute_policy(make_inputs(**{**HARVEY, "shortage_cost": 0.5}))
    assert out["flag_no_safety_stock_pays"][0]
    assert out["order_qty"][0] == 100.0  # the EOQ
    assert out["reorder_point"][0] == 100.0  # mu_L: no safety stock
    assert out["safety_stock"][0] == pytest.approx(0.0)


def test_zero_order_cost_with_shortage_cost_matches_scipy() -> None:
    # S = 0 starts the iteration elsewhere (EOQ = 0 would stall it); check against scipy
    out = compute_policy(make_inputs(**{**HARVEY, "order_cost": 0.0}))
    D, H, p, mu, sg = 200.0, 2.0, 25.0, 100.0, 25.0
    res = optimize.minimize(
        lambda x: hw_cost(x[0], x[1], D, 0.0, H, p, mu, sg),
        x0=[20, 150],
        method="Nelder-Mead",
        options={"xatol": 1e-9, "fatol": 1e-12},
    )
    assert abs(out["order_qty"][0] - res.x[0]) <= 1.0
    assert abs(out["reorder_point"][0] - res.x[1]) <= 1.0


def test_bracketing_fallback_agrees_with_the_iteration(monkeypatch: pytest.MonkeyPatch) -> None:
    rng = np.random.default_rng(12)
    k = 400
    d = rng.uniform(0.5, 50, k)
    inp = make_inputs(
        k,
        annual_demand=d * 52,
        demand_per_period=d,
        demand_sd_per_period=rng.uniform(0, 30, k),
        lead_time_days=rng.uniform(1, 60, k),
        lead_time_sd_days=rng.uniform(0, 5, k),
        unit_cost=rng.uniform(0.5, 100, k),
        order_cost=rng.uniform(0, 100, k),
        holding_rate=rng.uniform(0.1, 0.4, k),
        measure="shortage cost",
        shortage_cost=rng.exponential(30, k),
        pack_size=rng.integers(1, 6, k).astype(float),
    )
    iterated = compute_policy(inp)
    monkeypatch.setattr(policy_mod, "SHORTAGE_MAX_ITER", 0)  # every item by bracketing
    bracketed = compute_policy(inp)
    for col in ("order_qty", "reorder_point", "flag_no_safety_stock_pays"):
        np.testing.assert_array_equal(iterated[col], bracketed[col])
    assert iterated["flag_no_safety_stock_pays"].any()
    assert not iterated["flag_no_safety_stock_pays"].all()


def test_missing_shortage_cost_is_flagged_not_fatal() -> None:
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        out = compute_policy(
            make_inputs(2, measure="shortage cost", shortage_cost=np.array([np.nan, 20.0]))
        )
    assert out["flag_shortage_cost_missing"].tolist() == [True, False]
    assert np.isnan(
        out.loc[0, ["order_qty", "reorder_point", "annual_total_cost"]].astype(float)
    ).all()
    assert np.isfinite(out.loc[1, "order_qty"])


# ---------------------------------------------------------------------------------------
# Costs, random lead time, bad rows
# ---------------------------------------------------------------------------------------


def test_annual_costs_add_up() -> None:
    k = 3
    out = compute_policy(
        make_inputs(
            k,
            measure=np.array(list(SERVICE_MEASURES), dtype=object),
            shortage_cost=np.array([4.0, np.nan, 4.0]),
            pack_size=np.array([1.0, 12.0, 5.0]),
        )
    )
    parts = out[
        [
            "annual_ordering_cost",
            "annual_cycle_holding_cost",
            "annual_safety_holding_cost",
            "annual_shortage_cost",
        ]
    ].sum(axis=1)
    np.testing.assert_allclose(out["annual_total_cost"], parts, rtol=1e-12)
    # shortage cost where p is given: p * D / Q * expected units short (Hadley & Whitin 1963)
    exp = 4.0 * out["orders_per_year"][0] * out["expected_units_short_per_cycle"][0]
    assert out["annual_shortage_cost"][0] == pytest.approx(exp)
    assert out["annual_shortage_cost"][1] == 0.0
    ss = out["reorder_point"] - out["lead_time_demand_mean"]
    np.testing.assert_allclose(out["safety_stock"], ss)
    np.testing.assert_allclose(
        out["average_inventory_value"], 10.0 * (out["order_qty"] / 2 + np.maximum(ss, 0))
    )
    np.testing.assert_allclose(
        out["annual_cycle_holding_cost"], order_cost_terms(out["order_qty"], 0.0, 0.0, 2.5)
    )


def test_random_lead_time_sigma_matches_simulation() -> None:
    # sigma_L = sqrt(L sigma_d^2 + d^2 sigma_LT^2) (Silver, Pyke & Peterson 1998, ch. 7)
    # against a simulated sum of a random number of periods' demand
    rng = np.random.default_rng(99)
    d, sd_d = 20.0, 6.0
    lt_values = np.array([3, 4, 5, 6, 7, 8])
    lt_probs = np.array([0.05, 0.15, 0.3, 0.3, 0.15, 0.05])
    L = float(lt_values @ lt_probs)
    sLT = float(np.sqrt(((lt_values - L) ** 2) @ lt_probs))
    trials = 200_000
    lts = rng.choice(lt_values, size=trials, p=lt_probs)
    demand = rng.normal(d, sd_d, size=(trials, lt_values.max()))
    mask = np.arange(lt_values.max())[None, :] < lts[:, None]
    totals = (demand * mask).sum(axis=1)
    mu, sigma = lead_time_demand(d, sd_d, L, sLT)
    se_mean = totals.std(ddof=1) / np.sqrt(trials)
    assert abs(totals.mean() - float(mu)) < 5 * se_mean
    # standard error of the sample variance: sqrt((m4 - s^4) / n)
    dev = totals - totals.mean()
    var = dev.var(ddof=1)
    se_var = np.sqrt(((dev**4).mean() - var**2) / trials)
    assert abs(var - float(sigma) ** 2) < 5 * se_var
    # and the lead-time sd in days feeds through compute_policy the same way
    out = compute_policy(
        make_inputs(
            demand_per_period=d,
            demand_sd_per_period=sd_d,
            lead_time_days=L,
            lead_time_sd_days=sLT,
            days_per_period=1.0,
        )
    )
    assert out["lead_time_demand_sd"][0] == pytest.approx(float(sigma))


def test_bad_rows_give_nan_without_warnings() -> None:
    k = 8
    inp = make_inputs(
        k,
        annual_demand=np.array([0.0, np.nan, 1200, 1200, 1200, 1200, 1200, 1200]),
        unit_cost=np.array([10, 10, np.nan, 10, 10, 10, 10, 10]),
        service_target=np.array([0.95, 0.95, 0.95, 1.0, np.nan, 0.95, 0.95, 0.95]),
        measure=np.array(
            ["cycle service"] * 5 + ["guess", " Fill Rate ", "fill rate"], dtype=object
        ),
        pack_size=np.array([1, 1, 1, 1, 1, 1, 1, 2.5]),
    )
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        out = compute_policy(inp)
    bad = [0, 1, 2, 3, 4, 5, 7]
    assert out.loc[bad, "order_qty"].isna().all()
    assert out.loc[bad, "annual_total_cost"].isna().all()
    assert np.isfinite(out.loc[6, "reorder_point"])  # case and spaces in the measure ignored
    assert not out.loc[bad, "flag_no_safety_stock_pays"].any()


def test_normal_doubtful_flag() -> None:
    # rule of thumb (common practice): sigma_L / mu_L >= 0.5 or mu_L < 10 units
    out = compute_policy(
        make_inputs(
            3,
            demand_per_period=np.array([100.0, 100.0, 2.0]),
            demand_sd_per_period=np.array([30.0, 80.0, 0.5]),
            lead_time_days=7.0,
        )
    )
    assert out["flag_normal_doubtful"].tolist() == [False, True, True]


def test_mixed_measures_and_models_give_each_item_its_own_numbers() -> None:
    """Each measure's reorder point is worked out on that measure's items only: a batch
    mixing the three measures and four models gives every item exactly the numbers it gets
    alone. Reference for the cycle-service rows: brute force on scipy.stats, the smallest
    whole R with P(X <= R) >= target (Poisson: scipy.stats.poisson)."""
    rng = np.random.default_rng(41)
    n = 60
    measures = np.array(SERVICE_MEASURES, dtype=object)[rng.integers(0, 3, n)]
    models = np.array(["normal", "poisson", "negative binomial", "gamma", ""], dtype=object)[
        rng.integers(0, 5, n)
    ]
    d = rng.uniform(0.5, 40.0, n)
    inp = make_inputs(
        n,
        annual_demand=d * 52,
        demand_per_period=d,
        demand_sd_per_period=np.sqrt(d) * rng.uniform(0.6, 2.5, n),
        lead_time_days=rng.uniform(3, 30, n),
        measure=measures,
        service_target=rng.uniform(0.8, 0.99, n),
        shortage_cost=np.where(rng.random(n) < 0.9, rng.uniform(1, 80, n), np.nan),
        pack_size=rng.choice([1.0, 6.0], n),
    )
    inp.model = models
    batch = compute_policy(inp)
    for i in range(n):
        alone = compute_policy(
            PolicyInputs(
                **{
                    f: (v[i : i + 1] if isinstance(v, np.ndarray) else v)
                    for f, v in vars(inp).items()
                }
            )
        )
        pd.testing.assert_frame_equal(
            batch.iloc[[i]].reset_index(drop=True), alone, check_exact=True
        )
    cs = (measures == "cycle service") & (models == "poisson")
    assert cs.any()
    for i in np.flatnonzero(cs):
        mu = batch["lead_time_demand_mean"].iat[i]
        r = 0
        while stats.poisson.cdf(r, mu) < inp.service_target[i] - 1e-12:
            r += 1
        assert batch["reorder_point"].iat[i] == max(r, 0)


def test_model_names_once_per_distinct_value_equal_the_per_item_rule() -> None:
    """item_model_names normalises each distinct name once; the reference is the per-item
    rule itself (pandas strip + lower, missing -> "") applied to every item."""
    from xlpolicy.core.arrays import _normalised_names, item_model_names

    rng = np.random.default_rng(3)
    pool = np.array(
        [" Normal", "POISSON ", "negative binomial", "Gamma", "auto", "bogus", "", None, np.nan],
        dtype=object,
    )
    names = pool[rng.integers(0, len(pool), 500)]
    assert list(item_model_names(names, 500)) == list(_normalised_names(names))
    text_only = pool[:7][rng.integers(0, 7, 500)]
    got = item_model_names(text_only, 500)
    assert list(got) == list(_normalised_names(text_only))
    assert all(type(x) is str for x in got)
    # numbers that hash alike but read differently stay apart (the per-item path)
    mixed = np.array([1, 1.0, True, "Gamma"] * 30, dtype=object)
    assert list(item_model_names(mixed, 120)[:4]) == ["1", "1.0", "true", "gamma"]


def test_smallest_whole_asking_each_point_once_equals_the_plain_rounds() -> None:
    """_smallest_whole_at (each point asked once) against _smallest_whole (the reference:
    two plain rounds) for monotone conditions r >= threshold, with starts below, at and
    above the answer, and NaN, inf and huge starts."""
    from xlpolicy.core.policy import _smallest_whole, _smallest_whole_at

    rng = np.random.default_rng(8)
    n = 4000
    thr = rng.integers(-5, 50, n).astype(float) + rng.choice([0.0, 0.3], n)
    start = np.ceil(thr) + rng.integers(-3, 4, n)
    start[:6] = [np.nan, np.inf, -np.inf, 2.0**60, -(2.0**60), 2.0**53 + 2]
    asked = []

    def at(r: np.ndarray, k: np.ndarray) -> np.ndarray:
        asked.append(len(k))
        return r >= thr[k]

    want = _smallest_whole(start[6:], lambda r: r >= thr[6:])
    got = _smallest_whole_at(start[6:], lambda r, k: at(r, k + 6))
    np.testing.assert_array_equal(got, want)
    assert sum(asked) < 4 * (n - 6)  # fewer points asked than the plain rounds
    np.testing.assert_array_equal(  # the huge starts take the plain rounds
        _smallest_whole_at(start, lambda r, k: r >= thr[k]),
        _smallest_whole(start, lambda r: r >= thr),
    )
