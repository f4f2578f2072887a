"""The cost-optimal (Q, R) when each unit short costs p (backorders), many items at once.

The Hadley & Whitin (1963, "Analysis of Inventory Systems") iteration alternates
1 - F(R) = Q H / (p D) and Q = sqrt(2 D (S + p n(R)) / H) from the EOQ, for every item
still moving; items it settles slowly are solved by bracketing, and whole-unit demand
models take a last descent over whole reorder points. Symbols as in :mod:`xlpolicy.core.policy`.
"""

from __future__ import annotations

import numpy as np

from xlpolicy.core.models import Z_LIMIT, LeadTimeDemandModel, ModelFactory

#: The backorder (Q, R) iteration stops when Q changes by less than this, relatively ...
SHORTAGE_RTOL = 1e-9


#: ... or after this many rounds (it normally settles in under 20).
SHORTAGE_MAX_ITER = 200


_BISECTION_STEPS = 64


#: Most whole-unit steps taken from the iterate to the cost-optimal R (usually 0 to 2).
_DESCENT_STEPS = 10_000


#: The tail probability whose upper quantile bounds the search for a cost optimum.
_FAR_TAIL = 1e-300


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
