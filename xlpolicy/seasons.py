"""Planning with seasons and trends: the forecast per item, the plan for now, the season plan.

Glue between the planner and :mod:`xlpolicy.core.forecast` (no file I/O). For every item
with a History it runs the forecast, keeps it where it beats the flat average out of sample
(the choice and why go to the results as ``forecast`` and ``forecast_reason``), and turns it
into what the policy needs:

- demand per period for now: the forecast demand over the item's lead time from the plan
  date (``Plan as of``, else the run date), divided by the lead time, so that the lead-time
  demand mean is the forecast of the coming lead time; where lead times starting later in
  the same month need more, the largest of them (our rule: the plan is made at a month's
  start and must hold until the next, as the season plan's months do);
- its spread: the forecast error over the lead time (core.forecast: root mean square error
  of past lead-time forecasts), given per period as error / sqrt(L) so that the policy's
  sd_L = sd sqrt(L) is that error (a varying lead time still adds its d^2 sLT^2);
- annual demand, for the order quantity and the annual costs: the forecast rate over the
  coming quarter-year (at least the lead time), as a year (our rule: an order placed now is
  used up over the following weeks, so it is sized on them, not on the year's average).

The season plan applies the same at the start of each of the next 12 months (or seasons).
"""

from __future__ import annotations

import datetime as _dt
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np
import pandas as pd

from .core.forecast import (
    CHOOSE_MARGIN,
    Calendar,
    ForecastResult,
    calendar_for,
    forecast_items,
)
from .core.policy import PolicyInputs, compute_policy
from .core.portfolio import take_inputs
from .problems import ProblemLog

#: The window whose forecast rate sizes the order quantity: a quarter of a year.
ORDER_WINDOW_YEARS = 0.25
#: An index this far from 1 (highest over lowest at least this) counts as a season used,
#: a trend adding this share of the level within a year counts as a trend used (our rule,
#: only for the words "seasonal" and "trend": the forecast is used as fitted either way).
SEASON_WORD_RATIO = 1.25
TREND_WORD_SHARE = 0.05
#: Columns of the season plan (one row per item and month), in order.
SEASON_PLAN_COLUMNS: tuple[str, ...] = (
    "item",
    "month",
    "plan_date",
    "forecast_per_period",
    "lead_time_demand_mean",
    "lead_time_demand_sd",
    "reorder_point",
    "order_qty",
    "safety_stock",
)


@dataclass
class SeasonForecast:
    """The forecast's outcome per item (arrays over the Items rows) and the plan's dates."""

    chosen: np.ndarray
    label: np.ndarray
    reason: np.ndarray
    mae_ratio: np.ndarray
    error_sd: np.ndarray
    mean_now: np.ndarray
    sd_now: np.ndarray
    annual_now: np.ndarray
    as_of: _dt.date | None
    #: per plan row (month): its label, its date, and per chosen item its rate and lead-time
    #: demand; rows of plan_* follow ``plan_items`` (Items row positions)
    plan_labels: list[str] = field(default_factory=list)
    plan_dates: list[_dt.date | None] = field(default_factory=list)
    plan_items: np.ndarray = field(default_factory=lambda: np.zeros(0, dtype=np.int64))
    plan_mean: np.ndarray = field(default_factory=lambda: np.zeros((0, 0)))
    plan_annual: np.ndarray = field(default_factory=lambda: np.zeros((0, 0)))
    result: ForecastResult | None = None
    calendar: Calendar | None = None
    #: the Items rows of ``result``'s rows, their History rows and first periods
    fc_items: np.ndarray = field(default_factory=lambda: np.zeros(0, dtype=np.int64))
    hist_rows: np.ndarray = field(default_factory=lambda: np.zeros(0, dtype=np.int64))
    begin: np.ndarray = field(default_factory=lambda: np.zeros(0, dtype=np.int64))
    #: per item, the flat average's demand and spread per period (before the forecast)
    flat_mean: np.ndarray = field(default_factory=lambda: np.zeros(0))
    flat_sd: np.ndarray = field(default_factory=lambda: np.zeros(0))
    #: per item, the error spread of the out-of-sample forecasts (for the back-test)
    holdout_sd: np.ndarray = field(default_factory=lambda: np.zeros(0))


