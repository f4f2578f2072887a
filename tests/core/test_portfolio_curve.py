"""The exchange curve: safety-stock investment against shortages per year, all items.

Source of the method: Silver, Pyke & Peterson, "Inventory Management and Production
Planning and Scheduling", 3rd ed., 1998, exchange curves (ch. 7 for safety stock; the
chapter number from memory): total safety stock in money against expected units short or
stockout occasions per year, traced by one common parameter. The checks: the curve is
monotone, today's settings are a point of it (computed by the same function), and its
points agree with an independent computation from scipy.stats on a small instance.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from xlpolicy.core.policy import PolicyInputs, compute_policy
from xlpolicy.core.portfolio import exchange_curve, scaled_inputs


def inputs(
    n: int = 24, measure: str = "cycle service", seed: int = 3, targets: np.ndarray | None = None
) -> PolicyInputs:
    """Invented items (test data only) under all four demand models."""
    rng = np.random.default_rng(seed)
    one = np.ones(n)
    d = rng.uniform(0.3, 60, n)
    models = np.array(["normal", "poisson", "negative binomial", "gamma"] * (n // 4), dtype=object)
    return PolicyInputs(
        annual_demand=d * 52,
        demand_per_period=d,
        demand_sd_per_period=np.sqrt(d) * 1.7,
        lead_time_days=rng.uniform(3, 30, n),
        lead_time_sd_days=0 * one,
        unit_cost=rng.uniform(1, 80, n),
        order_cost=rng.uniform(5, 40, n),
        holding_rate=0.22 * one,
        measure=np.full(n, measure, dtype=object),
        service_target=0.95 * one if targets is None else targets,
        shortage_cost=rng.uniform(2, 30, n),
        pack_size=one,
        minimum_order=0 * one,
        days_per_period=7.0,
        model=models,
    )


def totals(pol) -> dict[str, float]:
    """The same sums as the curve's, from one compute_policy frame."""
    return {
        "safety_stock_investment": float(
            np.nansum(
                np.maximum(pol["safety_stock"], 0)
                * pol["annual_purchase_cost"]
                / pol["annual_demand"]
            )
        ),
        "units_short_per_year": float(
            np.nansum(pol["orders_per_year"] * pol["expected_units_short_per_cycle"])
        ),
        "stockout_occasions_per_year": float(
            np.nansum(pol["orders_per_year"] * (1 - pol["cycle_service"]))
        ),
    }


@pytest.mark.parametrize("measure", ["cycle service", "fill rate", "shortage cost"])
def test_curve_is_monotone(measure):
    curve = exchange_curve(inputs(measure=measure), 0.95, measure)
    inv = curve["safety_stock_investment"].to_numpy()
    short = curve["units_short_per_year"].to_numpy()
    occ = curve["stockout_occasions_per_year"].to_numpy()
    # rows run from least stock to most: investment rises as shortages fall
    assert np.all(np.diff(inv) >= 0) and inv[-1] > inv[0]
    assert np.all(np.diff(short) <= 1e-9) and short[-1] < short[0]
    if measure != "shortage cost":  # Q is fixed there; under shortage cost Q moves with p
        assert np.all(np.diff(occ) <= 1e-9) and occ[-1] < occ[0]
    assert curve["current"].sum() == 1


@pytest.mark.parametrize("measure", ["cycle service", "fill rate", "shortage cost"])
def test_curve_passes_through_todays_policy(measure):
    # items with targets of their own too: the common factor leaves them as they are at f=1
    targets = np.where(np.arange(24) % 3 == 0, 0.99, 0.9)
    inp = inputs(measure=measure, targets=targets)
    curve = exchange_curve(inp, 0.9, measure)
    today = curve[curve["current"]].iloc[0]
    expect = totals(compute_policy(inp))
    for key, value in expect.items():
        assert today[key] == pytest.approx(value, rel=1e-12, abs=1e-12)
    if measure == "shortage cost":
        assert today["shortage_cost_multiplier"] == 1.0
    else:
        assert today["default_target"] == 0.9


