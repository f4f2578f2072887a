"""What an item's demand history looks like, and which lead-time demand model suits it.

Input is an items x periods matrix (periods in time order, NaN = unreadable cell), the same
one :func:`xlpolicy.core.demand.history_statistics` takes. Everything is numpy over whole
columns: the only Python loops run over periods (Croston smoothing) or over a handful of
seasons, never over items. Items with no data give NaN / empty results quietly, without
RuntimeWarnings.

Rules of thumb marked "our rule" below are this project's own choices, not published
standards; the SBC cut-offs, Croston's method and the SBA are published (sources beside them).
"""

from __future__ import annotations

from dataclasses import dataclass, fields

import numpy as np
import pandas as pd
from numpy.typing import ArrayLike
from scipy import special

from xlpolicy.contract import DEMAND_MODELS

__all__ = [
    "DEMAND_CLASSES",
    "ADI_CUTOFF",
    "CV2_CUTOFF",
    "HistoryAnalysis",
    "analyse_history",
    "choose_model",
]

#: Syntetos, Boylan & Croston (2005), "On the categorization of demand patterns", JORS 56.
DEMAND_CLASSES: tuple[str, ...] = ("smooth", "erratic", "intermittent", "lumpy")
ADI_CUTOFF = 1.32
CV2_CUTOFF = 0.49

# Our rules of thumb (not published standards); named so that callers can quote them.
TREND_MIN_RECENT = 8  # the recent third must hold at least this many periods
TREND_T = 3.0  # |Welch t| above this ...
TREND_RATIO_LOW, TREND_RATIO_HIGH = 0.67, 1.5  # ... and recent/earlier mean outside this
SEASON_P = 0.01  # one-way ANOVA p-value below this ...
SEASON_RATIO = 1.5  # ... and highest/lowest seasonal mean at least this ...
SEASON_REPEAT_R = 0.5  # ... and, with two years or more, year-1 vs later profile r above this
OUTLIER_K = 5.0  # threshold = median + OUTLIER_K * 1.4826 * MAD
OUTLIER_SD_DROP = 0.30  # removing the value must lower the sd by more than this fraction
NORMAL_MIN_MEAN = 20.0  # normal model needs at least this many units over the lead time
NORMAL_MAX_CV = 0.5  # ... and sd/mean over the lead time below this (common practice)
DISPERSION_ALPHA = 0.05  # index-of-dispersion test level (Poisson vs over-dispersed)

_MAD_TO_SD = 1.4826  # 1 / Phi^-1(0.75): MAD -> sd for normal data (common practice)


@dataclass(frozen=True)
class HistoryAnalysis:
    """Per-item description of a demand history; every field is a 1-D array over items.

    start: first period (column index) used: the explicit start, else the item's first
    period with a sale (> 0), else 0. The item's "span" is its readable cells from start
    to the last column; unless said otherwise every statistic is over the span.
    periods / nonzero_periods: readable periods / periods with a sale (> 0) in the span.
    mean, sd: plain mean and sample sd (ddof=1) per period (sd NaN below 2 periods).
    adi: periods / nonzero_periods (NaN without a sale). cv2: (sd/mean)^2 of the non-zero
    sizes, sample sd (0 with fewer than 2 sales). demand_class: one of DEMAND_CLASSES, or
    "" with no sale. rate: demand per period for planning, rate_method "mean" or "SBA".
    croston: Croston's estimate (NaN when undefined). vmr: sd^2 / mean.
    whole_numbers: every readable quantity in the span is a whole number.
    dispersion_p: upper-tail p of (n-1) s^2 / mean ~ chi2(n-1) (small = over-dispersed).
    trend_ratio: mean of the recent third / mean of the earlier part (NaN when not tested).
    seasonal_strength: highest / lowest seasonal mean of the detrended series (NaN when
    not tested, inf when the lowest is <= 0). outlier_*: the largest value in the span when
    it is flagged (index -1 / NaN otherwise); sd_without_outlier: span sd without that
    period (NaN when nothing is flagged); outlier_threshold: median + 5 * 1.4826 * MAD
    (floored), NaN when not computed. periods_since_sale: columns after the last sale to
    the end of the sheet (-1 with no sale in the span). dormant: no sale in the last
    dormant_periods columns although the span has one.
    """

    start: np.ndarray
    periods: np.ndarray
    nonzero_periods: np.ndarray
    mean: np.ndarray
    sd: np.ndarray
    adi: np.ndarray
    cv2: np.ndarray
    demand_class: np.ndarray
    rate: np.ndarray
    rate_method: np.ndarray
    croston: np.ndarray
    vmr: np.ndarray
    whole_numbers: np.ndarray
    dispersion_p: np.ndarray
    trend_ratio: np.ndarray
    trend: np.ndarray
    seasonal: np.ndarray
    seasonal_strength: np.ndarray
    outlier: np.ndarray
    outlier_index: np.ndarray
    outlier_value: np.ndarray
    sd_without_outlier: np.ndarray
    periods_since_sale: np.ndarray
    dormant: np.ndarray
    outlier_threshold: np.ndarray


