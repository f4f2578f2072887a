"""From what was read to a Report: demand per item, the policy, statuses, reorder list, totals.

No file I/O here. The per-item arithmetic is done over whole columns by the core; this
module decides which items can be planned and turns the core's flags into problems that
a person can act on.
"""

from __future__ import annotations

import datetime as _dt
from typing import Any

import numpy as np
import pandas as pd

from .backtest import AUTO_MAX_ITEMS, backtest_totals, run_backtest
from .contract import (
    ALL_RESULT_KEYS,
    AUTO_MODEL,
    CLASS_TARGET_SETTINGS,
    SHORTAGE_COST,
    STATUS_OK,
    STATUS_SKIPPED,
    STATUS_WARNING,
    TEXT_RESULT_KEYS,
)
from .core.classes import DEFAULT_CUTOFFS, abc_classes
from .core.discounts import price_at
from .core.history import analyse_history
from .core.model_choice import analysis_from_figures, choose_model
from .core.periodic import periodic_policy
from .core.policy import PolicyInputs, compute_policy, evaluate_policy
from .core.portfolio import (
    BUDGET,
    CURVE_AUTO_MAX,
    ORDERS,
    apply_cap,
    exchange_curve,
    take_inputs,
)
from .plausibility import (
    input_amounts_unsafe,
    plausibility_notes,
    report_unsafe,
    unsafe_items,
)
from .problems import ProblemLog, Severity
from .reading import InputData
from .report import REORDER_KEYS, Report
from .season_backtest import SEASON_BACKTEST_KEYS, compare_policies
from .seasons import SeasonForecast, forecast_demand, season_notes, season_plan

#: Fewer non-zero periods than this gives an unreliable standard deviation (common
#: practice: about eight non-zero periods at the least).
MIN_NONZERO_PERIODS = 8


