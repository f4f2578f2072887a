"""Decisions across all items at once: the exchange curve and aggregate caps.

Both work on the same :class:`~xlpolicy.core.policy.PolicyInputs` the single-item policy
uses and call :func:`~xlpolicy.core.policy.compute_policy` and
:func:`~xlpolicy.core.policy.evaluate_policy` on whole columns, so every number here is made
by the same formulas, under each item's own demand model, as the Policy sheet's.

Exchange curve (Silver, Pyke & Peterson, *Inventory Management and Production Planning and
Scheduling*, 3rd ed., 1998, ch. 7, "exchange curves"; chapter from memory): total safety-
stock investment against expected units short and stockout occasions per year, across all
items, traced by one common parameter. The parameter is the one the owner actually sets:
the service target (or, under the shortage-cost measure, the shortage cost). Each point
moves every item's setting together: the odds of running short in a cycle, (1 - target) /
target, are multiplied by one common factor f (so items on the Settings default all get
the same new target, and an item with its own target keeps its place relative to the
others), and a shortage cost is divided by f (the cost-optimal chance of running short is
about Q H / (p D), inversely proportional to p). f = 1 is today's settings, so today's
policy is a point of the curve, computed in the same call. Items x points are computed at
once by tiling the inputs; there is no per-item loop.

Aggregate caps (Lagrangian relaxation; e.g. Hillier & Lieberman, *Introduction to
Operations Research*, on Lagrange multipliers for constrained optimisation; Silver, Pyke &
Peterson 1998, ch. 5, on order quantities under an aggregate budget or a limit on the
number of orders; both references from memory): minimise the total annual cost subject to
a cap on the total average inventory value, sum c (Q/2 + max(R - mu, 0)) <= B, or on the
total orders a year, sum D / Q <= N. Adding lambda times the capped quantity to the cost
splits the problem by item, and each item's relaxed problem is the ordinary one with a
changed input: a budget multiplier lambda (per $ of average stock per year) raises every
holding rate to i + lambda; an orders multiplier lambda (per order) raises every order
cost to S + lambda. So for a given lambda, compute_policy gives every item's best Q (and,
under the shortage-cost measure, its best R) with pack sizes and minimum orders respected;
bisection on lambda finds the smallest multiplier whose policy meets the cap. Because Q
moves in whole packs, the usage is a step function of lambda and usually some slack is
left: a greedy pass then spends it on single-item steps (one pack, one unit of reorder
point) that lower the true cost, best saving per unit of the cap first, until none fits.
The result meets the cap, and (for the cycle-service and shortage-cost measures) no such
step that stays within it lowers the total cost (the tests check any single-item change by
brute force). Under the fill-rate measure R follows Q (the smallest R meeting the target
for that Q), so there the multiplier chooses Q and each R is re-set to keep the target: a
policy that meets the cap and every target, not a proven least-cost one (the fill-rate
rule itself sets Q by the EOQ without regard to R).
"""

from __future__ import annotations

from dataclasses import dataclass, field, fields, replace
from typing import Any

import numpy as np
import pandas as pd

from xlpolicy.contract import CYCLE_SERVICE, FILL_RATE, SHORTAGE_COST
from xlpolicy.core.models import MODEL_NAMES, NormalLeadTimeDemand, model_factory
from xlpolicy.core.policy import PROB_TOL, PolicyInputs, compute_policy, evaluate_policy

__all__ = [
    "EXCHANGE_COLUMNS",
    "DEFAULT_CURVE_TARGETS",
    "DEFAULT_CURVE_MULTIPLIERS",
    "BUDGET",
    "ORDERS",
    "CapResult",
    "exchange_curve",
    "scaled_inputs",
    "tile_inputs",
    "apply_cap",
    "cap_usage",
]

#: Service targets (for the items on the Settings default) at which the curve is traced;
#: today's default target is always added.
DEFAULT_CURVE_TARGETS: tuple[float, ...] = (
    0.5,
    0.75,
    0.8,
    0.85,
    0.9,
    0.925,
    0.95,
    0.97,
    0.98,
    0.99,
    0.995,
    0.999,
)
#: Multipliers on every shortage cost (shortage-cost measure); 1 (today) is among them.
DEFAULT_CURVE_MULTIPLIERS: tuple[float, ...] = (0.1, 0.2, 0.5, 1.0, 2.0, 5.0, 10.0, 20.0, 50.0)

