"""The back-test: each planned policy simulated on the item's own demand, and what it says.

Glue between the planner and :mod:`xlpolicy.core.simulate` (no file I/O): which items are
simulated on which demand, the result columns, the warnings where the promised and the
simulated service disagree, and the totals for the summary.

Items planned from History are simulated on block-bootstrap resamples of their own history
span (and the history is also replayed once as it happened); items planned from annual
figures have no history to resample and are simulated on draws from their demand model.
The history is used as read: a period capped by 'Cap outliers' is resampled uncapped, and
an unreadable cell counts as no demand.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd

from .contract import FILL_RATE, SHORTAGE_COST, SIMULATION_RESULT_KEYS, STATUS_SKIPPED
from .core.simulate import (
    BlockBootstrap,
    HistoryReplay,
    ModelDraws,
    block_length,
    history_band,
    service_check,
    simulate_policy,
)
from .core.simulate_search import reorder_point_for_target
from .problems import ProblemLog

#: Runs per item when simulation is asked for without a number.
DEFAULT_RUNS = 100
#: Up to this many items the back-test runs unless switched off: it then adds at most a
#: few seconds (measured: 0.5 s at 1,000 items, 4.8 s at 10,000, 100 runs of 104 weeks).
AUTO_MAX_ITEMS = 5000
#: More runs than this are refused as a likely typing slip (and a very long wait).
MAX_RUNS = 5000
#: The random seed of every back-test, so a run can be repeated exactly.
SEED = 20_241_202
#: A promise outside the band by less than this is not worth a warning (our rule: the
#: promise is itself an estimate from the same history, good to a point or so).
MARGIN = 0.01
#: Simulated periods for resamples and model draws: the history's length, at least this
#: many years.
MIN_YEARS = 2.0

#: The search for the reorder point that reaches the target in simulation starts this many
#: lead-time demand sds above the planned one, doubling from there (our rule: most
#: shortfalls close within a quarter to one sd; see core.simulate_search).
SEARCH_FIRST_STEP = 0.25

#: Items whose simulated stock is drawn on the trace sheet.
TRACE_ITEMS = 3

SOURCE_BOOTSTRAP = "history, block bootstrap"
SOURCE_MODEL = "demand model draws"
CHECK_TEXT = {-1: "short of promise", 0: "as promised", 1: "above promise"}


def simulation_runs(settings: dict[str, Any], log: ProblemLog, n_items: int = 0) -> int:
    """The number of runs asked for (0: no back-test), the Settings value checked here.

    ``simulate`` (from the command line or API) True turns the back-test on (with the
    Settings number of runs, else DEFAULT_RUNS), False off. A Settings value that is not a
    whole number from 0 to MAX_RUNS is reported at its cell and the back-test left out.
    Neither given: the back-test runs (DEFAULT_RUNS) for up to AUTO_MAX_ITEMS items, where
    it costs a few seconds at most, and is left out with a note above that.
    """
    simulate = settings.pop("simulate", None)
    raw = settings.get("simulation_runs")
    if simulate is None and raw is None:
        if n_items <= AUTO_MAX_ITEMS:
            settings["simulation_runs"] = DEFAULT_RUNS
            settings.setdefault("sources", {})["simulation_runs"] = (
                f"default (up to {AUTO_MAX_ITEMS:,} items)"
            )
            return DEFAULT_RUNS
        log.info(
            f"The back-test was left out: for {n_items:,} items it would add about "
            f"{n_items * 5 / 10_000:.0f} s. Use --simulate, or set 'Simulation runs' in "
            "Settings (100 is a good start), to have it.",
            code="backtest-skipped",
        )
        return 0
    runs = 0
    if raw is not None:
        try:
            x = float(raw)
        except (TypeError, ValueError):
            x = float("nan")
        if np.isfinite(x) and x == int(x) and 0 <= x <= MAX_RUNS:
            runs = int(x)
        else:
            source = str((settings.get("sources") or {}).get("simulation_runs", ""))
            cell = source.split(" ", 1)[1] if source.startswith("Settings ") else ""
            log.warning(
                f"Simulation runs must be a whole number from 0 to {MAX_RUNS} (100 is "
                "a good start); the back-test was left out. Write a number such as "
                "100, or 0 for none.",
                sheet="Settings" if cell else "",
                cell=cell,
                value=raw,
                code="setting-simulation_runs",
            )
            settings["simulation_runs"] = None
            return 0
    if simulate is False:
        return 0
    if simulate and runs == 0:
        runs = DEFAULT_RUNS
        settings["simulation_runs"] = runs
        settings.setdefault("sources", {})["simulation_runs"] = "command line (default)"
    return runs


def run_backtest(
    results: pd.DataFrame,
    data: Any,
    idx: np.ndarray,
    demand: dict[str, np.ndarray],
    log: ProblemLog,
    seed: int = SEED,
) -> dict[str, Any] | None:
    """Simulate the planned items (rows idx of results) if the settings ask for it.

    Fills the SIMULATION_RESULT_KEYS columns of those rows and logs a warning for each item
    whose simulated service falls short of its promise by more than the band (an info
    note where it is clearly above). Returns the stock trace of up to TRACE_ITEMS items
    (the history replayed, or the first run of model draws) for the Stock trace sheet, or
    None without a back-test.
    """
    settings = data.settings
    lost = bool(settings.pop("lost_sales", None))
    runs = simulation_runs(settings, log, len(idx))
    if not runs or not len(idx):
        return None
    settings["simulation_unmet_demand"] = "lost" if lost else "backordered"
    ppy = float(settings["periods_per_year"])
    dpp = float(settings["days_per_period"])
    df = data.items.df.iloc[idx]

    def num(key: str) -> np.ndarray:
        return pd.to_numeric(results.loc[idx, key], errors="coerce").to_numpy(float)

    q, r = num("order_qty"), num("reorder_point")
    lt = df["lead_time_days"].to_numpy(float) / dpp
    lsd = np.nan_to_num(df["lead_time_sd_days"].to_numpy(float)) / dpp
    H = num("holding_rate") * _price_paid(num("unit_price"), num("unit_cost"))
    S, p = num("order_cost"), num("shortage_cost")
    hist = data.history
    rows = demand["hist_row"][idx]
    from_hist = (rows >= 0) & (hist is not None)
    n_cols = hist.matrix.shape[1] if hist is not None else 0
    horizon = int(max(n_cols, np.ceil(MIN_YEARS * ppy)))
    out = {k: np.full(len(idx), np.nan) for k in SIMULATION_RESULT_KEYS}
    source = np.full(len(idx), "", dtype=object)
    models = results.loc[idx, "model"].to_numpy(object).astype(str)
    groups: list[tuple[np.ndarray, BlockBootstrap | ModelDraws, str]] = []
    span = np.zeros(0)
    h = np.flatnonzero(from_hist)
    if h.size:
        start = demand["span_start"][idx][h]
        span = n_cols - start
        m = hist.matrix[rows[h]]
        split = (models[h], num("demand_per_period")[h], num("demand_sd_per_period")[h])
        groups.append(
            (
                h,
                BlockBootstrap(m, start, block_length(lt[h], span), horizon, *split),
                SOURCE_BOOTSTRAP,
            )
        )
    f = np.flatnonzero(~from_hist)
    if f.size:
        groups.append(
            (
                f,
                ModelDraws(
                    results.loc[idx, "model"].to_numpy(object)[f],
                    num("demand_per_period")[f],
                    num("demand_sd_per_period")[f],
                    horizon,
                ),
                SOURCE_MODEL,
            )
        )
    measure = str(settings.get("service_measure"))
    fill = measure == FILL_RATE
    rng = np.random.default_rng(seed)
    for k, src, label in groups:
        res = simulate_policy(
            q[k],
            r[k],
            lt[k],
            lsd[k],
            src,
            seed=rng,
            order_cost=S[k],
            holding_cost=H[k],
            shortage_cost=p[k],
            replications=runs,
            lost_sales=lost,
            periods_per_year=ppy,
        )
        c = dict(res.columns)
        if label == SOURCE_BOOTSTRAP:  # allow for the history's own length (see core)
            c.update(history_band(c, span, lt[k]))
        for key in (
            "cycle_service",
            "cycle_service_low",
            "cycle_service_high",
            "fill_rate",
            "fill_rate_low",
            "fill_rate_high",
        ):
            out[f"simulated_{key}"][k] = c[key]
        out["simulated_average_on_hand"][k] = c["average_on_hand"]
        out["simulated_orders_per_year"][k] = c["orders_per_year"]
        out["simulated_annual_total_cost"][k] = c["annual_total_cost"]
        source[k] = np.where(np.isfinite(c["cycle_service"]), label, "")
        if isinstance(src, BlockBootstrap):  # the same items' histories, replayed once
            rep = simulate_policy(
                q[k],
                r[k],
                lt[k],
                lsd[k],
                HistoryReplay(src.matrix, src.start, src.model, src.mean, src.sd),
                seed=rng,
                replications=runs,
                lost_sales=lost,
                periods_per_year=ppy,
            )
            out["replayed_cycle_service"][k] = rep.columns["cycle_service"]

    promised = num("fill_rate") if fill else num("cycle_service")
    lo = out["simulated_fill_rate_low" if fill else "simulated_cycle_service_low"]
    hi = out["simulated_fill_rate_high" if fill else "simulated_cycle_service_high"]
    check = service_check(promised, lo, hi, MARGIN)
    done = source != ""
    # where the simulation clearly falls below the target (its whole band below it) or
    # short of the promise (the warning's test): the reorder point that reaches the target
    # there. Items below target within their band are left alone: their shortfall is
    # within the simulation's own error, and a search would chase that noise.
    target = num("service_target")
    est = out["simulated_fill_rate" if fill else "simulated_cycle_service"]
    with np.errstate(invalid="ignore"):
        below = (
            done
            & np.isfinite(target)
            & (measure != SHORTAGE_COST)
            & (est < target)
            & ((hi < target) | (check < 0))
        )
    r_sim = np.full(len(idx), np.nan)
    sd_lt = num("demand_sd_per_period") * np.sqrt(np.maximum(lt, 1.0))
    for k, src, _label in groups:
        local = np.flatnonzero(below[k])
        if local.size:
            sel = k[local]
            r_sim[sel] = reorder_point_for_target(
                q[sel],
                r[sel],
                lt[sel],
                lsd[sel],
                src.take(local),
                target[sel],
                SEARCH_FIRST_STEP * sd_lt[sel],
                fill_rate=fill,
                replications=runs,
                seed=seed + 2,
                lost_sales=lost,
                periods_per_year=ppy,
            )
    out["simulated_target_reorder_point"] = r_sim
    out["simulated_target_extra_holding_cost"] = (r_sim - r) * H
    out["simulation_source"] = source
    out["simulation_check"] = np.where(done, [CHECK_TEXT[int(x)] for x in check], "")
    for key, val in out.items():
        results.loc[idx, key] = val
    _warn(results, data, idx, check, promised, fill, runs, log)

    # the stock trace: the items whose simulated service falls furthest below the promise
    gap = np.where(
        done,
        np.nan_to_num(
            promised - out["simulated_cycle_service" if not fill else "simulated_fill_rate"]
        ),
        -np.inf,
    )
    cost = np.where(done, np.nan_to_num(num("annual_total_cost")), -np.inf)
    order = np.lexsort((-cost, -gap))
    pick = [int(j) for j in order if done[j]][:TRACE_ITEMS]
    if not pick:
        return None
    pick_a = np.asarray(pick)
    hist_pick = pick_a[from_hist[pick_a]]
    model_pick = pick_a[~from_hist[pick_a]]
    rows_out: list[dict[str, Any]] = []
    labels = [
        str(x.isoformat() if hasattr(x, "isoformat") else x)
        for x in (hist.labels if hist is not None else [])
    ]
    for sel, is_hist in ((hist_pick, True), (model_pick, False)):
        if not sel.size:
            continue
        if is_hist:
            shown: HistoryReplay | ModelDraws = HistoryReplay(
                hist.matrix[rows[sel]],
                demand["span_start"][idx][sel],
                models[sel],
                num("demand_per_period")[sel],
                num("demand_sd_per_period")[sel],
            )
            first = demand["span_start"][idx][sel]
            what = "its own history, as it was"
        else:
            shown = ModelDraws(
                results.loc[idx, "model"].to_numpy(object)[sel],
                num("demand_per_period")[sel],
                num("demand_sd_per_period")[sel],
                horizon,
            )
            first = np.zeros(sel.size, dtype=np.int64)
            what = "draws from its demand model (the first run)"
        tr = simulate_policy(
            q[sel],
            r[sel],
            lt[sel],
            lsd[sel],
            shown,
            replications=1,
            seed=np.random.default_rng(seed + 1),
            lost_sales=lost,
            periods_per_year=ppy,
            trace_items=np.arange(sel.size),
        ).trace
        for j, loc in enumerate(sel):
            i = idx[loc]
            t0 = int(first[j])
            n_t = tr["net_stock"].shape[1]
            lab = (
                labels[t0:n_t]
                if is_hist and len(labels) >= n_t
                else [str(k + 1) for k in range(t0, n_t)]
            )
            rows_out.append(
                {
                    "row": int(i),
                    "item": results.at[i, "item"],
                    "description": results.at[i, "description"],
                    "order_qty": float(q[loc]),
                    "reorder_point": float(r[loc]),
                    "source": what,
                    "labels": lab,
                    **{k: tr[k][j, t0:] for k in ("demand", "net_stock", "position", "ordered")},
                }
            )
    rows_out.sort(key=lambda d: pick.index(int(np.flatnonzero(idx == d["row"])[0])))
    return {"items": rows_out, "unmet": "lost" if lost else "backordered"}


def _remedy(results: pd.DataFrame, i: int) -> str:
    """What to do, in numbers where the search found them."""
    r_sim = float(results.at[i, "simulated_target_reorder_point"])
    extra = float(results.at[i, "simulated_target_extra_holding_cost"])
    if np.isfinite(r_sim) and r_sim > float(results.at[i, "reorder_point"]):
        return (
            f"In the same simulation a reorder point of {r_sim:,.0f} (now "
            f"{float(results.at[i, 'reorder_point']):,.0f}) reaches the target, for about "
            f"{extra:,.2f} more a year in holding cost; or try another Demand model."
        )
    return (
        "Raise the reorder point (or try another Demand model) until the simulated "
        "figure reaches the target."
    )


def _price_paid(unit_price: np.ndarray, unit_cost: np.ndarray) -> np.ndarray:
    """The price paid per unit (after any price break), else the unit cost: the basis of
    the policy's holding costs, so the back-test's costs use it too."""
    return np.where(np.isfinite(unit_price), unit_price, unit_cost)


def _warn(
    results: pd.DataFrame,
    data: Any,
    idx: np.ndarray,
    check: np.ndarray,
    promised: np.ndarray,
    fill: bool,
    runs: int,
    log: ProblemLog,
) -> None:
    """A warning per item short of its promise; a note per item clearly above it."""
    what = "fill rate" if fill else "cycle service"
    key = "simulated_fill_rate" if fill else "simulated_cycle_service"
    items = data.items
    rows = items.df["row"].to_numpy(int)[idx]
    for j in np.flatnonzero(check != 0):
        i = idx[j]
        sim = float(results.at[i, key])
        lo, hi = float(results.at[i, f"{key}_low"]), float(results.at[i, f"{key}_high"])
        src = str(results.at[i, "simulation_source"])
        model = str(results.at[i, "model"])
        how = (
            "resamples of its own history"
            if src == SOURCE_BOOTSTRAP
            else f"draws from its {model} model"
        )
        band = f"{sim:.1%} (95 % band {lo:.1%} to {hi:.1%}, {runs} runs on {how})"
        where = dict(
            sheet=items.sheet,
            cell=items.cell("item", int(rows[j])),
            item=results.at[i, "item"],
            value=round(sim, 4),
        )
        if check[j] < 0:
            log.warning(
                f"Back-test: simulated {what} {band} falls short of the "
                f"{promised[j]:.1%} the {model} model promises, so the model misreads "
                "this item's demand. " + _remedy(results, i),
                code="simulated-service-short",
                **where,
            )
        else:
            log.info(
                f"Back-test: simulated {what} {band} is above the {promised[j]:.1%} the "
                f"{model} model promises; the reorder point may hold more safety stock "
                "than the target needs. Check it before lowering it.",
                code="simulated-service-above",
                **where,
            )


def backtest_totals(results: pd.DataFrame, totals: dict[str, float]) -> pd.DataFrame:
    """Add the back-test counts to the totals; without a back-test, drop its columns.

    Each count is over the planned items simulated under a service measure with a target
    (cycle service or fill rate), comparing the simulated figure of that measure (the
    estimate, the middle of its band) with the item's target:

    * items_meeting_target_in_simulation: the estimate is at or above the target;
    * items_below_target_in_simulation: the estimate is below the target;
    * items_clearly_below_target_in_simulation: even the top of the 95 % band is below the
      target (part of the previous count);
    * items_short_in_simulation: the band lies below what the item's model promises by
      more than MARGIN (the warnings' test; the promise is often above the target).
    """
    src = results["simulation_source"] if "simulation_source" in results.columns else None
    done = (src.fillna("").astype(str) != "").to_numpy() if src is not None else None
    if done is None or not done.any():
        return results.drop(columns=[k for k in SIMULATION_RESULT_KEYS if k in results.columns])
    planned = (results["status"] != STATUS_SKIPPED).to_numpy()
    done = done & planned
    target = pd.to_numeric(results["service_target"], errors="coerce").to_numpy(float)
    measure = results["service_measure"].astype(str).to_numpy()
    fill = measure == FILL_RATE

    def pick(key: str) -> np.ndarray:
        return np.where(
            fill,
            results[f"simulated_fill_rate{key}"].to_numpy(float),
            results[f"simulated_cycle_service{key}"].to_numpy(float),
        )

    est, hi = pick(""), pick("_high")
    with_target = done & np.isfinite(target) & (measure != SHORTAGE_COST) & np.isfinite(est)
    with np.errstate(invalid="ignore"):
        meets = with_target & (est >= target - 1e-12)
        clearly = with_target & ~meets & (hi < target - 1e-12)
    totals["items_simulated"] = float(done.sum())
    totals["items_with_target_simulated"] = float(with_target.sum())
    totals["items_meeting_target_in_simulation"] = float(meets.sum())
    totals["items_below_target_in_simulation"] = float((with_target & ~meets).sum())
    totals["items_clearly_below_target_in_simulation"] = float(clearly.sum())
    totals["items_short_in_simulation"] = float(
        (done & (results["simulation_check"].astype(str) == CHECK_TEXT[-1]).to_numpy()).sum()
    )
    return results
