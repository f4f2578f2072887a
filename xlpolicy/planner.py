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

from .contract import (
    ALL_RESULT_KEYS,
    SHORTAGE_COST,
    STATUS_OK,
    STATUS_SKIPPED,
    STATUS_WARNING,
)
from .core.demand import history_statistics
from .core.policy import PolicyInputs, compute_policy
from .problems import ProblemLog, Severity
from .reading import InputData
from .report import REORDER_KEYS, Report

#: Fewer non-zero periods than this gives an unreliable standard deviation (field notes:
#: "fewer than ~8 non-zero periods"; common practice).
MIN_NONZERO_PERIODS = 8


def build_report(data: InputData, log: ProblemLog, source_name: str,
                 run_date: _dt.date | None = None) -> Report:
    """Plan every usable item and assemble the report (no writing)."""
    settings = data.settings
    items = data.items
    df = items.df.copy()
    n = len(df)
    ppy = float(settings["periods_per_year"])
    usable = items.usable.copy()

    demand = _demand(data, df, usable, ppy, log)
    planned = usable & demand["ok"]

    results = pd.DataFrame(index=range(n), columns=list(ALL_RESULT_KEYS), dtype=object)
    for key in ("item", "description", "category", "supplier", "unit_cost", "order_cost",
                "holding_rate", "shortage_cost", "pack_size", "minimum_order"):
        results[key] = df[key].to_numpy()
    results["demand_source"] = demand["source"]
    results["history_periods"] = demand["periods"]
    results["service_measure"] = settings["service_measure"]

    idx = np.flatnonzero(planned)
    if len(idx):
        sub = df.iloc[idx]
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
            service_target=sub["service_target"].to_numpy(float),
            shortage_cost=sub["shortage_cost"].to_numpy(float),
            pack_size=np.nan_to_num(sub["pack_size"].to_numpy(float), nan=1.0),
            minimum_order=np.nan_to_num(sub["minimum_order"].to_numpy(float)),
            days_per_period=float(settings["days_per_period"]),
        )
        pol = compute_policy(inp)
        for key in pol.columns:
            if key in results.columns:
                results.loc[idx, key] = pol[key].to_numpy()
        _flag_problems(pol, df.iloc[idx], items, log)
    if settings["service_measure"] == SHORTAGE_COST:
        results["service_target"] = np.nan

    _reorder_columns(results, df, planned)
    results["status"] = _statuses(results["item"], planned, log)
    results = _typed(results)
    reorder = _reorder_list(results, df)
    totals = _totals(results, reorder)
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
    return Report(results=results, reorder=reorder, problems=log.sorted(), settings=settings,
                  totals=totals, input_summary=summary, source_name=source_name,
                  run_date=run_date or _dt.date.today())