#: Columns of :func:`exchange_curve`, one row per point, lowest investment first.
EXCHANGE_COLUMNS: tuple[str, ...] = (
    "default_target",
    "shortage_cost_multiplier",
    "shortage_odds_factor",
    "safety_stock_investment",
    "units_short_per_year",
    "stockout_occasions_per_year",
    "fill_rate_overall",
    "annual_safety_holding_cost",
    "items",
    "current",
)

BUDGET = "budget"
ORDERS = "orders"

_BISECTION_REL = 1e-4  # the polish spends what a coarser multiplier leaves
_BISECTION_MAX = 80
_BRACKET_MAX = 80
_POLISH_ROUNDS = 10_000


def tile_inputs(inp: PolicyInputs, k: int) -> PolicyInputs:
    """The inputs repeated k times, point-major (row p * n + i is item i at point p).

    Every per-item field (an array whose first axis is the items: a column, or a table
    per item such as the padded price breaks) is tiled along that axis; scalars and the
    scalar days_per_period are left as they are, so fields added to PolicyInputs later are
    carried along.
    """
    n = np.asarray(inp.annual_demand).reshape(-1).shape[0]
    out: dict[str, Any] = {}  # each field's value, of that field's type
    for f in fields(inp):
        val = getattr(inp, f.name)
        if val is not None and np.ndim(val) >= 1 and len(val) == n:
            arr = np.asarray(val)
            out[f.name] = np.tile(arr, (k,) + (1,) * (arr.ndim - 1))
    return replace(inp, **out)


def take_inputs(inp: PolicyInputs, rows: np.ndarray) -> PolicyInputs:
    """The inputs of some items only (``rows``: their positions), every per-item field cut.

    Per-item fields are found as in :func:`tile_inputs` (first axis = the items), so
    fields added to PolicyInputs later are cut along with the others.
    """
    n = np.asarray(inp.annual_demand).reshape(-1).shape[0]
    out: dict[str, Any] = {}  # each field's value, of that field's type
    for f in fields(inp):
        val = getattr(inp, f.name)
        if val is not None and np.ndim(val) >= 1 and len(val) == n:
            out[f.name] = np.asarray(val)[rows]
    return replace(inp, **out)


def _item_column(inp: PolicyInputs, name: str, n: int, dtype: type = float) -> np.ndarray:
    return np.broadcast_to(np.asarray(getattr(inp, name), dtype=dtype), (n,)).copy()


def _measures(inp: PolicyInputs, n: int) -> np.ndarray:
    raw = _item_column(inp, "measure", n, object).astype(str)
    return np.char.lower(np.char.strip(raw))


def scaled_inputs(inp: PolicyInputs, factors: np.ndarray) -> PolicyInputs:
    """The inputs tiled once per factor f, each item's setting moved by f.

    Service measures: the odds of running short, (1 - t) / t, times f, i.e.
    t' = t / (t + f (1 - t)). Shortage cost: p' = p / f. f = 1 leaves the inputs exactly
    as they are (today's settings).
    """
    f_arr = np.asarray(factors, dtype=float).reshape(-1)
    n = np.asarray(inp.annual_demand).reshape(-1).shape[0]
    k = f_arr.shape[0]
    t = np.tile(_item_column(inp, "service_target", n), k)
    p = np.tile(_item_column(inp, "shortage_cost", n), k)
    f = np.repeat(f_arr, n)
    with np.errstate(all="ignore"):
        t_new = np.where(f == 1.0, t, t / (t + f * (1.0 - t)))
        p_new = np.where(f == 1.0, p, p / f)
    tiled = tile_inputs(inp, k)
    return replace(
        tiled,
        service_target=t_new,
        shortage_cost=p_new,
        measure=np.tile(_item_column(inp, "measure", n, object), k),
    )