def build_report(
    data: InputData, log: ProblemLog, source_name: str, run_date: _dt.date | None = None
) -> Report:
    """Plan every usable item and assemble the report (no writing)."""
    settings = data.settings
    items = data.items
    df = items.df  # read only here
    n = len(df)
    ppy = float(settings["periods_per_year"])
    usable = items.usable.copy()

    demand = _demand(data, df, usable, ppy, log, run_date)
    planned = usable & demand["ok"]
    # Amounts too large to total (a unit cost of 1e308) never reach a class, a cap or a sum.
    unsafe = planned & input_amounts_unsafe(df, demand["annual"])
    if unsafe.any():
        report_unsafe(items, np.flatnonzero(unsafe), log)
        planned &= ~unsafe

    # Classes first, from annual demand x unit cost (neither depends on the service target),
    # then each item's target: its own, else its class's, else the Settings default.
    abc = _abc(df, demand["annual"], planned, settings)
    target, target_source = _class_targets(df, items.own_target, abc, settings)

    # The table is made once from its first columns: numbers in float columns from the start
    # (as _typed leaves them), text in object ones (pandas makes text columns str).
    first: dict[str, Any] = {
        key: np.full(n, np.nan, dtype=object if key in TEXT_RESULT_KEYS else float)
        for key in ALL_RESULT_KEYS
    }
    for key in (
        "item",
        "description",
        "category",
        "supplier",
        "unit_cost",
        "order_cost",
        "holding_rate",
        "shortage_cost",
        "pack_size",
        "minimum_order",
        "shelf_life_days",
    ):
        first[key] = df[key].to_numpy()
    for key in (
        "demand_source",
        "history_periods",
        "model",
        "model_reason",
        "demand_class",
        "rate_method",
        "adi",
        "cv2",
        "history_start",
        "forecast",
        "forecast_reason",
        "forecast_mae_ratio",
        "forecast_error_sd",
    ):
        first[key] = demand[
            "source" if key == "demand_source" else "periods" if key == "history_periods" else key
        ]
    first["service_measure"] = np.full(n, settings["service_measure"], dtype=object)
    first["abc_class"] = abc
    first["service_target_source"] = target_source
    results = pd.DataFrame(first)

    idx = np.flatnonzero(planned)
    portfolio: dict[str, Any] = {}
    trace = None
    plan_table = None
    season_totals: dict[str, float] = {}
    if len(idx):
        sub = df[list(_PLAN_INPUTS)].iloc[idx]  # the columns the policy reads, planned rows
        measure = np.full(len(idx), settings["service_measure"], dtype=object)
        inp = PolicyInputs(
            annual_demand=demand["annual"][idx],
            demand_per_period=demand["mean"][idx],
            demand_sd_per_period=demand["sd"][idx],
            lead_time_days=sub["lead_time_days"].to_numpy(float),
            lead_time_sd_days=np.nan_to_num(sub["lead_time_sd_days"].to_numpy(float)),
            unit_cost=sub["unit_cost"].to_numpy(float),
            order_cost=sub["order_cost"].to_numpy(float),
            holding_rate=sub["holding_rate"].to_numpy(float),
            measure=measure,
            service_target=target[idx],
            shortage_cost=sub["shortage_cost"].to_numpy(float),
            pack_size=np.nan_to_num(sub["pack_size"].to_numpy(float), nan=1.0),
            minimum_order=np.nan_to_num(sub["minimum_order"].to_numpy(float)),
            days_per_period=float(settings["days_per_period"]),
            model=demand["model"][idx],
            break_qty=data.price_breaks.qty[idx] if data.price_breaks is not None else None,
            break_price=(data.price_breaks.price[idx] if data.price_breaks is not None else None),
            shelf_life_days=sub["shelf_life_days"].to_numpy(float),
        )
        pol = compute_policy(inp)
        bad = unsafe_items(pol)  # an overflow inside the policy: the item is left out
        if bad.any():
            report_unsafe(items, idx[bad], log)
            planned[idx[bad]] = False
            keep = np.flatnonzero(~bad)
            idx, sub, inp = idx[keep], sub.iloc[keep], take_inputs(inp, keep)
            pol = pol.iloc[keep].reset_index(drop=True)
    if len(idx):
        # Caps and the exchange curve are about continuous review: items on periodic review
        # get their order-up-to policy below, so they are left out of both (and told).
        cont = np.flatnonzero(_review_days(sub, settings) <= 0)
        if len(cont) == len(idx):
            pol, portfolio = _portfolio(inp, pol, settings, log)
        elif len(cont):
            part, portfolio = _portfolio(
                take_inputs(inp, cont), pol.iloc[cont].reset_index(drop=True), settings, log
            )
            pol = pol.copy()
            for key in part.columns:
                if key not in pol.columns:
                    pol[key] = np.nan
                pol.loc[cont, key] = part[key].to_numpy()
            if portfolio or settings.get("stock_budget") or settings.get("orders_cap"):
                log.info(
                    f"The {len(idx) - len(cont):,} item(s) on periodic review are outside "
                    "the stock budget, the orders cap and the exchange curve, which are "
                    "worked out for the items on continuous review.",
                    code="portfolio-periodic-left-out",
                )
        for key in pol.columns:
            if key in results.columns:
                _put(results, idx, key, pol[key].to_numpy())
        _flag_problems(pol, df[["row", "item"]].iloc[idx], items, log)
        sf = demand["season"]
        if sf is not None and sf.chosen[idx].any():
            ahead = np.intersect1d(cont, np.flatnonzero(sf.chosen[idx]))
            plan_table = season_plan(inp, ahead, sf, idx, df["item"].to_numpy(object))
            season_notes(plan_table, sf, df, data.history, settings, log)
            if 0 < len(ahead) <= AUTO_MAX_ITEMS and data.history is not None:
                frame, season_totals = compare_policies(
                    inp, ahead, idx, sf, data.history.matrix, ppy
                )
                for key in SEASON_BACKTEST_KEYS:
                    _put(results, frame["row"].to_numpy(), key, frame[key].to_numpy(float))
    _periodic(results, df, planned, demand, target, settings, data, log)
    # The back-test simulates continuous review; items on periodic review are left out
    # (their order-up-to policy has no reorder point to replay).
    continuous = idx[results["review"].to_numpy(object)[idx] != "periodic"]
    trace = run_backtest(results, data, continuous, demand, log) if len(idx) else None
    if settings["service_measure"] == SHORTAGE_COST:
        results["service_target"] = np.nan
        results["service_target_source"] = ""
    results.loc[~planned, ["model", "model_reason", "service_target_source"]] = ""

    _reorder_columns(results, df, planned)
    _abc_and_today(results, df, planned, settings, data.price_breaks)
    plausibility_notes(results, items, planned, log)
    results["status"] = _statuses(results["item"], planned, log)
    results = _typed(results)
    reorder = _reorder_list(results, df)
    totals = _totals(results, reorder)
    totals.update(season_totals)
    results = backtest_totals(results, totals)
    history = data.history
    summary: dict[str, Any] = {
        "file": source_name,
        "items_read": n,
        "items_planned": int(planned.sum()),
        "items_skipped": int(n - planned.sum()),
        "history_layout": history.layout if history else "none",
        "history_items": len(history.items) if history else 0,
        "periods": len(history.labels) if history else 0,
        "first_period": history.labels[0] if history and history.labels else None,
        "last_period": history.labels[-1] if history and history.labels else None,
        "period": settings["period"],
    }
    return Report(
        results=results,
        reorder=reorder,
        problems=log.sorted(),
        settings=settings,
        totals=totals,
        input_summary=summary,
        source_name=source_name,
        run_date=run_date or _dt.date.today(),
        portfolio=portfolio,
        trace=trace,
        season_plan=plan_table,
    )


#: The Items columns the policy reads.
_PLAN_INPUTS = (
    "lead_time_days",
    "lead_time_sd_days",
    "unit_cost",
    "order_cost",
    "holding_rate",
    "shortage_cost",
    "pack_size",
    "minimum_order",
    "shelf_life_days",
    "review_period_days",
)


