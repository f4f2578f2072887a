"""Replay of a (Q, R) policy that changes over time on an item's own demand history.

For the comparison of a policy re-planned at each month's start (with the seasonal and
trend forecast) and a fixed one (the flat average), both run on the history as it
happened. Vectorised over items; the loop runs over periods.

The discretisation (our rule, simpler than core.simulate's, which replays a fixed policy
with fractional lead times): stock is reviewed at the end of each period; when the
inventory position (net stock + on order) is at or below the reorder point in force, the
smallest whole number of order quantities that lifts it above is ordered, and arrives
after the next ``lead`` periods' demand (the lead time in whole periods, at least 1).
Demand that finds no stock is backordered. A replenishment cycle (an arrival) is stocked
out when the net stock just before it, plus the undershoot below the reorder point at
which the order was placed, is below 0: the order is counted as placed at R, the
analytic model's assumption (as core.simulate counts it), so the figure is the cycle
service the reorder point is set for. Each item starts at its first simulated period with
R + Q on hand and nothing on order; cycles arriving and periods before a warm-up of
lead + 1 periods are not counted.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

__all__ = ["replay_policy"]


def replay_policy(
    demand: ArrayLike,
    reorder_point: ArrayLike,
    order_qty: ArrayLike,
    lead: ArrayLike,
    first: ArrayLike,
) -> dict[str, np.ndarray]:
    """Replay per item; reorder_point and order_qty are items x periods (the policy in force
    at the end of each period), lead and first per item.

    Returns per item: cycles, stocked_out (cycles stocked out), cycle_service
    (1 - stocked_out / cycles, NaN without a cycle), demand, short (units that found no
    stock), fill_rate, average_on_hand (units, over the periods counted), periods.
    """
    d = np.nan_to_num(np.asarray(demand, dtype=float))
    n, t_len = d.shape
    r = np.asarray(reorder_point, dtype=float)
    q = np.asarray(order_qty, dtype=float)
    lt = np.maximum(np.rint(np.broadcast_to(np.asarray(lead, dtype=float), (n,))), 1).astype(
        np.int64
    )
    start = np.broadcast_to(np.asarray(first, dtype=np.int64), (n,))
    rows = np.arange(n)
    pipe = np.zeros((n, t_len + int(lt.max() if n else 1) + 2))
    under = np.zeros_like(pipe)  # the undershoot of the order arriving then
    net = np.zeros(n)
    on_order = np.zeros(n)
    cycles = np.zeros(n)
    out_cycles = np.zeros(n)
    dem = np.zeros(n)
    short = np.zeros(n)
    on_hand = np.zeros(n)
    periods = np.zeros(n)
    count_from = start + lt + 1
    for t in range(t_len):
        begin_now = start == t
        if begin_now.any():
            s0 = r[:, t] + q[:, t]
            net = np.where(begin_now, np.where(np.isfinite(s0), s0, 0.0), net)
        live = t >= start
        arriving = pipe[:, t]
        counted = live & (t >= count_from)
        got = counted & (arriving > 0)
        cycles += got
        out_cycles += got & (net + under[:, t] < 0)
        net = net + arriving
        on_order = on_order - arriving
        dt = np.where(live, d[:, t], 0.0)
        before = np.maximum(net, 0.0)
        net = net - dt
        dem += np.where(counted, dt, 0.0)
        short += np.where(counted, dt - np.minimum(before, dt), 0.0)
        on_hand += np.where(counted, np.maximum(net, 0.0), 0.0)
        periods += counted
        pos = net + on_order
        rt, qt = r[:, t], q[:, t]
        need = live & np.isfinite(rt) & np.isfinite(qt) & (qt > 0) & (pos <= rt)
        if need.any():
            k = np.floor((rt - pos) / np.where(qt > 0, qt, 1.0)) + 1.0
            amount = np.where(need, k * qt, 0.0)
            due = np.minimum(t + 1 + lt, pipe.shape[1] - 1)
            pipe[rows, due] += amount
            under[rows, due] = np.where(need, rt - pos, under[rows, due])
            on_order = on_order + amount
    with np.errstate(invalid="ignore", divide="ignore"):
        return {
            "cycles": cycles,
            "stocked_out": out_cycles,
            "cycle_service": np.where(cycles > 0, 1.0 - out_cycles / cycles, np.nan),
            "demand": dem,
            "short": short,
            "fill_rate": np.where(dem > 0, 1.0 - short / dem, np.nan),
            "average_on_hand": np.where(periods > 0, on_hand / periods, np.nan),
            "periods": periods,
        }