def _demand(data: InputData, df: pd.DataFrame, usable: np.ndarray, ppy: float,
            log: ProblemLog) -> dict[str, np.ndarray]:
    """Demand per period (mean, sd) and per year, for each item, from history or figures."""
    n = len(df)
    mean = np.full(n, np.nan)
    sd = np.full(n, np.nan)
    periods = np.zeros(n, dtype=float)
    nonzero = np.zeros(n, dtype=float)
    first_sale = np.zeros(n, dtype=float)  # index of the first period with a sale
    source = np.full(n, "", dtype=object)
    hist = data.history
    has_hist = np.zeros(n, dtype=bool)
    if hist is not None and len(hist.items):
        stats = history_statistics(hist.matrix)
        pos = hist.index()
        where = np.array([pos.get(code, -1) for code in df["item"]], dtype=np.int64)
        has_hist = where >= 0
        w = where[has_hist]
        mean[has_hist] = stats.mean[w]
        sd[has_hist] = stats.sd[w]
        periods[has_hist] = stats.periods[w]
        sold = np.nan_to_num(hist.matrix) > 0
        first_sale[has_hist] = np.where(sold.any(axis=1), sold.argmax(axis=1), 0)[w]
        nonzero[has_hist] = stats.nonzero_periods[w]
        source[has_hist] = "history"

    fig = ~has_hist & ~np.isnan(df["annual_demand"].to_numpy(float))
    annual_fig = df["annual_demand"].to_numpy(float)
    mean[fig] = annual_fig[fig] / ppy
    sd_fig = df["demand_sd"].to_numpy(float)
    sd[fig] = sd_fig[fig]
    source[fig] = "annual figures"

    sheet = data.items.sheet
    period = data.settings["period"]
    codes = df["item"].to_numpy(object)
    rows = df["row"].to_numpy(int)
    hsheet = hist.sheet if hist is not None else sheet
    first = hist.first_cell if hist is not None else {}

    # Masks over all items; messages are written only for the items each one selects.
    both = usable & has_hist & ~np.isnan(annual_fig)
    too_short = usable & has_hist & (periods < 2)
    zero_hist = usable & has_hist & ~too_short & (mean == 0)
    short = (usable & has_hist & ~too_short & ~zero_hist
             & ((periods < ppy) | (nonzero < MIN_NONZERO_PERIODS)))
    # An item whose first sale comes late in the span (a new item) has its early periods
    # counted as zero, which understates its demand (contract: the span is the sheet's).
    late = (usable & has_hist & ~too_short & ~zero_hist
            & (first_sale >= np.maximum(4, 0.25 * periods)))
    zero_fig = usable & fig & (mean == 0)
    sd_assumed = usable & fig & ~zero_fig & np.isnan(sd)
    missing = usable & ~has_hist & ~fig
    sd[sd_assumed] = np.sqrt(mean[sd_assumed])

    for i in np.flatnonzero(both):
        log.info("This item has History as well as an annual demand figure; the History was "
                 "used.", sheet=sheet, cell=data.items.cell("annual_demand", rows[i]),
                 item=codes[i], value=annual_fig[i], code="demand-both")
    for i in np.flatnonzero(too_short):
        log.error(f"Only {int(periods[i])} readable History period(s): at least 2 are needed to "
                  "estimate how demand varies. Fix the History cells or give annual demand and "
                  "demand sd in Items. The item was skipped.", sheet=hsheet,
                  cell=first.get(codes[i], ""), item=codes[i], code="history-too-short")
    for i in np.flatnonzero(zero_hist):
        log.warning(f"No demand in {int(periods[i])} {period}s of History, so no stock policy "
                    "was computed. Decide by hand whether to keep stocking it.", sheet=hsheet,
                    cell=first.get(codes[i], ""), item=codes[i], value=0, code="demand-zero")
    for i in np.flatnonzero(short):
        log.warning(f"Short history: {int(periods[i])} {period}s, {int(nonzero[i])} with sales. "
                    "The demand spread, and so the safety stock, is uncertain; review it by "
                    "hand and re-run as history builds up.", sheet=hsheet,
                    cell=first.get(codes[i], ""), item=codes[i], code="history-short")
    for i in np.flatnonzero(late):
        log.warning(f"First sale in {period} {int(first_sale[i]) + 1} of {int(periods[i])}: the "
                    f"{int(first_sale[i])} {period}s before it count as zero demand, so a new "
                    "item's demand is understated. Check its order quantity and reorder point "
                    "by hand.", sheet=hsheet,
                    cell=first.get(codes[i], ""), item=codes[i], code="history-late-start")
    for i in np.flatnonzero(zero_fig):
        log.warning("Annual demand is 0, so no stock policy was computed.", sheet=sheet,
                    cell=data.items.cell("annual_demand", rows[i]), item=codes[i], value=0,
                    code="demand-zero")
    for i in np.flatnonzero(sd_assumed):
        log.warning(f"Demand sd is blank; {sd[i]:.3g} per {period} was assumed (the spread of "
                    "purely random sales, Poisson). Enter the sd if you know it.", sheet=sheet,
                    cell=data.items.cell("demand_sd", rows[i])
                    or data.items.cell("annual_demand", rows[i]), item=codes[i],
                    code="demand-sd-assumed")
    where = f"no rows in {hist.sheet}" if hist is not None else "no History sheet"
    for i in np.flatnonzero(missing):
        log.error(f"No demand data: {where}, and no annual demand in Items. Add the item's sales "
                  "history, or its annual demand and demand sd. The item was skipped.",
                  sheet=sheet, cell=data.items.cell("item", rows[i]), item=codes[i],
                  code="demand-missing")
    ok = ~(too_short | zero_hist | zero_fig | missing)
    return {"mean": mean, "sd": sd, "annual": mean * ppy, "periods": periods, "ok": ok,
            "source": source}