def forecast_demand(
    hist: Any,
    where: np.ndarray,
    start: np.ndarray,
    lead_periods: np.ndarray,
    eligible: np.ndarray,
    settings: dict[str, Any],
    run_date: _dt.date | None,
    log: ProblemLog,
) -> SeasonForecast:
    """Forecast every item that has a History row (``where`` >= 0) and plan it for now.

    ``start``: per History row, the first period of the item's span (HistoryAnalysis.start);
    ``lead_periods``: per item, the lead time in periods; ``eligible``: per item, may be
    planned with the forecast (smooth or erratic demand, planned from History).
    """
    n = len(where)
    ppy = float(settings["periods_per_year"])
    dpp = float(settings["days_per_period"])
    out = SeasonForecast(
        chosen=np.zeros(n, dtype=bool),
        label=np.full(n, "", dtype=object),
        reason=np.full(n, "", dtype=object),
        mae_ratio=np.full(n, np.nan),
        error_sd=np.full(n, np.nan),
        mean_now=np.full(n, np.nan),
        sd_now=np.full(n, np.nan),
        annual_now=np.full(n, np.nan),
        as_of=None,
    )
    has = where >= 0
    if not has.any() or hist.matrix.shape[1] == 0:
        return out
    items = np.flatnonzero(has)
    rows = where[items]
    labels = list(hist.labels)
    lead = np.where(np.isfinite(lead_periods) & (lead_periods > 0), lead_periods, 1.0)
    lead_i = lead[items]
    as_of = settings.get("plan_as_of") or run_date or _dt.date.today()
    if isinstance(as_of, _dt.datetime):
        as_of = as_of.date()
    out.as_of = as_of
    probe = calendar_for(labels, ppy, dpp, 0)
    year = max(int(round(ppy)), 1)
    per_season = ppy / probe.n_seasons
    window = np.maximum(lead_i, ORDER_WINDOW_YEARS * ppy)
    base_extra = int(np.ceil(window.max())) + int(np.ceil(lead_i.max())) + 2
    # where the plan starts (future periods after the History's last one)
    dated = probe.starts is not None
    offset0 = 0
    if dated:
        cal0 = calendar_for(labels, ppy, dpp, 3 * year)
        offset0 = _offset_of(cal0, as_of)
    extra = offset0 + year + base_extra + int(np.ceil(per_season))
    cal = calendar_for(labels, ppy, dpp, extra)
    if dated:
        plan_dates: list[_dt.date | None] = [as_of] + [_month_start(as_of, k) for k in range(1, 12)]
        offsets = [_offset_of(cal, d) for d in plan_dates if d is not None]
        ends = offsets[1:] + [_offset_of(cal, _month_start(as_of, 12))]
        plan_labels = [f"{d:%b %Y}" for d in plan_dates if d is not None]
    else:
        k_seasons = probe.n_seasons if probe.n_seasons > 1 else 12
        step = ppy / k_seasons
        offsets = [int(round(k * step)) for k in range(k_seasons)]
        ends = offsets[1:] + [int(round(k_seasons * step))]
        plan_dates = [None] * len(offsets)
        t_len = cal.columns
        plan_labels = [
            f"next {cal.names[int(cal.season[t_len + o])]}"
            if probe.n_seasons > 1
            else f"period +{o + 1}"
            for o in offsets
        ]
    horizon = max(offsets) + base_extra + 1
    el = eligible[items]
    fc = forecast_items(
        hist.matrix[rows],
        cal,
        lead_i,
        start=start[rows],
        eligible=el,
        horizon=horizon,
    )
    out.result, out.calendar, out.fc_items = fc, cal, items
    out.hist_rows, out.begin = rows, np.asarray(start, dtype=np.int64)[rows]
    chosen_i = fc.chosen
    out.chosen[items] = chosen_i
    out.mae_ratio[items] = fc.mae_ratio
    out.error_sd[items] = np.where(chosen_i, fc.error_sd, np.nan)
    out.holdout_sd = np.full(n, np.nan)
    out.holdout_sd[items] = fc.holdout_error_sd
    label = np.full(len(items), "flat average", dtype=object)
    reason = _flat_reasons(fc, el, year, probe.n_seasons)
    if chosen_i.any():
        c = np.flatnonzero(chosen_i)
        seasonal = fc.season_strength[c] >= SEASON_WORD_RATIO
        rise = np.abs(_trend_year(fc, c, year)) >= TREND_WORD_SHARE * np.abs(fc.level[c])
        label[c] = np.where(
            seasonal & rise,
            "seasonal and trend",
            np.where(seasonal, "seasonal", np.where(rise, "trend", "smoothed level")),
        )
        reason[c] = [
            f"out-of-sample error over the lead time {100 * (1 - r):.0f} % below the flat "
            f"average's ({int(k)} forecasts from the end of the first year on)"
            for r, k in zip(fc.mae_ratio[c], fc.origins[c], strict=True)
        ]
        path = fc.path[c]
        lt = lead_i[c]
        win = window[c]
        items_c = items[c]
        plan_mean = np.empty((len(c), len(offsets)))
        plan_annual = np.empty((len(c), len(offsets)))
        for j, (o, e) in enumerate(zip(offsets, ends, strict=True)):  # a dozen months
            # the reorder point must cover every lead time starting in the month, until
            # the next month's plan: the largest lead-time forecast among them
            best = np.full(len(c), -np.inf)
            for sh in range(o, max(e, o + 1)):
                best = np.maximum(best, _window_sum(path, np.full(len(c), float(sh)), lt))
            plan_mean[:, j] = best / lt
            start_o = np.full(len(c), float(o))
            plan_annual[:, j] = _window_sum(path, start_o, win) / win * ppy
        out.mean_now[items_c] = plan_mean[:, 0]
        out.sd_now[items_c] = fc.error_sd[c] / np.sqrt(lt)
        out.annual_now[items_c] = plan_annual[:, 0]
        out.plan_items = items_c
        out.plan_mean = plan_mean
        out.plan_annual = plan_annual
    out.label[items] = np.where(el | chosen_i, label, "")
    out.reason[items] = reason
    out.plan_labels = plan_labels
    out.plan_dates = plan_dates
    if not dated and settings.get("plan_as_of") is not None:
        log.info(
            "The History's periods are not dates, so 'Plan as of' could not place the plan "
            "in the year: the forecast starts after the History's last period.",
            sheet="Settings",
            code="plan-as-of-undated",
        )
    return out


