"""What planning with seasons buys, back-tested on each item's own history.

For every item planned with its season or trend (xlpolicy.seasons), two policies are
replayed on its History as it happened (core.replan), from the end of its first year on:

- forecast-driven: re-planned at each month's start, as an owner running the tool each
  month would: the reorder point and order quantity from the forecast of the demand over
  the lead time (the largest among the lead times starting in that month, as the season
  plan sets it), made with the data up to that day (the rolling-origin forecasts behind
  the choice, core.forecast.rolling_forecasts), with the item's forecast-error spread;
- flat: the policy the tool would set without the forecast (the whole history's average
  demand and its spread), fixed.

Both are computed by core.policy with the item's own costs, packs and targets. What the
comparison knows in advance (stated, so it can be judged): the spread each uses is taken
from the whole history (the spread of the errors of those same out-of-sample forecasts,
the flat average's demand spread),
and the flat policy's average comes from the whole history too; only the forecast-driven
policy's level, trend and season are estimated from the past alone, month by month.
Service here is cycle service (the share of replenishment cycles without a shortage) and
the stock is the average on hand; see core.replan for how a period is replayed.
"""

from __future__ import annotations

from dataclasses import replace
from typing import Any

import numpy as np
import pandas as pd

from .core.forecast import rolling_forecasts
from .core.policy import PolicyInputs, compute_policy
from .core.portfolio import take_inputs
from .core.replan import replay_policy

#: Per-item result keys (numbers), in the order they are added to the results.
SEASON_BACKTEST_KEYS: tuple[str, ...] = (
    "season_backtest_service",
    "season_backtest_flat_service",
    "season_backtest_stock",
    "season_backtest_flat_stock",
)


