"""All-units quantity discounts: the order quantity with the lowest total annual cost.

With all-units price breaks, an order of Q units pays the price of the largest break
quantity b_j <= Q on every unit. The annual cost of ordering Q is

    TC(Q) = D S / Q + i c(Q) Q / 2 + D c(Q)

(ordering, cycle-stock holding at the price paid, purchase). The textbook method (Nahmias,
*Production and Operations Analysis*, ch. 4, all-units discounts; Chopra & Meindl, *Supply
Chain Management*, ch. 11): for each price, the EOQ at that price; where it lies below the
price's break, move it up to the break; compare the totals. Here orders must also be whole
packs and at least the minimum order, so for each price the allowed quantities either side
of that point, kept inside the price's own quantity range, are the candidates, and each is
costed at the price it really earns. TC is convex within a price's range, so the best
allowed quantity of each range is one of these and the cheapest candidate is the optimum.

Everything is over whole arrays: items x price levels (breaks padded with +inf quantities).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

__all__ = [
    "DiscountChoice",
    "all_units_order_qty",
    "price_at",
    "sorted_breaks",
    "total_annual_cost",
]

_WHOLE_TOL = 1e-9


def sorted_breaks(qty: ArrayLike, price: ArrayLike) -> tuple[np.ndarray, np.ndarray]:
    """Breaks per item sorted by quantity; padding (NaN or inf quantity) moved to the end.

    Returns (quantities with +inf for padding, prices with NaN for padding), both (n, k).
    """
    q = np.atleast_2d(np.asarray(qty, dtype=float)).copy()
    p = np.atleast_2d(np.asarray(price, dtype=float)).copy()
    pad = ~(np.isfinite(q) & np.isfinite(p))
    q[pad] = np.inf
    p[pad] = np.nan
    order = np.argsort(q, axis=1, kind="stable")
    return np.take_along_axis(q, order, axis=1), np.take_along_axis(p, order, axis=1)


def _levels(
    base_price: ArrayLike, qty: np.ndarray, price: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Price levels per item: the base price from 0 units, then the sorted breaks."""
    n = qty.shape[0]
    base = np.broadcast_to(np.asarray(base_price, dtype=float).reshape(-1, 1), (n, 1))
    return (np.concatenate([np.zeros((n, 1)), qty], axis=1), np.concatenate([base, price], axis=1))


def price_at(q: ArrayLike, base_price: ArrayLike, qty: ArrayLike, price: ArrayLike) -> np.ndarray:
    """The unit price an order of q units pays: that of the largest break quantity <= q.

    q has one value per item (n,) or several (n, m); the base price applies below every
    break. NaN where q is NaN.
    """
    bq, bp = sorted_breaks(qty, price)
    lq, lp = _levels(base_price, bq, bp)
    q_a = np.asarray(q, dtype=float)
    q2 = q_a.reshape(q_a.shape[0], -1)
    # level index = number of level quantities <= q, minus one (level 0 is at 0 units)
    tol = _WHOLE_TOL * np.maximum(1.0, np.abs(q2))
    k = (lq[:, None, :] <= (q2 + tol)[:, :, None]).sum(axis=2) - 1
    out = np.take_along_axis(lp, np.maximum(k, 0), axis=1)
    out = np.where(np.isfinite(q2), out, np.nan)
    return out.reshape(q_a.shape)


def total_annual_cost(
    q: ArrayLike, D: ArrayLike, S: ArrayLike, i: ArrayLike, unit_price: ArrayLike
) -> np.ndarray:
    """D S / Q + i c Q / 2 + D c: ordering, cycle-stock holding and purchase a year."""
    q_a = np.asarray(q, dtype=float)
    c = np.asarray(unit_price, dtype=float)
    with np.errstate(all="ignore"):
        return (
            np.asarray(D) * np.asarray(S) / q_a + np.asarray(i) * c * q_a / 2.0 + np.asarray(D) * c
        )