# ---------------------------------------------------------------------------------------
# Small vectorised helpers (masked row statistics)
# ---------------------------------------------------------------------------------------


def _row_stats(x: np.ndarray, mask: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Count, mean and sample sd (ddof=1) of x over mask, per row; NaN where undefined."""
    n = np.count_nonzero(mask, axis=1)
    outside = ~mask
    buf = x.copy()
    np.copyto(buf, 0.0, where=outside)  # = np.where(mask, x, 0.0), in one buffer
    with np.errstate(invalid="ignore", divide="ignore"):
        mean = np.where(n > 0, buf.sum(axis=1) / np.maximum(n, 1), np.nan)
        np.subtract(x, mean[:, None], out=buf)  # two-pass: accurate for large means
        np.copyto(buf, 0.0, where=outside)
        np.multiply(buf, buf, out=buf)
        ss = buf.sum(axis=1)
        sd = np.where(n >= 2, np.sqrt(ss / np.maximum(n - 1, 1)), np.nan)
    return n, mean, sd


def _first_true(mask: np.ndarray) -> np.ndarray:
    """Column index of the first True per row, -1 for none (also with zero columns)."""
    if mask.shape[1] == 0:
        return np.full(mask.shape[0], -1, dtype=np.int64)
    return np.where(mask.any(axis=1), mask.argmax(axis=1), -1).astype(np.int64)


def _last_true(mask: np.ndarray) -> np.ndarray:
    """Column index of the last True per row, -1 for none."""
    if mask.shape[1] == 0:
        return np.full(mask.shape[0], -1, dtype=np.int64)
    last = mask.shape[1] - 1 - mask[:, ::-1].argmax(axis=1)
    return np.where(mask.any(axis=1), last, -1).astype(np.int64)


def _row_median(x: np.ndarray, mask: np.ndarray) -> np.ndarray:
    """Median of x over mask per row; NaN for empty rows (and NaN cells left out).

    Sort + take, as numpy's nanmedian does for short rows (its masked-array median): the
    cells outside the mask sort last as +inf, and the median is (low + high) / 2 of the
    middle pair (the middle cell twice for an odd count), so the numbers are the same as
    np.nanmedian's to the bit, without its masked-array overhead.
    """
    n_rows, n_cols = x.shape
    if n_cols == 0:
        return np.full(n_rows, np.nan)
    take = mask & ~np.isnan(x)
    vals = np.where(take, x, np.inf)
    vals.sort(axis=1)
    cnt = take.sum(axis=1)
    high = cnt // 2
    low = np.where(cnt % 2 == 1, high, high - 1)
    rows = np.arange(n_rows)
    hi_idx = np.minimum(high, n_cols - 1)
    lo_idx = np.maximum(low, 0)
    med = (vals[rows, lo_idx] + vals[rows, hi_idx]) / 2.0
    return np.where(cnt > 0, med, np.nan)


def _upper_tail(tail: np.ufunc, x: np.ndarray, *df: np.ndarray) -> np.ndarray:
    """scipy.stats.chi2.sf(x, df) or f.sf(x, df1, df2) for positive degrees of freedom.

    The same special function scipy's distribution calls (chdtrc, fdtrc), with its edges:
    1 at or below 0, 0 at +inf, NaN for NaN; without the distribution's argument handling,
    which cost more than the function itself here.
    """
    out = np.zeros(x.shape)
    inside = (x > 0) & (x < np.inf)
    if inside.any():
        out[inside] = tail(*(d[inside] for d in df), x[inside])
    out[x <= 0] = 1.0
    out[np.isnan(x)] = np.nan
    return out


def _seasons(n_cols: int, periods_per_year: float) -> tuple[np.ndarray, int] | None:
    """(Season index per column, year length in columns), or None for untested data.

    Monthly data (periods_per_year rounds to 12): the month, column % 12. Weekly data
    (rounds to 52 or 53, e.g. 365/7): 4-week blocks of a 52-week year, (column % 52) // 4,
    i.e. 13 seasons of 4 weeks (our choice: close to months, fine enough to see a one-month
    peak). Columns count from the sheet's first period, so seasons line up across items
    and years. Anything else (daily, quarterly, ...) is not tested.
    """
    cols = np.arange(n_cols)
    r = round(periods_per_year)
    if r == 12:
        return cols % 12, 12
    if r in (52, 53):
        return (cols % 52) // 4, 52
    return None


# ---------------------------------------------------------------------------------------
# The analysis
# ---------------------------------------------------------------------------------------


def analyse_history(
    matrix: ArrayLike,
    periods_per_year: float,
    *,
    start: ArrayLike | None = None,
    dormant_periods: int | None = None,
    cap_outliers: bool = False,
    smoothing: float = 0.1,
) -> HistoryAnalysis:
    """Describe each item's demand history and estimate its demand rate.

    matrix: items x periods (a 1-D input is one item), NaN = unreadable cell.
    periods_per_year: 52 weekly, 12 monthly, 365 daily, ... (seasons are tested only for
    monthly and weekly data, see _seasons; the default dormant_periods is
    round(periods_per_year / 4), at least 1).
    start: per item, the column of an explicit first period, or -1 (any negative, or NaN)
    for "from the item's first sale". A start past the last column leaves an empty span.
    smoothing: Croston/SBA alpha (0.1, common practice).
    cap_outliers: cap a flagged outlier at its threshold (rounded down for whole-number
    items) before mean, sd, rate and the other statistics; the outlier flags stay set.

    Rules, in short (details beside each step): SBC (2005) classes from ADI and CV^2;
    rate = mean for smooth/erratic, SBA for intermittent/lumpy (mean when SBA is undefined,
    i.e. fewer than two sales and no explicit start); trend, seasonality and outlier flags
    by our own rules of thumb (module constants TREND_*, SEASON_*, OUTLIER_*).
    """
    if not np.isfinite(periods_per_year) or periods_per_year <= 0:
        raise ValueError("periods_per_year must be a positive number")
    if not 0.0 < smoothing <= 1.0:
        raise ValueError("smoothing must be in (0, 1]")
    m = np.asarray(matrix, dtype=float)
    if m.ndim == 1:
        m = m.reshape(1, -1)
    if m.shape[0] <= ANALYSIS_BLOCK:
        return _analyse_block(m, periods_per_year, start, dormant_periods, cap_outliers, smoothing)
    # Every statistic is per item (row), so blocks of items give the same answer with the
    # temporaries (a few dozen items x periods arrays) bounded by the block, not the sheet.
    starts = (
        None if start is None else np.broadcast_to(np.asarray(start, dtype=float), (m.shape[0],))
    )
    parts = [
        _analyse_block(
            m[a : a + ANALYSIS_BLOCK],
            periods_per_year,
            None if starts is None else starts[a : a + ANALYSIS_BLOCK],
            dormant_periods,
            cap_outliers,
            smoothing,
        )
        for a in range(0, m.shape[0], ANALYSIS_BLOCK)
    ]
    return HistoryAnalysis(
        **{
            f.name: np.concatenate([getattr(p, f.name) for p in parts])
            for f in fields(HistoryAnalysis)
        }
    )


#: Items analysed at a time (see analyse_history): 2,048 x 104 weekly periods is 1.7 MB a
#: temporary array (9 MB for the seasonality's five stacked sums), against 83 MB for
#: 100,000 items at once; blocks this small stay in the processor's caches, which made the
#: analysis of 100,000 items about 15 % faster than blocks of 8,192 (measured, 2 cores).
ANALYSIS_BLOCK = 2_048


def _analyse_block(
    m: np.ndarray,
    periods_per_year: float,
    start: ArrayLike | None,
    dormant_periods: int | None,
    cap_outliers: bool,
    smoothing: float,
) -> HistoryAnalysis:
    """analyse_history for one block of items (rows of ``m``)."""
    n_items, n_cols = m.shape
    cols = np.arange(n_cols)
    rows = np.arange(n_items)
    readable = ~np.isnan(m)
    positive = m > 0  # False for NaN: a sale is a readable cell above 0

    # --- span: explicit start, else first sale, else column 0 -------------------------
    first_sale = _first_true(positive)
    if start is None:
        explicit = np.zeros(n_items, dtype=bool)
        s_in = np.full(n_items, -1, dtype=np.int64)
    else:
        s_f = np.broadcast_to(np.asarray(start, dtype=float), (n_items,))
        s_in = np.where(np.isfinite(s_f), s_f, -1.0).astype(np.int64)  # NaN = no start
        explicit = s_in >= 0
    begin = np.where(explicit, s_in, np.maximum(first_sale, 0)).astype(np.int64)
    span = readable & (cols[None, :] >= begin[:, None])
    raw_sale = span & positive

    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        # --- whole numbers (count data), on the raw values ------------------------------
        # |m - round(m)| > 1e-9 max(1, |m|), in two buffers
        off = np.round(m)
        np.subtract(m, off, out=off)
        np.abs(off, out=off)
        tol = np.abs(m)
        np.maximum(tol, 1.0, out=tol)
        np.multiply(tol, 1e-9, out=tol)
        frac = off > tol
        del off, tol
        whole = span.any(axis=1) & ~(span & frac).any(axis=1)

        # --- outliers, on the raw values -----------------------------------------------
        # Our rule: the largest value in the span is an outlier when it exceeds
        # median + 5 * 1.4826 * MAD and leaving that one period out lowers the span sd by
        # more than 30 %. Median and MAD come from the whole span, or from the non-zero
        # sizes for intermittent-side items (ADI > 1.32), whose medians would otherwise be
        # 0. The robust scale is floored at 10 % of the median, and at 1 unit for
        # whole-number items, so that near-constant series (MAD = 0) do not flag a 1-unit
        # step. ADI does not change under capping, so the choice is stable.
        n_raw, mean_raw, sd_raw = _row_stats(m, span)
        nz_raw = raw_sale.sum(axis=1)
        adi_raw = np.where(nz_raw > 0, n_raw / np.maximum(nz_raw, 1), np.nan)
        basis = np.where((adi_raw > ADI_CUTOFF)[:, None], raw_sale, span)
        med = _row_median(m, basis)
        mad = _row_median(np.abs(m - med[:, None]), basis)
        scale = np.maximum(_MAD_TO_SD * mad, 0.1 * np.abs(med))
        scale = np.where(whole, np.maximum(scale, 1.0), scale)
        threshold = med + OUTLIER_K * scale
        ranked = np.where(span, m, -np.inf)
        cand = ranked.argmax(axis=1) if n_cols else np.zeros(n_items, dtype=np.int64)
        cand_val = ranked[rows, cand] if n_cols else np.full(n_items, -np.inf)
        # the span sd without the largest value, for the rows where it can decide anything
        # (each row's sd is its own, so a subset of rows gives the same numbers)
        maybe = np.flatnonzero((cand_val > threshold) & (n_raw >= 3))
        sd_wo = np.full(n_items, np.nan)
        if maybe.size:
            without = span[maybe]
            without[np.arange(maybe.size), cand[maybe]] = False
            sd_wo[maybe] = _row_stats(m[maybe], without)[2]
        outlier = np.zeros(n_items, dtype=bool)
        outlier[maybe] = sd_wo[maybe] < (1.0 - OUTLIER_SD_DROP) * sd_raw[maybe]
        outlier_index = np.where(outlier, cand, -1).astype(np.int64)
        outlier_value = np.where(outlier, cand_val, np.nan)
        sd_without_outlier = np.where(outlier, sd_wo, np.nan)

        work = m
        n, mean, sd, sale = n_raw, mean_raw, sd_raw, raw_sale  # unchanged unless capped
        if cap_outliers and outlier.any():
            work = m.copy()
            cap = np.where(whole, np.floor(threshold), threshold)
            work[rows[outlier], cand[outlier]] = cap[outlier]
            sale = span & (work > 0)
            n, mean, sd = _row_stats(work, span)

        # --- level, spread, SBC class --------------------------------------------------
        nz = sale.sum(axis=1)
        adi = np.where(nz > 0, n / np.maximum(nz, 1), np.nan)
        _, size_mean, size_sd = _row_stats(work, sale)
        cv2 = np.where(nz >= 2, (size_sd / size_mean) ** 2, 0.0)
        intermittent_side = adi > ADI_CUTOFF
        erratic_side = cv2 > CV2_CUTOFF
        demand_class = np.select(
            [
                np.isnan(adi),
                ~intermittent_side & ~erratic_side,
                ~intermittent_side & erratic_side,
                intermittent_side & ~erratic_side,
            ],
            ["", "smooth", "erratic", "intermittent"],
            default="lumpy",
        ).astype(object)

        # --- Croston (1972) and the Syntetos-Boylan approximation (2005) ---------------
        croston, sba = _croston(work, sale, begin, explicit, smoothing)
        use_sba = intermittent_side & np.isfinite(sba)
        rate = np.where(use_sba, sba, mean)
        rate_method = np.where(use_sba, "SBA", "mean").astype(object)

        # --- dispersion: variance-to-mean ratio and the index-of-dispersion test ------
        var = sd * sd
        vmr = np.where(mean > 0, var / np.where(mean > 0, mean, 1.0), np.nan)
        disp_ok = (n >= 2) & (mean > 0) & np.isfinite(vmr)
        dfree = np.maximum(n - 1, 1)
        dispersion_p = np.where(
            disp_ok, _upper_tail(special.chdtrc, np.where(disp_ok, dfree * vmr, 0.0), dfree), np.nan
        )

        trend_ratio, trend = _trend(work, span, n)
        seasonal, seasonal_strength = _seasonality(work, span, begin, n, mean, periods_per_year)

        # --- recency -------------------------------------------------------------------
        last_sale = _last_true(sale)
        periods_since_sale = np.where(last_sale >= 0, n_cols - 1 - last_sale, -1)
        if dormant_periods is None:
            dormant_periods = max(1, int(round(periods_per_year / 4)))
        dormant = (last_sale >= 0) & (periods_since_sale >= dormant_periods)

    return HistoryAnalysis(
        start=begin,
        periods=n.astype(np.int64),
        nonzero_periods=nz.astype(np.int64),
        mean=mean,
        sd=sd,
        adi=adi,
        cv2=cv2,
        demand_class=demand_class,
        rate=rate,
        rate_method=rate_method,
        croston=croston,
        vmr=vmr,
        whole_numbers=whole,
        dispersion_p=dispersion_p,
        trend_ratio=trend_ratio,
        trend=trend,
        seasonal=seasonal,
        seasonal_strength=seasonal_strength,
        outlier=outlier,
        outlier_index=outlier_index,
        outlier_value=outlier_value,
        sd_without_outlier=sd_without_outlier,
        periods_since_sale=periods_since_sale.astype(np.int64),
        dormant=dormant,
        outlier_threshold=np.where(n_raw >= 3, threshold, np.nan),
    )


def _croston(
    x: np.ndarray,
    sale: np.ndarray,
    begin: np.ndarray,
    explicit: np.ndarray,
    alpha: float,
) -> tuple[np.ndarray, np.ndarray]:
    """Croston (1972) rate z/p and SBA (1 - alpha/2) z/p (Syntetos & Boylan 2005).

    z (size) and p (interval) are smoothed only in periods with a sale:
    z <- z + alpha (size - z), p <- p + alpha (q - p), q = columns since the previous sale.
    Initialisation: z = the first sale's size; p = the first known interval. With an
    explicit start the first interval runs from the start: q = t_first - start + 1. With
    the span starting at the first sale that interval is not known, so p is set to the gap
    between the first two sales (the update at the second sale then leaves it unchanged).
    Undefined (NaN) until p is known. Unreadable cells count as periods in q.
    One loop over periods; every step is numpy across all items.
    """
    n_items, n_cols = x.shape
    z = np.full(n_items, np.nan)
    p = np.full(n_items, np.nan)
    last = np.where(explicit, begin - 1, -1).astype(np.int64)
    known = explicit.copy()
    # periods as rows: each step reads one contiguous row instead of a strided column
    x_t = np.ascontiguousarray(x.T)
    sale_t = np.ascontiguousarray(sale.T)
    for t in np.flatnonzero(sale_t.any(axis=1)):
        hit = sale_t[t]
        d = x_t[t]
        z = np.where(hit, np.where(np.isnan(z), d, z + alpha * (d - z)), z)
        q = int(t) - last
        ok = hit & known
        p = np.where(ok, np.where(np.isnan(p), q, p + alpha * (q - p)), p)
        last = np.where(hit, int(t), last)
        known = known | hit
    croston = z / p
    return croston, (1.0 - alpha / 2.0) * croston


def _trend(x: np.ndarray, span: np.ndarray, n: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Recent third vs the earlier part: ratio of means and a trend flag (our rule).

    The recent part is the last n // 3 readable periods of the span and must hold at least
    8 (so spans of 24+ periods). Flag when |Welch t| > 3 and the ratio is outside
    [0.67, 1.5]: the t test keeps noise quiet, the ratio keeps tiny but significant drifts
    of big sellers quiet. Returns (ratio, flag); ratio NaN when not tested.
    """
    k = n // 3
    rank = np.cumsum(span, axis=1)
    recent = span & (rank > (n - k)[:, None])
    early = span & ~recent
    n2, m2, s2 = _row_stats(x, recent)
    n1, m1, s1 = _row_stats(x, early)
    tested = k >= TREND_MIN_RECENT
    se = np.sqrt(s1 * s1 / np.maximum(n1, 1) + s2 * s2 / np.maximum(n2, 1))
    diff = m2 - m1
    t = np.where(se > 0, diff / np.where(se > 0, se, 1.0), np.where(diff == 0, 0.0, np.inf))
    ratio = np.where(m1 > 0, m2 / np.where(m1 > 0, m1, 1.0), np.where(m2 > 0, np.inf, np.nan))
    ratio = np.where(tested, ratio, np.nan)
    flag = tested & (np.abs(t) > TREND_T) & ((ratio < TREND_RATIO_LOW) | (ratio > TREND_RATIO_HIGH))
    return ratio, flag


def _seasonality(
    x: np.ndarray,
    span: np.ndarray,
    begin: np.ndarray,
    n: np.ndarray,
    mean: np.ndarray,
    periods_per_year: float,
) -> tuple[np.ndarray, np.ndarray]:
    """Seasonal flag and strength (our rule), for monthly and weekly data only.

    Needs at least one year of readable periods in the span and every season seen.
    The span is detrended by a straight line (least squares per item), so that a steady
    rise is not mistaken for a season; then a one-way ANOVA of the residuals by season
    (F = between / within mean squares, df = (k - 1, n - k - 1), scipy's F distribution).
    Flag when p < 0.01, the highest / lowest seasonal mean of the detrended series
    (residual season means + item mean: the returned strength) is >= 1.5, and, with two
    years or more, the pattern repeats: the season profile of the span's first year
    correlates with that of all later periods at r > 0.5 (over seasons seen in both).
    """
    n_items, n_cols = x.shape
    seasonal = np.zeros(n_items, dtype=bool)
    strength = np.full(n_items, np.nan)
    found = _seasons(n_cols, periods_per_year)
    if found is None or n_cols == 0:
        return seasonal, strength
    season, ppy = found
    g = int(season.max()) + 1
    onehot = (season[:, None] == np.arange(g)[None, :]).astype(float)
    cols = np.arange(n_cols, dtype=float)
    outside = ~span

    # straight-line detrend per item (each array is 0 outside the span, as np.where gives)
    nn = np.maximum(n, 1)
    tbar = np.where(span, cols[None, :], 0.0).sum(axis=1) / nn
    tc = np.subtract.outer(-tbar, -cols)  # cols - tbar, item by column
    np.copyto(tc, 0.0, where=outside)
    y0 = x - mean[:, None]
    np.copyto(y0, 0.0, where=outside)
    sxx = (tc * tc).sum(axis=1)
    slope = np.where(sxx > 0, (tc * y0).sum(axis=1) / np.where(sxx > 0, sxx, 1.0), 0.0)
    # the residuals, the same kept to the span's first year and to the rest, and the span
    # and its first year as 0/1, in one buffer: one matrix product gives the five sums by
    # season (the counts are whole numbers, so exact however they are summed)
    first_year = span & (cols[None, :] < (begin + ppy)[:, None])
    later = span & ~first_year
    parts = np.empty((5, n_items, n_cols))
    resid = parts[0]
    np.multiply(slope[:, None], tc, out=resid)
    np.subtract(y0, resid, out=resid)
    np.copyto(resid, 0.0, where=outside)
    np.copyto(parts[1], resid)
    np.copyto(parts[1], 0.0, where=~first_year)
    np.copyto(parts[2], resid)
    np.copyto(parts[2], 0.0, where=~later)
    np.copyto(parts[3], span)
    np.copyto(parts[4], first_year)
    by_season = (parts.reshape(5 * n_items, n_cols) @ onehot).reshape(5, n_items, g)
    sums, sums_a, sums_b, cnt, ca = by_season
    del parts
    gmean = np.where(cnt > 0, sums / np.where(cnt > 0, cnt, 1.0), 0.0)
    seen = (cnt > 0).sum(axis=1)
    ssb = (cnt * gmean * gmean).sum(axis=1)  # residuals have mean 0 over the span
    # each cell less its season's mean (a product with 0/1 weights picks one term; where a
    # mean is not finite, the product's own NaN/inf pattern is kept for that item)
    within = resid - gmean[:, season]
    odd = ~np.isfinite(gmean).all(axis=1)
    if odd.any():
        within[odd] = resid[odd] - gmean[odd] @ onehot.T
    np.copyto(within, 0.0, where=outside)
    ssw = (within * within).sum(axis=1)
    df1 = seen - 1
    df2 = n - seen - 1
    tested = (n >= ppy) & (seen == g) & (df2 > 0) & np.isfinite(mean)
    df1s = np.maximum(df1, 1)
    df2s = np.maximum(df2, 1)
    fstat = np.where(
        ssw > 0,
        (ssb / df1s) / np.where(ssw > 0, ssw / df2s, 1.0),
        np.where(ssb > 0, np.inf, np.nan),
    )
    pval = np.where(
        tested & ~np.isnan(fstat),
        _upper_tail(special.fdtrc, np.where(np.isnan(fstat), 0.0, fstat), df1s, df2s),
        np.nan,
    )

    level = np.where(cnt > 0, gmean + mean[:, None], np.nan)
    hi = np.where(cnt > 0, level, -np.inf).max(axis=1)
    lo = np.where(cnt > 0, level, np.inf).min(axis=1)
    strength = np.where(lo > 0, hi / np.where(lo > 0, lo, 1.0), np.inf)
    strength = np.where(tested, strength, np.nan)

    # repetition: first year of the span vs everything after it
    cb = cnt - ca
    pa = np.where(ca > 0, sums_a / np.maximum(ca, 1), 0.0)
    pb = np.where(cb > 0, sums_b / np.maximum(cb, 1), 0.0)
    w = (ca > 0) & (cb > 0)
    nw = w.sum(axis=1)
    da = np.where(w, pa - (w * pa).sum(axis=1, keepdims=True) / np.maximum(nw, 1)[:, None], 0.0)
    db = np.where(w, pb - (w * pb).sum(axis=1, keepdims=True) / np.maximum(nw, 1)[:, None], 0.0)
    den = np.sqrt((da * da).sum(axis=1) * (db * db).sum(axis=1))
    r = np.where(den > 0, (da * db).sum(axis=1) / np.where(den > 0, den, 1.0), np.nan)
    two_years = n >= 2 * ppy
    repeats = ~two_years | ((nw >= 3) & (r > SEASON_REPEAT_R))

    seasonal = tested & (pval < SEASON_P) & (strength >= SEASON_RATIO) & repeats
    return seasonal, strength


# ---------------------------------------------------------------------------------------
# Model choice
# ---------------------------------------------------------------------------------------


def _num(x: np.ndarray) -> np.ndarray:
    """Short number text: whole units from 10 up, two significant digits below."""
    x = np.where(np.isfinite(x), x, 0.0)
    big = np.abs(x) >= 10
    out = np.empty(x.shape, dtype=object)
    if big.any():
        out[big] = np.char.mod("%.0f", x[big])
    if (~big).any():
        out[~big] = _two_digits(x[~big])
    return out.astype(str)


#: "%.2g" of k / 10 and of k / 100 for k = 0 .. 100: the text of two significant digits.
_TWO_DIGITS_HI = np.array(["%.2g" % (k / 10) for k in range(101)], dtype=object)
_TWO_DIGITS_LO = np.array(["%.2g" % (k / 100) for k in range(101)], dtype=object)


def _two_digits(x: np.ndarray) -> np.ndarray:
    """np.char.mod("%.2g", x), looked up from a table for 0.1 <= x < 10.

    There the text depends only on x rounded to two significant digits, round(10 x) or
    round(100 x), which a product computes exactly unless it sits within a hair of a half
    (a tie the exact binary value may fall either side of): those, and every other x,
    are formatted by Python itself.
    """
    hi = (x >= 1.0) & (x < 10.0)
    lo = (x >= 0.1) & (x < 1.0)
    y = np.where(hi, x * 10.0, x * 100.0)
    k = np.rint(y)
    clear = (hi | lo) & (np.abs(y - np.floor(y) - 0.5) > 1e-6)
    out = np.empty(x.shape, dtype=object)
    ki = np.where(clear, k, 0).astype(np.int64)
    out[clear & hi] = _TWO_DIGITS_HI[ki[clear & hi]]
    out[clear & lo] = _TWO_DIGITS_LO[ki[clear & lo]]
    rest = ~clear
    if rest.any():
        out[rest] = np.char.mod("%.2g", x[rest])
    return out


def choose_model(
    analysis: HistoryAnalysis,
    lead_time_periods: ArrayLike,
    lead_time_sd_periods: ArrayLike,
    forced: ArrayLike | None = None,
) -> tuple[np.ndarray, np.ndarray]:
    """Pick a lead-time demand model per item; returns (model name, reason) object arrays.

    The rule (reasons are shown to users):
    1. A model set by the user (forced[i] one of normal, poisson, negative binomial,
       gamma; blank, None or "auto" means choose) is used: "set by the user".
    2. Lead-time demand: mu_L = rate L, V_L = L sd^2 + rate^2 sLT^2 (Silver, Pyke &
       Peterson 1998, ch. 7), with rate and sd from the analysis.
    3. mu_L >= 20 units, sqrt(V_L)/mu_L < 0.5 and a smooth or erratic class: "normal".
    4. Otherwise, whole-number (count) data: "poisson" when the index-of-dispersion test
       does not reject Poisson (p >= 0.05) and the lead time is fixed, or when V_L <= mu_L;
       else "negative binomial" (variance clearly above the mean, or a varying lead time).
    5. Otherwise "gamma" (fractional quantities, matched mean and variance).
    Items with no sales get "" and the reason "no sales in the history"; items whose
    statistics or lead time are missing (NaN, fewer than 2 periods, L <= 0) get "" and "".
    """
    a = analysis
    k = a.rate.shape[0]
    lt = np.broadcast_to(np.asarray(lead_time_periods, dtype=float), (k,))
    slt = np.broadcast_to(np.asarray(lead_time_sd_periods, dtype=float), (k,))
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        mu = a.rate * lt
        v = lt * a.sd * a.sd + a.rate * a.rate * slt * slt
        cv = np.sqrt(v) / np.where(mu > 0, mu, np.nan)
        lt_ratio = v / np.where(mu > 0, mu, np.nan)
    valid = np.isfinite(mu) & np.isfinite(v) & (lt > 0) & (slt >= 0) & (a.rate > 0)
    no_sales = (a.periods > 0) & (a.nonzero_periods == 0)
    steady_class = (a.demand_class == "smooth") | (a.demand_class == "erratic")

    normal = valid & (mu >= NORMAL_MIN_MEAN) & (cv < NORMAL_MAX_CV) & steady_class
    counts = valid & ~normal & a.whole_numbers
    poisson_like = (a.dispersion_p >= DISPERSION_ALPHA) & (slt == 0)
    under = v <= mu
    poisson = counts & (poisson_like | under)
    negbin = counts & ~poisson
    gamma = valid & ~normal & ~a.whole_numbers

    # The reasons are text per item: each is formatted only for the items it describes.
    reason = np.full(k, "", dtype=object)
    model = np.full(k, "", dtype=object)
    cv_text = np.where(np.isfinite(cv), cv, 0.0)

    def head(sel: np.ndarray, text: str, tail: str) -> np.ndarray:
        return np.char.add(np.char.add(text, _num(mu[sel])), tail)

    def count_reason(sel: np.ndarray, why: str, value: np.ndarray) -> np.ndarray:
        return np.char.add(
            np.char.add(head(sel, "count-like demand, ", " units over the lead time"), why),
            np.char.add(_num(value[sel]), ")"),
        )

    if normal.any():
        reason[normal] = np.char.add(
            head(normal, "steady demand: ", " units over the lead time, sd/mean "),
            np.char.mod("%.2f", cv_text[normal]),
        )
    pois_test = poisson & poisson_like
    pois_under = poisson & ~poisson_like
    model[poisson] = "poisson"
    if pois_test.any():
        reason[pois_test] = count_reason(pois_test, ": variance close to the mean (ratio ", a.vmr)
    if pois_under.any():
        reason[pois_under] = count_reason(
            pois_under, ": variance over the lead time not above the mean (ratio ", lt_ratio
        )
    nb_disp = negbin & (a.dispersion_p < DISPERSION_ALPHA)
    nb_lt = negbin & ~nb_disp
    model[negbin] = "negative binomial"
    if nb_disp.any():
        reason[nb_disp] = count_reason(nb_disp, ": variance clearly above the mean (ratio ", a.vmr)
    if nb_lt.any():
        reason[nb_lt] = count_reason(
            nb_lt, ": the lead time varies, which widens demand over it (variance/mean ", lt_ratio
        )
    model[normal] = "normal"
    model[gamma] = "gamma"
    if gamma.any():
        reason[gamma] = np.char.add(
            head(
                gamma,
                "skewed or small demand in fractional quantities: ",
                " units over the lead time, sd/mean ",
            ),
            np.char.mod("%.2f", cv_text[gamma]),
        )
    reason[no_sales] = "no sales in the history"

    if forced is not None:
        f = np.broadcast_to(np.asarray(forced, dtype=object), (k,))
        f = np.where(pd.isna(f), "", f).astype(str)
        f = np.char.lower(np.char.strip(f))
        is_forced = np.isin(f, np.asarray(DEMAND_MODELS))
        model[is_forced] = f[is_forced]
        reason[is_forced] = "set by the user"
    return model, reason


def analysis_from_figures(mean: ArrayLike, sd: ArrayLike) -> HistoryAnalysis:
    """Evidence for :func:`choose_model` for items given as annual figures, not history.

    Only the mean and sd per period are known, so the items are treated as steady count
    data (units), and the variance counts as "clearly above the mean" when it exceeds it
    by more than 10 % (our rule: no test is possible without the periods themselves).
    Pattern flags are all off; nothing can be said about trend or season.
    """
    m = np.asarray(mean, dtype=float).reshape(-1)
    s = np.asarray(sd, dtype=float).reshape(-1)
    k = m.shape[0]
    with np.errstate(invalid="ignore", divide="ignore"):
        vmr = s * s / np.where(m > 0, m, np.nan)
    nan = np.full(k, np.nan)
    no = np.zeros(k, dtype=bool)
    minus = np.full(k, -1, dtype=np.int64)
    return HistoryAnalysis(
        start=np.zeros(k, dtype=np.int64),
        periods=np.full(k, 2.0),
        nonzero_periods=np.where(m > 0, 2.0, 0.0),
        mean=m,
        sd=s,
        adi=nan,
        cv2=nan,
        demand_class=np.full(k, "smooth", dtype=object),
        rate=m,
        rate_method=np.full(k, "mean", dtype=object),
        croston=nan,
        vmr=vmr,
        whole_numbers=np.ones(k, dtype=bool),
        dispersion_p=np.where(vmr > 1.1, 0.0, 1.0),
        trend_ratio=nan,
        trend=no,
        seasonal=no,
        seasonal_strength=nan,
        outlier=no,
        outlier_index=minus,
        outlier_value=nan,
        sd_without_outlier=nan,
        periods_since_sale=minus,
        dormant=no,
        outlier_threshold=nan,
    )