def _demand(
    data: InputData,
    df: pd.DataFrame,
    usable: np.ndarray,
    ppy: float,
    log: ProblemLog,
    run_date: _dt.date | None = None,
) -> dict[str, Any]:
    """Demand per period (rate, sd), per year, and the lead-time demand model, per item.

    From History: each item's own span (from its first sale, or its History start), its
    demand class, the rate (plain mean, or the Syntetos-Boylan estimate for intermittent
    and lumpy items), and pattern warnings. From annual figures otherwise.
    """
    n = len(df)
    settings = data.settings
    period = settings["period"]
    mean = np.full(n, np.nan)
    sd = np.full(n, np.nan)
    periods = np.zeros(n, dtype=float)
    nonzero = np.zeros(n, dtype=float)
    source = np.full(n, "", dtype=object)
    out_text = {
        k: np.full(n, "", dtype=object)
        for k in ("model", "model_reason", "demand_class", "rate_method", "history_start")
    }
    adi = np.full(n, np.nan)
    cv2 = np.full(n, np.nan)
    hist = data.history
    has_hist = np.zeros(n, dtype=bool)
    hist_row = np.full(n, -1, dtype=np.int64)  # for the back-test: History row, span start
    span_start = np.zeros(n, dtype=np.int64)
    codes = df["item"].to_numpy(object)
    rows = df["row"].to_numpy(int)
    sheet = data.items.sheet
    dpp = float(settings["days_per_period"])
    lead = df["lead_time_days"].to_numpy(float) / dpp
    lead_sd = np.nan_to_num(df["lead_time_sd_days"].to_numpy(float)) / dpp
    forced = _forced_models(df, settings)
    an = None
    season: SeasonForecast | None = None
    if hist is not None and len(hist.items):
        where = _history_rows(hist.items, codes)
        has_hist = where >= 0
        w = where[has_hist]
        start = _history_starts(data, df, where, log)
        dormant = settings.get("dormant_after")
        an = analyse_history(
            hist.matrix,
            ppy,
            start=start,
            dormant_periods=int(dormant) if dormant else None,
            cap_outliers=settings.get("cap_outliers") == "yes",
        )
        back = np.full(len(hist.items), -1, dtype=np.int64)  # history row -> item row
        back[w] = np.flatnonzero(has_hist)
        models, reasons = choose_model(an, lead[back], lead_sd[back], forced[back])
        for key, arr in (
            ("model", models),
            ("model_reason", reasons),
            ("demand_class", an.demand_class),
            ("rate_method", an.rate_method),
        ):
            out_text[key][has_hist] = arr[w]
        mean[has_hist] = an.rate[w]
        sd[has_hist] = an.sd[w]
        periods[has_hist] = an.periods[w]
        nonzero[has_hist] = an.nonzero_periods[w]
        adi[has_hist] = an.adi[w]
        cv2[has_hist] = an.cv2[w]
        labels = np.array([_label(x) for x in hist.labels] + [""], dtype=object)
        out_text["history_start"][has_hist] = labels[np.minimum(an.start[w], len(labels) - 1)]
        source[has_hist] = "history"
        hist_row[has_hist] = w
        span_start[has_hist] = an.start[w]
        steady = np.isin(out_text["demand_class"], ("smooth", "erratic"))
        # the season plan is of reorder points: items on periodic review stay flat for now
        periodic = _review_days(df, settings) > 0
        season = forecast_demand(
            hist,
            where,
            an.start,
            lead,
            usable & has_hist & steady & ~periodic,
            settings,
            run_date,
            log,
        )
        season.reason[has_hist & steady & periodic] = (
            "items on periodic review are planned on the flat average"
        )

    annual_fig = df["annual_demand"].to_numpy(float)
    fig = ~has_hist & ~np.isnan(annual_fig)
    mean[fig] = annual_fig[fig] / ppy
    sd[fig] = df["demand_sd"].to_numpy(float)[fig]
    source[fig] = "annual figures"

    hsheet = hist.sheet if hist is not None else sheet
    first = hist.first_cell if hist is not None else {}

    # Masks over all items; messages are written only for the items each one selects.
    both = usable & has_hist & ~np.isnan(annual_fig)
    too_short = usable & has_hist & (periods < 2)
    zero_hist = usable & has_hist & ~too_short & ~(mean > 0)
    short = (
        usable
        & has_hist
        & ~too_short
        & ~zero_hist
        & ((periods < ppy) | (nonzero < MIN_NONZERO_PERIODS))
    )
    zero_fig = usable & fig & (mean == 0)
    sd_assumed = usable & fig & ~zero_fig & np.isnan(sd)
    missing = usable & ~has_hist & ~fig
    sd[sd_assumed] = np.sqrt(mean[sd_assumed])

    figs = fig & ~zero_fig
    if figs.any():
        models, reasons = choose_model(
            analysis_from_figures(mean[figs], sd[figs]), lead[figs], lead_sd[figs], forced[figs]
        )
        out_text["model"][figs] = models
        out_text["model_reason"][figs] = np.where(
            models == "", "", np.char.add("from the annual figures: ", reasons.astype(str))
        )

    for i in np.flatnonzero(both):
        log.info(
            "This item has History as well as an annual demand figure; the History was used.",
            sheet=sheet,
            cell=data.items.cell("annual_demand", rows[i]),
            item=codes[i],
            value=annual_fig[i],
            code="demand-both",
        )
    for i in np.flatnonzero(too_short):
        log.error(
            f"Only {int(periods[i])} readable History period(s): at least 2 are needed to "
            "estimate how demand varies. Fix the History cells or give annual demand and "
            "demand sd in Items. The item was skipped.",
            sheet=hsheet,
            cell=first.get(codes[i], ""),
            item=codes[i],
            code="history-too-short",
        )
    for i in np.flatnonzero(zero_hist):
        log.warning(
            f"No demand in {int(periods[i])} {period}s of History, so no stock policy "
            "was computed. Decide by hand whether to keep stocking it.",
            sheet=hsheet,
            cell=first.get(codes[i], ""),
            item=codes[i],
            value=0,
            code="demand-zero",
        )
    for i in np.flatnonzero(short):
        few = nonzero[i] < MIN_NONZERO_PERIODS
        why = (
            f"only {int(nonzero[i])} {period}s with sales, too few for a reliable estimate "
            "of how demand varies"
            if few
            else "less than a year, so seasonal swings cannot be seen yet and the spread is "
            "a rough estimate"
        )
        log.warning(
            f"Short history: {int(periods[i])} {period}s, {why}. Review the safety "
            "stock by hand, and re-run as history builds up.",
            sheet=hsheet,
            cell=first.get(codes[i], ""),
            item=codes[i],
            code="history-short",
        )
    for i in np.flatnonzero(zero_fig):
        log.warning(
            "Annual demand is 0, so no stock policy was computed.",
            sheet=sheet,
            cell=data.items.cell("annual_demand", rows[i]),
            item=codes[i],
            value=0,
            code="demand-zero",
        )
    for i in np.flatnonzero(sd_assumed):
        log.warning(
            f"Demand sd is blank; {sd[i]:.3g} per {period} was assumed (the spread of "
            "purely random sales, Poisson). Enter the sd if you know it.",
            sheet=sheet,
            cell=data.items.cell("demand_sd", rows[i]) or data.items.cell("annual_demand", rows[i]),
            item=codes[i],
            code="demand-sd-assumed",
        )
    where_txt = f"no rows in {hist.sheet}" if hist is not None else "no History sheet"
    for i in np.flatnonzero(missing):
        log.error(
            f"No demand data: {where_txt}, and no annual demand in Items. Add the item's "
            "sales history, or its annual demand and demand sd. The item was skipped.",
            sheet=sheet,
            cell=data.items.cell("item", rows[i]),
            item=codes[i],
            code="demand-missing",
        )
    ok = ~(too_short | zero_hist | zero_fig | missing)
    annual = mean * ppy
    fc_keys: dict[str, Any] = {
        "forecast": np.full(n, "", dtype=object),
        "forecast_reason": np.full(n, "", dtype=object),
        "forecast_mae_ratio": np.full(n, np.nan),
        "forecast_error_sd": np.full(n, np.nan),
    }
    if season is not None:
        # items planned with their forecast: its demand for now, its error for the spread
        use = ok & season.chosen & (season.mean_now > 0) & (season.annual_now > 0)
        none_ahead = season.chosen & ~use
        season.label[none_ahead] = "flat average"
        season.reason[none_ahead] = "the forecast for the coming lead time is not above 0"
        season.chosen &= use
        season.flat_mean, season.flat_sd = mean.copy(), sd.copy()
        mean[use] = season.mean_now[use]
        sd[use] = season.sd_now[use]
        annual[use] = season.annual_now[use]
        fc_keys["forecast"] = np.where(ok, season.label, "")
        fc_keys["forecast_reason"] = np.where(ok, season.reason, "")
        fc_keys["forecast_mae_ratio"] = np.where(ok, season.mae_ratio, np.nan)
        fc_keys["forecast_error_sd"] = np.where(use, season.error_sd, np.nan)
    if an is not None:
        _pattern_notes(
            an, hist, where, usable & ok & has_hist, codes, period, settings, log, season
        )
    return {
        "mean": mean,
        "sd": sd,
        "annual": annual,
        "season": season,
        **fc_keys,
        "periods": periods,
        "ok": ok,
        "source": source,
        "adi": adi,
        "cv2": cv2,
        "hist_row": hist_row,
        "span_start": span_start,
        **out_text,
    }


