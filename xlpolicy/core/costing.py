"""What a whole-unit (Q, R) policy achieves and costs a year, under a lead-time demand model.

Cycle service F(R); units short per cycle n(R) = E[(X - R)^+]; fill rate 1 - n(R) / Q;
ordering D S / Q; cycle-stock holding H Q / 2; safety-stock holding H (R - mu); shortage
p D / Q n(R); purchase D c (Silver, Pyke & Peterson 1998, ch. 7). The same formulas cost
the recommended policy and the one a shop uses today, so the two compare like for like.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from numpy.typing import ArrayLike

from xlpolicy.core.arrays import _column, item_model_names
from xlpolicy.core.models import MODEL_NAMES, LeadTimeDemandModel, NormalLeadTimeDemand
from xlpolicy.core.models import model_factory as named_model


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

    Silver, Pyke & Peterson (1998, ch. 7): cycle service F(R); units short per cycle
    n(R) = E[(X - R)^+]; fill rate 1 - n(R)/Q; ordering D S/Q; cycle holding H Q/2; safety
    holding H (R - mu); shortage p D/Q n(R) where p is given (NaN: none, cost 0); purchase
    D c; average inventory value c (Q/2 + max(R - mu, 0)).
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
