"""A forecast per item with level, damped trend and seasons of the year, for all items at once.

The method is exponential smoothing with a damped additive trend and multiplicative seasonal
indices (Holt-Winters with damping: Gardner & McKenzie 1985, "Forecasting trends in time
series", Management Science 31; Hyndman & Athanasopoulos, *Forecasting: Principles and
Practice*, section on Holt-Winters' damped method). Seasons are seasons of the year, not
single periods: the months of the year, whether the history is kept by day, week or month
(a weekly or daily history updates its month's index at every period of that month), or,
where the History's periods carry no dates, months by position (monthly data) or 13 blocks
of four weeks (weekly data). Starting indices come from a ratio-to-average decomposition
(Silver, Pyke & Peterson 1998, ch. 4) shrunk toward flat by an empirical-Bayes weight
(Efron & Morris 1975): an index is kept in proportion to how much of its spread across the
year stands above the spread that noise alone would give.

Per item, the flat average and the smoothed forecast are compared out of sample by rolling
origin: from the end of the item's first year of history onwards, each period end is an
origin from which both forecast the demand over the item's lead time, using only the data
up to the origin; the smoothed forecast is chosen when its mean absolute error is at least
CHOOSE_MARGIN below the flat average's (the ratio of the two is the mean absolute scaled
error with the flat average as the scale, Hyndman & Koehler 2006) over at least
MIN_ORIGINS origins. The same origins give the root mean square error of the lead-time
forecast, the spread that safety stock covers (Silver, Pyke & Peterson 1998, ch. 4 and 7).

Everything is numpy over whole columns of items; the Python loops run over time periods
(the recursion) and over the handful of seasons, never over items.
"""

from __future__ import annotations

import datetime as _dt
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike

__all__ = [
    "Calendar",
    "Smoothing",
    "ForecastResult",
    "calendar_for",
    "smooth",
    "starting_state",
    "forecast_items",
    "rolling_forecasts",
    "MONTH_NAMES",
    "CHOOSE_MARGIN",
    "MIN_ORIGINS_YEAR_SHARE",
]

MONTH_NAMES = (
    "Jan",
    "Feb",
    "Mar",
    "Apr",
    "May",
    "Jun",
    "Jul",
    "Aug",
    "Sep",
    "Oct",
    "Nov",
    "Dec",
)

#: The smoothed forecast is chosen when its out-of-sample mean absolute error is at most
#: (1 - CHOOSE_MARGIN) times the flat average's (our rule: a clear gain, not a tie that
#: noise decides; the false-positive rate it gives on flat series is in docs/seasons.md).
CHOOSE_MARGIN = 0.10
#: ... over at least this share of a year of rolling origins (and at least 6).
MIN_ORIGINS_YEAR_SHARE = 0.5
#: Seasonal indices are kept between these (a season with next to no sales still gets a
#: small index, so a level can be read back from its sales).
INDEX_FLOOR, INDEX_CAP = 0.05, 20.0


@dataclass(frozen=True)
class Smoothing:
    """Smoothing constants, stated per month and turned into per-period ones.

    alpha (level), beta (trend) and gamma (season, per observation of the season on monthly
    data) are fixed, not fitted per item: values in the range usual in practice (Gardner
    1985 and 2006 reviews, from memory: alpha 0.1 to 0.3, damping 0.8 to 0.98). For a
    period shorter than a month each constant c becomes 1 - (1 - c) ** (12 / periods per
    year), and the damping phi ** (12 / periods per year), so that the memory in calendar
    time is the same whatever the period (our rule).
    """

    alpha: float = 0.3
    beta: float = 0.1
    gamma: float = 0.2
    phi: float = 0.9

    def per_period(self, periods_per_year: float) -> tuple[float, float, float, float]:
        """(alpha, beta, gamma, phi) for one period of a history with this many a year."""
        k = 12.0 / periods_per_year
        return (
            1.0 - (1.0 - self.alpha) ** k,
            1.0 - (1.0 - self.beta) ** k,
            1.0 - (1.0 - self.gamma) ** k,
            self.phi**k,
        )