def test_common_factor_scales_the_odds_of_running_short():
    # items on the default all get the curve's target; an item with its own target keeps
    # the same odds ratio to them: (1 - t')/t' = f (1 - t)/t
    inp = inputs(n=4, targets=np.array([0.95, 0.95, 0.99, 0.8]))
    f = (1 - 0.9) / 0.9 / ((1 - 0.95) / 0.95)  # the factor that takes 0.95 to 0.9
    out = scaled_inputs(inp, np.array([1.0, f]))
    t = out.service_target.reshape(2, 4)
    np.testing.assert_array_equal(t[0], [0.95, 0.95, 0.99, 0.8])
    np.testing.assert_allclose(t[1, :2], 0.9)
    np.testing.assert_allclose((1 - t[1]) / t[1], f * (1 - t[0]) / t[0])


def test_points_against_scipy_on_a_small_instance():
    # Two normal items and one Poisson item at cycle-service targets. Independently:
    # R = smallest whole r with F(r) >= target; Q = the cheaper whole number beside the EOQ
    # sqrt(2 D S / H) (Harris 1913; Wilson 1934); units short per cycle E[(X - R)^+] (normal:
    # sigma G(z), G(z) = phi(z) - z (1 - Phi(z)), Silver, Pyke & Peterson 1998; Poisson: a
    # sum over the pmf); stockouts per year D/Q P(X > R).
    D = np.array([2600.0, 1040.0, 156.0])
    d = D / 52
    sd = np.array([12.0, 7.0, math.sqrt(3.0)])
    lead = np.array([14.0, 7.0, 7.0])
    c = np.array([8.0, 30.0, 55.0])
    S = np.array([25.0, 40.0, 15.0])
    i = 0.2
    inp = PolicyInputs(
        annual_demand=D,
        demand_per_period=d,
        demand_sd_per_period=sd,
        lead_time_days=lead,
        lead_time_sd_days=np.zeros(3),
        unit_cost=c,
        order_cost=S,
        holding_rate=np.full(3, i),
        measure=np.full(3, "cycle service", dtype=object),
        service_target=np.full(3, 0.95),
        shortage_cost=np.full(3, np.nan),
        pack_size=np.ones(3),
        minimum_order=np.zeros(3),
        days_per_period=7.0,
        model=np.array(["normal", "normal", "poisson"], dtype=object),
    )
    curve = exchange_curve(inp, 0.95, "cycle service", targets=(0.8, 0.9, 0.99))
    mu = d * lead / 7
    sig = sd * np.sqrt(lead / 7)
    H = i * c
    eoq = np.sqrt(2 * D * S / H)
    lo, hi = np.floor(eoq), np.ceil(eoq)
    q = np.where(D * S / hi + H * hi / 2 < D * S / lo + H * lo / 2, hi, lo)
    for target in (0.8, 0.9, 0.95, 0.99):
        row = curve[np.isclose(curve["default_target"], target)].iloc[0]
        inv = short = occ = 0.0
        for k in range(3):
            if k < 2:
                dist = stats.norm(mu[k], sig[k])
                r = math.ceil(dist.ppf(target))
                r = r - 1 if dist.cdf(r - 1) >= target else r
                z = (r - mu[k]) / sig[k]
                es = sig[k] * (stats.norm.pdf(z) - z * stats.norm.sf(z))
            else:
                dist = stats.poisson(mu[k])
                r = int(next(x for x in range(1000) if dist.cdf(x) >= target))
                x = np.arange(r, 400)
                es = float(np.sum((x - r) * dist.pmf(x)))
            inv += c[k] * max(r - mu[k], 0.0)
            short += D[k] / q[k] * es
            occ += D[k] / q[k] * dist.sf(r)
        assert row["safety_stock_investment"] == pytest.approx(inv, rel=1e-9)
        assert row["units_short_per_year"] == pytest.approx(short, rel=1e-9)
        assert row["stockout_occasions_per_year"] == pytest.approx(occ, rel=1e-9)
        assert row["fill_rate_overall"] == pytest.approx(1 - short / D.sum(), rel=1e-12)
        # the holding cost of that safety stock, on the same basis: holding rate x it
        assert row["annual_safety_holding_cost"] == pytest.approx(i * inv, rel=1e-9)


