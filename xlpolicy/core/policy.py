"""Continuous-review (Q, R) policies for many items at once.

Q is the EOQ (Harris 1913; Wilson 1934) rounded to pack size and minimum order, or, when
the user gives a shortage cost instead of a service target, the iterative backorder
optimum (Hadley & Whitin 1963; Nahmias, (Q, R) chapter). R is the smallest whole reorder
point meeting a cycle-service or fill-rate target, or the cost-optimal one. Lead-time demand
follows a model per item (normal, Poisson, negative binomial or gamma; core.models): items
are grouped by model and each group is computed at once. Everything is numpy over whole
columns; each service measure's reorder point is worked out on that measure's items only
(every model method works item by item, so this gives the same numbers as computing all
and choosing by mask); there is no per-item loop. Items whose inputs cannot give a policy
get NaN numbers rather than an exception or a warning.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, fields, replace
from typing import Any

import numpy as np
import pandas as pd
from numpy.typing import ArrayLike

from xlpolicy.contract import CYCLE_SERVICE, FILL_RATE, SHORTAGE_COST
from xlpolicy.core.demand import lead_time_demand
from xlpolicy.core.discounts import DiscountChoice, all_units_order_qty
from xlpolicy.core.models import (
    MODEL_NAMES,
    Z_LIMIT,
    LeadTimeDemandModel,
    NormalLeadTimeDemand,
)
from xlpolicy.core.models import (
    model_factory as named_model,
)

__all__ = [
    "PolicyInputs",
    "evaluate_policy",
    "EVALUATION_COLUMNS",
    "ModelFactory",
    "compute_policy",
    "item_model_names",
    "round_order_qty",
    "order_cost_terms",
    "POLICY_COLUMNS",
    "PROB_TOL",
    "SHORTAGE_MAX_ITER",
    "SHORTAGE_RTOL",
]

#: A service target counts as met when the achieved value is within this of it, so that
#: float noise (1e-16) never adds a whole unit to a reorder point.
PROB_TOL = 1e-12
#: The backorder (Q, R) iteration stops when Q changes by less than this, relatively ...
SHORTAGE_RTOL = 1e-9
#: ... or after this many rounds (it normally settles in under 20).
SHORTAGE_MAX_ITER = 200

_BISECTION_STEPS = 64
#: Most whole-unit steps taken from the iterate to the cost-optimal R (usually 0 to 2).
_DESCENT_STEPS = 10_000
#: The tail probability whose upper quantile bounds the search for a cost optimum.
_FAR_TAIL = 1e-300

#: Builds a lead-time demand model from (mean, sd) arrays: a model class or a function.
ModelFactory = Callable[[np.ndarray, np.ndarray], LeadTimeDemandModel]
#: Relative slack when turning a continuous value into a whole number (float noise).
_WHOLE_TOL = 1e-9

#: Columns of the frame returned by :func:`compute_policy`, in order.
POLICY_COLUMNS: tuple[str, ...] = (
    "annual_demand",
    "demand_per_period",
    "demand_sd_per_period",
    "lead_time_days",
    "lead_time_demand_mean",
    "lead_time_demand_sd",
    "service_measure",
    "service_target",
    "model",
    "eoq",
    "order_qty",
    "reorder_point",
    "safety_stock",
    "cycle_service",
    "fill_rate",
    "expected_units_short_per_cycle",
    "orders_per_year",
    "annual_ordering_cost",
    "annual_cycle_holding_cost",
    "annual_safety_holding_cost",
    "annual_shortage_cost",
    "annual_total_cost",
    "annual_purchase_cost",
    "average_inventory_value",
    "rounding_cost_ratio",
    "rounding_penalty",
    "flag_no_safety_stock_pays",
    "flag_normal_doubtful",
    "flag_reorder_point_floored",
    "flag_shortage_cost_missing",
    "unit_price",
    "price_break_qty",
    "discount_saving",
    "plain_eoq_qty",
    "shelf_life_days",
    "shelf_life_max_qty",
    "shelf_life_cost",
    "flag_shelf_life_below_minimum",
)


@dataclass
class PolicyInputs:
    """Per-item inputs, each a 1-D array of length n (days_per_period is a scalar).

    measure holds "cycle service", "fill rate" or "shortage cost" (contract.SERVICE_MEASURES;
    case and outer spaces ignored). service_target may be NaN for "shortage cost" items;
    shortage_cost is NaN where not given; lead_time_sd_days 0, pack_size 1 and
    minimum_order 0 where not given. Holding cost per unit-year is H = holding_rate * unit_cost.
    model, optional, names each item's lead-time demand model (core.models.MODEL_NAMES; case
    and outer spaces ignored); None, "" or a missing value means the default model of
    :func:`compute_policy` (normal unless its caller passes another model_factory).
    """

    annual_demand: np.ndarray
    demand_per_period: np.ndarray
    demand_sd_per_period: np.ndarray
    lead_time_days: np.ndarray
    lead_time_sd_days: np.ndarray
    unit_cost: np.ndarray
    order_cost: np.ndarray
    holding_rate: np.ndarray
    measure: np.ndarray
    service_target: np.ndarray
    shortage_cost: np.ndarray
    pack_size: np.ndarray
    minimum_order: np.ndarray
    days_per_period: float
    model: np.ndarray | None = None
    #: All-units price breaks, (n, k) each, padded with NaN (core.discounts); None: none.
    break_qty: np.ndarray | None = None
    break_price: np.ndarray | None = None
    #: Days a unit stays usable (NaN: it keeps); caps Q at the demand over that time.
    shelf_life_days: np.ndarray | None = None


def order_cost_terms(
    q: ArrayLike, annual_demand: ArrayLike, order_cost: ArrayLike, holding_cost: ArrayLike
) -> np.ndarray:
    """Annual ordering plus cycle-stock holding cost, D S / Q + H Q / 2 (EOQ cost curve)."""
    q_a = np.asarray(q, dtype=float)
    with np.errstate(all="ignore"):
        return (
            np.asarray(annual_demand, dtype=float) * np.asarray(order_cost, dtype=float) / q_a
            + np.asarray(holding_cost, dtype=float) * q_a / 2.0
        )


def _order_candidates(
    q: ArrayLike, pack: ArrayLike, moq: ArrayLike
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The allowed order quantities just below and just above q, and where they exist.

    Allowed: whole multiples of the pack size, at least one pack and at least the minimum
    order raised to a pack multiple. Returns (lo, hi, ok); lo == hi when q is allowed.
    """
    q_a, pk, m = np.broadcast_arrays(*(np.asarray(x, dtype=float) for x in (q, pack, moq)))
    with np.errstate(all="ignore"):
        pk_whole = np.round(pk)
        ok = (
            np.isfinite(q_a)
            & (q_a >= 0)
            & np.isfinite(pk)
            & (pk_whole >= 1)
            & (np.abs(pk - pk_whole) <= _WHOLE_TOL * pk)
            & np.isfinite(m)
            & (m >= 0)
        )
        pk_s = np.where(ok, pk_whole, 1.0)
        q_s = np.where(ok, q_a, 1.0)
        floor_q = pk_s * np.maximum(1.0, np.ceil(np.where(ok, m, 0.0) / pk_s - _WHOLE_TOL))
        k = q_s / pk_s
        k_near = np.round(k)
        near = np.abs(k - k_near) <= _WHOLE_TOL * np.maximum(1.0, k)
        lo = np.maximum(np.where(near, k_near, np.floor(k)) * pk_s, floor_q)
        hi = np.maximum(np.where(near, k_near, np.ceil(k)) * pk_s, floor_q)
    return lo, hi, ok


