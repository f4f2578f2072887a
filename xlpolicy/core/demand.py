"""Demand statistics from a history matrix, and demand over the lead time.

Pure numpy over whole columns: no per-item loops, and no warnings for items with no data.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

__all__ = ["DemandStats", "history_statistics", "lead_time_demand"]


@dataclass(frozen=True)
class DemandStats:
    """Per-item demand statistics, each a 1-D array with one entry per item (row).

    mean: average demand per period (NaN with no values);
    sd: sample standard deviation, n - 1 in the denominator (NaN with fewer than 2 values);
    periods: number of periods with a value; nonzero_periods: those with non-zero demand.
    """

    mean: np.ndarray
    sd: np.ndarray
    periods: np.ndarray
    nonzero_periods: np.ndarray


def history_statistics(matrix: ArrayLike) -> DemandStats:
    """Mean, sample sd and period counts per row of an items x periods matrix.

    NaN marks a missing cell and is left out (the caller decides beforehand which empty
    cells mean zero demand). A 1-D input is taken as one item. Rows with no values give
    NaN statistics quietly, so one empty item does not flood the console with warnings.
    """
    m = np.asarray(matrix, dtype=float)
    if m.ndim == 1:
        m = m.reshape(1, -1)
    present = ~np.isnan(m)
    periods = present.sum(axis=1)
    nonzero = (present & (m != 0)).sum(axis=1)
    filled = np.where(present, m, 0.0)
    with np.errstate(invalid="ignore", divide="ignore"):
        mean = np.where(periods > 0, filled.sum(axis=1) / periods, np.nan)
        dev = np.where(present, m - mean[:, None], 0.0)  # two-pass: accurate for large means
        ss = (dev * dev).sum(axis=1)
        sd = np.where(periods >= 2, np.sqrt(ss / (periods - 1)), np.nan)
    return DemandStats(
        mean=mean,
        sd=sd,
        periods=periods.astype(np.int64),
        nonzero_periods=nonzero.astype(np.int64),
    )


def lead_time_demand(
    d: ArrayLike,
    sd_d: ArrayLike,
    lead_time_periods: ArrayLike,
    lead_time_sd_periods: ArrayLike,
) -> tuple[np.ndarray, np.ndarray]:
    """Mean and sd of demand over a (possibly random) lead time.

    mu_L = d L and sigma_L = sqrt(L sd_d^2 + d^2 sLT^2), for independent per-period demands
    and a lead time independent of demand (Silver, Pyke & Peterson 1998, ch. 7). With
    sLT = 0 this is sd_d sqrt(L). Inputs broadcast; NaN propagates.
    """
    d_a, s_a, lt_a, slt_a = np.broadcast_arrays(
        np.asarray(d, dtype=float),
        np.asarray(sd_d, dtype=float),
        np.asarray(lead_time_periods, dtype=float),
        np.asarray(lead_time_sd_periods, dtype=float),
    )
    with np.errstate(invalid="ignore", over="ignore"):
        mu = d_a * lt_a
        sigma = np.sqrt(lt_a * s_a * s_a + d_a * d_a * slt_a * slt_a)
    return mu, sigma