def test_at_low_targets_no_safety_stock_costs_nothing_to_hold():
    # Below a 50 % target the normal model's reorder point sits under the mean lead-time
    # demand: negative safety stock. Counted as no safety stock, its investment is 0 and so
    # is its holding cost (never a negative cost beside a zero investment).
    inp = inputs(n=8)
    curve = exchange_curve(inp, 0.95, "cycle service", targets=(0.2, 0.35, 0.5))
    assert (curve["annual_safety_holding_cost"] >= 0).all()
    low = curve[curve["safety_stock_investment"] == 0]
    assert (low["annual_safety_holding_cost"] == 0).all()
    # every item here has the holding rate 0.22: the cost is that share of the investment
    assert np.allclose(
        curve["annual_safety_holding_cost"], 0.22 * curve["safety_stock_investment"], rtol=1e-9
    )


def test_items_that_cannot_be_planned_are_left_out():
    inp = inputs(n=4)
    inp.annual_demand[1] = np.nan
    curve = exchange_curve(inp, 0.95, "cycle service")
    assert (curve["items"] == 3).all()
    assert np.isfinite(curve["safety_stock_investment"]).all()


def test_curve_with_price_breaks_passes_through_todays_policy():
    """Per-item tables (the padded price breaks, items x breaks) are tiled with the items.

    The reference is compute_policy on the same inputs; the curve's point for today's
    settings must be that policy exactly (found when the price-break and curve work met).
    """
    from dataclasses import replace

    inp = inputs(n=12)
    qty = np.tile(np.array([[0.0, 100.0, 500.0]]), (12, 1))
    price = np.asarray(inp.unit_cost)[:, None] * np.array([[1.0, 0.97, 0.93]])
    qty[::3, 2] = np.nan  # some items have only two breaks (NaN pads the table)
    price[::3, 2] = np.nan
    inp = replace(inp, break_qty=qty, break_price=price)
    curve = exchange_curve(inp, 0.95, "cycle service")
    today = curve[curve["current"]].iloc[0]
    expect = totals(compute_policy(inp))
    for key, value in expect.items():
        assert today[key] == pytest.approx(value, rel=1e-12, abs=1e-12)


def test_curve_in_groups_of_points_is_the_same(monkeypatch):
    """Points are computed a group at a time (bounded memory); the curve must not change.

    The reference is the same curve computed in one call over all points.
    """
    import xlpolicy.core.portfolio as portfolio

    inp = inputs(n=24, measure="fill rate")
    whole = exchange_curve(inp, 0.95, "fill rate")
    monkeypatch.setattr(portfolio, "CURVE_ROWS", 30)  # one point (24 rows) per call
    grouped = portfolio.exchange_curve(inp, 0.95, "fill rate")
    assert grouped.equals(whole)


def test_auto_curve_is_left_out_for_a_big_catalogue_with_a_note(tmp_path, monkeypatch):
    """Setting 'auto' (the default) skips the curve past CURVE_AUTO_MAX items and says so;
    'yes' (or --curve) traces it anyway."""
    from builders import simple_workbook

    import xlpolicy
    import xlpolicy.planner as planner

    src = simple_workbook(tmp_path / "w.xlsx")
    monkeypatch.setattr(planner, "CURVE_AUTO_MAX", 2)  # three items: past the limit
    report = xlpolicy.analyse(src)
    assert "exchange_curve" not in report.portfolio
    assert any(p.code == "exchange-curve-skipped" for p in report.problems)
    forced = xlpolicy.analyse(src, exchange_curve=True)
    assert "exchange_curve" in forced.portfolio
    monkeypatch.setattr(planner, "CURVE_AUTO_MAX", 20_000)
    assert "exchange_curve" in xlpolicy.analyse(src).portfolio
