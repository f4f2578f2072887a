"""Periodic review (T, S): every T days, order enough to raise the stock position to S.

An order placed at a review arrives L later and must cover demand until the next order
arrives, so S protects the *protection interval* T + L (Silver, Pyke & Peterson,
*Inventory Management and Production Planning and Scheduling*, 3rd ed., 1998, ch. 7).
Demand over it has mean d (T + L) and sd sqrt((T + L) s^2 + d^2 sL^2) (the lead-time
formula with T + L; the review period itself is fixed), and follows the item's own demand
model (core.models). S is the smallest whole number that meets

- cycle service: P(X <= S) >= target (no stock-out in a review cycle);
- fill rate: 1 - E[(X - S)+] / (d T) >= target (SPP 1998, ch. 7: units short per review
  cycle over the demand per review);
- shortage cost p per unit short: P(X > S) = H T_y / p (T_y: the review period in years),
  the whole S either side with the lower cost; no safety stock where H T_y >= p.

Costs a year: an order every review (orders = periods per year / T), ordering S_o x orders,
cycle stock H d T / 2 (half the average order), safety stock H (S - mean), shortage p x
orders x E[(X - S)+]. All over whole arrays, one pass per demand model.
"""

from __future__ import annotations

from functools import partial

import numpy as np
import pandas as pd
from numpy.typing import ArrayLike

from xlpolicy.contract import CYCLE_SERVICE, FILL_RATE, SHORTAGE_COST
from xlpolicy.core.demand import lead_time_demand
from xlpolicy.core.models import (
    MODEL_NAMES,
    LeadTimeDemandModel,
    NormalLeadTimeDemand,
    model_factory,
)
from xlpolicy.core.policy import PROB_TOL, _ceil_tol, _smallest_whole, item_model_names

__all__ = ["PERIODIC_COLUMNS", "periodic_policy"]

#: Columns of :func:`periodic_policy`, in order.
PERIODIC_COLUMNS: tuple[str, ...] = (
    "protection_demand_mean",
    "protection_demand_sd",
    "order_up_to_level",
    "safety_stock",
    "order_qty",
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
    "flag_no_safety_stock_pays",
)


def _cycle_met(model: LeadTimeDemandModel, target: np.ndarray, s: np.ndarray) -> np.ndarray:
    """Whether order-up-to level ``s`` meets the cycle-service ``target`` under ``model``."""
    return model.cdf(s) >= target - PROB_TOL


def _fill_met(
    model: LeadTimeDemandModel, target: np.ndarray, q: np.ndarray, s: np.ndarray
) -> np.ndarray:
    """Whether level ``s`` meets the fill-rate ``target`` with mean order size ``q``."""
    return 1.0 - model.expected_shortage(s) / q >= target - PROB_TOL


def _col(x: ArrayLike, n: int) -> np.ndarray:
    return np.broadcast_to(np.asarray(x, dtype=float), (n,)).copy()