def _history_rows(history_items: list[str], codes: np.ndarray) -> np.ndarray:
    """Each item's row in History, -1 where it has none (a hash lookup over all codes)."""
    index = pd.Index(history_items, dtype=object)
    if index.is_unique:
        return index.get_indexer(pd.Index(codes, dtype=object)).astype(np.int64)
    pos = {code: i for i, code in enumerate(history_items)}  # the last row of a repeated code
    return np.array([pos.get(code, -1) for code in codes], dtype=np.int64)


def _label(x: Any) -> str:
    """A History period as text for the output (ISO date, or the label itself)."""
    return x.isoformat() if isinstance(x, (_dt.date, _dt.datetime)) else str(x)


def _forced_models(df: pd.DataFrame, settings: dict[str, Any]) -> np.ndarray:
    """The model the user set per item (column), else for all (setting); "" = choose."""
    default = settings.get("demand_model") or AUTO_MODEL
    col = df["demand_model"].to_numpy(object)
    out = np.where(pd.isna(col), default, col).astype(object)
    out[out == AUTO_MODEL] = ""
    return out


def _history_starts(
    data: InputData, df: pd.DataFrame, where: np.ndarray, log: ProblemLog
) -> np.ndarray:
    """Per History row, the period index of the item's History start (-1: its first sale)."""
    hist = data.history
    assert hist is not None
    start = np.full(len(hist.items), -1, dtype=np.int64)
    raw = df["history_start"].to_numpy(object)
    given = np.flatnonzero((where >= 0) & ~pd.isna(raw))
    if not len(given):
        return start
    dated = bool(hist.labels) and isinstance(hist.labels[0], _dt.date)
    ordinals = np.array([d.toordinal() for d in hist.labels] if dated else [], dtype=np.int64)
    text_labels = {_label(x): k for k, x in enumerate(hist.labels)}
    for i in given:
        v = raw[i]
        k = -1
        if dated and isinstance(v, (_dt.date, _dt.datetime)):
            day = v.date() if isinstance(v, _dt.datetime) else v
            k = int(np.searchsorted(ordinals, day.toordinal()))  # first period on/after it
            k = k if k < len(hist.labels) else -1
        else:
            k = text_labels.get(_label(v).strip(), -1)
        if k < 0:
            log.warning(
                f"History start {v!r} is not a period in {hist.sheet}; the item's "
                "history was counted from its first sale. Write a date within the "
                "History's span, or one of its period labels.",
                sheet=data.items.sheet,
                cell=data.items.cell("history_start", int(df["row"].iat[i])),
                item=df["item"].iat[i],
                value=v,
                code="history_start-unknown",
            )
            continue
        start[where[i]] = k
    return start


