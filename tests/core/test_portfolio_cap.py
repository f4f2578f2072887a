"""Aggregate caps: a stock budget or a cap on orders a year, across all items.

Method: Lagrangian relaxation of the cap (any operations research text on Lagrange
multipliers, e.g. Hillier & Lieberman, "Introduction to Operations Research", from memory;
for order quantities under an aggregate budget or orders limit, Silver, Pyke & Peterson,
"Inventory Management and Production Planning and Scheduling", 3rd ed., 1998, ch. 5,
chapter number from memory). Checked here: the cap is met; no single-item change the
item's rules allow and the cap still admits lowers the total cost (brute force over each
item's order quantities and reorder points, costed independently with scipy.stats); a
slack cap returns the unconstrained policy; the multiplier agrees with the closed-form
continuous optimum.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from xlpolicy.core.policy import PolicyInputs, compute_policy
from xlpolicy.core.portfolio import BUDGET, ORDERS, apply_cap, cap_usage


def inputs(
    measure: str = "cycle service", packs: bool = True, n: int = 6, seed: int = 4
) -> PolicyInputs:
    """A small invented instance (test data only): normal and Poisson items, some packs."""
    rng = np.random.default_rng(seed)
    d = rng.uniform(2, 40, n)
    one = np.ones(n)
    pack = np.where(np.arange(n) % 3 == 1, 6.0, 1.0) if packs else one
    moq = np.where(np.arange(n) % 3 == 2, 30.0, 0.0) if packs else 0 * one
    return PolicyInputs(
        annual_demand=d * 52,
        demand_per_period=d,
        demand_sd_per_period=np.sqrt(d) * 1.5,
        lead_time_days=rng.uniform(5, 21, n),
        lead_time_sd_days=0 * one,
        unit_cost=rng.uniform(2, 60, n),
        order_cost=rng.uniform(10, 50, n),
        holding_rate=0.2 * one,
        measure=np.full(n, measure, dtype=object),
        service_target=0.95 * one,
        shortage_cost=rng.uniform(5, 40, n) if measure == "shortage cost" else np.nan * one,
        pack_size=pack,
        minimum_order=moq,
        days_per_period=7.0,
        model=np.array(["normal", "poisson"] * (n // 2), dtype=object),
    )


class Independent:
    """Each item's cost, usage and rules, computed here with scipy.stats."""

    def __init__(self, inp: PolicyInputs, base):
        self.inp = inp
        self.mu = base["lead_time_demand_mean"].to_numpy(float)
        self.sd = base["lead_time_demand_sd"].to_numpy(float)
        self.models = list(inp.model)

    def dist(self, k: int):
        if self.models[k] == "poisson":
            return stats.poisson(self.mu[k])
        return stats.norm(self.mu[k], self.sd[k])

    def short(self, k: int, r: float) -> float:
        """E[(X - r)^+]: the normal loss function, or a sum over the Poisson pmf."""
        if self.models[k] == "poisson":
            x = np.arange(int(r), int(self.mu[k] + 60 * math.sqrt(self.mu[k]) + 60))
            return float(np.sum(np.maximum(x - r, 0) * stats.poisson.pmf(x, self.mu[k])))
        z = (r - self.mu[k]) / self.sd[k]
        return self.sd[k] * (stats.norm.pdf(z) - z * stats.norm.sf(z))

    def cost(self, k: int, q: float | np.ndarray, r: float) -> float | np.ndarray:
        """Ordering + cycle holding + safety holding + shortage.

        Silver, Pyke & Peterson 1998, ch. 7.
        """
        i = self.inp
        D, S, H = i.annual_demand[k], i.order_cost[k], i.holding_rate[k] * i.unit_cost[k]
        p = i.shortage_cost[k]
        shortage = 0.0 if np.isnan(p) else p * D / q * self.short(k, r)
        return D * S / q + H * q / 2 + H * (r - self.mu[k]) + shortage

    def usage(self, kind: str, k: int, q: float | np.ndarray, r: float) -> float | np.ndarray:
        i = self.inp
        if kind == BUDGET:
            return i.unit_cost[k] * (q / 2 + max(r - self.mu[k], 0.0))
        return i.annual_demand[k] / q

    def allowed(self, k: int, q: float | np.ndarray, r: float) -> np.ndarray:
        """Whether (q, r) keeps the item's rules; ``q`` may be an array (one answer each)."""
        i = self.inp
        q = np.asarray(q, dtype=float)
        pack, moq = i.pack_size[k], i.minimum_order[k]
        ok = (q >= max(pack, moq)) & (np.abs(q / pack - np.round(q / pack)) <= 1e-9) & (r >= 0)
        if str(i.measure[k]) == "cycle service" and r >= 0:
            ok &= bool(self.dist(k).cdf(r) >= i.service_target[k] - 1e-12)
        return ok


