"""Which lead-time demand model suits each item, and why, in words the owner reads.

From an item's :class:`~xlpolicy.core.history.HistoryAnalysis` and its lead time: the
normal model where lead-time demand is large and steady enough (our rule: at least
NORMAL_MIN_MEAN units and sd/mean below NORMAL_MAX_CV, common practice), else a count model
(Poisson, or negative binomial where the index-of-dispersion test finds over-dispersion)
for whole-unit sales, else gamma; a model named in Items wins. The reason is written with
the figures that decided it.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from numpy.typing import ArrayLike

from xlpolicy.contract import DEMAND_MODELS
from xlpolicy.core.history import (
    DISPERSION_ALPHA,
    NORMAL_MAX_CV,
    NORMAL_MIN_MEAN,
    HistoryAnalysis,
)

__all__ = ["choose_model", "analysis_from_figures"]


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