def _offset_of(cal: Calendar, day: _dt.date) -> int:
    """The future period (0 = the first after the History) that holds ``day``; 0 before."""
    starts = cal.starts or ()
    k = 0
    for j, s in enumerate(starts):
        if s <= day:
            k = j
        else:
            break
    return k


def _month_start(day: _dt.date, k: int) -> _dt.date:
    """The first day of the k-th month after ``day``'s month."""
    y, m = divmod(day.month - 1 + k, 12)
    return _dt.date(day.year + y, m + 1, 1)


def _trend_year(fc: ForecastResult, rows: np.ndarray, year: int) -> np.ndarray:
    """What the damped trend adds to the level over the next year, per item."""
    phi = fc.phi
    add = phi * (1 - phi**year) / (1 - phi) if phi != 1 else float(year)
    return fc.trend[rows] * add


def _window_sum(path: np.ndarray, start: np.ndarray, length: np.ndarray) -> np.ndarray:
    """Forecast demand from ``start`` (periods, may be fractional) over ``length`` periods.

    The cumulative forecast is taken as linear within a period, so a fractional lead time
    counts that share of its last period.
    """
    n, h = path.shape
    cum = np.concatenate([np.zeros((n, 1)), np.cumsum(path, axis=1)], axis=1)

    def at(x: np.ndarray) -> np.ndarray:
        x = np.clip(x, 0.0, float(h))
        k = np.minimum(np.floor(x).astype(np.int64), h - 1)
        rows = np.arange(n)
        return cum[rows, k] + (x - k) * path[rows, k]

    return at(start + length) - at(start)


def _flat_reasons(
    fc: ForecastResult, eligible: np.ndarray, year: int, n_seasons: int
) -> np.ndarray:
    """Why an item stays on the flat average (one text per item)."""
    out = np.full(len(eligible), "", dtype=object)
    tested = fc.tested
    out[~eligible] = "intermittent or lumpy demand: the Syntetos-Boylan rate is kept"
    short = eligible & ~tested
    out[short] = (
        "history too short to test a season or trend: a year and half a year more are "
        "needed for the out-of-sample comparison"
    )
    lost = eligible & tested & ~fc.chosen
    if lost.any():
        out[lost] = [
            f"the seasonal/trend forecast was not clearly better out of sample (error "
            f"{100 * r:.0f} % of the flat average's; at most {100 * (1 - CHOOSE_MARGIN):.0f} % "
            "needed)"
            for r in fc.mae_ratio[lost]
        ]
    return out