def brute_force_no_better_change(inp, res, kind, r_span=6):
    """Every single-item change the rules allow and the cap admits costs at least as much."""
    base = compute_policy(inp)
    ind = Independent(inp, base)
    q = res.policy["order_qty"].to_numpy(float)
    r = res.policy["reorder_point"].to_numpy(float)
    n = len(q)
    costs = np.array([ind.cost(k, q[k], r[k]) for k in range(n)])
    uses = np.array([ind.usage(kind, k, q[k], r[k]) for k in range(n)])
    total, used = costs.sum(), uses.sum()
    assert used <= res.cap * (1 + 1e-12)
    assert total == pytest.approx(res.cost, rel=1e-9)
    checked = 0
    for k in range(n):
        pack = inp.pack_size[k]
        eoq = math.sqrt(
            2 * inp.annual_demand[k] * inp.order_cost[k] / (inp.holding_rate[k] * inp.unit_cost[k])
        )
        q2 = np.arange(pack, 4 * eoq + 4 * pack, pack)  # every order quantity at once
        for r2 in range(int(max(r[k] - r_span, 0)), int(r[k] + r_span + 1)):
            ok = ind.allowed(k, q2, r2) & ~((q2 == q[k]) & (r2 == r[k]))
            new_use = used - uses[k] + ind.usage(kind, k, q2, r2)
            ok &= ~(new_use > res.cap)
            checked += int(ok.sum())
            new_total = total - costs[k] + ind.cost(k, q2, r2)
            worse = ok & ~(new_total >= total - 1e-9 * total)
            assert not worse.any(), (k, q2[worse], r2, new_total[worse], total)
    assert checked > 0  # the check had something to try


@pytest.mark.parametrize("kind, share", [(BUDGET, 0.7), (BUDGET, 0.5), (ORDERS, 0.6)])
def test_binding_cap_is_met_and_no_single_change_lowers_cost(kind, share):
    inp = inputs()
    base = compute_policy(inp)
    cap = share * cap_usage(base, kind)
    res = apply_cap(inp, base, kind, cap)
    assert res.binding and res.feasible and res.multiplier > 0
    assert res.usage <= cap
    assert res.cost > res.uncapped_cost  # the cap binds, so it costs something
    assert res.cost_of_cap == pytest.approx(res.cost - res.uncapped_cost)
    q = res.policy["order_qty"].to_numpy(float)
    assert np.allclose(q / inp.pack_size, np.round(q / inp.pack_size))
    assert np.all(q >= inp.minimum_order)
    brute_force_no_better_change(inp, res, kind)


def test_budget_cap_under_shortage_cost_moves_reorder_points_too():
    inp = inputs("shortage cost")
    base = compute_policy(inp)
    cap = 0.6 * cap_usage(base, BUDGET)
    res = apply_cap(inp, base, BUDGET, cap)
    assert res.binding and res.feasible and res.usage <= cap
    # the multiplier acts as a higher holding cost: less safety stock pays
    assert np.all(res.policy["reorder_point"] <= base["reorder_point"])
    assert np.any(res.policy["reorder_point"] < base["reorder_point"])
    brute_force_no_better_change(inp, res, BUDGET, r_span=4)


