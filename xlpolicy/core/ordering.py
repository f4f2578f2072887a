"""Order quantities a supplier accepts: the EOQ cost curve, packs, minimums, price breaks.

Allowed quantities are whole multiples of the pack size, at least one pack and at least the
minimum order raised to a pack multiple. Of the two allowed quantities around a continuous
optimum the cheaper on the EOQ cost curve D S / Q + H Q / 2 is taken (Harris 1913; the
curve is flat near its optimum, so the rounding costs little). All-units price breaks are
chosen by :func:`xlpolicy.core.discounts.all_units_order_qty`.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np
from numpy.typing import ArrayLike

from xlpolicy.core.discounts import DiscountChoice, all_units_order_qty

if TYPE_CHECKING:
    from xlpolicy.core.policy import PolicyInputs

#: Relative slack when turning a continuous value into a whole number (float noise).
_WHOLE_TOL = 1e-9


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