def _pattern_notes(
    an: Any,
    hist: Any,
    where: np.ndarray,
    sel: np.ndarray,
    codes: np.ndarray,
    period: str,
    settings: dict[str, Any],
    log: ProblemLog,
    season: SeasonForecast | None = None,
) -> None:
    """A planner's notes on each item's history: new, shifting, seasonal, spiky, dormant.

    Items planned with their season or trend are left to xlpolicy.seasons, which says what
    was planned; the others keep the warning, with why the forecast was not used.
    """
    n_cols = hist.matrix.shape[1]
    if season is not None:
        sel = sel & ~season.chosen
    items_idx = np.flatnonzero(sel)
    h = where[items_idx]
    why_flat = np.full(hist.matrix.shape[0], "", dtype=object)
    if season is not None:
        why_flat[where[items_idx]] = [
            f" Not planned with a season or trend: {r}." if r else ""
            for r in season.reason[items_idx]
        ]
    capped = settings.get("cap_outliers") == "yes"

    def note(mask: np.ndarray, code: str, severity: str, text: Any) -> None:
        for i, j in zip(items_idx[mask], h[mask], strict=True):
            getattr(log, severity)(
                text(j),
                sheet=hist.sheet,
                cell=hist.first_cell.get(codes[i], ""),
                item=codes[i],
                code=code,
            )

    new = (an.start[h] >= 4) & (an.start[h] >= 0.25 * n_cols)
    note(
        new,
        "history-new-item",
        "info",
        lambda j: (
            f"History counted from the first sale ({_label(hist.labels[an.start[j]])}, {period} "
            f"{an.start[j] + 1} of {n_cols}), as for a new item: the {period}s before it are not "
            "counted as zero demand."
        ),
    )
    # A seasonal swing or a stop in sales also shifts the recent third: say the cause only.
    trend = an.trend[h] & ~an.seasonal[h] & ~an.dormant[h]
    note(
        trend,
        "demand-trend",
        "warning",
        lambda j: (
            f"Demand has {'risen' if an.trend_ratio[j] > 1 else 'fallen'}: the recent third of "
            f"the history runs at {an.trend_ratio[j]:.2f} times the earlier level. The policy uses "
            "the average over the whole history; if the change will last, set a later History "
            "start for this item or adjust the order quantity and reorder point by hand."
            + why_flat[j]
        ),
    )
    note(
        an.seasonal[h],
        "demand-seasonal",
        "warning",
        lambda j: (
            f"Demand is seasonal: the busiest part of the year runs at about "
            f"{min(an.seasonal_strength[j], 99):.1f} times the quietest. A year-round average "
            "leaves too little stock before the peak and too much after it: raise the reorder "
            "point ahead of the busy season and lower it after." + why_flat[j]
        ),
    )
    note(
        an.outlier[h],
        "demand-outlier",
        "warning",
        lambda j: (
            f"One {period} ({_label(hist.labels[an.outlier_index[j]])}: "
            f"{an.outlier_value[j]:g} units) stands far above the rest and drives much of the "
            f"demand spread (sd {an.sd[j] if not capped else an.sd_without_outlier[j]:.3g} with it,"
            f" {an.sd_without_outlier[j]:.3g} without). "
            + (
                f"It was capped at {an.outlier_threshold[j]:g} as Settings asks."
                if capped
                else "Check it was a real sale, not a one-off bulk order or a typo; "
                "set 'Cap outliers' to yes in Settings to cap such periods."
            )
        ),
    )
    note(
        an.dormant[h],
        "demand-dormant",
        "warning",
        lambda j: (
            f"No sales in the last {int(an.periods_since_sale[j])} {period}s, though it sold "
            "before: possibly discontinued or replaced. Confirm before reordering."
        ),
    )


_FLAG_TEXT = {
    "flag_normal_doubtful": (
        "normal-doubtful",
        "Demand over the lead time is small or erratic (mean {mu:.3g}, sd {sd:.3g}); a normal "
        "model can misstate the reorder point for such items. Check the reorder point by hand.",
    ),
    "flag_no_safety_stock_pays": (
        "no-safety-stock-pays",
        "With this shortage cost, holding extra stock costs more than the shortages it avoids, "
        "so no safety stock was planned (reorder point = expected lead-time demand). Check the "
        "shortage cost.",
    ),
    "flag_shelf_life_below_minimum": (
        "shelf-life-below-minimum",
        "Less sells within the shelf life than the smallest order the supplier accepts (one "
        "pack, or the minimum order): the order quantity was set to that smallest order, so "
        "part of each order will likely expire unsold. Ask for a smaller pack or minimum, or "
        "check the Shelf life days.",
    ),
    "flag_reorder_point_floored": (
        "reorder-point-floored",
        "The service target is met even with a negative reorder point; the reorder point was "
        "raised to 0.",
    ),
}


def _flag_problems(pol: pd.DataFrame, sub: pd.DataFrame, items: Any, log: ProblemLog) -> None:
    """Turn the core's per-item flags into warnings naming the item's row."""
    for flag, (code, text) in _FLAG_TEXT.items():
        if flag not in pol.columns:
            continue
        for k in np.flatnonzero(pol[flag].to_numpy(bool)):
            mu = float(pol["lead_time_demand_mean"].iat[k])
            sd = float(pol["lead_time_demand_sd"].iat[k])
            row = int(sub["row"].iat[k])
            log.warning(
                text.format(mu=mu, sd=sd),
                sheet=items.sheet,
                cell=items.cell("item", row),
                item=sub["item"].iat[k],
                code=code,
            )