@pytest.mark.parametrize("kind", [BUDGET, ORDERS])
def test_slack_cap_returns_the_unconstrained_policy(kind):
    inp = inputs()
    base = compute_policy(inp)
    res = apply_cap(inp, base, kind, 1.01 * cap_usage(base, kind))
    assert not res.binding and res.multiplier == 0 and res.cost_of_cap == 0
    assert res.policy is base
    assert not res.changed.any()


def test_multiplier_matches_the_closed_form_continuous_optimum():
    # Continuous relaxation, cycle service (R fixed): minimise sum D S/Q + H Q/2 subject to
    # sum c Q/2 <= B - safety stock value. Lagrange: Q(lam) = sqrt(2 D S / (c (i + lam))),
    # lam where the budget is spent exactly. Whole units move the discrete answer by at most
    # one unit per item, so the two agree to a few units of usage.
    inp = inputs(packs=False, n=40, seed=9)
    base = compute_policy(inp)
    ss_value = float(np.sum(inp.unit_cost * np.maximum(base["safety_stock"], 0)))
    cap = 0.55 * cap_usage(base, BUDGET)
    res = apply_cap(inp, base, BUDGET, cap)
    D, S, c, i = inp.annual_demand, inp.order_cost, inp.unit_cost, inp.holding_rate

    def spent(lam: float) -> float:
        return float(np.sum(c * np.sqrt(2 * D * S / (c * (i + lam))) / 2)) + ss_value

    lo, hi = 0.0, 100.0
    for _ in range(200):  # plain bisection, independent of the module's
        mid = (lo + hi) / 2
        lo, hi = (mid, hi) if spent(mid) > cap else (lo, mid)
    assert res.multiplier == pytest.approx(hi, rel=0.05)

    # the envelope theorem: the last $ of budget is worth the multiplier a year; check it
    # against the continuous cost's slope, C(B) = sum sqrt(2 D S c (i+lam)) ... by difference
    def cost_at(budget: float) -> float:
        a, b = 0.0, 100.0
        for _ in range(200):
            m = (a + b) / 2
            a, b = (m, b) if spent(m) > budget else (a, m)
        q = np.sqrt(2 * D * S / (c * (i + b)))
        return float(np.sum(D * S / q + i * c * q / 2))

    slope = (cost_at(cap - 50) - cost_at(cap + 50)) / 100
    assert slope == pytest.approx(hi, rel=1e-3)


def test_budget_below_what_the_targets_need_is_reported_infeasible():
    inp = inputs()
    base = compute_policy(inp)
    ss_value = float(np.sum(inp.unit_cost * np.maximum(base["safety_stock"], 0)))
    res = apply_cap(inp, base, BUDGET, 0.5 * ss_value)
    assert res.binding and not res.feasible
    assert res.usage > res.cap
    # the least: every item at its smallest allowed order
    q_min = np.maximum(inp.pack_size, inp.pack_size * np.ceil(inp.minimum_order / inp.pack_size))
    assert np.allclose(res.policy["order_qty"], q_min)
    assert res.least == pytest.approx(
        float(np.sum(inp.unit_cost * (q_min / 2 + np.maximum(base["safety_stock"], 0))))
    )


@pytest.mark.parametrize("kind, share", [(BUDGET, 0.6), (ORDERS, 0.7)])
def test_fill_rate_items_keep_their_target_under_a_cap(kind, share):
    # Under the fill-rate measure R follows Q, so the cap is met by the multiplier rule with
    # each R re-set to the smallest meeting the target; checked: cap met, targets met
    # (fill rate 1 - E[(X - R)^+] / Q recomputed with scipy), whole packs, minimum orders.
    inp = inputs("fill rate")
    base = compute_policy(inp)
    res = apply_cap(inp, base, kind, share * cap_usage(base, kind))
    assert res.binding and res.feasible and res.usage <= res.cap
    ind = Independent(inp, base)
    q = res.policy["order_qty"].to_numpy(float)
    r = res.policy["reorder_point"].to_numpy(float)
    for k in range(len(q)):
        assert 1 - ind.short(k, r[k]) / q[k] >= inp.service_target[k] - 1e-12
        assert ind.allowed(k, q[k], r[k])