def compare_policies(
    inp: PolicyInputs,
    positions: np.ndarray,
    planned_rows: np.ndarray,
    sf: Any,
    matrix: np.ndarray,
    periods_per_year: float,
) -> tuple[pd.DataFrame, dict[str, float]]:
    """Replay both policies for ``positions`` (of ``inp``); per-item frame and totals.

    ``sf``: the SeasonForecast (its calendar, forecast rows, error spread and the flat
    figures kept before the forecast replaced them); ``matrix``: the History matrix.
    """
    empty = pd.DataFrame(columns=["row", *SEASON_BACKTEST_KEYS])
    cal = sf.calendar
    if not len(positions) or cal is None:
        return empty, {}
    rows_items = planned_rows[positions]
    fc_pos = pd.Index(sf.fc_items).get_indexer(rows_items)
    hist_rows = sf.hist_rows[fc_pos]
    begin = sf.begin[fc_pos]
    m = np.asarray(matrix, dtype=float)[hist_rows]
    k, t_len = m.shape
    sub = take_inputs(inp, positions)
    dpp = float(sub.days_per_period)
    lead = np.asarray(sub.lead_time_days, dtype=float) / dpp
    keep = rolling_forecasts(m, cal, lead, begin)
    season = cal.season[:t_len]
    year = int(round(periods_per_year))
    starts = np.flatnonzero(np.r_[False, season[1:] != season[:-1]])
    starts = starts[starts >= int(begin.min()) + year] if len(starts) else starts
    if not len(starts):
        return empty, {}
    j = len(starts)
    # k x j: made at the period before each start, covering the month's lead times
    fc = keep["month"][:, starts - 1]
    err = sf.holdout_sd[rows_items]  # the spread of these same forecasts' errors
    with np.errstate(invalid="ignore", divide="ignore"):
        per = np.where(fc > 0, fc / lead[:, None], np.nan)
    tiled = _tile(sub, j)
    tiled.demand_per_period = per.reshape(-1)
    tiled.demand_sd_per_period = np.repeat(err / np.sqrt(lead), j)
    tiled.annual_demand = per.reshape(-1) * periods_per_year
    pol = compute_policy(tiled)
    r_ms = pol["reorder_point"].to_numpy(float).reshape(k, j)
    q_ms = pol["order_qty"].to_numpy(float).reshape(k, j)
    # the policy in force in each period: the one set at the last month start before it
    which = np.searchsorted(starts, np.arange(t_len), side="right") - 1
    valid = which >= 0
    r_t = np.where(valid[None, :], r_ms[:, np.maximum(which, 0)], np.nan)
    q_t = np.where(valid[None, :], q_ms[:, np.maximum(which, 0)], np.nan)
    own_first = np.maximum(begin + year, starts[0])
    first = starts[np.minimum(np.searchsorted(starts, own_first), j - 1)]
    flat_in = replace(
        sub,
        demand_per_period=sf.flat_mean[rows_items],
        demand_sd_per_period=sf.flat_sd[rows_items],
        annual_demand=sf.flat_mean[rows_items] * periods_per_year,
    )
    flat = compute_policy(flat_in)
    r_f = np.repeat(flat["reorder_point"].to_numpy(float)[:, None], t_len, axis=1)
    q_f = np.repeat(flat["order_qty"].to_numpy(float)[:, None], t_len, axis=1)
    a = replay_policy(m, r_t, q_t, lead, first)
    b = replay_policy(m, r_f, q_f, lead, first)
    frame = pd.DataFrame(
        {
            "row": rows_items,
            "season_backtest_service": a["cycle_service"],
            "season_backtest_flat_service": b["cycle_service"],
            "season_backtest_stock": a["average_on_hand"],
            "season_backtest_flat_stock": b["average_on_hand"],
        }
    )
    cost = np.asarray(sub.unit_cost, dtype=float)
    ok = np.isfinite(a["cycle_service"]) & np.isfinite(b["cycle_service"])

    def service(res: dict[str, np.ndarray]) -> float:
        cyc = res["cycles"][ok].sum()
        return float(1.0 - res["stocked_out"][ok].sum() / cyc) if cyc > 0 else float("nan")

    totals = {
        "season_backtest_items": float(ok.sum()),
        "season_backtest_service": service(a),
        "season_backtest_flat_service": service(b),
        "season_backtest_stock_value": float(np.nansum((a["average_on_hand"] * cost)[ok])),
        "season_backtest_flat_stock_value": float(np.nansum((b["average_on_hand"] * cost)[ok])),
        "season_backtest_target": float(np.nanmean(np.asarray(sub.service_target)[ok]))
        if ok.any()
        else float("nan"),
    }
    return frame, totals


def _tile(inp: PolicyInputs, times: int) -> PolicyInputs:
    """Each item's inputs repeated ``times`` times in a row (item-major)."""
    n = np.asarray(inp.annual_demand).reshape(-1).shape[0]
    out: dict[str, Any] = {}
    for name in inp.__dataclass_fields__:
        val = getattr(inp, name)
        if val is not None and np.ndim(val) >= 1 and len(val) == n:
            out[name] = np.repeat(np.asarray(val), times, axis=0)
    return replace(inp, **out)


def summary_line(totals: dict[str, float], currency: str = "") -> str:
    """One sentence on what planning with seasons bought in the back-test ("" without one)."""
    n = totals.get("season_backtest_items", 0.0)
    if not n:
        return ""
    s_a, s_b = totals["season_backtest_service"], totals["season_backtest_flat_service"]
    v_a, v_b = totals["season_backtest_stock_value"], totals["season_backtest_flat_stock_value"]
    change = (v_a / v_b - 1.0) if v_b > 0 else float("nan")
    more = "more" if change > 0 else "less"
    return (
        f"Planning with seasons and trends, back-tested on the history of {int(n)} item(s): "
        f"{100 * s_a:.1f} % of replenishment cycles without a shortage against "
        f"{100 * s_b:.1f} % with the year-round average, holding {100 * abs(change):.0f} % "
        f"{more} stock on average ({currency}{v_a:,.0f} against {currency}{v_b:,.0f})."
    )
