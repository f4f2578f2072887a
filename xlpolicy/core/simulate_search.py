"""The reorder point that reaches a service target in the back-test simulation itself.

Where an item's simulated service falls below its target, the analytic model misreads its
demand, so a better reorder point cannot come from the model: it is searched for in the
simulation. For each such item, the smallest whole number of units k >= 0 such that the
policy (Q, R + k) reaches the target on the same simulated demand: k is doubled from a
first step until the target is reached, then narrowed by bisection to a single unit.

Every trial simulates all the searched items together with the same seed, so each item
sees the same demand draws at every R it is tried with (common random numbers). With
backorders that makes the simulated service a non-decreasing step function of R on those
draws: raising R lifts the whole stock path by the same amount and changes no order date,
so the search finds the exact smallest k on them (with lost sales, nearly so). Vectorised
over items; the only loop runs over the trials (about 2 log2 of the answer over the step).
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

from .simulate import DemandSource, simulate_policy

__all__ = ["reorder_point_for_target", "MAX_DOUBLINGS"]

#: The first step is doubled at most this many times (2^12 first steps: a reorder point
#: far beyond any sensible one); an item not reaching its target by then gets NaN.
MAX_DOUBLINGS = 12


def reorder_point_for_target(
    order_qty: ArrayLike,
    reorder_point: ArrayLike,
    lead_time_periods: ArrayLike,
    lead_time_sd_periods: ArrayLike,
    demand: DemandSource,
    target: ArrayLike,
    first_step: ArrayLike,
    *,
    fill_rate: bool = False,
    replications: int = 100,
    seed: int = 0,
    lost_sales: bool = False,
    periods_per_year: float = 52.0,
) -> np.ndarray:
    """Per item, the smallest R + k (k a whole number >= 0) whose simulated cycle service
    (or fill rate) is at least the target; NaN where none is found within MAX_DOUBLINGS
    doublings of ``first_step`` (at least 1 unit), or where the inputs are unusable.
    """
    q = np.asarray(order_qty, dtype=float).reshape(-1)
    n = q.shape[0]

    def col(x: ArrayLike) -> np.ndarray:
        return np.broadcast_to(np.asarray(x, dtype=float), (n,)).copy()

    r, lt, lsd, tgt = (
        col(reorder_point),
        col(lead_time_periods),
        col(lead_time_sd_periods),
        col(target),
    )
    step = np.maximum(np.ceil(np.nan_to_num(col(first_step), nan=1.0)), 1.0)
    key = "fill_rate" if fill_rate else "cycle_service"

    def reaches(k: np.ndarray) -> np.ndarray:
        res = simulate_policy(
            q,
            r + k,
            lt,
            lsd,
            demand,
            replications=replications,
            seed=seed,
            lost_sales=lost_sales,
            periods_per_year=periods_per_year,
        )
        got = res.columns[key]
        with np.errstate(invalid="ignore"):
            return np.isfinite(got) & (got >= tgt - 1e-12)

    lo = np.full(n, 0.0)  # the largest k known to fall short
    hi = np.full(n, np.nan)  # the smallest k known to reach the target
    usable = np.isfinite(q) & (q > 0) & np.isfinite(r) & np.isfinite(lt) & (lt >= 0) & (tgt <= 1.0)
    if not usable.any():
        return hi
    if not usable.all():
        k_use = np.flatnonzero(usable)
        out = np.full(n, np.nan)
        out[k_use] = reorder_point_for_target(
            q[k_use],
            r[k_use],
            lt[k_use],
            lsd[k_use],
            demand.take(k_use),
            tgt[k_use],
            step[k_use],
            fill_rate=fill_rate,
            replications=replications,
            seed=seed,
            lost_sales=lost_sales,
            periods_per_year=periods_per_year,
        )
        return out
    ok0 = reaches(np.zeros(n))
    hi[ok0] = 0.0
    k = step.copy()
    for _ in range(MAX_DOUBLINGS + 1):
        open_ = np.isnan(hi)
        if not open_.any():
            break
        trial = np.where(open_, k, np.nan_to_num(hi))
        ok = reaches(trial)
        hi = np.where(open_ & ok, trial, hi)
        lo = np.where(open_ & ~ok, trial, lo)
        k = np.where(open_ & ~ok, 2.0 * k, k)
    while True:
        gap = np.isfinite(hi) & (hi - lo > 1.0)
        if not gap.any():
            break
        mid = np.where(gap, np.floor((lo + hi) / 2.0), np.nan_to_num(hi))
        ok = reaches(mid)
        hi = np.where(gap & ok, mid, hi)
        lo = np.where(gap & ~ok, mid, lo)
    return r + hi