def _allowed_around(
    x: np.ndarray, pack: np.ndarray, moq: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Allowed quantities just below and just above x: whole packs, at least the minimum.

    The same rule as core.policy.round_order_qty: multiples of the pack size, at least one
    pack and at least the minimum order raised to a pack multiple.
    """
    with np.errstate(all="ignore"):
        floor_q = pack * np.maximum(1.0, np.ceil(moq / pack - _WHOLE_TOL))
        k = x / pack
        k_near = np.round(k)
        near = np.abs(k - k_near) <= _WHOLE_TOL * np.maximum(1.0, k)
        lo = np.maximum(np.where(near, k_near, np.floor(k)) * pack, floor_q)
        hi = np.maximum(np.where(near, k_near, np.ceil(k)) * pack, floor_q)
    return lo, hi


@dataclass
class DiscountChoice:
    """The chosen order quantity per item and what it costs (arrays of length n).

    ``order_qty``: whole packs, at least the minimum; ``unit_price``: the price it pays;
    ``break_qty``: the break quantity of that price (NaN: the base price); ``q_continuous``:
    the EOQ at that price moved up to its break (before pack rounding); ``total_cost``:
    TC(order_qty); ``plain_qty`` and ``plain_cost``: the EOQ at the base price rounded the
    same way and its TC at the price that quantity really earns; ``saving``: plain_cost -
    total_cost (>= 0).
    """

    order_qty: np.ndarray
    unit_price: np.ndarray
    break_qty: np.ndarray
    q_continuous: np.ndarray
    total_cost: np.ndarray
    plain_qty: np.ndarray
    plain_cost: np.ndarray
    saving: np.ndarray


def all_units_order_qty(
    D: ArrayLike,
    S: ArrayLike,
    i: ArrayLike,
    base_price: ArrayLike,
    break_qty: ArrayLike,
    break_price: ArrayLike,
    pack: ArrayLike,
    moq: ArrayLike,
    max_qty: ArrayLike | None = None,
) -> DiscountChoice:
    """The allowed order quantity with the lowest D S/Q + i c(Q) Q/2 + D c(Q), per item.

    ``break_qty`` and ``break_price`` are (n, k), padded with NaN (or inf quantities) where
    an item has fewer breaks; the base price applies from 0 units. ``max_qty`` (an allowed
    quantity, or inf/NaN for none) caps the order, e.g. at what sells within a shelf life:
    TC is convex within each price's range, so the best capped quantity is a candidate at or
    below the cap, or the cap itself. Ties go to the smaller quantity. Invalid inputs give
    NaN.
    """
    D_a = np.asarray(D, dtype=float).reshape(-1, 1)
    n = D_a.shape[0]

    def col(x: ArrayLike) -> np.ndarray:
        return np.broadcast_to(np.asarray(x, dtype=float).reshape(-1, 1), (n, 1))

    S_a, i_a, c0, pk, m = (col(x) for x in (S, i, base_price, pack, moq))
    bq, bp = sorted_breaks(
        np.asarray(break_qty, dtype=float).reshape(n, -1),
        np.asarray(break_price, dtype=float).reshape(n, -1),
    )
    lq, lp = _levels(c0, bq, bp)  # (n, L)
    with np.errstate(all="ignore"):
        eoq = np.sqrt(2.0 * D_a * S_a / (i_a * lp))  # EOQ at each price
        nxt = np.concatenate([lq[:, 1:], np.full((n, 1), np.inf)], axis=1)
        # largest whole quantity below the next break (orders are whole units)
        upper = np.where(
            np.isfinite(nxt), np.ceil(nxt - _WHOLE_TOL * np.maximum(1.0, nxt)) - 1.0, np.inf
        )
        x = np.minimum(np.maximum(eoq, lq), upper)
        x = np.where(np.isfinite(lp), x, np.nan)
        lo, hi = _allowed_around(x, pk, m)
        cand = np.concatenate([lo, hi], axis=1)  # (n, 2L)
        cap = np.full((n, 1), np.inf)
        if max_qty is not None:
            cap = np.asarray(max_qty, dtype=float).reshape(-1, 1) * np.ones((n, 1))
            cap = np.where(np.isfinite(cap), cap, np.inf)
            cand = np.concatenate([cand, np.where(np.isfinite(cap), cap, np.nan)], axis=1)
        c_cand = price_at(cand, c0[:, 0], bq, bp)
        tc = total_annual_cost(cand, D_a, S_a, i_a, c_cand)
        tc = np.where(np.isfinite(tc) & (cand <= cap * (1 + _WHOLE_TOL)), tc, np.inf)
        # lowest cost; among equal costs (to float noise) the smallest quantity
        best_tc = tc.min(axis=1, keepdims=True)
        tie = tc <= best_tc + 1e-12 * np.maximum(1.0, np.abs(best_tc))
        q_best = np.where(tie, cand, np.inf).min(axis=1)
        price = price_at(q_best, c0[:, 0], bq, bp)
        level = (lq <= (q_best + _WHOLE_TOL * np.maximum(1.0, q_best))[:, None]).sum(1) - 1
        level = np.maximum(level, 0)
        b_used = np.take_along_axis(lq, level[:, None], axis=1)[:, 0]
        eoq_used = np.sqrt(2.0 * D_a[:, 0] * S_a[:, 0] / (i_a[:, 0] * price))
        q_cont = np.maximum(eoq_used, b_used)
        total = total_annual_cost(q_best, D_a[:, 0], S_a[:, 0], i_a[:, 0], price)
        # the plain EOQ at the base price, rounded to packs the cheaper way on its own curve
        p_lo, p_hi = _allowed_around(eoq[:, :1], pk, m)
        h0 = i_a * c0
        cost_lo = D_a * S_a / p_lo + h0 * p_lo / 2.0
        cost_hi = D_a * S_a / p_hi + h0 * p_hi / 2.0
        plain = np.minimum(np.where(cost_hi < cost_lo, p_hi, p_lo), cap)[:, 0]
        plain_cost = total_annual_cost(
            plain, D_a[:, 0], S_a[:, 0], i_a[:, 0], price_at(plain, c0[:, 0], bq, bp)
        )
        valid = np.isfinite(q_best) & np.isfinite(total) & (D_a[:, 0] > 0) & np.isfinite(plain_cost)
    nan = np.full(n, np.nan)
    return DiscountChoice(
        order_qty=np.where(valid, q_best, nan),
        unit_price=np.where(valid, price, nan),
        break_qty=np.where(valid & (level > 0), b_used, nan),
        q_continuous=np.where(valid, q_cont, nan),
        total_cost=np.where(valid, total, nan),
        plain_qty=np.where(valid, plain, nan),
        plain_cost=np.where(valid, plain_cost, nan),
        saving=np.where(valid, np.maximum(plain_cost - total, 0.0), nan),
    )