def _odds(t: float) -> float:
    return (1.0 - t) / t


#: Rows (items x curve points) per compute_policy call when tracing the exchange curve.
CURVE_ROWS = 250_000
#: With the setting "auto" (the default), the curve is traced for up to this many planned
#: items: each point is a whole policy calculation, so at 100,000 items the curve's 13
#: points would double the run (measured: 48 s against 25 s).
CURVE_AUTO_MAX = 20_000


def exchange_curve(
    inp: PolicyInputs,
    default_target: float,
    measure: str,
    targets: tuple[float, ...] = DEFAULT_CURVE_TARGETS,
    multipliers: tuple[float, ...] = DEFAULT_CURVE_MULTIPLIERS,
) -> pd.DataFrame:
    """Safety-stock investment against shortages per year, across all items, per point.

    ``measure`` (the Settings service measure) picks the parameter: the default service
    target (points at ``targets`` plus ``default_target``) or a multiplier on every
    shortage cost (``multipliers``, which should include 1). Per point, over the items
    compute_policy can plan: safety_stock_investment = sum c max(R - mu, 0) (as the
    Summary's safety stock value); units_short_per_year = sum D/Q n(R);
    stockout_occasions_per_year = sum D/Q P(X > R); fill_rate_overall = 1 - units short /
    demand; annual_safety_holding_cost = sum H max(R - mu, 0), on the investment's basis
    (the price paid, safety stock above 0 only). ``current`` marks today's point
    (f = 1). Rows run from the lowest investment to the highest.
    """
    key = str(measure).strip().lower()
    if key == SHORTAGE_COST:
        mult = np.array(sorted({float(m) for m in multipliers if m > 0} | {1.0}))
        factors = 1.0 / mult
        shown_t = np.full(mult.shape, np.nan)
        shown_m = mult
    else:
        t0 = float(default_target)
        grid = np.array(sorted({float(t) for t in targets if 0 < t < 1} | {t0}))
        factors = np.array([1.0 if g == t0 else _odds(g) / _odds(t0) for g in grid])
        shown_t = grid
        shown_m = np.full(grid.shape, np.nan)
    n = np.asarray(inp.annual_demand).reshape(-1).shape[0]
    k = factors.shape[0]
    # A few points per compute_policy call: one call over all items x points at once holds
    # every point's whole policy frame (2.4 GB at 100,000 items); groups of points of about
    # CURVE_ROWS rows keep the memory of one group, each call still vectorised.
    per_call = max(1, CURVE_ROWS // max(n, 1))
    wanted = (
        "order_qty",
        "orders_per_year",
        "safety_stock",
        "expected_units_short_per_cycle",
        "cycle_service",
        "annual_demand",
        "annual_safety_holding_cost",
        "unit_price",
    )
    parts: dict[str, list[np.ndarray]] = {key: [] for key in wanted}
    for a in range(0, k, per_call):
        pol = compute_policy(scaled_inputs(inp, factors[a : a + per_call]))
        for key in wanted:
            # Stock is valued at the price paid (the price break's, where there are breaks).
            col = (
                pol[key]
                if key in pol.columns
                else np.tile(_item_column(inp, "unit_cost", n), len(factors[a : a + per_call]))
            )
            parts[key].append(np.asarray(col, dtype=float))

    def per_point(key: str) -> np.ndarray:
        return np.concatenate(parts[key]).reshape(k, n)

    c = per_point("unit_price")
    q = per_point("order_qty")
    orders = per_point("orders_per_year")
    ss = per_point("safety_stock")
    short = per_point("expected_units_short_per_cycle")
    csl = per_point("cycle_service")
    demand = per_point("annual_demand")
    planned = np.isfinite(q)
    with np.errstate(all="ignore"):
        units_short = np.nansum(orders * short, axis=1)
        total_demand = np.nansum(np.where(planned, demand, np.nan), axis=1)
        frame = pd.DataFrame(
            {
                "default_target": shown_t,
                "shortage_cost_multiplier": shown_m,
                "shortage_odds_factor": factors,
                "safety_stock_investment": np.nansum(np.maximum(ss, 0.0) * c, axis=1),
                "units_short_per_year": units_short,
                "stockout_occasions_per_year": np.nansum(orders * (1.0 - csl), axis=1),
                "fill_rate_overall": np.where(
                    total_demand > 0, 1.0 - units_short / total_demand, np.nan
                ),
                # on the investment's basis: safety stock above 0 only (H max(R - mu, 0))
                "annual_safety_holding_cost": np.nansum(
                    np.where(ss > 0, per_point("annual_safety_holding_cost"), 0.0), axis=1
                ),
                "items": planned.sum(axis=1).astype(float),
                "current": factors == 1.0,
            },
            columns=list(EXCHANGE_COLUMNS),
        )
    # lower f = fewer shortages = more stock: order by falling factor
    return frame.sort_values("shortage_odds_factor", ascending=False, kind="stable").reset_index(
        drop=True
    )


# ---------------------------------------------------------------------------------------
# Aggregate caps
# ---------------------------------------------------------------------------------------


@dataclass
class CapResult:
    """What capping the whole portfolio did.

    ``policy``: compute_policy's columns for every item, at the true costs (the
    unconstrained frame itself when the cap does not bind). ``usage`` and
    ``uncapped_usage``: the capped total (average inventory value, or orders a year) with
    and without the cap; ``cost``/``uncapped_cost``: the annual total cost. ``multiplier``:
    the Lagrange multiplier at which the cap is met (0 when it does not bind), in $ of
    yearly cost per $ of average stock (budget) or per order a year (orders).
    ``feasible`` is False when even the least the policies allow (one pack or the minimum
    order per item, and the reorder points the service targets need) is above the cap;
    ``least`` is then that least usage (NaN otherwise). ``changed``: items whose Q or R
    differs.
    """

    kind: str
    cap: float
    binding: bool
    feasible: bool
    multiplier: float
    usage: float
    uncapped_usage: float
    cost: float
    uncapped_cost: float
    least: float
    policy: pd.DataFrame
    changed: np.ndarray = field(default_factory=lambda: np.zeros(0, dtype=bool))
    polish_steps: int = 0

    @property
    def cost_of_cap(self) -> float:
        """Yearly total cost with the cap minus without it."""
        return self.cost - self.uncapped_cost


def cap_usage(policy: pd.DataFrame, kind: str) -> float:
    """The capped total of a policy frame: average inventory value or orders a year."""
    key = "average_inventory_value" if kind == BUDGET else "orders_per_year"
    return float(np.nansum(policy[key].to_numpy(float)))


def _relaxed(inp: PolicyInputs, kind: str, lam: float) -> PolicyInputs:
    """The item problems with the multiplier folded in (holding rate or order cost)."""
    if kind == BUDGET:
        return replace(inp, holding_rate=np.asarray(inp.holding_rate, dtype=float) + lam)
    return replace(inp, order_cost=np.asarray(inp.order_cost, dtype=float) + lam)


class _Costing:
    """Per-item true costs, usage and rule checks of (Q, R) pairs, all items at once."""

    def __init__(self, inp: PolicyInputs, base: pd.DataFrame, kind: str):
        n = len(base)
        self.kind = kind
        self.mu = base["lead_time_demand_mean"].to_numpy(float)
        self.sd = base["lead_time_demand_sd"].to_numpy(float)
        self.model = base["model"].to_numpy(object)
        self.D = base["annual_demand"].to_numpy(float)
        self.c = _item_column(inp, "unit_cost", n)
        self.S = _item_column(inp, "order_cost", n)
        self.H = _item_column(inp, "holding_rate", n) * self.c
        self.p = _item_column(inp, "shortage_cost", n)
        self.target = _item_column(inp, "service_target", n)
        measure = _measures(inp, n)
        self.is_cs = measure == CYCLE_SERVICE
        self.is_fr = measure == FILL_RATE
        pack = np.round(np.nan_to_num(_item_column(inp, "pack_size", n), nan=1.0))
        self.pack = np.maximum(pack, 1.0)
        moq = np.nan_to_num(_item_column(inp, "minimum_order", n))
        self.q_min = self.pack * np.maximum(1.0, np.ceil(moq / self.pack - 1e-9))

    def fill_rate_reorder(self, q: np.ndarray, which: np.ndarray) -> np.ndarray:
        """For the items in ``which``: the smallest whole R >= 0 whose fill rate with
        order quantity q meets the target (as compute_policy sets it); NaN elsewhere."""
        out = np.full(q.shape, np.nan)
        names = np.where(self.model == "", NormalLeadTimeDemand.name, self.model)
        for name in MODEL_NAMES:
            k = np.flatnonzero(which & (names == name))
            if not k.size:
                continue
            model = model_factory(name)(self.mu[k], self.sd[k])
            t, qk = self.target[k], q[k]
            with np.errstate(all="ignore"):
                start = np.ceil(model.min_r_for_shortage((1.0 - t) * qk) - 1e-9)
                meets = lambda x, m=model, t=t, qk=qk: (  # noqa: E731
                    1.0 - m.expected_shortage(x) / qk >= t - PROB_TOL
                )
                r = start
                for _ in range(2):
                    r = np.where(meets(r - 1.0), r - 1.0, r)
                    r = np.where(meets(r), r, r + 1.0)
            out[k] = np.maximum(r, 0.0)
        return out

    def evaluate(self, q: np.ndarray, r: np.ndarray, reps: int = 1) -> pd.DataFrame:
        """evaluate_policy at the true costs; q and r hold ``reps`` stacked copies."""

        def t(x: np.ndarray) -> np.ndarray:
            return np.tile(x, reps)

        return evaluate_policy(
            q,
            r,
            t(self.mu),
            t(self.sd),
            t(self.model),
            t(self.D),
            t(self.S),
            t(self.H),
            t(self.c),
            t(self.p),
        )

    def evaluate_at(self, k: np.ndarray, q: np.ndarray, r: np.ndarray) -> pd.DataFrame:
        """evaluate for the items k (indices, repeats allowed) at their (q, r)."""
        return evaluate_policy(
            q,
            r,
            self.mu[k],
            self.sd[k],
            self.model[k],
            self.D[k],
            self.S[k],
            self.H[k],
            self.c[k],
            self.p[k],
        )

    def usage_at(self, k: np.ndarray, q: np.ndarray, r: np.ndarray) -> np.ndarray:
        """usage for the items k at their (q, r)."""
        with np.errstate(all="ignore"):
            if self.kind == BUDGET:
                return self.c[k] * (q / 2.0 + np.maximum(r - self.mu[k], 0.0))
            return self.D[k] / q

    def allowed_at(
        self, k: np.ndarray, q: np.ndarray, r: np.ndarray, ev: pd.DataFrame
    ) -> np.ndarray:
        """allowed for the items k at their (q, r), ev = evaluate_at(k, q, r)."""
        t, cs, fr = self.target[k], self.is_cs[k], self.is_fr[k]
        ok = (
            (q >= self.q_min[k] - 1e-9)
            & (r >= 0)
            & np.isfinite(ev["annual_total_cost"].to_numpy(float))
        )
        ok &= ~cs | (ev["cycle_service"].to_numpy(float) >= t - PROB_TOL)
        ok &= ~fr | (ev["fill_rate"].to_numpy(float) >= t - PROB_TOL)
        return ok

    def usage(self, q: np.ndarray, r: np.ndarray, reps: int = 1) -> np.ndarray:
        with np.errstate(all="ignore"):
            if self.kind == BUDGET:
                c, mu = np.tile(self.c, reps), np.tile(self.mu, reps)
                return c * (q / 2.0 + np.maximum(r - mu, 0.0))
            return np.tile(self.D, reps) / q

    def allowed(self, q: np.ndarray, r: np.ndarray, ev: pd.DataFrame, reps: int = 1) -> np.ndarray:
        """Whether (q, r) is a policy the item's rules accept (packs, minimum, target)."""
        t = np.tile(self.target, reps)
        cs, fr = np.tile(self.is_cs, reps), np.tile(self.is_fr, reps)
        ok = (
            (q >= np.tile(self.q_min, reps) - 1e-9)
            & (r >= 0)
            & np.isfinite(ev["annual_total_cost"].to_numpy(float))
        )
        ok &= ~cs | (ev["cycle_service"].to_numpy(float) >= t - PROB_TOL)
        ok &= ~fr | (ev["fill_rate"].to_numpy(float) >= t - PROB_TOL)
        return ok


@dataclass(frozen=True)
class _Point:
    """Every item's order quantity, reorder point and share of the cap at one multiplier."""

    q: np.ndarray
    r: np.ndarray
    share: np.ndarray  # average inventory value (budget) or orders a year; NaN: not planned

    @property
    def usage(self) -> float:
        """The capped total, as :func:`cap_usage` gives it for the whole frame."""
        return float(np.nansum(self.share))

    @classmethod
    def of(cls, policy: pd.DataFrame, kind: str) -> _Point:
        key = "average_inventory_value" if kind == BUDGET else "orders_per_year"
        return cls(
            policy["order_qty"].to_numpy(float),
            policy["reorder_point"].to_numpy(float),
            policy[key].to_numpy(float),
        )

    @classmethod
    def between(cls, inp: PolicyInputs, kind: str, lam: float, lo: _Point, hi: _Point) -> _Point:
        """The policy at multiplier ``lam``, for ``lo`` and ``hi`` the policies at two
        multipliers on either side of it, computing only the items that can move.

        Each item's relaxed problem is the ordinary one with a higher holding rate (budget)
        or order cost (orders cap), and an item's order quantity only falls as its holding
        rate rises and only rises as its order cost does (the EOQ, the cheaper pack multiple
        of it and the cheapest price break all move one way, since each comparison between
        a larger and a smaller quantity tips further the same way; its reorder point then
        moves one way too under the service measures: a cycle-service R does not depend on
        the costs, a fill-rate R only on Q). So such an item whose Q and R are the same at
        both ends has them at every multiplier between, and only the others are solved
        again: near the end of the bisection a few per cent of the items. Under the
        shortage-cost measure R is the cheaper of the floor and ceiling of a quantile that
        the costs move, and that choice can flip back and forth (a test found one), so
        those items are always solved again. An item's policy does not depend on the other
        items in the call (compute_policy), so the result equals a whole call's.
        """
        shortage = _measures(inp, len(hi.q)) == SHORTAGE_COST
        same = _equal(lo.q, hi.q) & _equal(lo.r, hi.r) & ~shortage
        move = np.flatnonzero(~same)
        q, r, share = hi.q.copy(), hi.r.copy(), hi.share.copy()
        if move.size:
            got = cls.of(compute_policy(take_inputs(_relaxed(inp, kind, lam), move)), kind)
            q[move], r[move], share[move] = got.q, got.r, got.share
        return cls(q, r, share)


def _equal(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Element-wise equality that counts two NaNs (an item not planned) as equal."""
    return (a == b) | (np.isnan(a) & np.isnan(b))


def apply_cap(inp: PolicyInputs, base: pd.DataFrame, kind: str, cap: float) -> CapResult:
    """The least-cost policies whose total average inventory value (kind "budget") or total
    orders a year (kind "orders") is at most ``cap``; see the module docstring.

    ``base`` is compute_policy(inp), the unconstrained policy. Where it already meets the
    cap it is returned unchanged (binding False, multiplier 0). Items compute_policy cannot
    plan (NaN) are left out of the totals and untouched.
    """
    if kind not in (BUDGET, ORDERS):
        raise ValueError(f"unknown cap kind {kind!r}")
    cost0 = float(np.nansum(base["annual_total_cost"].to_numpy(float)))
    use0 = cap_usage(base, kind)
    n = len(base)
    if use0 <= cap or n == 0:
        return CapResult(
            kind,
            cap,
            False,
            True,
            0.0,
            use0,
            use0,
            cost0,
            cost0,
            float("nan"),
            base,
            np.zeros(n, dtype=bool),
        )

    # bracket: quadruple the multiplier until the cap is met (or it clearly cannot be)
    scale = (
        0.05
        if kind == BUDGET
        else max(float(np.nanmedian(_item_column(inp, "order_cost", n))), 1.0)
    )
    lo, hi = 0.0, scale
    at_lo = _Point.of(base, kind)
    at_hi = _Point.of(compute_policy(_relaxed(inp, kind, hi)), kind)
    for _ in range(_BRACKET_MAX):
        if at_hi.usage <= cap:
            break
        prev = at_hi.usage
        lo, hi, at_lo = hi, hi * 4.0, at_hi
        at_hi = _Point.of(compute_policy(_relaxed(inp, kind, hi)), kind)
        if kind == BUDGET and prev - at_hi.usage <= 1e-9 * max(prev, 1.0) and hi > 1e3:
            break  # at the floor: the targets and minimum orders need more than the cap
    feasible = at_hi.usage <= cap
    if feasible:
        for _ in range(_BISECTION_MAX):
            if hi - lo <= _BISECTION_REL * hi:
                break
            mid = 0.5 * (lo + hi)
            at_mid = _Point.between(inp, kind, mid, at_lo, at_hi)
            if at_mid.usage <= cap:
                hi, at_hi = mid, at_mid
            else:
                lo, at_lo = mid, at_mid
    q, r = at_hi.q.copy(), at_hi.r.copy()
    ok = np.isfinite(q) & np.isfinite(base["order_qty"].to_numpy(float))
    cost = _Costing(inp, base, kind)
    steps = 0
    if feasible:
        q, r, steps = _polish(cost, q, r, ok, cap, base["order_qty"].to_numpy(float))
    policy = _restate(base, cost, q, r, ok)
    use = cap_usage(policy, kind)
    changed = ok & (
        (policy["order_qty"].to_numpy(float) != base["order_qty"].to_numpy(float))
        | (policy["reorder_point"].to_numpy(float) != base["reorder_point"].to_numpy(float))
    )
    return CapResult(
        kind,
        cap,
        True,
        feasible,
        hi if feasible else float("nan"),
        use,
        use0,
        float(np.nansum(policy["annual_total_cost"].to_numpy(float))),
        cost0,
        use if not feasible else float("nan"),
        policy,
        changed,
        steps,
    )


def _polish(
    cost: _Costing, q: np.ndarray, r: np.ndarray, ok: np.ndarray, cap: float, q_free: np.ndarray
) -> tuple[np.ndarray, np.ndarray, int]:
    """Spend the slack the whole-pack rounding left on single-item steps that save cost.

    Each round, every item's neighbours are costed at the true costs: Q one pack down, the
    same or up with R one unit down, the same or up. Fill-rate items instead step Q one
    pack towards their unconstrained order quantity (``q_free``, never past it), with R
    re-set to the smallest that meets the target, as compute_policy's rule sets it: under
    that measure R follows Q, and the rule does not choose Q and R together, so moving
    them freely could "save" against a policy the rule would never give. Of the steps its
    rules allow, an item's best is the one saving most per unit of the cap used (a step
    that saves cost and frees some of the cap ranks first). Steps are taken in that order
    while they fit in the slack; rounds repeat until no allowed saving step fits.
    """
    n = q.shape[0]
    dq = np.array([-1.0, -1.0, -1.0, 0.0, 0.0, 1.0, 1.0, 1.0])
    dr = np.array([-1.0, 0.0, 1.0, -1.0, 1.0, -1.0, 0.0, 1.0])
    fr = cost.is_fr & ok
    lo_free, hi_free = np.minimum(q, q_free), np.maximum(q, q_free)
    steps = 0
    # An item's candidate steps and their costs depend only on its own (Q, R), so they
    # are worked out for every item once, then again only for the items that moved.
    m = len(dq) + (2 if fr.any() else 0)
    q_all, r_all = np.empty((m, n)), np.empty((m, n))
    cost_c, use_c = np.empty((m, n)), np.empty((m, n))
    allowed = np.empty((m, n), dtype=bool)
    cost_now, use_now = np.empty(n), np.empty(n)
    fresh = np.arange(n)
    for _ in range(_POLISH_ROUNDS):
        if fresh.size:
            f = fresh
            cost_now[f] = cost.evaluate_at(f, q[f], r[f])["annual_total_cost"].to_numpy(float)
            use_now[f] = cost.usage_at(f, q[f], r[f])
            for j, (a, b) in enumerate(zip(dq, dr, strict=True)):
                q_all[j, f] = np.where(fr[f], np.nan, q[f] + a * cost.pack[f])
                r_all[j, f] = r[f] + b
            if m > len(dq):  # along the fill-rate rule: R follows Q, Q back towards q_free
                mine = np.zeros(n, dtype=bool)
                mine[f] = True
                for j, a in enumerate((-1.0, 1.0), start=len(dq)):
                    q_f = q + a * cost.pack
                    inside = mine & fr & (q_f >= lo_free - 1e-9) & (q_f <= hi_free + 1e-9)
                    q_all[j, f] = np.where(inside, q_f, np.nan)[f]
                    r_all[j, f] = np.where(inside, cost.fill_rate_reorder(q_f, inside), np.nan)[f]
            k = np.tile(f, m)
            q_c, r_c = q_all[:, f].ravel(), r_all[:, f].ravel()
            ev = cost.evaluate_at(k, q_c, r_c)
            cost_c[:, f] = ev["annual_total_cost"].to_numpy(float).reshape(m, f.size)
            use_c[:, f] = cost.usage_at(k, q_c, r_c).reshape(m, f.size)
            allowed[:, f] = (cost.allowed_at(k, q_c, r_c, ev) & ok[k]).reshape(m, f.size)
        slack = cap - float(np.nansum(np.where(ok, use_now, np.nan)))
        with np.errstate(all="ignore"):
            d_cost = cost_c - cost_now[None, :]
            d_use = use_c - use_now[None, :]
            gain = allowed & (d_cost < -1e-9 * np.maximum(1.0, np.abs(cost_now)))
            # score: saving per unit of the cap; a step that frees the cap and saves first
            score = np.where(d_use <= 0, -1e300, d_cost / d_use)
        score = np.where(gain, score, np.inf)
        best = np.argmin(score, axis=0)
        cols = np.arange(n)
        best_score = score[best, cols]
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
        take[0] = True  # the first fits on its own
        chosen = cand[take]
        q[chosen] = q_all[best[chosen], chosen]
        r[chosen] = r_all[best[chosen], chosen]
        steps += int(chosen.size)
        fresh = np.sort(chosen)
    return q, r, steps


def _restate(
    base: pd.DataFrame, cost: _Costing, q: np.ndarray, r: np.ndarray, ok: np.ndarray
) -> pd.DataFrame:
    """The unconstrained frame with the capped Q and R and their true service and costs."""
    out = base.copy()
    k = np.flatnonzero(ok)
    ev = cost.evaluate(q, r)
    with np.errstate(all="ignore"):
        values = {
            "order_qty": q,
            "reorder_point": r,
            "safety_stock": ev["safety_stock"].to_numpy(float),
            "cycle_service": ev["cycle_service"].to_numpy(float),
            "fill_rate": ev["fill_rate"].to_numpy(float),
            "expected_units_short_per_cycle": ev["units_short_per_cycle"].to_numpy(float),
            "orders_per_year": cost.D / q,
            "annual_ordering_cost": ev["annual_ordering_cost"].to_numpy(float),
            "annual_cycle_holding_cost": ev["annual_cycle_holding_cost"].to_numpy(float),
            "annual_safety_holding_cost": ev["annual_safety_holding_cost"].to_numpy(float),
            "annual_shortage_cost": ev["annual_shortage_cost"].to_numpy(float),
            "annual_total_cost": ev["annual_total_cost"].to_numpy(float),
            "average_inventory_value": cost.c * (q / 2.0 + np.maximum(r - cost.mu, 0.0)),
        }
    for key, val in values.items():
        col = out[key].to_numpy(float).copy()
        col[k] = val[k]
        out[key] = col
    return out