def _statuses(codes: pd.Series, planned: np.ndarray, log: ProblemLog) -> np.ndarray:
    flagged = {
        p.item for p in log.problems if p.item and p.severity in (Severity.WARNING, Severity.ERROR)
    }
    out = np.where(planned, STATUS_OK, STATUS_SKIPPED).astype(object)
    warn = planned & codes.isin(flagged).to_numpy()
    out[warn] = STATUS_WARNING
    return out


def _review_days(df: pd.DataFrame, settings: dict[str, Any]) -> np.ndarray:
    """Each item's review period in days: its own, else the setting; 0 = continuous review."""
    T = df["review_period_days"].to_numpy(float)
    default = settings.get("review_period_days")
    return np.where(np.isnan(T), float(default) if default is not None else 0.0, T)


def _periodic(
    results: pd.DataFrame,
    df: pd.DataFrame,
    planned: np.ndarray,
    demand: dict[str, np.ndarray],
    target: np.ndarray,
    settings: dict[str, Any],
    data: InputData,
    log: ProblemLog,
) -> None:
    """Periodic review (T, S) for items with a review period; the others stay continuous.

    The item's Review period days wins, else the setting; 0 or none: continuous review.
    A periodic item has no reorder point: its order-up-to level S replaces it, and its
    order quantity is the average order (demand over one review period).
    """
    T = _review_days(df, settings)
    results["review"] = np.where(planned, np.where(T > 0, "periodic", "continuous"), "")
    per = planned & (T > 0)
    results["review_period_days"] = np.where(per, T, np.nan)
    k = np.flatnonzero(per)
    if not len(k):
        return
    sub = df.iloc[k]
    pol = periodic_policy(
        T[k],
        demand["mean"][k],
        demand["sd"][k],
        sub["lead_time_days"].to_numpy(float),
        np.nan_to_num(sub["lead_time_sd_days"].to_numpy(float)),
        float(settings["days_per_period"]),
        float(settings["periods_per_year"]),
        sub["order_cost"].to_numpy(float),
        sub["holding_rate"].to_numpy(float),
        sub["unit_cost"].to_numpy(float),
        settings["service_measure"],
        target[k],
        sub["shortage_cost"].to_numpy(float),
        model=results["model"].to_numpy(object)[k],
    )
    for key in pol.columns:
        if key in results.columns:
            _put(results, k, key, pol[key].to_numpy())
    # what belongs to continuous review only
    results.loc[
        k,
        [
            "reorder_point",
            "eoq",
            "rounding_penalty",
            "rounding_cost_ratio",
            "price_break_qty",
            "plain_eoq_qty",
            "discount_saving",
            "shelf_life_max_qty",
            "shelf_life_cost",
        ],
    ] = np.nan
    results.loc[k, "unit_price"] = sub["unit_cost"].to_numpy(float)
    breaks = data.price_breaks
    has_breaks = (breaks.count()[k] > 0) if breaks is not None else np.zeros(len(k), bool)
    has_life = np.isfinite(sub["shelf_life_days"].to_numpy(float))
    rows = sub["row"].to_numpy(int)
    for j in np.flatnonzero(has_breaks | has_life):
        what = " and ".join(
            w for w, on in (("price breaks", has_breaks[j]), ("a shelf life", has_life[j])) if on
        )
        log.warning(
            f"This item is reviewed every {T[k][j]:g} days (periodic review), so its "
            f"{what} were not applied: they shape the order quantity of continuous "
            "review only. Set Review period days to 0 to use them.",
            sheet=data.items.sheet,
            cell=data.items.cell("review_period_days", rows[j]) or data.items.cell("item", rows[j]),
            item=sub["item"].iat[j],
            code="periodic-ignores-breaks",
        )


def _reorder_columns(results: pd.DataFrame, df: pd.DataFrame, planned: np.ndarray) -> None:
    """Inventory position and the quantity to order now, where stock figures are given."""
    on_hand = df["on_hand"].to_numpy(float)
    position = (
        on_hand
        + np.nan_to_num(df["on_order"].to_numpy(float))
        - np.nan_to_num(df["backordered"].to_numpy(float))
    )
    r = pd.to_numeric(results["reorder_point"], errors="coerce").to_numpy(float)
    q = pd.to_numeric(results["order_qty"], errors="coerce").to_numpy(float)
    with np.errstate(invalid="ignore", divide="ignore"):
        k = np.floor((r - position) / q) + 1
        qty = np.where(planned & (position <= r), k * q, 0.0)
    # Periodic review: at the review, order up to S in whole packs (at least the minimum).
    s_up = pd.to_numeric(results["order_up_to_level"], errors="coerce").to_numpy(float)
    per = planned & np.isfinite(s_up)
    if per.any():
        pack = np.nan_to_num(df["pack_size"].to_numpy(float), nan=1.0)
        moq = np.nan_to_num(df["minimum_order"].to_numpy(float))
        with np.errstate(invalid="ignore", divide="ignore"):
            need = s_up - position
            up = np.ceil(need / pack - 1e-9) * pack
            qty = np.where(per, np.where(need > 0, np.maximum(up, moq), 0.0), qty)
    qty[~planned | np.isnan(position)] = np.nan
    results["inventory_position"] = position
    results["order_now_qty"] = qty