@dataclass(frozen=True)
class Calendar:
    """The season of each period, for the history's columns and as many more after them.

    season[c]: the season (0 .. n_seasons - 1) of column c, for c < len(season);
    names: a short name per season ("Jan", or "weeks 1-4"); columns: the history's length;
    periods_per_year: as in Settings; starts: the first day of each future period where
    the History's periods are dates (else None).
    """

    season: np.ndarray
    n_seasons: int
    names: tuple[str, ...]
    columns: int
    periods_per_year: float
    starts: tuple[_dt.date, ...] | None = None


def calendar_for(
    labels: Sequence[object],
    periods_per_year: float,
    days_per_period: float,
    extra: int,
) -> Calendar:
    """The seasons of a History's periods and of ``extra`` periods after the last.

    Dated periods: the calendar month of each period's middle day. Undated: monthly data by
    position (column % 12), weekly data in 13 blocks of four weeks of a 52-week year (the
    same seasons :mod:`xlpolicy.core.history` tests), anything else one season (no season).
    """
    n = len(labels)
    total = n + max(int(extra), 0)
    dated = n > 0 and all(isinstance(x, (_dt.date, _dt.datetime)) for x in labels)
    if dated:
        first: list[_dt.date] = [
            x.date() if isinstance(x, _dt.datetime) else x
            for x in labels
            if isinstance(x, _dt.date)
        ]
        days: list[_dt.date] = list(first)
        if round(periods_per_year) == 12:  # a month's label may be any day of the month
            y0, m0 = first[-1].year, first[-1].month - 1
            for k in range(1, total - n + 1):
                y, mo = divmod(m0 + k, 12)
                days.append(_dt.date(y0 + y, mo + 1, 1))
            mids = days
        else:
            step = _dt.timedelta(days=float(days_per_period))
            for k in range(n, total):  # periods after the last one, at the period's length
                days.append(first[-1] + step * (k - n + 1))
            half = _dt.timedelta(days=float(days_per_period) / 2.0)
            mids = [d + half for d in days]
        season = np.array([d.month - 1 for d in mids], dtype=np.int64)
        future = tuple(days[n:])
        return Calendar(season, 12, MONTH_NAMES, n, periods_per_year, future)
    cols = np.arange(total)
    r = round(periods_per_year)
    if r == 12:
        return Calendar(cols % 12, 12, MONTH_NAMES, n, periods_per_year)
    if r in (52, 53):
        names = tuple(f"weeks {4 * g + 1}-{4 * g + 4}" for g in range(13))
        return Calendar((cols % 52) // 4, 13, names, n, periods_per_year)
    return Calendar(np.zeros(total, dtype=np.int64), 1, ("year",), n, periods_per_year)


# ---------------------------------------------------------------------------------------
# The recursion
# ---------------------------------------------------------------------------------------


def smooth(
    y: ArrayLike,
    season: ArrayLike,
    level: ArrayLike,
    trend: ArrayLike,
    indices: ArrayLike,
    alpha: float,
    beta: float,
    gamma: float,
    phi: float,
    active: ArrayLike | None = None,
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Damped-trend multiplicative Holt-Winters over whole columns of items.

    y: items x periods; season: the season of each period (0 .. g - 1); level, trend:
    per item, the state before the first period; indices: items x g, the starting index of
    each season. At each period t (for items where ``active`` is True, else the state is
    kept), with s the current index of t's season and f = (level + phi trend) s the
    one-step forecast (Hyndman & Athanasopoulos, damped Holt-Winters, in error-correction
    form as in the standard recursions):

        level' = alpha y / s + (1 - alpha) (level + phi trend)
        trend' = beta (level' - level) + (1 - beta) phi trend
        s'     = gamma y / (level + phi trend) + (1 - gamma) s

    Returns (one-step forecasts items x periods, final level, trend, indices). With one
    period per season this is the textbook recursion; statsmodels' ExponentialSmoothing
    (trend "add", damped, seasonal "mul") gives the same numbers (tests/core/test_forecast.py).
    """
    x = np.asarray(y, dtype=float)
    if x.ndim == 1:
        x = x.reshape(1, -1)
    n, t_len = x.shape
    seas = np.asarray(season, dtype=np.int64)
    lv = np.broadcast_to(np.asarray(level, dtype=float), (n,)).copy()
    tr = np.broadcast_to(np.asarray(trend, dtype=float), (n,)).copy()
    s_all = np.array(np.broadcast_to(np.asarray(indices, dtype=float), (n, indices_width(indices))))
    act = (
        np.ones((n, t_len), dtype=bool)
        if active is None
        else np.broadcast_to(np.asarray(active, dtype=bool), (n, t_len))
    )
    fitted = np.full((n, t_len), np.nan)
    x_t = np.ascontiguousarray(x.T)
    a_t = np.ascontiguousarray(act.T)
    with np.errstate(invalid="ignore", divide="ignore"):
        for t in range(t_len):
            g = int(seas[t])
            s = s_all[:, g]
            base = lv + phi * tr
            fitted[:, t] = base * s
            on = a_t[t] & ~np.isnan(x_t[t])
            if not on.any():
                continue
            obs = x_t[t]
            new_lv = alpha * obs / s + (1.0 - alpha) * base
            new_tr = beta * (new_lv - lv) + (1.0 - beta) * phi * tr
            new_s = gamma * obs / base + (1.0 - gamma) * s
            lv = np.where(on, new_lv, lv)
            tr = np.where(on, new_tr, tr)
            s_all[:, g] = np.where(on & np.isfinite(new_s), new_s, s)
    return fitted, lv, tr, s_all


def indices_width(indices: ArrayLike) -> int:
    """The number of seasons in an indices array (its last axis)."""
    return int(np.shape(indices)[-1])


def _same_season_pairs(season: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Columns that have an earlier column of the same season, and that earlier column."""
    last: dict[int, int] = {}
    cur, prev = [], []
    for c, g in enumerate(season.tolist()):
        if g in last:
            cur.append(c)
            prev.append(last[g])
        last[g] = c
    return np.array(cur, dtype=np.int64), np.array(prev, dtype=np.int64)


def damped_sum(phi: float, h: np.ndarray) -> np.ndarray:
    """phi + phi^2 + ... + phi^h, elementwise (h whole, >= 0)."""
    h = np.asarray(h, dtype=float)
    if phi == 1.0:
        return h
    return phi * (1.0 - phi**h) / (1.0 - phi)


# ---------------------------------------------------------------------------------------
# Starting state: ratio-to-average decomposition, indices shrunk toward flat
# ---------------------------------------------------------------------------------------


def starting_state(
    x: np.ndarray,
    window: np.ndarray,
    season: np.ndarray,
    n_seasons: int,
    periods_per_year: float,
    fit_trend: np.ndarray,
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Level, trend, indices and shrinkage weight fitted on each item's ``window`` of periods.

    1. A straight line through the window's demand (least squares; slope 0 where fit_trend
       is False): the trend. 2. Raw index of season g: the window's demand in g over the
       line's value there (ratio to average, Silver, Pyke & Peterson 1998, ch. 4), 1 for a
       season not seen. 3. Shrinkage toward 1 (flat): weight w = signal / (signal + noise),
       noise = the mean sampling variance of a raw index (the variance of a period's ratio to
       the line, estimated from successive periods of the same season, or the Poisson
       1 / level where no season has two periods, over its count), signal = the spread of the
       raw indices across seasons less that noise, at least 0 (Efron & Morris 1975). 4. The
       indices are rescaled to average 1 over the seasons and kept within
       [INDEX_FLOOR, INDEX_CAP]; the line is refitted to the deseasonalised demand.

    Returns (level at the period before the window, trend per period, indices items x g,
    weight w, level at the window's last period).
    """
    n, t_len = x.shape
    cols = np.arange(t_len, dtype=float)
    onehot = (season[:t_len, None] == np.arange(n_seasons)[None, :]).astype(float)
    w_f = window.astype(float)
    xv = np.where(window, x, 0.0)
    with np.errstate(invalid="ignore", divide="ignore"):
        cnt = w_f.sum(axis=1)
        first = np.where(window.any(axis=1), window.argmax(axis=1), 0)
        last = np.where(window.any(axis=1), t_len - 1 - window[:, ::-1].argmax(axis=1), 0)

        def line(values: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
            mean = values.sum(axis=1) / np.maximum(cnt, 1)
            tbar = (w_f * cols).sum(axis=1) / np.maximum(cnt, 1)
            tc = np.where(window, cols[None, :] - tbar[:, None], 0.0)
            sxx = (tc * tc).sum(axis=1)
            slope = np.where(sxx > 0, (tc * values).sum(axis=1) / np.where(sxx > 0, sxx, 1), 0.0)
            slope = np.where(fit_trend, slope, 0.0)
            return mean, tbar, slope

        mean, tbar, slope = line(xv)
        fit = mean[:, None] + slope[:, None] * (cols[None, :] - tbar[:, None])
        ok_fit = window & (fit > 0)
        ratio = np.where(ok_fit, x / np.where(ok_fit, fit, 1.0), 0.0)
        by = np.stack([ratio, ok_fit.astype(float)]).reshape(2 * n, t_len) @ onehot
        r_sum, r_cnt = by.reshape(2, n, n_seasons)
        raw = np.where(r_cnt > 0, r_sum / np.maximum(r_cnt, 1), 1.0)

        # noise: half the mean square difference between a period and the one before it
        # of the same season (a calendar fact, the same for every item)
        cur, prev = _same_season_pairs(season[:t_len])
        both = ok_fit[:, cur] & ok_fit[:, prev]
        d = np.where(both, ratio[:, cur] - ratio[:, prev], 0.0)
        diff_sq = (d * d).sum(axis=1)
        pairs = both.sum(axis=1)
        poisson = 1.0 / np.where(mean > 0, mean, np.nan)
        var_one = np.where(pairs >= n_seasons, diff_sq / (2.0 * np.maximum(pairs, 1)), poisson)
        seen_g = r_cnt > 0
        n_seen = seen_g.sum(axis=1)
        noise = np.where(seen_g, var_one[:, None] / np.maximum(r_cnt, 1), 0.0).sum(
            axis=1
        ) / np.maximum(n_seen, 1)
        rbar = np.where(seen_g, raw, 0.0).sum(axis=1) / np.maximum(n_seen, 1)
        spread = np.where(seen_g, (raw - rbar[:, None]) ** 2, 0.0).sum(axis=1) / np.maximum(
            n_seen - 1, 1
        )
        signal = np.maximum(spread - noise, 0.0)
        weight = np.where(
            (n_seen >= 2) & (signal + noise > 0),
            signal / np.where(signal + noise > 0, signal + noise, 1),
            0.0,
        )
        weight = np.where(np.isfinite(weight), weight, 0.0)
        idx = 1.0 + weight[:, None] * (raw - 1.0)
        idx = np.clip(idx, INDEX_FLOOR, INDEX_CAP)
        idx = idx / idx.mean(axis=1, keepdims=True)

        # the line again, through the deseasonalised demand
        des = np.where(window, x / idx[:, season[:t_len]], 0.0)
        mean2, tbar2, slope2 = line(des)
        level_before = mean2 + slope2 * (first - 1 - tbar2)
        level_end = mean2 + slope2 * (last - tbar2)
    level_before = np.where(np.isfinite(level_before) & (cnt > 0), level_before, np.nan)
    return level_before, slope2, idx, weight, level_end


# ---------------------------------------------------------------------------------------
# Per item: evaluate, choose, and forecast
# ---------------------------------------------------------------------------------------


@dataclass(frozen=True)
class ForecastResult:
    """What the forecast says per item; each field is over items (rows of the input).

    tested: the item had enough history for the comparison (a year, and MIN origins after
    it). chosen: the smoothed forecast beat the flat average out of sample (and the item was
    eligible). mae_ratio: the smoothed forecast's out-of-sample mean absolute error over the
    flat average's (NaN when not tested); origins: how many origins were compared.
    error_sd: the spread of the smoothed lead-time forecast's error (units over the lead
    time) for safety stock: for chosen items the root mean square error of the lead-time
    forecasts of the model started on the whole span, over the same origins, corrected for
    the parameters fitted (SSE / (N - k), k = seasons + 2); holdout_error_sd: the same from
    the out-of-sample run (started on the first year only); flat_error_sd: the flat
    average's out-of-sample root mean square error.
    level, trend, phi: the final state (per period) and the damping per period; indices:
    items x seasons, the final seasonal indices; weight: the shrinkage weight of the
    starting indices (0 = flat, 1 = kept as measured). path: items x future periods, the
    forecast per period after the history's last period. season_strength: highest over
    lowest final index.
    """

    tested: np.ndarray
    chosen: np.ndarray
    mae_ratio: np.ndarray
    origins: np.ndarray
    error_sd: np.ndarray
    flat_error_sd: np.ndarray
    holdout_error_sd: np.ndarray
    level: np.ndarray
    trend: np.ndarray
    phi: float
    indices: np.ndarray
    weight: np.ndarray
    path: np.ndarray
    season_strength: np.ndarray
    calendar: Calendar


#: Items forecast at a time (bounded temporaries; the recursion's state is per item).
FORECAST_BLOCK = 16_384


def forecast_items(
    matrix: ArrayLike,
    calendar: Calendar,
    lead_periods: ArrayLike,
    *,
    start: ArrayLike | None = None,
    eligible: ArrayLike | None = None,
    horizon: int = 0,
    smoothing: Smoothing | None = None,
) -> ForecastResult:
    """Fit, compare out of sample and forecast every item (see the module docstring).

    matrix: items x periods (NaN = unreadable); start: per item, the first column of its
    history (as :class:`~xlpolicy.core.history.HistoryAnalysis.start`), default its first
    sale; lead_periods: the lead time in periods per item (fractions allowed); eligible:
    items that may be chosen (e.g. not intermittent); horizon: future periods to forecast
    (the calendar must cover the history plus horizon).
    """
    m = np.asarray(matrix, dtype=float)
    if m.ndim == 1:
        m = m.reshape(1, -1)
    n = m.shape[0]
    lead = np.broadcast_to(np.asarray(lead_periods, dtype=float), (n,))
    el = (
        np.ones(n, dtype=bool)
        if eligible is None
        else np.broadcast_to(np.asarray(eligible, dtype=bool), (n,))
    )
    st = None if start is None else np.broadcast_to(np.asarray(start, dtype=np.int64), (n,))
    parts = [
        _forecast_block(
            m[a : a + FORECAST_BLOCK],
            calendar,
            lead[a : a + FORECAST_BLOCK],
            None if st is None else st[a : a + FORECAST_BLOCK],
            el[a : a + FORECAST_BLOCK],
            horizon,
            smoothing or Smoothing(),
        )
        for a in range(0, max(n, 1), FORECAST_BLOCK)
    ]
    first = parts[0]
    out = {}
    for name in ForecastResult.__dataclass_fields__:
        v = getattr(first, name)
        if name in ("phi", "calendar"):
            out[name] = v
        else:
            out[name] = np.concatenate([getattr(p, name) for p in parts])
    return ForecastResult(**out)


def _forecast_block(
    m: np.ndarray,
    cal: Calendar,
    lead: np.ndarray,
    start: np.ndarray | None,
    eligible: np.ndarray,
    horizon: int,
    smoothing: Smoothing,
) -> ForecastResult:
    """forecast_items for one block: evaluated where it can be chosen, fitted where chosen."""
    n, t_len = m.shape
    ppy = cal.periods_per_year
    phi = smoothing.per_period(ppy)[3]
    positive = m > 0
    first_sale = (
        np.where(positive.any(axis=1), positive.argmax(axis=1), 0)
        if t_len
        else np.zeros(n, np.int64)
    )
    begin = first_sale if start is None else np.where(start >= 0, start, first_sale)
    year = int(round(ppy))
    span_len = np.where(t_len > begin, t_len - begin, 0)
    need = max(6, int(np.ceil(MIN_ORIGINS_YEAR_SHARE * ppy)))
    cand = np.flatnonzero(eligible & (span_len >= year + need))
    tested = np.zeros(n, dtype=bool)
    mae_ratio = np.full(n, np.nan)
    origins = np.zeros(n)
    error_sd = np.full(n, np.nan)
    flat_sd = np.full(n, np.nan)
    if cand.size:
        ev = _evaluate(m[cand], cal, lead[cand], begin[cand], smoothing)
        for arr, part in zip((tested, mae_ratio, origins, error_sd, flat_sd), ev, strict=True):
            arr[cand] = part
    chosen = tested & (mae_ratio <= 1.0 - CHOOSE_MARGIN)
    level = np.full(n, np.nan)
    trend = np.full(n, np.nan)
    indices = np.ones((n, cal.n_seasons))
    weight = np.full(n, np.nan)
    path = np.full((n, max(horizon, 0)), np.nan)
    strength = np.full(n, np.nan)
    pick = np.flatnonzero(chosen)
    holdout_sd = error_sd.copy()
    if pick.size:
        # The spread for safety stock: errors of the lead-time forecasts of the model as it
        # is finally started (on the whole span), over the same origins, with the residual
        # variance's degrees-of-freedom correction SSE / (N - k), k = the seasons' indices,
        # level and trend fitted (Hyndman & Athanasopoulos, residual variance). The
        # out-of-sample errors, whose model was started on one year only, overstate the
        # error of a forecast started on all of it (kept as holdout_error_sd).
        ins = _evaluate(m[pick], cal, lead[pick], begin[pick], smoothing, whole_span=True)
        k_par = cal.n_seasons + 2
        n_or = ins[2]
        with np.errstate(invalid="ignore", divide="ignore"):
            fix = np.sqrt(n_or / np.where(n_or > k_par, n_or - k_par, np.nan))
        error_sd[pick] = np.where(np.isfinite(fix), ins[3] * fix, holdout_sd[pick])
        fin = _final(m[pick], cal, begin[pick], horizon, smoothing)
        level[pick], trend[pick], indices[pick], weight[pick], path[pick], strength[pick] = fin
    return ForecastResult(
        tested=tested,
        chosen=chosen,
        mae_ratio=mae_ratio,
        origins=origins,
        error_sd=error_sd,
        flat_error_sd=flat_sd,
        holdout_error_sd=holdout_sd,
        level=level,
        trend=trend,
        phi=phi,
        indices=indices,
        weight=weight,
        path=path,
        season_strength=strength,
        calendar=cal,
    )


def _evaluate(
    m: np.ndarray,
    cal: Calendar,
    lead: np.ndarray,
    begin: np.ndarray,
    smoothing: Smoothing,
    whole_span: bool = False,
    keep: dict[str, np.ndarray] | None = None,
) -> tuple[np.ndarray, ...]:
    """Rolling-origin comparison: (tested, MAE ratio, origins, error sd, flat error sd).

    Started on the first year of each item's span (out of sample from its end on), or, with
    whole_span, on the whole span with a trend where it is 1.5 years long (as the final
    forecast is started).
    """
    n, t_len = m.shape
    ppy = cal.periods_per_year
    alpha, beta, gamma, phi = smoothing.per_period(ppy)
    g = cal.n_seasons
    season = cal.season
    cols = np.arange(t_len)
    span = ~np.isnan(m) & (cols[None, :] >= begin[:, None])
    active = cols[None, :] >= begin[:, None]
    year = int(round(ppy))
    span_len = np.where(t_len > begin, t_len - begin, 0)

    # --- evaluation run: started on the first year only ---------------------------------
    if whole_span:
        fit_trend = span_len >= int(round(1.5 * ppy))
        l0, b0, s0, _, _ = starting_state(m, span, season, g, ppy, fit_trend)
    else:
        first_year = span & (cols[None, :] < (begin + year)[:, None])
        no_trend = np.zeros(n, dtype=bool)
        l0, b0, s0, _, _ = starting_state(m, first_year, season, g, ppy, no_trend)
    l0 = np.where(np.isfinite(l0), l0, 0.0)
    # the state at the end of the first year is where the out-of-sample comparison starts;
    # the recursion runs through the first year too (its own starting values came from it)
    lead_c = np.where(np.isfinite(lead) & (lead > 0), lead, 1.0)
    whole = np.floor(lead_c).astype(np.int64)
    frac = lead_c - whole
    h_max = int(whole.max() + 1) if n else 1
    hs = np.arange(1, h_max + 1)
    weights = np.where(
        hs[None, :] <= whole[:, None],
        1.0,
        np.where(hs[None, :] == whole[:, None] + 1, frac[:, None], 0.0),
    )
    w_trend = weights * damped_sum(phi, hs)[None, :]
    rows = np.arange(n)
    x0 = np.where(span, m, 0.0)
    csum = np.concatenate([np.zeros((n, 1)), np.cumsum(x0, axis=1)], axis=1)
    ccnt = np.concatenate([np.zeros((n, 1)), np.cumsum(span, axis=1)], axis=1)
    # per origin t (after period t): the demand over the next lead time, where it is known,
    # and the flat average of the periods up to t; computed for all origins at once
    origin = np.arange(t_len)
    stop = origin[None, :] + 1 + whole[:, None]  # the first period not wholly inside
    known = (stop + (frac[:, None] > 0)) <= t_len
    use = known & (origin[None, :] + 1 >= (begin + year)[:, None])
    stop_c = np.minimum(stop, t_len)
    actual = np.take_along_axis(csum, stop_c, axis=1) - csum[:, 1:]
    part = np.take_along_axis(x0, np.minimum(stop_c, t_len - 1), axis=1)
    actual += frac[:, None] * np.where(stop < t_len, part, 0.0)
    with np.errstate(invalid="ignore", divide="ignore"):
        f_flat = csum[:, 1:] / np.where(ccnt[:, 1:] > 0, ccnt[:, 1:], np.nan) * lead_c[:, None]
    f_hw = np.full((n, t_len), np.nan)
    lv, tr = l0.copy(), b0.copy()
    s_all = s0.copy()
    x_t = np.ascontiguousarray(m.T)
    act_t = np.ascontiguousarray(active.T)
    season_ext = np.concatenate([season, np.zeros(h_max + 1, dtype=np.int64)])
    any_use = use.any(axis=0)
    f_month: np.ndarray | None = None
    first_origin = int(begin.min()) + year if n else 0
    if keep is not None:
        f_month = np.full((n, t_len), np.nan)
        # periods from each column to the end of its season's run (the month)
        seas_all = cal.season
        month_len = np.ones(len(seas_all), dtype=np.int64)
        for c in range(len(seas_all) - 2, -1, -1):
            if seas_all[c + 1] == seas_all[c]:
                month_len[c] = month_len[c + 1] + 1
        pad = int(month_len.max()) + h_max + 1
        season_ext2 = np.concatenate([seas_all, np.zeros(pad, dtype=np.int64)])
        phis_ext = damped_sum(phi, np.arange(1, h_max + pad + 1))
    with np.errstate(invalid="ignore", divide="ignore"):
        for t in range(t_len):
            gs = int(season[t])
            s = s_all[:, gs]
            base = lv + phi * tr
            obs = x_t[t]
            on = act_t[t] & ~np.isnan(obs)
            if on.all():
                new_lv = alpha * obs / s + (1.0 - alpha) * base
                tr = beta * (new_lv - lv) + (1.0 - beta) * phi * tr
                lv = new_lv
                s_all[:, gs] = gamma * obs / base + (1.0 - gamma) * s
            elif on.any():
                new_lv = alpha * obs / s + (1.0 - alpha) * base
                new_tr = beta * (new_lv - lv) + (1.0 - beta) * phi * tr
                new_s = gamma * obs / base + (1.0 - gamma) * s
                lv = np.where(on, new_lv, lv)
                tr = np.where(on, new_tr, tr)
                s_all[:, gs] = np.where(on & np.isfinite(new_s), new_s, s)
            if any_use[t]:
                ahead = s_all[:, season_ext[t + 1 : t + 1 + h_max]]
                f_hw[:, t] = lv * np.einsum("ij,ij->i", ahead, weights) + tr * np.einsum(
                    "ij,ij->i", ahead, w_trend
                )
            if f_month is not None and t + 1 >= first_origin:
                # the largest lead-time forecast among the lead times starting in the
                # month (season) that begins after t: what a plan made now must cover
                stay = int(month_len[t + 1]) if t + 1 < len(month_len) else 1
                fut = season_ext2[t + 1 : t + 1 + h_max + stay]
                path = (lv[:, None] + phis_ext[None, : len(fut)] * tr[:, None]) * s_all[:, fut]
                best = np.full(n, -np.inf)
                for sh in range(stay):
                    best = np.maximum(best, (path[:, sh : sh + h_max] * weights).sum(axis=1))
                f_month[:, t] = best
    if keep is not None:  # the forecasts themselves, for a back-test
        keep.update(forecast=f_hw, flat=f_flat, actual=actual, origin=use)
        if f_month is not None:
            keep["month"] = f_month
    with np.errstate(invalid="ignore"):
        e_hw = f_hw - actual
        e_flat = f_flat - actual
        ok = use & np.isfinite(e_hw) & np.isfinite(e_flat)
    e_hw = np.where(ok, e_hw, 0.0)
    e_flat = np.where(ok, e_flat, 0.0)
    origins = ok.sum(axis=1).astype(float)
    abs_hw = np.abs(e_hw).sum(axis=1)
    abs_flat = np.abs(e_flat).sum(axis=1)
    sq_hw = (e_hw * e_hw).sum(axis=1)
    sq_flat = (e_flat * e_flat).sum(axis=1)
    del rows

    need = max(6, int(np.ceil(MIN_ORIGINS_YEAR_SHARE * ppy)))
    tested = (span_len >= year) & (origins >= need)
    with np.errstate(invalid="ignore", divide="ignore"):
        mae_ratio = np.where(
            tested & (abs_flat > 0), abs_hw / np.where(abs_flat > 0, abs_flat, 1), np.nan
        )
        mae_ratio = np.where(
            tested & (abs_flat == 0), np.where(abs_hw == 0, 1.0, np.inf), mae_ratio
        )
        error_sd = np.where(origins > 0, np.sqrt(sq_hw / np.maximum(origins, 1)), np.nan)
        flat_sd = np.where(origins > 0, np.sqrt(sq_flat / np.maximum(origins, 1)), np.nan)
    return tested, mae_ratio, origins, error_sd, flat_sd


def _final(
    m: np.ndarray, cal: Calendar, begin: np.ndarray, horizon: int, smoothing: Smoothing
) -> tuple[np.ndarray, ...]:
    """Started on the whole span, smoothed through it: (level, trend, indices, weight,
    forecast path, season strength)."""
    n, t_len = m.shape
    ppy = cal.periods_per_year
    alpha, beta, gamma, phi = smoothing.per_period(ppy)
    season = cal.season
    cols = np.arange(t_len)
    span = ~np.isnan(m) & (cols[None, :] >= begin[:, None])
    active = cols[None, :] >= begin[:, None]
    span_len = np.where(t_len > begin, t_len - begin, 0)
    fit_trend = span_len >= int(round(1.5 * ppy))
    l1, b1, s1, weight, _ = starting_state(m, span, season, cal.n_seasons, ppy, fit_trend)
    l1 = np.where(np.isfinite(l1), l1, 0.0)
    _, lv, tr, s_fin = smooth(m, season[:t_len], l1, b1, s1, alpha, beta, gamma, phi, active)
    hz = np.arange(1, horizon + 1)
    if horizon > 0:
        fut = season[t_len : t_len + horizon]
        path = (lv[:, None] + damped_sum(phi, hz)[None, :] * tr[:, None]) * s_fin[:, fut]
        path = np.maximum(path, 0.0)
    else:
        path = np.zeros((n, 0))
    with np.errstate(invalid="ignore", divide="ignore"):
        low = s_fin.min(axis=1)
        strength = s_fin.max(axis=1) / np.where(low > 0, low, np.nan)
    return lv, tr, s_fin, weight, path, strength


def rolling_forecasts(
    matrix: ArrayLike,
    calendar: Calendar,
    lead_periods: ArrayLike,
    begin: ArrayLike,
    smoothing: Smoothing | None = None,
) -> dict[str, np.ndarray]:
    """The out-of-sample lead-time forecasts behind the choice, per item and origin.

    Returns items x periods arrays: "forecast" (the smoothed forecast of the demand over
    the lead time after each period, made with the data up to it), "month" (made at the same
    origin: the largest of the forecasts for the lead times starting in the month that
    begins after it, what a plan made then must cover until the next), "flat" (the flat
    average's), "actual" (the demand that came), and "origin" (True where the origin counts:
    from the end of the item's first year on, with the lead time inside the history).
    """
    m = np.asarray(matrix, dtype=float)
    if m.ndim == 1:
        m = m.reshape(1, -1)
    n = m.shape[0]
    lead = np.broadcast_to(np.asarray(lead_periods, dtype=float), (n,))
    b = np.broadcast_to(np.asarray(begin, dtype=np.int64), (n,))
    keep: dict[str, np.ndarray] = {}
    _evaluate(m, calendar, lead, b, smoothing or Smoothing(), keep=keep)
    return keep
