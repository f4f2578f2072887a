"""ABC classes by annual spend (Pareto), over whole columns.

Common practice (Silver, Pyke & Peterson 1998, ch. 3): rank items by annual spend D c; the
items that make up the first 80 % of total spend are class A, the next 15 % class B and
the rest class C. The cut-offs are parameters (cumulative shares).
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

DEFAULT_CUTOFFS: tuple[float, float] = (0.80, 0.95)


def abc_classes(spend: ArrayLike, cutoffs: tuple[float, float] = DEFAULT_CUTOFFS) -> np.ndarray:
    """ "A", "B" or "C" per item ("" where spend is NaN or negative).

    An item is in A when the spend of the items ranked above it is below the first cut-off
    share, so the item that crosses 80 % is still A; likewise for B. Ties keep input order.
    """
    x = np.asarray(spend, dtype=float).reshape(-1)
    valid = np.isfinite(x) & (x >= 0)
    out = np.full(x.shape[0], "", dtype=object)
    total = x[valid].sum()
    if not valid.any():
        return out
    idx = np.flatnonzero(valid)
    order = idx[np.argsort(-x[idx], kind="stable")]
    before = np.concatenate(([0.0], np.cumsum(x[order])[:-1]))
    share_before = before / total if total > 0 else np.zeros_like(before)
    out[order] = np.where(
        share_before < cutoffs[0], "A", np.where(share_before < cutoffs[1], "B", "C")
    )
    return out