_FLAG_TEXT = {
    "flag_normal_doubtful": (
        "normal-doubtful",
        "Demand over the lead time is small or erratic (mean {mu:.3g}, sd {sd:.3g}); a normal "
        "model can misstate the reorder point for such items. Check the reorder point by hand."),
    "flag_no_safety_stock_pays": (
        "no-safety-stock-pays",
        "With this shortage cost, holding extra stock costs more than the shortages it avoids, "
        "so no safety stock was planned (reorder point = expected lead-time demand). Check the "
        "shortage cost."),
    "flag_reorder_point_floored": (
        "reorder-point-floored",
        "The service target is met even with a negative reorder point; the reorder point was "
        "raised to 0."),
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
            log.warning(text.format(mu=mu, sd=sd), sheet=items.sheet,
                        cell=items.cell("item", row), item=sub["item"].iat[k], code=code)


def _statuses(codes: pd.Series, planned: np.ndarray, log: ProblemLog) -> np.ndarray:
    flagged = {p.item for p in log.problems
               if p.item and p.severity in (Severity.WARNING, Severity.ERROR)}
    out = np.where(planned, STATUS_OK, STATUS_SKIPPED).astype(object)
    warn = planned & codes.isin(flagged).to_numpy()
    out[warn] = STATUS_WARNING
    return out


def _reorder_columns(results: pd.DataFrame, df: pd.DataFrame, planned: np.ndarray) -> None:
    """Inventory position and the quantity to order now, where stock figures are given."""
    on_hand = df["on_hand"].to_numpy(float)
    position = on_hand + np.nan_to_num(df["on_order"].to_numpy(float)) - np.nan_to_num(
        df["backordered"].to_numpy(float))
    r = pd.to_numeric(results["reorder_point"], errors="coerce").to_numpy(float)
    q = pd.to_numeric(results["order_qty"], errors="coerce").to_numpy(float)
    with np.errstate(invalid="ignore", divide="ignore"):
        k = np.floor((r - position) / q) + 1
        qty = np.where(planned & (position <= r), k * q, 0.0)
    qty[~planned | np.isnan(position)] = np.nan
    results["inventory_position"] = position
    results["order_now_qty"] = qty


def _typed(results: pd.DataFrame) -> pd.DataFrame:
    text = {"item", "status", "model", "service_measure", "description", "category", "supplier",
            "demand_source"}
    for key in results.columns:
        if key not in text:
            results[key] = pd.to_numeric(results[key], errors="coerce").astype(float)
    return results


def _reorder_list(results: pd.DataFrame, df: pd.DataFrame) -> pd.DataFrame:
    due = results[results["order_now_qty"].fillna(0) > 0].copy()
    rows = df.loc[due.index]
    due["on_hand"] = rows["on_hand"].to_numpy(float)
    due["on_order"] = rows["on_order"].to_numpy(float)
    due["backordered"] = rows["backordered"].to_numpy(float)
    due["order_now_value"] = due["order_now_qty"] * due["unit_cost"]
    due["supplier"] = due["supplier"].fillna("(no supplier given)")
    due = due.sort_values(["supplier", "item"], kind="stable")
    return due[list(REORDER_KEYS)].reset_index(drop=True)


def _totals(results: pd.DataFrame, reorder: pd.DataFrame) -> dict[str, float]:
    ok = results["status"] != STATUS_SKIPPED
    r = results[ok]

    def s(key: str) -> float:
        return float(np.nansum(r[key].to_numpy(float)))

    avg_value = s("average_inventory_value")
    purchase = s("annual_purchase_cost")
    ss_value = float(np.nansum((r["safety_stock"].clip(lower=0) * r["unit_cost"]).to_numpy(float)))
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
        "items_to_reorder": float(len(reorder)),
        "reorder_value": float(np.nansum(reorder["order_now_value"].to_numpy(float))),
    }
