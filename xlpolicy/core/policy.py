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

A group's computation runs in named stages (``_terms``, ``_usable``, ``_order_quantity``,
``_reorder_points``, ``_output``) over small dataclasses of arrays. The pieces it uses
live beside it: allowed order quantities and price breaks in :mod:`.ordering`, the
backorder optimum in :mod:`.backorder`, service and costs of a given (Q, R) in
:mod:`.costing`.

Symbols (as in Silver, Pyke & Peterson 1998, and most texts):

- D: annual demand (units a year); d, sd_d: demand and its sd per period
- S: cost to place one order; c: unit cost (the price paid, under price breaks)
- i: holding rate a year; H = i c: holding cost per unit a year
- p: cost per unit short (the shortage-cost measure)
- Q: order quantity; R: reorder point; EOQ = sqrt(2 D S / H)
- mu_L, sigma_L: mean and sd of demand over the lead time; F, n(R): its cdf and the
  expected units short per cycle, E[(X - R)^+]
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, fields, replace

import numpy as np
import pandas as pd

from xlpolicy.contract import CYCLE_SERVICE, FILL_RATE, SHORTAGE_COST
from xlpolicy.core.arrays import _column, _per_distinct, item_model_names
from xlpolicy.core.backorder import SHORTAGE_MAX_ITER, SHORTAGE_RTOL, _shortage_optimum
from xlpolicy.core.costing import EVALUATION_COLUMNS, _achieved, evaluate_policy
from xlpolicy.core.demand import lead_time_demand
from xlpolicy.core.discounts import DiscountChoice
from xlpolicy.core.models import (
    MODEL_NAMES,
    LeadTimeDemandModel,
    ModelFactory,
    NormalLeadTimeDemand,
)
from xlpolicy.core.models import (
    model_factory as named_model,
)
from xlpolicy.core.ordering import (
    _WHOLE_TOL,
    _discounts,
    _order_candidates,
    order_cost_terms,
    round_order_qty,
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


def _broadcast_inputs(inp: PolicyInputs, n: int) -> PolicyInputs:
    """The inputs with every per-item field as a length-n array (scalars spread out)."""
    cols: dict[str, object] = {}
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
    return PolicyInputs(**cols)  # type: ignore[arg-type]


def _policy_group(
    inp: PolicyInputs, model_factory: ModelFactory, usable: np.ndarray | None = None
) -> pd.DataFrame:
    """compute_policy for items sharing one model factory; usable=False forces NaN numbers."""
    return pd.DataFrame(
        _policy_group_columns(inp, model_factory, usable), columns=list(POLICY_COLUMNS)
    )


# ---------------------------------------------------------------------------------------
# The computation for one group of items sharing a demand model, in named stages. Each
# stage takes and gives whole columns; the dataclasses carry the arrays between them.
# ---------------------------------------------------------------------------------------


@dataclass
class _Columns:
    """The inputs as length-n float arrays, and which measure each item uses."""

    D: np.ndarray
    d: np.ndarray
    sd_d: np.ndarray
    lt: np.ndarray
    slt: np.ndarray
    c: np.ndarray
    S: np.ndarray
    i: np.ndarray
    target: np.ndarray
    p: np.ndarray
    pack: np.ndarray
    moq: np.ndarray
    measure_raw: np.ndarray
    is_cs: np.ndarray
    is_fr: np.ndarray
    is_sc: np.ndarray
    dpp: float

    @classmethod
    def of(cls, inp: PolicyInputs) -> _Columns:
        D = np.asarray(inp.annual_demand, dtype=float).reshape(-1)
        n = D.shape[0]
        measure_raw = np.broadcast_to(np.asarray(inp.measure, dtype=object), (n,))
        measure = _per_distinct(measure_raw, lambda v: np.char.lower(np.char.strip(v.astype(str))))
        return cls(
            D=D,
            d=_column(inp.demand_per_period, n),
            sd_d=_column(inp.demand_sd_per_period, n),
            lt=_column(inp.lead_time_days, n),
            slt=_column(inp.lead_time_sd_days, n),
            c=_column(inp.unit_cost, n),
            S=_column(inp.order_cost, n),
            i=_column(inp.holding_rate, n),
            target=_column(inp.service_target, n),
            p=_column(inp.shortage_cost, n),
            pack=_column(inp.pack_size, n),
            moq=_column(inp.minimum_order, n),
            measure_raw=measure_raw,
            is_cs=measure == CYCLE_SERVICE,
            is_fr=measure == FILL_RATE,
            is_sc=measure == SHORTAGE_COST,
            dpp=float(inp.days_per_period),
        )


@dataclass
class _Terms:
    """Lead-time demand, the shelf-life cap, the price-break choice and the price paid."""

    mu_l: np.ndarray
    sig_l: np.ndarray
    life: np.ndarray
    has_life: np.ndarray
    life_cont: np.ndarray  # expected demand over the shelf life, units
    floor_q: np.ndarray  # the smallest allowed order
    cap_packs: np.ndarray
    life_short: np.ndarray
    cap_q: np.ndarray
    disc: DiscountChoice | None  # the price-break choice under the shelf-life cap
    disc_unc: DiscountChoice | None  # ... and without it
    has_breaks: np.ndarray
    c: np.ndarray  # the price paid
    H: np.ndarray
    eoq_raw: np.ndarray


def _terms(inp: PolicyInputs, x: _Columns) -> _Terms:
    """All-units price breaks: Q by the lowest ordering + holding + purchase cost, and
    every cost after that at the price that Q pays (core.discounts). Shelf life: Q at most
    the demand over the usable life, in whole packs; where that is below the smallest
    allowed order, the smallest allowed order (flagged)."""
    n = x.D.shape[0]
    mu_l, sig_l = lead_time_demand(x.d, x.sd_d, x.lt / x.dpp, x.slt / x.dpp)
    life = (
        _column(inp.shelf_life_days, n) if inp.shelf_life_days is not None else np.full(n, np.nan)
    )
    has_life = np.isfinite(life) & (life > 0)
    life_cont = x.d * life / x.dpp
    pk1 = np.where(np.isfinite(x.pack) & (x.pack >= 1), np.round(x.pack), 1.0)
    floor_q = pk1 * np.maximum(
        1.0, np.ceil(np.where(np.isfinite(x.moq), x.moq, 0.0) / pk1 - _WHOLE_TOL)
    )
    cap_packs = np.floor(life_cont / pk1 + _WHOLE_TOL) * pk1
    life_short = has_life & (cap_packs < floor_q)
    cap_q = np.where(has_life, np.where(life_short, floor_q, cap_packs), np.inf)
    disc, has_breaks = _discounts(inp, n, x.D, x.S, x.i, x.c, x.pack, x.moq)
    disc_capped = disc
    if disc is not None and (has_life & has_breaks).any():
        disc_capped, _ = _discounts(inp, n, x.D, x.S, x.i, x.c, x.pack, x.moq, cap_q)
    c = np.where(has_breaks, disc_capped.unit_price, x.c) if disc_capped is not None else x.c
    H = x.i * c
    return _Terms(
        mu_l,
        sig_l,
        life,
        has_life,
        life_cont,
        floor_q,
        cap_packs,
        life_short,
        cap_q,
        disc_capped,
        disc,
        has_breaks,
        c,
        H,
        np.sqrt(2.0 * x.D * x.S / H),
    )


def _usable(
    x: _Columns, t: _Terms, usable: np.ndarray | None
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(ok, target_ok, p_given): which items can be planned, and with what they were given."""
    base_ok = (
        np.isfinite(x.D)
        & (x.D > 0)
        & np.isfinite(x.d)
        & (x.d >= 0)
        & np.isfinite(x.sd_d)
        & (x.sd_d >= 0)
        & np.isfinite(x.lt)
        & (x.lt >= 0)
        & np.isfinite(x.slt)
        & (x.slt >= 0)
        & np.isfinite(t.c)
        & (t.c > 0)
        & np.isfinite(x.S)
        & (x.S >= 0)
        & np.isfinite(x.i)
        & (x.i > 0)
        & np.isfinite(t.H)
        & (t.H > 0)
        & np.isfinite(t.mu_l)
        & np.isfinite(t.sig_l)
        & np.isfinite(t.eoq_raw)
        & np.isfinite(x.pack)
        & (x.pack >= 1)
        & (np.abs(x.pack - np.round(x.pack)) <= _WHOLE_TOL * x.pack)
        & np.isfinite(x.moq)
        & (x.moq >= 0)
        & bool(np.isfinite(x.dpp) and x.dpp > 0)
    )
    p_given = np.isfinite(x.p)
    target_ok = np.isfinite(x.target) & (x.target > 0) & (x.target < 1)
    ok = base_ok & (((x.is_cs | x.is_fr) & target_ok) | (x.is_sc & p_given & (x.p >= 0)))
    if usable is not None:
        ok = ok & np.asarray(usable, dtype=bool)
    return ok, target_ok, p_given


@dataclass
class _Working:
    """Working copies: harmless values where an item is not ok, so no NaN reaches a solver."""

    D: np.ndarray
    S: np.ndarray
    H: np.ndarray
    c: np.ndarray
    mu: np.ndarray
    sd: np.ndarray
    pack: np.ndarray
    moq: np.ndarray
    target: np.ndarray
    p: np.ndarray
    eoq: np.ndarray
    model: LeadTimeDemandModel

    @classmethod
    def of(
        cls,
        x: _Columns,
        t: _Terms,
        ok: np.ndarray,
        target_ok: np.ndarray,
        p_given: np.ndarray,
        model_factory: ModelFactory,
    ) -> _Working:
        def safe(a: np.ndarray, v: float) -> np.ndarray:
            return np.where(ok, a, v)

        mu, sd = safe(t.mu_l, 1.0), safe(t.sig_l, 1.0)
        return cls(
            D=safe(x.D, 1.0),
            S=safe(x.S, 1.0),
            H=safe(t.H, 1.0),
            c=safe(t.c, 1.0),
            mu=mu,
            sd=sd,
            pack=safe(x.pack, 1.0),
            moq=safe(x.moq, 0.0),
            target=np.where(ok & target_ok, x.target, 0.5),
            p=np.where(ok & p_given, x.p, 1.0),
            eoq=safe(t.eoq_raw, 1.0),
            model=model_factory(mu, sd),
        )


class _ShortageItems:
    """The shortage-cost items (k) with their own model: whole R for a given Q, and cost.

    R for a given Q solves 1 - F(R) = Q H / (p D), then the cheaper of floor and ceil;
    where Q H / (p D) >= 1 no safety stock pays and R = mu_L.
    """

    def __init__(self, w: _Working, sc: np.ndarray, nopay: np.ndarray, factory: ModelFactory):
        self.k = np.flatnonzero(sc)
        self.model = _subset_model(w.model, factory, w.mu, w.sd, self.k)
        self.D, self.S = w.D[self.k], w.S[self.k]
        self.H, self.mu = w.H[self.k], w.mu[self.k]
        self.pD = (w.p * w.D)[self.k]
        self.nopay = nopay[self.k]

    def reorder(self, q: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        ratio_q = np.where(self.pD > 0, q * self.H / self.pD, np.inf)
        no_ss_q = self.nopay | (ratio_q >= 1.0)
        r_cont = np.where(
            no_ss_q, self.mu, self.model.upper_quantile(np.where(no_ss_q, 0.5, ratio_q))
        )
        r_lo, r_hi = np.floor(r_cont), np.ceil(r_cont)

        def r_cost(r: np.ndarray) -> np.ndarray:
            return self.H * (r - self.mu) + self.pD / q * self.model.expected_shortage(r)

        return np.where(r_cost(r_hi) < r_cost(r_lo), r_hi, r_lo), no_ss_q

    def cost(self, q: np.ndarray, r: np.ndarray) -> np.ndarray:
        """Expected annual cost with backorders (Hadley & Whitin 1963), R floored at 0."""
        r0 = np.maximum(r, 0.0)
        return (
            self.D * self.S / q
            + self.H * (q / 2.0 + r0 - self.mu)
            + self.pD / q * self.model.expected_shortage(r0)
        )


@dataclass
class _Orders:
    """The order quantity and what it brings: Q, the continuous optimum it was rounded
    from, the effective order cost S', the shortage-cost R and its no-safety-stock flag,
    the quantity without the shelf-life cap, and what that cap costs a year."""

    Q: np.ndarray
    q_cont: np.ndarray
    s_eff: np.ndarray
    r_sc: np.ndarray
    no_ss: np.ndarray
    life_cost: np.ndarray


def _shortage_start(
    x: _Columns, w: _Working, ok: np.ndarray, factory: ModelFactory
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(q_cont, s_eff, nopay): the continuous optimum each item is rounded from (the
    Hadley-Whitin optimum for shortage-cost items, else the EOQ) and S' = S + p n(R*)."""
    n = x.D.shape[0]
    sc = x.is_sc & ok
    nopay = np.zeros(n, dtype=bool)
    q_cont = w.eoq.copy()
    s_eff = w.S.copy()
    if sc.any():
        idx = np.flatnonzero(sc)
        q_opt, n_opt, nopay_sc = _shortage_optimum(
            factory, w.mu[idx], w.sd[idx], w.D[idx], w.S[idx], w.H[idx], w.p[idx], w.eoq[idx]
        )
        nopay[idx] = nopay_sc
        q_cont[idx] = np.where(nopay_sc, w.eoq[idx], q_opt)
        s_eff[idx] = np.where(nopay_sc, w.S[idx], w.S[idx] + w.p[idx] * n_opt)
    return q_cont, s_eff, nopay


def _order_quantity(
    x: _Columns, t: _Terms, w: _Working, ok: np.ndarray, factory: ModelFactory
) -> _Orders:
    """Service measures: the cheaper pack multiple on the EOQ cost curve. Shortage cost:
    the pack multiple below or above the optimum whose whole (Q, R) costs less in full.
    Then the price-break quantity, then the shelf-life cap."""
    n = x.D.shape[0]
    q_cont, s_eff, nopay = _shortage_start(x, w, ok, factory)
    sc = _ShortageItems(w, x.is_sc & ok, nopay, factory)
    Q = round_order_qty(q_cont, w.pack, w.moq, w.D, s_eff, w.H)
    r_sc = np.zeros(n)  # the shortage-cost reorder point (0 for the other items)
    no_ss = np.zeros(n, dtype=bool)
    k = sc.k
    if k.size:
        q_lo, q_hi, _ = _order_candidates(q_cont[k], w.pack[k], w.moq[k])
        r_sc_lo, no_ss_lo = sc.reorder(q_lo)
        r_sc_hi, no_ss_hi = sc.reorder(q_hi)
        take_hi = sc.cost(q_hi, r_sc_hi) < sc.cost(q_lo, r_sc_lo)
        Q[k] = np.where(take_hi, q_hi, q_lo)
        r_sc[k] = np.where(take_hi, r_sc_hi, r_sc_lo)
        no_ss[k] = np.where(take_hi, no_ss_hi, no_ss_lo)

    def sc_again(where: np.ndarray) -> None:
        """The shortage-cost R again, for the items of ``where`` whose Q has changed."""
        if not k.size or not where[k].any():
            return
        r_b, no_b = sc.reorder(Q[k])
        r_sc[k] = np.where(where[k], r_b, r_sc[k])
        no_ss[k] = np.where(where[k], no_b, no_ss[k])

    disc, disc_unc, has_breaks = t.disc, t.disc_unc, t.has_breaks
    if disc is not None and has_breaks.any():
        # The price-break quantity; R follows from it (the cost-optimal R for shortage cost).
        hb = has_breaks & ok
        Q = np.where(hb, disc.order_qty, Q)
        q_cont = np.where(hb, disc.q_continuous, q_cont)
        sc_again(hb)
    # Shelf life: what the order quantity would be without it, then the cap.
    q_free = Q.copy()
    if disc_unc is not None and has_breaks.any():
        q_free = np.where(has_breaks & ok, disc_unc.order_qty, q_free)
    capped = ok & t.has_life & (q_free > t.cap_q)
    if capped.any():
        plain_cap = capped & ~has_breaks  # breaks: the capped choice is already in Q
        Q = np.where(plain_cap, t.cap_q, Q)
        # rounding is measured from the capped continuous quantity, so the rounding
        # penalty does not count the cap's cost a second time
        q_cont = np.where(capped, np.minimum(q_cont, np.maximum(t.life_cont, t.floor_q)), q_cont)
        sc_again(capped)
    # What the cap costs a year, on ordering + cycle holding + purchase at the price
    # each quantity pays (the EOQ cost curve; purchase only differs with price breaks).
    c = t.c
    price_free = c
    if disc_unc is not None and has_breaks.any():
        price_free = np.where(has_breaks, disc_unc.unit_price, c)
    life_cost = np.where(
        t.has_life,
        (w.D * s_eff / Q + x.i * c * Q / 2.0 + w.D * c)
        - (w.D * s_eff / q_free + x.i * price_free * q_free / 2.0 + w.D * price_free),
        np.nan,
    )
    return _Orders(Q, q_cont, s_eff, r_sc, no_ss, life_cost)


def _reorder_points(
    x: _Columns, w: _Working, o: _Orders, ok: np.ndarray, factory: ModelFactory
) -> np.ndarray:
    """R before flooring at 0, each measure on its own items (0 for items not planned):
    cycle service, the smallest whole R with F(R) >= target; fill rate, the smallest whole R
    with 1 - n(R) / Q >= target; shortage cost, as the order quantity stage left it."""
    r_raw = o.r_sc
    k_cs = np.flatnonzero(x.is_cs & ok)
    if k_cs.size:
        m_cs, t_cs = _subset_model(w.model, factory, w.mu, w.sd, k_cs), w.target[k_cs]
        mu_cs, sd_cs = w.mu[k_cs], w.sd[k_cs]
        r_raw[k_cs] = _smallest_whole_at(
            _ceil_tol(m_cs.quantile(t_cs)),
            lambda r, j: _subset_model(m_cs, factory, mu_cs, sd_cs, j).cdf(r) >= t_cs[j] - PROB_TOL,
        )
    k_fr = np.flatnonzero(x.is_fr & ok)
    if k_fr.size:
        m_fr = _subset_model(w.model, factory, w.mu, w.sd, k_fr)
        t_fr, q_fr = w.target[k_fr], o.Q[k_fr]
        mu_fr, sd_fr = w.mu[k_fr], w.sd[k_fr]
        r_raw[k_fr] = _smallest_whole_at(
            _ceil_tol(m_fr.min_r_for_shortage((1.0 - t_fr) * q_fr)),
            lambda r, j: (
                1.0 - _subset_model(m_fr, factory, mu_fr, sd_fr, j).expected_shortage(r) / q_fr[j]
                >= t_fr[j] - PROB_TOL
            ),
        )
    return r_raw


def _policy_group_columns(
    inp: PolicyInputs, model_factory: ModelFactory, usable: np.ndarray | None = None
) -> dict[str, np.ndarray | float]:
    """The columns of :func:`_policy_group` (arrays, or a scalar for a whole column)."""
    x = _Columns.of(inp)
    with np.errstate(all="ignore"):
        t = _terms(inp, x)
        ok, target_ok, p_given = _usable(x, t, usable)
        w = _Working.of(x, t, ok, target_ok, p_given, model_factory)
        o = _order_quantity(x, t, w, ok, model_factory)
        r_raw = _reorder_points(x, w, o, ok, model_factory)
        floored = ok & (r_raw < 0)
        R = np.maximum(r_raw, 0.0)
        ach = _achieved(w.model, o.Q, R, w.mu, w.D, w.S, w.H, w.c, np.where(p_given, w.p, np.nan))
        return _output(x, t, w, o, R, ach, ok, floored, usable)


def _output(
    x: _Columns,
    t: _Terms,
    w: _Working,
    o: _Orders,
    R: np.ndarray,
    ach: dict[str, np.ndarray],
    ok: np.ndarray,
    floored: np.ndarray,
    usable: np.ndarray | None,
) -> dict[str, np.ndarray | float]:
    """The policy columns: what the whole-unit policy achieves and costs, the rounding
    penalty (what whole packs and minimum orders cost a year over the continuous optimum,
    on the curve D S' / Q + H Q / 2), the flags, and the price-break and shelf-life columns."""
    Q, q_cont, s_eff, disc = o.Q, o.q_cont, o.s_eff, t.disc
    rounding_penalty = order_cost_terms(Q, w.D, s_eff, w.H) - order_cost_terms(
        q_cont, w.D, s_eff, w.H
    )
    rounding_ratio = np.where(
        s_eff > 0,
        order_cost_terms(Q, w.D, s_eff, w.H) / order_cost_terms(q_cont, w.D, s_eff, w.H),
        np.nan,
    )
    used = np.where(ok, w.model.item_model_names(), w.model.name).astype(object)
    doubtful = (
        np.isfinite(t.mu_l)
        & np.isfinite(t.sig_l)
        & ((t.sig_l >= 0.5 * t.mu_l) | (t.mu_l < 10.0))
        & (used == NormalLeadTimeDemand.name)
    )
    if usable is not None:
        doubtful &= np.asarray(usable, dtype=bool)

    def out(a: np.ndarray) -> np.ndarray:
        return np.where(ok, a, np.nan)

    has_breaks = t.has_breaks
    return {
        "annual_demand": x.D,
        "demand_per_period": x.d,
        "demand_sd_per_period": x.sd_d,
        "lead_time_days": x.lt,
        "lead_time_demand_mean": t.mu_l,
        "lead_time_demand_sd": t.sig_l,
        "service_measure": np.asarray(x.measure_raw, dtype=object),
        "service_target": x.target,
        "model": used,
        "eoq": out(w.eoq),
        "order_qty": out(Q),
        "reorder_point": out(R),
        "safety_stock": out(ach["safety_stock"]),
        "cycle_service": out(ach["cycle_service"]),
        "fill_rate": out(ach["fill_rate"]),
        "expected_units_short_per_cycle": out(ach["short"]),
        "orders_per_year": out(ach["orders"]),
        "annual_ordering_cost": out(ach["ordering"]),
        "annual_cycle_holding_cost": out(ach["cycle_hold"]),
        "annual_safety_holding_cost": out(ach["ss_hold"]),
        "annual_shortage_cost": out(ach["shortage"]),
        "annual_total_cost": out(ach["total"]),
        "annual_purchase_cost": out(ach["purchase"]),
        "average_inventory_value": out(ach["avg_value"]),
        "rounding_cost_ratio": out(rounding_ratio),
        "rounding_penalty": out(np.maximum(rounding_penalty, 0.0)),
        "flag_no_safety_stock_pays": ok & o.no_ss,
        "flag_normal_doubtful": doubtful,
        "flag_reorder_point_floored": floored,
        "flag_shortage_cost_missing": x.is_sc & ~np.isfinite(x.p),
        "unit_price": out(t.c),
        "shelf_life_days": np.where(t.has_life, t.life, np.nan),
        "shelf_life_max_qty": out(np.where(t.has_life, t.cap_packs, np.nan)),
        "shelf_life_cost": out(np.maximum(o.life_cost, 0.0)),
        "flag_shelf_life_below_minimum": ok & t.life_short,
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