def round_order_qty(
    q: ArrayLike, pack: ArrayLike, moq: ArrayLike, D: ArrayLike, S: ArrayLike, H: ArrayLike
) -> np.ndarray:
    """Round a continuous order quantity to what a supplier accepts, choosing the cheaper side.

    The result is a whole multiple of the pack size, at least one pack and at least the
    minimum order (the minimum raised to a pack multiple). Of the pack multiples just below
    and just above q (each raised to that floor) the one with the lower D S / Q + H Q / 2 is
    taken; a tie goes to the smaller. The cost curve is flat near its optimum (an order
    quantity k times the EOQ costs (k + 1/k) / 2 times as much; Harris 1913), so the cost of
    rounding is small. pack must be a positive whole number; invalid or missing inputs give
    NaN.
    """
    lo, hi, ok = _order_candidates(q, pack, moq)
    d_a, s_a, h_a = (np.asarray(x, dtype=float) for x in (D, S, H))
    with np.errstate(all="ignore"):
        ok = ok & np.isfinite(d_a) & (d_a >= 0) & np.isfinite(s_a) & (s_a >= 0)
        ok = ok & np.isfinite(h_a) & (h_a >= 0)
        cost_lo = order_cost_terms(lo, d_a, s_a, h_a)
        cost_hi = order_cost_terms(hi, d_a, s_a, h_a)
        out = np.where(cost_hi < cost_lo, hi, lo)
    return np.where(ok, out, np.nan)


def _smallest_whole(start: np.ndarray, meets: Callable[[np.ndarray], np.ndarray]) -> np.ndarray:
    """Smallest whole r meeting a monotone condition, from a start within a unit or two."""
    r = start
    for _ in range(2):
        r = np.where(meets(r - 1.0), r - 1.0, r)
        r = np.where(meets(r), r, r + 1.0)
    return r


#: Whole numbers up to this size are exact in float, so r - 1 + 1 == r (see below).
_EXACT_WHOLE = 2.0**52


def _smallest_whole_at(
    start: np.ndarray, meets: Callable[[np.ndarray, np.ndarray], np.ndarray]
) -> np.ndarray:
    """:func:`_smallest_whole`, asking ``meets`` each point of each item only once.

    ``meets(r, k)`` is the condition for the items k (indices into start) at points r.
    The two rounds of _smallest_whole visit start - 1, start and at most one of start + 1
    or start - 2 per item, and revisit the first two; a pure condition gives the same
    answer there, so only the new points are asked (about half the evaluations). Starts
    too large for exact whole-number steps take the plain rounds.
    """
    big = np.isfinite(start) & (np.abs(start) >= _EXACT_WHOLE)
    if big.any():
        every = np.arange(start.shape[0])
        return _smallest_whole(start, lambda r: meets(r, every))
    below = start - 1.0
    a = meets(below, np.arange(start.shape[0]))  # meets(start - 1)
    b = a.copy()  # meets(r) after the first step: r = start - 1 where a
    k = np.flatnonzero(~a)
    if k.size:
        b[k] = meets(start[k], k)
    r = np.where(a, below, np.where(b, start, start + 1.0))
    k = np.flatnonzero(~a & ~b)  # at start + 1: is it enough, or start + 2
    if k.size:
        up = start[k] + 1.0
        r[k] = np.where(meets(up, k), up, up + 1.0)
    k = np.flatnonzero(a)  # at start - 1 (which meets): does start - 2 as well
    if k.size:
        down = below[k] - 1.0
        r[k] = np.where(meets(down, k), down, below[k])
    return r


def _ceil_tol(x: np.ndarray) -> np.ndarray:
    """Ceiling that ignores float noise just above a whole number."""
    with np.errstate(all="ignore"):
        return np.ceil(x - _WHOLE_TOL * np.maximum(1.0, np.abs(x)))


def _column(x: ArrayLike, n: int) -> np.ndarray:
    return np.broadcast_to(np.asarray(x, dtype=float), (n,)).copy()