def _polish_every_item_each_round(cost, q, r, ok, cap, q_free):
    """Reference for the polish: the same steps, every item's candidates re-costed in every
    round (what the polish did before it kept the costs of items that did not move)."""
    import xlpolicy.core.portfolio as portfolio

    n = q.shape[0]
    dq = np.array([-1.0, -1.0, -1.0, 0.0, 0.0, 1.0, 1.0, 1.0])
    dr = np.array([-1.0, 0.0, 1.0, -1.0, 1.0, -1.0, 0.0, 1.0])
    fr = cost.is_fr & ok
    lo_free, hi_free = np.minimum(q, q_free), np.maximum(q, q_free)
    steps = 0
    for _ in range(portfolio._POLISH_ROUNDS):
        cost_now = cost.evaluate(q, r)["annual_total_cost"].to_numpy(float)
        use_now = cost.usage(q, r)
        slack = cap - float(np.nansum(np.where(ok, use_now, np.nan)))
        cands_q = [np.where(fr, np.nan, q + a * cost.pack) for a in dq]
        cands_r = [r + b for b in dr]
        if fr.any():
            for a in (-1.0, 1.0):
                q_f = q + a * cost.pack
                inside = fr & (q_f >= lo_free - 1e-9) & (q_f <= hi_free + 1e-9)
                cands_q.append(np.where(inside, q_f, np.nan))
                cands_r.append(np.where(inside, cost.fill_rate_reorder(q_f, inside), np.nan))
        m = len(cands_q)
        q_c, r_c = np.concatenate(cands_q), np.concatenate(cands_r)
        ev = cost.evaluate(q_c, r_c, m)
        allowed = cost.allowed(q_c, r_c, ev, m) & np.tile(ok, m)
        with np.errstate(all="ignore"):
            d_cost = (ev["annual_total_cost"].to_numpy(float) - np.tile(cost_now, m)).reshape(m, n)
            d_use = (cost.usage(q_c, r_c, m) - np.tile(use_now, m)).reshape(m, n)
            gain = allowed.reshape(m, n) & (d_cost < -1e-9 * np.maximum(1.0, np.abs(cost_now)))
            score = np.where(d_use <= 0, -1e300, d_cost / d_use)
        score = np.where(gain, score, np.inf)
        best = np.argmin(score, axis=0)
        best_score = score[best, np.arange(n)]
        cand = np.flatnonzero(np.isfinite(best_score))
        if cand.size == 0:
            break
        need = d_use[best[cand], cand]
        fits = need <= slack
        cand, need = cand[fits], need[fits]
        if cand.size == 0:
            break
        order = np.argsort(best_score[cand], kind="stable")
        cand, need = cand[order], need[order]
        take = np.cumsum(need) <= slack + 1e-9 * max(abs(cap), 1.0)
        take[0] = True
        chosen = cand[take]
        q[chosen] = q_c.reshape(m, n)[best[chosen], chosen]
        r[chosen] = r_c.reshape(m, n)[best[chosen], chosen]
        steps += int(chosen.size)
    return q, r, steps


@pytest.mark.parametrize("measure", ["cycle service", "fill rate", "shortage cost"])
@pytest.mark.parametrize("kind", [BUDGET, ORDERS])
def test_polish_recosting_only_moved_items_equals_recosting_all(monkeypatch, measure, kind):
    """The polish keeps the candidate costs of items that did not move; the reference
    re-costs every item in every round. Same steps, so the same policy to the bit."""
    import xlpolicy.core.portfolio as portfolio

    inp = inputs(measure, n=120, seed=12)
    base = compute_policy(inp)
    use = cap_usage(base, kind)
    cap = 0.8 * use
    got = apply_cap(inp, base, kind, cap)
    monkeypatch.setattr(portfolio, "_polish", _polish_every_item_each_round)
    want = apply_cap(inp, base, kind, cap)
    assert got.polish_steps == want.polish_steps and got.polish_steps > 0
    np.testing.assert_array_equal(got.policy["order_qty"], want.policy["order_qty"])
    np.testing.assert_array_equal(got.policy["reorder_point"], want.policy["reorder_point"])
    np.testing.assert_array_equal(got.policy["annual_total_cost"], want.policy["annual_total_cost"])