def _abc(
    df: pd.DataFrame, annual_demand: np.ndarray, planned: np.ndarray, settings: dict[str, Any]
) -> np.ndarray:
    """ABC class per item by annual spend D x unit cost ("" for items not planned)."""
    spend = annual_demand * df["unit_cost"].to_numpy(float)
    cutoffs = settings.setdefault("abc_cutoffs", DEFAULT_CUTOFFS)
    return abc_classes(np.where(planned, spend, np.nan), cutoffs)


def _class_targets(
    df: pd.DataFrame, own: np.ndarray | None, abc: np.ndarray, settings: dict[str, Any]
) -> tuple[np.ndarray, np.ndarray]:
    """Each item's service target and where it came from.

    The item's own Service target wins; else its class's target (Service target A, B or C)
    where that setting is given; else the Service target setting (already in the column).
    """
    target = df["service_target"].to_numpy(float).copy()
    own_mask = np.ones(len(df), dtype=bool) if own is None else np.asarray(own, dtype=bool)
    source = np.where(own_mask, "item", "Settings: Service target").astype(object)
    for cls, key in CLASS_TARGET_SETTINGS.items():
        value = settings.get(key)
        if value is None:
            continue
        sel = ~own_mask & (abc == cls)
        target[sel] = float(value)
        source[sel] = f"Settings: Service target {cls}"
    return target, source


def _abc_and_today(
    results: pd.DataFrame,
    df: pd.DataFrame,
    planned: np.ndarray,
    settings: dict[str, Any],
    breaks: Any = None,
) -> None:
    """Today's policy (where given) evaluated like ours (the ABC class is set before).

    With price breaks, today's order quantity is held at the price it earns.
    """
    q_now = df["current_order_qty"].to_numpy(float)
    r_now = df["current_reorder_point"].to_numpy(float)
    results["current_order_qty"] = q_now
    results["current_reorder_point"] = r_now
    both = planned & np.isfinite(q_now) & np.isfinite(r_now)
    k = np.flatnonzero(both)
    if not len(k):
        return

    def col(key: str) -> np.ndarray:
        return pd.to_numeric(results[key], errors="coerce").to_numpy(float)[k]

    price_now = col("unit_cost")
    if breaks is not None:
        price_now = price_at(q_now[k], price_now, breaks.qty[k], breaks.price[k])
    ev = evaluate_policy(
        q_now[k],
        r_now[k],
        col("lead_time_demand_mean"),
        col("lead_time_demand_sd"),
        results["model"].to_numpy(object)[k],
        col("annual_demand"),
        col("order_cost"),
        col("holding_rate") * price_now,
        price_now,
        col("shortage_cost"),
    )
    for key, src in (
        ("current_safety_stock", "safety_stock"),
        ("current_cycle_service", "cycle_service"),
        ("current_fill_rate", "fill_rate"),
        ("current_units_short_per_cycle", "units_short_per_cycle"),
        ("current_annual_ordering_cost", "annual_ordering_cost"),
        ("current_annual_cycle_holding_cost", "annual_cycle_holding_cost"),
        ("current_annual_safety_holding_cost", "annual_safety_holding_cost"),
        ("current_annual_shortage_cost", "annual_shortage_cost"),
        ("current_annual_total_cost", "annual_total_cost"),
    ):
        _put(results, k, key, ev[src].to_numpy())
    _put(results, k, "annual_saving", ev["annual_total_cost"].to_numpy() - col("annual_total_cost"))


def _put(results: pd.DataFrame, rows: np.ndarray, key: str, values: np.ndarray) -> None:
    """results.loc[rows, key] = values, by numpy for a number column (pandas for text)."""
    if results[key].dtype != np.float64:
        results.loc[rows, key] = values
        return
    col = results[key].to_numpy(dtype=float, copy=True)
    col[rows] = (
        pd.to_numeric(pd.Series(values, dtype=object), errors="coerce").to_numpy(float)
        if np.asarray(values).dtype == object
        else values
    )
    results[key] = col


def _typed(results: pd.DataFrame) -> pd.DataFrame:
    """Every column but the text ones as float (numbers already are; anything else coerced)."""
    for key in results.columns:
        if key not in TEXT_RESULT_KEYS and results[key].dtype != np.float64:
            results[key] = pd.to_numeric(results[key], errors="coerce").astype(float)
    return results


def _reorder_list(results: pd.DataFrame, df: pd.DataFrame) -> pd.DataFrame:
    due = results[results["order_now_qty"].fillna(0) > 0].copy()
    rows = df.loc[due.index]
    due["on_hand"] = rows["on_hand"].to_numpy(float)
    due["on_order"] = rows["on_order"].to_numpy(float)
    due["backordered"] = rows["backordered"].to_numpy(float)
    # The purchaser pays the price the order quantity earns (a price break, where one
    # applies), so the list shows that price as the unit cost of this order.
    due["unit_cost"] = due["unit_price"].fillna(due["unit_cost"])
    due["order_now_value"] = due["order_now_qty"] * due["unit_cost"]
    due["supplier"] = due["supplier"].fillna("(no supplier given)")
    due = due.sort_values(["supplier", "item"], kind="stable")
    return due[list(REORDER_KEYS)].reset_index(drop=True)