def _shortage_optimum(
    model_factory: ModelFactory,
    mu: np.ndarray,
    sd: np.ndarray,
    D: np.ndarray,
    S: np.ndarray,
    H: np.ndarray,
    p: np.ndarray,
    eoq: np.ndarray,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Continuous (Q, R) optimum with backorder cost p per unit short, for arrays of items.

    The Hadley & Whitin (1963) iteration: from Q = EOQ, alternate 1 - F(R) = Q H / (p D) and
    Q = sqrt(2 D (S + p n(R)) / H), all items at once with a not-settled mask. Q rises
    monotonically to the first fixed point, which is the cost's local minimum; if Q H / (p D)
    reaches 1 first there is none and no safety stock pays. Items still moving after
    SHORTAGE_MAX_ITER rounds (a nearly flat cost curve slows the iteration) are solved by
    :func:`_shortage_bracketed`. Returns (Q, n(R) at the optimum, no-safety-stock-pays mask).
    """
    model = model_factory(mu, sd)
    pD = p * D
    with np.errstate(all="ignore"):
        n_mean = model.expected_shortage(mu)
        # S = 0 gives EOQ 0, where the iteration would stall at R = +inf: start higher.
        q = np.where(eoq > 0, eoq, np.sqrt(2.0 * D * (S + p * n_mean) / H))
        n_it = np.zeros_like(q)
        r_it = np.full_like(q, np.inf)
        nopay = np.zeros(q.shape, dtype=bool)
        done = np.zeros(q.shape, dtype=bool)
        for _ in range(SHORTAGE_MAX_ITER):
            ratio = np.where(pD > 0, q * H / pD, np.inf)
            nopay |= ~done & (ratio >= 1.0)
            done |= nopay
            act = np.flatnonzero(~done)  # work on the unsettled items only
            if act.size == 0:
                break
            sub = model_factory(mu[act], sd[act])
            r_new = sub.upper_quantile(ratio[act])
            n_new = sub.expected_shortage(r_new)
            q_new = np.sqrt(2.0 * D[act] * (S[act] + p[act] * n_new) / H[act])
            done[act] = np.abs(q_new - q[act]) <= SHORTAGE_RTOL * q[act]
            q[act], n_it[act], r_it[act] = q_new, n_new, r_new
        slow = ~done
        if slow.any():
            k = np.flatnonzero(slow)
            q_b, n_b, nopay_b = _shortage_bracketed(
                model_factory(mu[k], sd[k]), D[k], S[k], H[k], p[k], r_it[k]
            )
            q[k], n_it[k], nopay[k] = q_b, n_b, nopay_b
        if model.discrete:
            pay = np.flatnonzero(~nopay)
            if pay.size:
                q[pay], n_it[pay] = _whole_r_descent(
                    model_factory(mu[pay], sd[pay]), D[pay], S[pay], H[pay], p[pay], q[pay]
                )
    return q, n_it, nopay


def _whole_r_descent(
    model: LeadTimeDemandModel,
    D: np.ndarray,
    S: np.ndarray,
    H: np.ndarray,
    p: np.ndarray,
    q: np.ndarray,
) -> tuple[np.ndarray, np.ndarray]:
    """For whole-unit demand, the whole R >= 0 nearest the iterate that minimises the cost.

    With R whole, a fixed point of the Hadley-Whitin iteration is optimal in R for its Q
    and in Q for its R, but a neighbouring R with its own best Q can cost less. The cost
    with Q at its best for each R is C(R) = sqrt(2 D H (S + p n(R))) + H (R - mu); step to
    a cheaper neighbour while there is one. Returns (Q(R), n(R)) at the local minimum.
    """
    pD = p * D
    r = np.maximum(model.upper_quantile(np.clip(q * H / pD, 0.0, 1.0)), 0.0)

    def cost(x: np.ndarray) -> np.ndarray:
        return np.sqrt(2.0 * D * H * (S + p * model.expected_shortage(x))) + H * (x - model.mean)

    c_r = cost(r)
    for _ in range(_DESCENT_STEPS):
        down = (r >= 1.0) & (cost(r - 1.0) < c_r)
        up = ~down & (cost(r + 1.0) < c_r)
        if not (down | up).any():
            break
        r = np.where(down, r - 1.0, np.where(up, r + 1.0, r))
        c_r = cost(r)
    n_r = model.expected_shortage(r)
    return np.sqrt(2.0 * D * (S + p * n_r) / H), n_r


def _shortage_bracketed(
    model: LeadTimeDemandModel,
    D: np.ndarray,
    S: np.ndarray,
    H: np.ndarray,
    p: np.ndarray,
    r_right: np.ndarray,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The same optimum by bracketing, for items where the iteration is slow.

    With Q(R) = sqrt(2 D (S + p n(R)) / H), the stationary points are the roots of
    psi(R) = P(X > R) p D / (H Q(R)) = 1 and the local minimum is the rightmost root.
    psi is unimodal (checked numerically for the normal model), so: golden-section search
    for its peak left of r_right (where psi < 1), then bisection between the peak and
    r_right. A peak below 1 means no stationary point: no safety stock pays. The search
    reaches up to mean + Z_LIMIT sd, or further where a skewed model's tail is longer.
    """
    pD = p * D
    far = np.maximum(model.mean + Z_LIMIT * model.sd, model.upper_quantile(_FAR_TAIL))

    def parts(r: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        n_r = model.expected_shortage(r)
        q_r = np.sqrt(2.0 * D * (S + p * n_r) / H)
        return model.sf(r) * pD / (H * q_r), q_r, n_r

    lo = model.mean - Z_LIMIT * model.sd
    hi = np.minimum(r_right, far)
    golden = (np.sqrt(5.0) - 1.0) / 2.0
    x1 = hi - golden * (hi - lo)
    x2 = lo + golden * (hi - lo)
    f1, f2 = parts(x1)[0], parts(x2)[0]
    for _ in range(90):
        left = f1 >= f2  # the peak is in [lo, x2]
        lo = np.where(left, lo, x1)
        hi = np.where(left, x2, hi)
        x1n = hi - golden * (hi - lo)
        x2n = lo + golden * (hi - lo)
        x1_keep = np.where(left, x1n, x2)
        x2_keep = np.where(left, x1, x2n)
        f_new = parts(np.where(left, x1n, x2n))[0]
        f1, f2 = np.where(left, f_new, f2), np.where(left, f1, f_new)
        x1, x2 = x1_keep, x2_keep
    peak = 0.5 * (lo + hi)
    has_root = parts(peak)[0] >= 1.0
    a = peak.copy()
    b = np.minimum(r_right, far)
    for _ in range(_BISECTION_STEPS):
        mid = 0.5 * (a + b)
        above = parts(mid)[0] >= 1.0
        a = np.where(above, mid, a)
        b = np.where(above, b, mid)
    _, q_root, n_root = parts(a)
    return q_root, n_root, ~has_root


def compute_policy(
    inp: PolicyInputs,
    model_factory: ModelFactory = NormalLeadTimeDemand,
) -> pd.DataFrame:
    """Compute the (Q, R) policy and its annual costs for every item, in input row order.

    See the module docstring for the method and its sources. Achieved
    cycle_service and fill_rate are those of the final whole-unit (Q, R) under the model.
    Items that cannot be planned (D <= 0, a missing or invalid input, an unknown measure, a
    target outside (0, 1), a missing shortage cost) get NaN numbers; their input columns and
    lead-time demand are still shown.

    Lead-time demand model: inp.model names one per item (MODEL_NAMES); items without a
    name use model_factory, which builds a model from (mean, sd) arrays (default: normal).
    Items are grouped by model and each group is computed at once, results in input row
    order; an item's numbers do not depend on the other items in the batch. The "model"
    column says which model was used ("poisson" for a negative binomial item whose variance
    did not exceed its mean); an unknown model name gives NaN numbers and the "model"
    column repeats the name as given. Discrete models (Poisson, negative binomial) give
    whole reorder points directly; under a shortage cost their R for a given Q is the
    smallest whole R with P(X > R) <= Q H / (p D), which is where the expected annual cost
    stops falling (marginal analysis), with the same floor/ceil comparison as continuous
    models.

    Service measures round the EOQ with :func:`round_order_qty`. For "shortage cost" the
    continuous Hadley-Whitin optimum is found first; of the allowed order quantities just
    below and above it, each with its cheaper whole R (floor or ceil of the R solving
    1 - F(R) = Q H / (p D)), the pair with the lower expected annual cost is kept.
    rounding_cost_ratio is cost(Q) / cost(Q*) on the curve D S' / Q + H Q / 2, with Q* the
    continuous optimum and S' = S (service measures) or S + p n(R*) (shortage cost); it is
    NaN where S' = 0, since the curve's optimum then costs nothing.

    Price breaks (inp.break_qty / break_price, all-units): Q is the allowed quantity with
    the lowest D S / Q + i c(Q) Q / 2 + D c(Q) (core.discounts); unit_price is the price it
    pays, used for every holding and purchase cost; R follows from that Q. Shelf life
    (inp.shelf_life_days): Q is at most the demand over the life in whole packs
    (shelf_life_max_qty), or the smallest allowed order where that is less
    (flag_shelf_life_below_minimum); shelf_life_cost is what the cap adds a year on the
    ordering + cycle holding + purchase curve.

    Flags: flag_no_safety_stock_pays (shortage cost with Q H / (p D) >= 1: R = mu_L);
    flag_normal_doubtful (sigma_L / mu_L >= 0.5 or mu_L < 10 units, a common-practice rule
    of thumb for when the normal approximation is weak; set on rows computed under the
    normal model whose lead-time demand is known, False under the other models);
    flag_reorder_point_floored (R raised to 0); flag_shortage_cost_missing ("shortage cost"
    measure without a shortage cost: numbers NaN).
    """
    n = np.asarray(inp.annual_demand, dtype=float).reshape(-1).shape[0]
    if inp.model is None:
        return _policy_group(inp, model_factory)
    names = item_model_names(inp.model, n)
    known = np.isin(names, MODEL_NAMES) | (names == "")
    groups = [
        (np.flatnonzero(names == key), model_factory if key == "" else named_model(key))
        for key in ("",) + MODEL_NAMES
    ]
    groups.append((np.flatnonzero(~known), NormalLeadTimeDemand))  # unknown: NaN numbers
    groups = [(idx, fac) for idx, fac in groups if idx.size > 0]
    if len(groups) == 1 and known.all():
        return _policy_group(inp, groups[0][1])

    full = _broadcast_inputs(inp, n)
    parts = []
    for idx, fac in groups:
        sub = replace(
            full,
            **{
                f.name: getattr(full, f.name)[idx]
                for f in fields(full)
                if f.name != "days_per_period" and getattr(full, f.name) is not None
            },
        )
        parts.append((idx, _policy_group_columns(sub, fac, usable=known[idx])))
    # each group's columns put back at its items' rows (what concatenating the groups'
    # frames and sorting by row gave, without the frames; a whole-column scalar is an
    # object column in such a frame, so it is one here too)
    cols: dict[str, np.ndarray] = {}
    for key in POLICY_COLUMNS:
        values = [
            np.asarray(part[key], dtype=object if np.ndim(part[key]) == 0 else None)
            for _, part in parts
        ]
        col = np.empty(n, dtype=np.result_type(*values))
        for (idx, _), v in zip(parts, values, strict=True):
            col[idx] = v
        cols[key] = col
    out = pd.DataFrame(cols, index=pd.RangeIndex(n), columns=list(POLICY_COLUMNS))
    unknown = ~known
    if unknown.any():  # say which name was not understood, as the user wrote it
        model = np.broadcast_to(np.asarray(inp.model, dtype=object), (n,))  # as full.model
        given = pd.Series(model[unknown], dtype=object).astype(str).str.strip()
        out.loc[unknown, "model"] = given.to_numpy(dtype=object)
    return out


def _achieved(
    model: LeadTimeDemandModel,
    Q: np.ndarray,
    R: np.ndarray,
    mu: np.ndarray,
    D: np.ndarray,
    S: np.ndarray,
    H: np.ndarray,
    c: np.ndarray,
    p: np.ndarray,
) -> dict[str, np.ndarray]:
    """Service and yearly costs of whole-unit (Q, R) under a lead-time demand model.

    Field notes: cycle service F(R); units short per cycle n(R) = E[(X - R)^+]; fill rate
    1 - n(R)/Q; ordering D S/Q; cycle holding H Q/2; safety holding H (R - mu); shortage
    p D/Q n(R) where p is given (NaN: none, cost 0); purchase D c; average inventory value
    c (Q/2 + max(R - mu, 0)).
    """
    with np.errstate(all="ignore"):
        short = model.expected_shortage(R)
        ss = R - mu
        orders = D / Q
        ordering = D * S / Q
        cycle_hold = H * Q / 2.0
        ss_hold = H * ss
        shortage = np.where(np.isfinite(p), np.nan_to_num(p) * orders * short, 0.0)
        return {
            "cycle_service": model.cdf(R),
            "short": short,
            "fill_rate": np.clip(1.0 - short / Q, 0.0, 1.0),
            "safety_stock": ss,
            "orders": orders,
            "ordering": ordering,
            "cycle_hold": cycle_hold,
            "ss_hold": ss_hold,
            "shortage": shortage,
            "total": ordering + cycle_hold + ss_hold + shortage,
            "purchase": D * c,
            "avg_value": c * (Q / 2.0 + np.maximum(ss, 0.0)),
        }


#: Columns of :func:`evaluate_policy`.
EVALUATION_COLUMNS: tuple[str, ...] = (
    "safety_stock",
    "cycle_service",
    "fill_rate",
    "units_short_per_cycle",
    "annual_ordering_cost",
    "annual_cycle_holding_cost",
    "annual_safety_holding_cost",
    "annual_shortage_cost",
    "annual_total_cost",
)


def evaluate_policy(
    order_qty: ArrayLike,
    reorder_point: ArrayLike,
    mean: ArrayLike,
    sd: ArrayLike,
    model: ArrayLike,
    annual_demand: ArrayLike,
    order_cost: ArrayLike,
    holding_cost: ArrayLike,
    unit_cost: ArrayLike,
    shortage_cost: ArrayLike,
) -> pd.DataFrame:
    """Service and yearly costs of given (Q, R) policies, e.g. the ones a shop uses today.

    Each item is evaluated under its own lead-time demand model (a name from MODEL_NAMES;
    "" means normal), by the same formulas as compute_policy's achieved figures, so a
    comparison of today's policy with the recommended one is like for like. Items with a
    missing or non-positive Q, or an unknown model, get NaN.
    """
    q = np.asarray(order_qty, dtype=float).reshape(-1)
    n = q.shape[0]
    cols = [
        _column(x, n)
        for x in (
            reorder_point,
            mean,
            sd,
            annual_demand,
            order_cost,
            holding_cost,
            unit_cost,
            shortage_cost,
        )
    ]
    r, mu, sd_a, D, S, H, c, p = cols
    names = item_model_names(model, n)
    names[names == ""] = NormalLeadTimeDemand.name
    out = {col: np.full(n, np.nan) for col in EVALUATION_COLUMNS}
    ok = np.isfinite(q) & (q > 0) & np.isfinite(r) & np.isfinite(mu) & np.isfinite(sd_a)
    for name in MODEL_NAMES:
        k = np.flatnonzero(ok & (names == name))
        if not len(k):
            continue
        ach = _achieved(
            named_model(name)(mu[k], sd_a[k]), q[k], r[k], mu[k], D[k], S[k], H[k], c[k], p[k]
        )
        for col, key in zip(
            EVALUATION_COLUMNS,
            (
                "safety_stock",
                "cycle_service",
                "fill_rate",
                "short",
                "ordering",
                "cycle_hold",
                "ss_hold",
                "shortage",
                "total",
            ),
            strict=True,
        ):
            out[col][k] = ach[key]
    return pd.DataFrame(out, index=pd.RangeIndex(n), columns=list(EVALUATION_COLUMNS))


def item_model_names(model: ArrayLike | None, n: int) -> np.ndarray:
    """Per-item model names, lower case without outer spaces; "" where none is given.

    None, NaN and empty text mean "no name" (the default model). Accepts a scalar (applied
    to every item) or a 1-D array of length n. Names outside MODEL_NAMES are returned as
    they are (normalised), for the caller to report.
    """
    if model is None:
        return np.full(n, "", dtype=object)
    values = np.broadcast_to(np.asarray(model, dtype=object), (n,))
    return _per_distinct(values, _normalised_names)


def _normalised_names(values: np.ndarray) -> np.ndarray:
    raw = pd.Series(values, dtype=object)
    text = raw.where(raw.notna(), "").astype(str).str.strip().str.lower()
    return text.to_numpy(dtype=object)


def _per_distinct(values: np.ndarray, f: Callable[[np.ndarray], np.ndarray]) -> np.ndarray:
    """f(values) for an elementwise text function f, computed once per distinct value.

    A column of item names or measures holds a handful of distinct texts among 100,000
    items. Only for text (and missing) values: numbers such as 1, 1.0 and True would be
    one value to the hashing but three texts to f, so anything else takes f whole.
    """
    if len(values) < 64 or pd.api.types.infer_dtype(values, skipna=True) not in ("string", "empty"):
        return f(values)
    codes, uniques = pd.factorize(values, use_na_sentinel=True)
    if (codes < 0).any():  # missing values: f says what they become
        return f(values)
    return f(np.asarray(uniques, dtype=object))[codes]


def _broadcast_inputs(inp: PolicyInputs, n: int) -> PolicyInputs:
    """The inputs with every per-item field as a length-n array (scalars spread out)."""
    cols: dict[str, Any] = {}  # each field's value, of that field's type
    for f in fields(inp):
        val = getattr(inp, f.name)
        if f.name == "days_per_period" or val is None:
            cols[f.name] = val
        elif f.name in ("break_qty", "break_price"):
            arr = np.asarray(val, dtype=float)
            cols[f.name] = np.broadcast_to(
                arr.reshape(arr.shape[0] if arr.ndim else 1, -1),
                (n, arr.shape[-1] if arr.ndim else 1),
            ).copy()
        elif f.name in ("measure", "model"):
            cols[f.name] = np.broadcast_to(np.asarray(val, dtype=object), (n,)).copy()
        else:
            cols[f.name] = np.broadcast_to(np.asarray(val, dtype=float), (n,)).copy()
    return PolicyInputs(**cols)


def _policy_group(
    inp: PolicyInputs, model_factory: ModelFactory, usable: np.ndarray | None = None
) -> pd.DataFrame:
    """compute_policy for items sharing one model factory; usable=False forces NaN numbers."""
    return pd.DataFrame(
        _policy_group_columns(inp, model_factory, usable), columns=list(POLICY_COLUMNS)
    )


def _policy_group_columns(
    inp: PolicyInputs, model_factory: ModelFactory, usable: np.ndarray | None = None
) -> dict[str, np.ndarray | float]:
    """The columns of :func:`_policy_group` (arrays, or a scalar for a whole column)."""
    D = np.asarray(inp.annual_demand, dtype=float).reshape(-1)
    n = D.shape[0]
    d = _column(inp.demand_per_period, n)
    sd_d = _column(inp.demand_sd_per_period, n)
    lt = _column(inp.lead_time_days, n)
    slt = _column(inp.lead_time_sd_days, n)
    c = _column(inp.unit_cost, n)
    S = _column(inp.order_cost, n)
    i = _column(inp.holding_rate, n)
    target = _column(inp.service_target, n)
    p = _column(inp.shortage_cost, n)
    pack = _column(inp.pack_size, n)
    moq = _column(inp.minimum_order, n)
    measure_raw = np.broadcast_to(np.asarray(inp.measure, dtype=object), (n,))
    measure = _per_distinct(measure_raw, lambda v: np.char.lower(np.char.strip(v.astype(str))))
    is_cs = measure == CYCLE_SERVICE
    is_fr = measure == FILL_RATE
    is_sc = measure == SHORTAGE_COST
    dpp = float(inp.days_per_period)

    with np.errstate(all="ignore"):
        mu_l, sig_l = lead_time_demand(d, sd_d, lt / dpp, slt / dpp)
        # All-units price breaks: Q by the lowest ordering + holding + purchase cost, and
        # every cost after that at the price that Q pays (core.discounts).
        # Shelf life: Q at most the demand over the usable life, in whole packs; where that
        # is below the smallest allowed order, the smallest allowed order (flagged).
        life = (
            _column(inp.shelf_life_days, n)
            if inp.shelf_life_days is not None
            else np.full(n, np.nan)
        )
        has_life = np.isfinite(life) & (life > 0)
        life_cont = d * life / dpp  # expected demand over the shelf life, units
        pk1 = np.where(np.isfinite(pack) & (pack >= 1), np.round(pack), 1.0)
        floor_q = pk1 * np.maximum(
            1.0, np.ceil(np.where(np.isfinite(moq), moq, 0.0) / pk1 - _WHOLE_TOL)
        )
        cap_packs = np.floor(life_cont / pk1 + _WHOLE_TOL) * pk1
        life_short = has_life & (cap_packs < floor_q)
        cap_q = np.where(has_life, np.where(life_short, floor_q, cap_packs), np.inf)
        disc, has_breaks = _discounts(inp, n, D, S, i, c, pack, moq)
        disc_capped = disc
        if disc is not None and (has_life & has_breaks).any():
            disc_capped, _ = _discounts(inp, n, D, S, i, c, pack, moq, cap_q)
        disc_unc, disc = disc, disc_capped
        c = np.where(has_breaks, disc.unit_price, c) if disc is not None else c
        H = i * c
        eoq_raw = np.sqrt(2.0 * D * S / H)

        p_given = np.isfinite(p)
        base_ok = (
            np.isfinite(D)
            & (D > 0)
            & np.isfinite(d)
            & (d >= 0)
            & np.isfinite(sd_d)
            & (sd_d >= 0)
            & np.isfinite(lt)
            & (lt >= 0)
            & np.isfinite(slt)
            & (slt >= 0)
            & np.isfinite(c)
            & (c > 0)
            & np.isfinite(S)
            & (S >= 0)
            & np.isfinite(i)
            & (i > 0)
            & np.isfinite(H)
            & (H > 0)
            & np.isfinite(mu_l)
            & np.isfinite(sig_l)
            & np.isfinite(eoq_raw)
            & np.isfinite(pack)
            & (pack >= 1)
            & (np.abs(pack - np.round(pack)) <= _WHOLE_TOL * pack)
            & np.isfinite(moq)
            & (moq >= 0)
            & bool(np.isfinite(dpp) and dpp > 0)
        )
        target_ok = np.isfinite(target) & (target > 0) & (target < 1)
        ok = base_ok & (((is_cs | is_fr) & target_ok) | (is_sc & p_given & (p >= 0)))
        if usable is not None:
            ok = ok & np.asarray(usable, dtype=bool)

        # Working copies: harmless values where not ok, so no NaN reaches the solvers.
        def safe(x: np.ndarray, v: float) -> np.ndarray:
            return np.where(ok, x, v)

        Dw, Sw, Hw, cw = safe(D, 1.0), safe(S, 1.0), safe(H, 1.0), safe(c, 1.0)
        muw, sgw = safe(mu_l, 1.0), safe(sig_l, 1.0)
        packw, moqw = safe(pack, 1.0), safe(moq, 0.0)
        tw = np.where(ok & target_ok, target, 0.5)
        pw = np.where(ok & p_given, p, 1.0)
        eoq = safe(eoq_raw, 1.0)
        model = model_factory(muw, sgw)

        # -- shortage cost: the continuous Hadley-Whitin optimum, on those items only ---
        sc = is_sc & ok
        pD = pw * Dw
        nopay = np.zeros(n, dtype=bool)
        q_cont = eoq.copy()  # the continuous optimum each item is rounded from
        s_eff = Sw.copy()  # order cost plus expected shortage cost per order
        if sc.any():
            idx = np.flatnonzero(sc)
            q_opt, n_opt, nopay_sc = _shortage_optimum(
                model_factory, muw[idx], sgw[idx], Dw[idx], Sw[idx], Hw[idx], pw[idx], eoq[idx]
            )
            nopay[idx] = nopay_sc
            q_cont[idx] = np.where(nopay_sc, eoq[idx], q_opt)
            s_eff[idx] = np.where(nopay_sc, Sw[idx], Sw[idx] + pw[idx] * n_opt)

        # Whole R for a given Q under the shortage cost: 1 - F(R) = Q H / (p D), then the
        # cheaper of floor and ceil. Where Q H / (p D) >= 1 no safety stock pays: R = mu_L.
        # Worked out for the shortage-cost items only (k), with their own model.
        k_sc = np.flatnonzero(sc)
        model_sc = _subset_model(model, model_factory, muw, sgw, k_sc)
        H_k, mu_k, pD_k, nopay_k = Hw[k_sc], muw[k_sc], pD[k_sc], nopay[k_sc]

        def sc_reorder(q: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
            ratio_q = np.where(pD_k > 0, q * H_k / pD_k, np.inf)
            no_ss_q = nopay_k | (ratio_q >= 1.0)
            r_cont = np.where(
                no_ss_q, mu_k, model_sc.upper_quantile(np.where(no_ss_q, 0.5, ratio_q))
            )
            r_lo, r_hi = np.floor(r_cont), np.ceil(r_cont)

            def r_cost(r: np.ndarray) -> np.ndarray:
                return H_k * (r - mu_k) + pD_k / q * model_sc.expected_shortage(r)

            return np.where(r_cost(r_hi) < r_cost(r_lo), r_hi, r_lo), no_ss_q

        def sc_cost(q: np.ndarray, r: np.ndarray) -> np.ndarray:
            """Expected annual cost with backorders (Hadley & Whitin 1963), R floored at 0."""
            r0 = np.maximum(r, 0.0)
            return (
                Dw[k_sc] * Sw[k_sc] / q
                + H_k * (q / 2.0 + r0 - mu_k)
                + pD_k / q * model_sc.expected_shortage(r0)
            )

        # Service measures: the cheaper pack multiple on the EOQ cost curve. Shortage cost:
        # the pack multiple below or above the optimum whose whole (Q, R) costs less in full.
        Q = round_order_qty(q_cont, packw, moqw, Dw, s_eff, Hw)
        r_sc = np.zeros(n)  # the shortage-cost reorder point (0 for the other items)
        no_ss = np.zeros(n, dtype=bool)
        if k_sc.size:
            q_lo, q_hi, _ = _order_candidates(q_cont[k_sc], packw[k_sc], moqw[k_sc])
            r_sc_lo, no_ss_lo = sc_reorder(q_lo)
            r_sc_hi, no_ss_hi = sc_reorder(q_hi)
            take_hi = sc_cost(q_hi, r_sc_hi) < sc_cost(q_lo, r_sc_lo)
            Q[k_sc] = np.where(take_hi, q_hi, q_lo)
            r_sc[k_sc] = np.where(take_hi, r_sc_hi, r_sc_lo)
            no_ss[k_sc] = np.where(take_hi, no_ss_hi, no_ss_lo)

        def sc_again(where: np.ndarray) -> None:
            """The shortage-cost R again, for the items of ``where`` whose Q has changed."""
            if not k_sc.size or not where[k_sc].any():
                return
            r_b, no_b = sc_reorder(Q[k_sc])
            r_sc[k_sc] = np.where(where[k_sc], r_b, r_sc[k_sc])
            no_ss[k_sc] = np.where(where[k_sc], no_b, no_ss[k_sc])

        if disc is not None and has_breaks.any():
            # The price-break quantity; the reorder point follows from it as usual. Under
            # the shortage-cost measure R is the cost-optimal one for that Q.
            hb = has_breaks & ok
            Q = np.where(hb, disc.order_qty, Q)
            q_cont = np.where(hb, disc.q_continuous, q_cont)
            sc_again(hb)
        # Shelf life: what the order quantity would be without it, then the cap.
        q_free = Q.copy()
        if disc_unc is not None and has_breaks.any():
            q_free = np.where(has_breaks & ok, disc_unc.order_qty, q_free)
        capped = ok & has_life & (q_free > cap_q)
        if capped.any():
            plain_cap = capped & ~has_breaks  # breaks: the capped choice is already in Q
            Q = np.where(plain_cap, cap_q, Q)
            # rounding is measured from the capped continuous quantity, so the rounding
            # penalty does not count the cap's cost a second time
            q_cont = np.where(capped, np.minimum(q_cont, np.maximum(life_cont, floor_q)), q_cont)
            sc_again(capped)
        # What the cap costs a year, on ordering + cycle holding + purchase at the price
        # each quantity pays (the EOQ cost curve; purchase only differs with price breaks).
        price_free = c
        if disc_unc is not None and has_breaks.any():
            price_free = np.where(has_breaks, disc_unc.unit_price, c)
        life_cost = np.where(
            has_life,
            (Dw * s_eff / Q + i * c * Q / 2.0 + Dw * c)
            - (Dw * s_eff / q_free + i * price_free * q_free / 2.0 + Dw * price_free),
            np.nan,
        )

        # -- reorder points, each measure on its own items (0 for items not planned) ------
        r_raw = r_sc
        k_cs = np.flatnonzero(is_cs & ok)
        if k_cs.size:
            m_cs, t_cs = _subset_model(model, model_factory, muw, sgw, k_cs), tw[k_cs]
            mu_cs, sd_cs = muw[k_cs], sgw[k_cs]
            r_raw[k_cs] = _smallest_whole_at(
                _ceil_tol(m_cs.quantile(t_cs)),
                lambda r, j: (
                    _subset_model(m_cs, model_factory, mu_cs, sd_cs, j).cdf(r) >= t_cs[j] - PROB_TOL
                ),
            )
        k_fr = np.flatnonzero(is_fr & ok)
        if k_fr.size:
            m_fr, t_fr, q_fr = (
                _subset_model(model, model_factory, muw, sgw, k_fr),
                tw[k_fr],
                Q[k_fr],
            )
            mu_fr, sd_fr = muw[k_fr], sgw[k_fr]
            r_raw[k_fr] = _smallest_whole_at(
                _ceil_tol(m_fr.min_r_for_shortage((1.0 - t_fr) * q_fr)),
                lambda r, j: (
                    1.0
                    - _subset_model(m_fr, model_factory, mu_fr, sd_fr, j).expected_shortage(r)
                    / q_fr[j]
                    >= t_fr[j] - PROB_TOL
                ),
            )
        floored = ok & (r_raw < 0)
        R = np.maximum(r_raw, 0.0)

        # -- what the whole-unit policy achieves, and what it costs --------------------
        ach = _achieved(model, Q, R, muw, Dw, Sw, Hw, cw, np.where(p_given, pw, np.nan))
        cycle_service, short, fill, ss = (
            ach["cycle_service"],
            ach["short"],
            ach["fill_rate"],
            ach["safety_stock"],
        )
        orders, ordering, cycle_hold = ach["orders"], ach["ordering"], ach["cycle_hold"]
        ss_hold, shortage, total = ach["ss_hold"], ach["shortage"], ach["total"]
        purchase, avg_value = ach["purchase"], ach["avg_value"]
        # What whole packs and minimum orders cost a year over the continuous optimum, on
        # the curve D S'/Q + H Q/2 (S' = S, plus the expected shortage cost per order for
        # the shortage-cost measure): the price of ordering in what the supplier sells.
        rounding_penalty = order_cost_terms(Q, Dw, s_eff, Hw) - order_cost_terms(
            q_cont, Dw, s_eff, Hw
        )
        rounding_ratio = np.where(
            s_eff > 0,
            order_cost_terms(Q, Dw, s_eff, Hw) / order_cost_terms(q_cont, Dw, s_eff, Hw),
            np.nan,
        )
        used = np.where(ok, model.item_model_names(), model.name).astype(object)
        doubtful = (
            np.isfinite(mu_l)
            & np.isfinite(sig_l)
            & ((sig_l >= 0.5 * mu_l) | (mu_l < 10.0))
            & (used == NormalLeadTimeDemand.name)
        )
        if usable is not None:
            doubtful &= np.asarray(usable, dtype=bool)

    def out(x: np.ndarray) -> np.ndarray:
        return np.where(ok, x, np.nan)

    return {
        "annual_demand": D,
        "demand_per_period": d,
        "demand_sd_per_period": sd_d,
        "lead_time_days": lt,
        "lead_time_demand_mean": mu_l,
        "lead_time_demand_sd": sig_l,
        "service_measure": np.asarray(measure_raw, dtype=object),
        "service_target": target,
        "model": used,
        "eoq": out(eoq),
        "order_qty": out(Q),
        "reorder_point": out(R),
        "safety_stock": out(ss),
        "cycle_service": out(cycle_service),
        "fill_rate": out(fill),
        "expected_units_short_per_cycle": out(short),
        "orders_per_year": out(orders),
        "annual_ordering_cost": out(ordering),
        "annual_cycle_holding_cost": out(cycle_hold),
        "annual_safety_holding_cost": out(ss_hold),
        "annual_shortage_cost": out(shortage),
        "annual_total_cost": out(total),
        "annual_purchase_cost": out(purchase),
        "average_inventory_value": out(avg_value),
        "rounding_cost_ratio": out(rounding_ratio),
        "rounding_penalty": out(np.maximum(rounding_penalty, 0.0)),
        "flag_no_safety_stock_pays": ok & no_ss,
        "flag_normal_doubtful": doubtful,
        "flag_reorder_point_floored": floored,
        "flag_shortage_cost_missing": is_sc & ~p_given,
        "unit_price": out(c),
        "shelf_life_days": np.where(has_life, life, np.nan),
        "shelf_life_max_qty": out(np.where(has_life, cap_packs, np.nan)),
        "shelf_life_cost": out(np.maximum(life_cost, 0.0)),
        "flag_shelf_life_below_minimum": ok & life_short,
        "price_break_qty": out(disc.break_qty) if disc is not None else np.nan,
        "discount_saving": (
            out(np.where(has_breaks, disc.saving, np.nan)) if disc is not None else np.nan
        ),
        "plain_eoq_qty": (
            out(np.where(has_breaks, disc.plain_qty, np.nan)) if disc is not None else np.nan
        ),
    }


def _subset_model(
    model: LeadTimeDemandModel,
    model_factory: ModelFactory,
    mean: np.ndarray,
    sd: np.ndarray,
    k: np.ndarray,
) -> LeadTimeDemandModel:
    """The model of items k (the whole model when k is every item, in order).

    Every model method works item by item, so a model of some items gives those items'
    numbers exactly as the model of all items does.
    """
    if k.size == mean.shape[0]:
        return model
    return model_factory(mean[k], sd[k])


def _discounts(
    inp: PolicyInputs,
    n: int,
    D: np.ndarray,
    S: np.ndarray,
    i: np.ndarray,
    c: np.ndarray,
    pack: np.ndarray,
    moq: np.ndarray,
    max_qty: np.ndarray | None = None,
) -> tuple[DiscountChoice | None, np.ndarray]:
    """The all-units price-break choice for items with breaks (None when no item has any)."""
    none = np.zeros(n, dtype=bool)
    if inp.break_qty is None or inp.break_price is None:
        return None, none
    bq = np.asarray(inp.break_qty, dtype=float).reshape(n, -1)
    bp = np.asarray(inp.break_price, dtype=float).reshape(n, -1)
    has = (np.isfinite(bq) & np.isfinite(bp)).any(axis=1)
    if not has.any():
        return None, none
    with np.errstate(all="ignore"):
        safe_pack = np.where(np.isfinite(pack) & (pack >= 1), np.round(pack), 1.0)
        safe_moq = np.where(np.isfinite(moq) & (moq >= 0), moq, 0.0)
        choice = all_units_order_qty(D, S, i, c, bq, bp, safe_pack, safe_moq, max_qty)
    has &= np.isfinite(choice.order_qty)
    return choice, has