def periodic_policy(
    review_days: ArrayLike,
    demand_per_period: ArrayLike,
    demand_sd_per_period: ArrayLike,
    lead_time_days: ArrayLike,
    lead_time_sd_days: ArrayLike,
    days_per_period: float,
    periods_per_year: float,
    order_cost: ArrayLike,
    holding_rate: ArrayLike,
    unit_cost: ArrayLike,
    measure: ArrayLike,
    service_target: ArrayLike,
    shortage_cost: ArrayLike,
    model: ArrayLike | None = None,
) -> pd.DataFrame:
    """The (T, S) policy and its yearly costs per item (NaN where it cannot be computed).

    ``model`` names each item's demand model (MODEL_NAMES; "" or None: normal).
    """
    T = np.asarray(review_days, dtype=float).reshape(-1)
    n = T.shape[0]
    d, sd_d, L, sL = (
        _col(x, n)
        for x in (demand_per_period, demand_sd_per_period, lead_time_days, lead_time_sd_days)
    )
    S_o, i, c, target, p = (
        _col(x, n) for x in (order_cost, holding_rate, unit_cost, service_target, shortage_cost)
    )
    meas = np.char.lower(
        np.char.strip(np.broadcast_to(np.asarray(measure, dtype=object), (n,)).astype(str))
    )
    names = item_model_names(model, n)
    names[names == ""] = NormalLeadTimeDemand.name
    dpp = float(days_per_period)
    out = pd.DataFrame(np.nan, index=pd.RangeIndex(n), columns=list(PERIODIC_COLUMNS))
    with np.errstate(all="ignore"):
        mu, sig = lead_time_demand(d, sd_d, (T + L) / dpp, sL / dpp)
        H = i * c
        D = d * periods_per_year
        q_bar = d * T / dpp  # the average order: demand over one review period
        t_years = q_bar / D  # the review period in years (periods per year / T orders)
        ok = (
            np.isfinite(T)
            & (T > 0)
            & np.isfinite(mu)
            & np.isfinite(sig)
            & (d > 0)
            & np.isfinite(H)
            & (H > 0)
            & np.isfinite(S_o)
            & (S_o >= 0)
        )
        svc = (
            np.isin(meas, (CYCLE_SERVICE, FILL_RATE))
            & np.isfinite(target)
            & (target > 0)
            & (target < 1)
        )
        sc = (meas == SHORTAGE_COST) & np.isfinite(p) & (p > 0)
        ok &= svc | sc
    out["protection_demand_mean"] = mu
    out["protection_demand_sd"] = sig
    for name in MODEL_NAMES:
        k = np.flatnonzero(ok & (names == name))
        if not len(k):
            continue
        m = model_factory(name)(mu[k], sig[k])
        tw = np.where(svc[k], target[k], 0.5)
        qb = q_bar[k]
        with np.errstate(all="ignore"):
            s_cs = _smallest_whole(_ceil_tol(m.quantile(tw)), partial(_cycle_met, m, tw))
            s_fr = _smallest_whole(
                _ceil_tol(m.min_r_for_shortage((1.0 - tw) * qb)), partial(_fill_met, m, tw, qb)
            )
            pk = np.where(sc[k], p[k], 1.0)
            ratio = H[k] * t_years[k] / pk
            nopay = sc[k] & (ratio >= 1.0)
            s_cont = np.where(nopay, mu[k], m.upper_quantile(np.where(nopay, 0.5, ratio)))
            lo, hi = np.floor(s_cont), np.ceil(s_cont)

            def cost(s: np.ndarray, m=m, k=k, pk=pk) -> np.ndarray:
                return H[k] * (s - mu[k]) + pk * m.expected_shortage(s) / t_years[k]

            s_sc = np.where(cost(hi) < cost(lo), hi, lo)
            level = np.where(
                meas[k] == CYCLE_SERVICE, s_cs, np.where(meas[k] == FILL_RATE, s_fr, s_sc)
            )
            level = np.maximum(level, 0.0)
            short = m.expected_shortage(level)
            orders = 1.0 / t_years[k]
            ss = level - mu[k]
            ordering = S_o[k] * orders
            cycle = H[k] * qb / 2.0
            safety = H[k] * ss
            shortage = np.where(sc[k], pk * orders * short, 0.0)
            given_p = np.isfinite(p[k]) & ~sc[k]  # a shortage cost given under a target
            shortage = np.where(given_p, np.nan_to_num(p[k]) * orders * short, shortage)
        out.loc[k, "order_up_to_level"] = level
        out.loc[k, "safety_stock"] = ss
        out.loc[k, "order_qty"] = qb
        out.loc[k, "cycle_service"] = m.cdf(level)
        out.loc[k, "fill_rate"] = np.clip(1.0 - short / qb, 0.0, 1.0)
        out.loc[k, "expected_units_short_per_cycle"] = short
        out.loc[k, "orders_per_year"] = orders
        out.loc[k, "annual_ordering_cost"] = ordering
        out.loc[k, "annual_cycle_holding_cost"] = cycle
        out.loc[k, "annual_safety_holding_cost"] = safety
        out.loc[k, "annual_shortage_cost"] = shortage
        out.loc[k, "annual_total_cost"] = ordering + cycle + safety + shortage
        out.loc[k, "annual_purchase_cost"] = D[k] * c[k]
        out.loc[k, "average_inventory_value"] = c[k] * (qb / 2.0 + np.maximum(ss, 0.0))
        out.loc[k, "flag_no_safety_stock_pays"] = nopay.astype(float)
    return out