def _totals(results: pd.DataFrame, reorder: pd.DataFrame) -> dict[str, float]:
    ok = (results["status"] != STATUS_SKIPPED).to_numpy()

    def col(key: str) -> np.ndarray:
        return results[key].to_numpy(float)

    def s(key: str) -> float:
        return float(np.nansum(col(key)[ok]))

    avg_value = s("average_inventory_value")
    purchase = s("annual_purchase_cost")
    compared = ~np.isnan(col("annual_saving"))
    ss = col("safety_stock")[ok]
    ss = np.where((ss >= 0) | np.isnan(ss), ss, 0.0)  # clipped at 0, as Series.clip(lower=0)
    # valued at the price paid (after any price break), as the average inventory value is
    paid = np.where(np.isfinite(col("unit_price")), col("unit_price"), col("unit_cost"))[ok]
    ss_value = float(np.nansum(ss * paid))
    return {
        "items_planned": float(ok.sum()),
        "items_warning": float((results["status"] == STATUS_WARNING).sum()),
        "items_skipped": float((~ok).sum()),
        "annual_demand_units": s("annual_demand"),
        "annual_purchase_cost": purchase,
        "annual_ordering_cost": s("annual_ordering_cost"),
        "annual_cycle_holding_cost": s("annual_cycle_holding_cost"),
        "annual_safety_holding_cost": s("annual_safety_holding_cost"),
        "annual_shortage_cost": s("annual_shortage_cost"),
        "annual_total_cost": s("annual_total_cost"),
        "average_inventory_value": avg_value,
        "safety_stock_value": ss_value,
        "inventory_turns": purchase / avg_value if avg_value > 0 else float("nan"),
        "orders_per_year": s("orders_per_year"),
        "rounding_penalty": s("rounding_penalty"),
        "discount_saving": s("discount_saving"),
        "shelf_life_cost": s("shelf_life_cost"),
        "items_capped_by_shelf_life": float((col("shelf_life_cost")[ok] > 0).sum()),
        "items_with_price_breaks": float((~np.isnan(col("discount_saving")[ok])).sum()),
        "items_to_reorder": float(len(reorder)),
        "reorder_value": float(np.nansum(reorder["order_now_value"].to_numpy(float))),
        "items_compared": float(compared.sum()),
        "current_annual_total_cost": float(np.nansum(col("current_annual_total_cost")[compared])),
        "compared_recommended_annual_total_cost": float(
            np.nansum(col("annual_total_cost")[compared])
        ),
        "annual_saving": float(np.nansum(col("annual_saving")[compared])),
    }


def _portfolio(
    inp: PolicyInputs, pol: pd.DataFrame, settings: dict[str, Any], log: ProblemLog
) -> tuple[pd.DataFrame, dict[str, Any]]:
    """Decisions across all items: a cap on stock value or orders, then the exchange curve.

    A stock budget or an orders cap from Settings (or the command line) replaces the policy
    by the least-cost one that meets it; the unconstrained order quantity, reorder point and
    cost are kept beside it (``uncapped_*``). The exchange curve is traced around the
    settings as given, i.e. for the policy before any cap (the cap is a different question:
    what the limit costs). Returns the policy to report and what the Summary shows.
    """
    out: dict[str, Any] = {}
    budget, orders = settings.get("stock_budget"), settings.get("orders_cap")
    sources = settings.get("sources", {})

    def where(key: str) -> dict[str, str]:
        src = str(sources.get(key, ""))
        return (
            {"sheet": "Settings", "cell": src.split(" ", 1)[1]}
            if src.startswith("Settings ")
            else {"sheet": "", "cell": ""}
        )

    if budget is not None and orders is not None:
        log.warning(
            "Both a stock budget and an orders cap are set; only the stock budget was "
            "applied (one cap at a time). Leave one of them blank.",
            **where("orders_cap"),
            value=orders,
            code="cap-both",
        )
        orders = None
    cap = (
        (BUDGET, float(budget))
        if budget is not None
        else ((ORDERS, float(orders)) if orders is not None else None)
    )
    curve = settings.get("exchange_curve", "auto")
    n_items = len(np.asarray(inp.annual_demand).reshape(-1))
    if curve == "yes" or (curve == "auto" and n_items <= CURVE_AUTO_MAX):
        out["exchange_curve"] = exchange_curve(
            inp, float(settings["service_target"]), str(settings["service_measure"])
        )
    elif curve == "auto":
        log.info(
            f"The exchange curve was left out of the Summary: for {n_items:,} items each "
            "of its points is a whole policy calculation, which would about double the "
            "run. Set 'Exchange curve' to yes in Settings (or use --curve) to have it.",
            sheet="Settings",
            code="exchange-curve-skipped",
        )
    if cap is None:
        return pol, out
    res = apply_cap(inp, pol, *cap)
    out["cap"] = res
    key = "stock_budget" if cap[0] == BUDGET else "orders_cap"
    if res.binding and not res.feasible:
        what = "average stock value" if cap[0] == BUDGET else "orders a year"
        log.warning(
            f"The {key.replace('_', ' ')} of {cap[1]:,.2f} cannot be met: even the "
            f"smallest orders the packs and minimums allow"
            + (" and the reorder points the service targets need" if cap[0] == BUDGET else "")
            + f" give {res.least:,.2f} {what}. The policy with the least "
            "was used; raise the cap or lower the service targets.",
            **where(key),
            value=cap[1],
            code="cap-infeasible",
        )
    capped = res.policy.copy()
    capped["uncapped_order_qty"] = pol["order_qty"].to_numpy(float)
    capped["uncapped_reorder_point"] = pol["reorder_point"].to_numpy(float)
    capped["uncapped_annual_total_cost"] = pol["annual_total_cost"].to_numpy(float)
    return capped, out