def season_plan(
    inp: PolicyInputs,
    positions: np.ndarray,
    sf: SeasonForecast,
    planned_rows: np.ndarray,
    codes: np.ndarray,
) -> pd.DataFrame:
    """The policy at the start of each plan month for the chosen items, one row per month.

    ``inp``: the policy inputs of the planned items, ``planned_rows`` their Items rows;
    ``positions``: which of them (positions in ``inp``) to plan, all chosen by the forecast.
    The order quantity, reorder point and safety stock are computed exactly as for now
    (core.policy), with the demand of that month's lead time and quarter-year.
    """
    if not len(positions) or not sf.plan_labels:
        return pd.DataFrame(columns=["row", *SEASON_PLAN_COLUMNS])
    sub = take_inputs(inp, positions)
    k = len(positions)
    m = len(sf.plan_labels)
    lookup = pd.Index(sf.plan_items).get_indexer(planned_rows[positions])
    mean = sf.plan_mean[lookup]  # k x m
    annual = sf.plan_annual[lookup]
    tiled: dict[str, Any] = {}
    for f_name in sub.__dataclass_fields__:
        val = getattr(sub, f_name)
        if val is not None and np.ndim(val) >= 1 and len(val) == k:
            tiled[f_name] = np.repeat(np.asarray(val), m, axis=0)
    big = replace(sub, **tiled)
    big.demand_per_period = mean.reshape(-1)
    big.annual_demand = annual.reshape(-1)
    pol = compute_policy(big)
    items_col = np.repeat(planned_rows[positions], m)
    return pd.DataFrame(
        {
            "row": items_col,
            "item": np.repeat(np.asarray(codes, dtype=object)[planned_rows[positions]], m),
            "month": np.tile(np.array(sf.plan_labels, dtype=object), k),
            "plan_date": np.tile(np.array(sf.plan_dates, dtype=object), k),
            "forecast_per_period": mean.reshape(-1),
            "lead_time_demand_mean": pol["lead_time_demand_mean"].to_numpy(float),
            "lead_time_demand_sd": pol["lead_time_demand_sd"].to_numpy(float),
            "reorder_point": pol["reorder_point"].to_numpy(float),
            "order_qty": pol["order_qty"].to_numpy(float),
            "safety_stock": pol["safety_stock"].to_numpy(float),
        }
    )


def season_notes(
    plan: pd.DataFrame,
    sf: SeasonForecast,
    df: pd.DataFrame,
    hist: Any,
    settings: dict[str, Any],
    log: ProblemLog,
) -> None:
    """Say, per item planned with its forecast, what was done (notes, not warnings).

    Seasonal: the reorder point in the busiest and the quietest month of the plan. Trend:
    the trend per period now, how it is damped, and what it adds over the next year.
    """
    fc = sf.result
    if fc is None or plan.empty:
        return
    period = settings["period"]
    ppy = float(settings["periods_per_year"])
    year = max(int(round(ppy)), 1)
    codes = df["item"].to_numpy(object)
    rows = plan["row"].to_numpy(np.int64)
    # per item: the plan's months with the highest and lowest reorder point
    order = np.argsort(rows, kind="stable")
    first = np.r_[0, np.flatnonzero(np.diff(rows[order])) + 1]
    rop = plan["reorder_point"].to_numpy(float)[order]
    months = plan["month"].to_numpy(object)[order]
    item_rows = rows[order][first]
    where_fc = pd.Index(sf.fc_items).get_indexer(item_rows)
    ends = np.r_[first[1:], len(rows)]
    for i, (a, b, j) in enumerate(zip(first, ends, where_fc, strict=True)):
        r = rop[a:b]
        if not np.isfinite(r).any():
            continue
        hi, lo = int(np.nanargmax(r)), int(np.nanargmin(r))
        item = item_rows[i]
        label = sf.label[item]
        parts = [f"Planned with its forecast ({label})"]
        if "seasonal" in label:
            parts.append(
                f": reorder point {r[hi]:,.0f} in {months[a + hi]}, {r[lo]:,.0f} in "
                f"{months[a + lo]} (see the sheet Year ahead)"
            )
        if "trend" in label and j >= 0:
            b_now = float(fc.trend[j])
            add = float(_trend_year(fc, np.array([j]), year)[0])
            parts.append(
                f"{';' if 'seasonal' in label else ':'} a trend of {b_now:+.2g} units a "
                f"{period} per {period}, damped (each {period} it carries on at "
                f"{fc.phi:.3f} of the last), so over the next year it moves demand by about "
                f"{add:+.2g} a {period} (undamped: {b_now * year:+.2g})"
            )
        parts.append(
            f". Safety stock covers the forecast's error over the lead time "
            f"({sf.error_sd[item]:,.3g} units), not the raw spread of demand."
        )
        log.info(
            "".join(parts),
            sheet=hist.sheet,
            cell=hist.first_cell.get(codes[item], ""),
            item=codes[item],
            code="demand-planned-with-forecast",
        )