def varied_inputs(measure: str, seed: int, n: int = 120) -> PolicyInputs:
    """An invented instance with every rule that shapes Q (test data only): packs, minimum
    orders, all-units price breaks on a third of the items, shelf lives on a quarter, and
    the four lead-time demand models."""
    rng = np.random.default_rng(seed)
    d = rng.uniform(0.3, 60, n)
    cost = rng.uniform(1, 80, n)
    qty = np.full((n, 2), np.nan)
    price = np.full((n, 2), np.nan)
    has = np.arange(n) % 3 == 0
    qty[has] = np.stack([d[has] * 8, d[has] * 30], axis=1).round()
    price[has] = np.stack([cost[has] * 0.95, cost[has] * 0.9], axis=1)
    models = np.array(["normal", "poisson", "negative binomial", "gamma"], dtype=object)
    return PolicyInputs(
        annual_demand=d * 52,
        demand_per_period=d,
        demand_sd_per_period=np.sqrt(d) * rng.uniform(0.8, 3, n),
        lead_time_days=rng.uniform(2, 40, n),
        lead_time_sd_days=rng.uniform(0, 4, n),
        unit_cost=cost,
        order_cost=rng.uniform(0, 60, n),
        holding_rate=rng.uniform(0.1, 0.4, n),
        measure=np.full(n, measure, dtype=object),
        service_target=rng.uniform(0.8, 0.995, n),
        shortage_cost=cost * rng.uniform(0.2, 3, n),
        pack_size=rng.choice([1.0, 1.0, 6.0, 12.0, 50.0], n),
        minimum_order=rng.choice([0.0, 0.0, 20.0, 100.0], n),
        days_per_period=7.0,
        model=models[np.arange(n) % 4],
        break_qty=qty,
        break_price=price,
        shelf_life_days=np.where(np.arange(n) % 4 == 1, rng.uniform(10, 200, n), np.nan),
    )


@pytest.mark.parametrize("measure", ["cycle service", "fill rate", "shortage cost"])
@pytest.mark.parametrize("kind", [BUDGET, ORDERS])
@pytest.mark.parametrize("seed", [1, 2])
def test_policy_between_two_multipliers_equals_a_whole_calculation(measure, kind, seed):
    # The bisection re-solves only the items whose Q or R differ at the two ends of its
    # interval, on the ground that each item's Q and R move one way as the multiplier
    # grows. Checked here against a whole compute_policy at points inside the interval,
    # for every measure, with packs, minimums, price breaks, shelf lives and four models.
    from xlpolicy.core.portfolio import _Point, _relaxed

    inp = varied_inputs(measure, seed)
    lams = [0.0, 0.01, 0.03, 0.1, 0.4, 1.5] if kind == BUDGET else [0.0, 1, 4, 15, 60, 250]
    at = [_Point.of(compute_policy(_relaxed(inp, kind, lam)), kind) for lam in lams]
    for j in range(len(lams) - 1):
        for frac in (0.3, 0.7):
            lam = lams[j] + frac * (lams[j + 1] - lams[j])
            whole = _Point.of(compute_policy(_relaxed(inp, kind, lam)), kind)
            part = _Point.between(inp, kind, lam, at[j], at[j + 1])
            np.testing.assert_array_equal(part.q, whole.q)
            np.testing.assert_array_equal(part.r, whole.r)
            np.testing.assert_array_equal(part.share, whole.share)
