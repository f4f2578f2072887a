"""The Policy sheet: one row per item read, with the cost and stock columns as live formulas.

Whoever checks the numbers (an accountant, an auditor) can click a cost cell and see how it
is made from the visible inputs of the same row: annual demand, order quantity, reorder
point, lead-time demand, unit cost, order cost, holding rate, shortage cost and expected
units short. Each formula carries the tool's own number as its cached value, and is written
only when rebuilding it from the displayed inputs gives that number to 1e-9 relative;
otherwise the number itself is written. Numbers that come from a demand model's quantiles
or distribution (reorder point, cycle service, units short, lead-time demand) and the order
quantity after pack rounding stay values; a note on their header says how they are made.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
import pandas as pd
from xlsxwriter.utility import xl_col_to_name
from xlsxwriter.worksheet import Worksheet

from .. import contract
from .bulk import ROW, CellBlock
from .sheetkit import (
    LIGHT_RULE,
    MUTED,
    SKIPPED_FILL,
    WARNING_FILL,
    Col,
    Context,
    column,
    display_len,
    header_width,
    longest_line,
    texts,
)

FORMULA_HEADER_FILL = "#DDEBE3"

#: What the owner and the accountant read first: these columns print one page wide; every
#: other column is the audit trail, grouped after them in an outline that opens with the
#: "+" above the sheet (collapsed, so it neither clutters the screen nor prints).
FIRST_READ: tuple[str, ...] = (
    "item",
    "description",
    "status",
    "model",
    "order_qty",
    "reorder_point",
    "safety_stock",
    "cycle_service",
    "fill_rate",
    "annual_ordering_cost",
    "annual_cycle_holding_cost",
    "annual_safety_holding_cost",
    "annual_shortage_cost",
    "annual_total_cost",
)

POLICY_COLUMNS: tuple[Col, ...] = (
    Col("item", "Item", "code"),
    Col("description", "Description", "text"),
    Col("status", "Status", "text"),
    Col("model", "Demand model", "text"),
    # the policy
    Col("order_qty", "Order quantity (units)", "units"),
    Col("reorder_point", "Reorder point (units)", "units"),
    Col("safety_stock", "Safety stock (units)", "units1"),
    Col("cycle_service", "Cycle service achieved", "percent"),
    Col("fill_rate", "Fill rate achieved", "percent"),
    # what it costs
    Col("annual_ordering_cost", "Annual ordering cost", "money"),
    Col("annual_cycle_holding_cost", "Annual cycle stock holding cost", "money"),
    Col("annual_safety_holding_cost", "Annual safety stock holding cost", "money"),
    Col("annual_shortage_cost", "Annual shortage cost", "money"),
    Col("annual_total_cost", "Annual total cost", "money"),
    # the audit trail, in the outline
    Col("category", "Category", "text"),
    Col("supplier", "Supplier", "text"),
    Col("abc_class", "ABC class", "text"),
    Col("service_measure", "Service measure", "text"),
    Col("service_target", "Service target", "percent"),
    Col("service_target_source", "Service target from", "text"),
    # periodic review
    Col("review", "Review", "text"),
    Col("review_period_days", "Review period (days)", "days"),
    Col("order_up_to_level", "Order-up-to level (units)", "units"),
    Col("protection_demand_mean", "Demand over review + lead time, mean (units)", "demand"),
    Col("protection_demand_sd", "Demand over review + lead time, sd (units)", "demand"),
    Col("orders_per_year", "Orders per year", "decimal1"),
    Col("annual_purchase_cost", "Annual purchase cost", "money"),
    Col("average_inventory_value", "Average inventory value", "money"),
    # the inputs of those formulas
    Col("annual_demand", "Annual demand (units)", "demand"),
    Col("lead_time_demand_mean", "Lead-time demand, mean (units)", "demand"),
    Col("expected_units_short_per_cycle", "Expected units short per order cycle", "demand"),
    Col("unit_cost", "Unit cost", "money"),
    Col("order_cost", "Order cost (per order)", "money"),
    Col("holding_rate", "Holding rate (per year)", "percent"),
    Col("shortage_cost", "Shortage cost (per unit short)", "money"),
    Col("eoq", "EOQ before rounding (units)", "demand"),
    Col("pack_size", "Pack size (units)", "units"),
    Col("minimum_order", "Minimum order (units)", "units"),
    Col("rounding_penalty", "Yearly cost of rounding to packs and minimums", "money"),
    # all-units price breaks (the Price breaks sheet)
    Col("unit_price", "Unit price paid (after any price break)", "money"),
    Col("price_break_qty", "Price break used: from (units)", "units"),
    Col("plain_eoq_qty", "Plain EOQ at the Unit cost (units)", "units"),
    Col("discount_saving", "Yearly saving of the price break over the plain EOQ", "money"),
    # shelf life
    Col("shelf_life_days", "Shelf life (days)", "days"),
    Col("shelf_life_max_qty", "Most to order: what sells within the shelf life (units)", "units"),
    Col("shelf_life_cost", "Yearly cost of the shelf-life cap", "money"),
    # where the demand figures come from
    Col("demand_per_period", "Demand per period (units)", "demand"),
    Col("demand_sd_per_period", "Demand sd per period (units)", "demand"),
    Col("lead_time_days", "Lead time (days)", "days"),
    Col("lead_time_demand_sd", "Lead-time demand, sd (units)", "demand"),
    Col("model_reason", "Why this model", "text"),
    Col("demand_class", "Demand pattern", "text"),
    Col("demand_source", "Demand taken from", "text"),
    Col("history_start", "History counted from", "text"),
    Col("history_periods", "History periods", "count"),
    Col("rate_method", "Demand rate estimated by", "text"),
    Col("adi", "Average periods between sales", "demand"),
    Col("cv2", "Variability of sale sizes (CV squared)", "demand"),
    # stock now
    Col("inventory_position", "Inventory position (units)", "units"),
    Col("order_now_qty", "Quantity to order now (units)", "units"),
    # today's policy, where the Items sheet gives it
    Col("current_order_qty", "Today: order quantity (units)", "units"),
    Col("current_reorder_point", "Today: reorder point (units)", "units"),
    Col("current_safety_stock", "Today: safety stock (units)", "units1"),
    Col("current_cycle_service", "Today: cycle service", "percent"),
    Col("current_fill_rate", "Today: fill rate", "percent"),
    Col("current_units_short_per_cycle", "Today: expected units short per order cycle", "demand"),
    Col("current_annual_ordering_cost", "Today: annual ordering cost", "money"),
    Col("current_annual_cycle_holding_cost", "Today: annual cycle stock holding cost", "money"),
    Col("current_annual_safety_holding_cost", "Today: annual safety stock holding cost", "money"),
    Col("current_annual_shortage_cost", "Today: annual shortage cost", "money"),
    Col("current_annual_total_cost", "Today: annual total cost", "money"),
    Col("annual_saving", "Annual saving with the recommended policy", "money"),
    # without the stock budget or orders cap, where one is set
    Col("uncapped_order_qty", "Without the cap: order quantity (units)", "units"),
    Col("uncapped_reorder_point", "Without the cap: reorder point (units)", "units"),
    Col("uncapped_annual_total_cost", "Without the cap: annual total cost", "money"),
    # the back-test, when one was run (xlpolicy.backtest)
    Col("simulation_check", "Back-test: service against the promise", "text"),
    Col("simulated_cycle_service", "Back-test: cycle service", "percent"),
    Col("simulated_cycle_service_low", "Back-test: cycle service, band low", "percent"),
    Col("simulated_cycle_service_high", "Back-test: cycle service, band high", "percent"),
    Col("simulated_fill_rate", "Back-test: fill rate", "percent"),
    Col("simulated_fill_rate_low", "Back-test: fill rate, band low", "percent"),
    Col("simulated_fill_rate_high", "Back-test: fill rate, band high", "percent"),
    Col("replayed_cycle_service", "Back-test: cycle service on the history as it was", "percent"),
    Col("simulated_average_on_hand", "Back-test: average on hand (units)", "demand"),
    Col("simulated_orders_per_year", "Back-test: orders per year", "decimal1"),
    Col("simulated_annual_total_cost", "Back-test: annual total cost", "money"),
    Col(
        "simulated_target_reorder_point",
        "Back-test: reorder point reaching the target (units)",
        "units",
    ),
    Col(
        "simulated_target_extra_holding_cost",
        "Back-test: extra yearly holding cost of that reorder point",
        "money",
    ),
    Col("simulation_source", "Back-test: demand simulated from", "text"),
)

#: The inputs the formulas name, by symbol.
SYMBOLS = {
    "Q": "order_qty",
    "R": "reorder_point",
    "mu": "lead_time_demand_mean",
    "D": "annual_demand",
    "S": "order_cost",
    "i": "holding_rate",
    "c": "unit_price",
    "p": "shortage_cost",
    "n": "expected_units_short_per_cycle",
    "ORD": "annual_ordering_cost",
    "CYC": "annual_cycle_holding_cost",
    "SAF": "annual_safety_holding_cost",
    "SHO": "annual_shortage_cost",
    "RT": "simulated_target_reorder_point",
    "OUT": "order_up_to_level",
    "PM": "protection_demand_mean",
}

Values = dict[str, np.ndarray]


def _shortage(v: Values) -> np.ndarray:
    return np.where(np.isnan(v["p"]), 0.0, v["p"] * v["D"] / v["Q"] * v["n"])


#: key -> (formula template, symbols that must be filled, the same sum in numpy, words).
FORMULAS: dict[str, tuple[str, tuple[str, ...], Callable[[Values], np.ndarray], str]] = {
    "safety_stock": (
        "{R}-{mu}",
        ("R", "mu"),
        lambda v: v["R"] - v["mu"],
        "reorder point - mean lead-time demand",
    ),
    "orders_per_year": (
        "{D}/{Q}",
        ("D", "Q"),
        lambda v: v["D"] / v["Q"],
        "annual demand / order quantity",
    ),
    "annual_ordering_cost": (
        "{D}/{Q}*{S}",
        ("D", "Q", "S"),
        lambda v: v["D"] / v["Q"] * v["S"],
        "annual demand / order quantity x order cost",
    ),
    "annual_cycle_holding_cost": (
        "{i}*{c}*{Q}/2",
        ("i", "c", "Q"),
        lambda v: v["i"] * v["c"] * v["Q"] / 2,
        "holding rate x unit cost x order quantity / 2",
    ),
    "annual_safety_holding_cost": (
        "{i}*{c}*({R}-{mu})",
        ("i", "c", "R", "mu"),
        lambda v: v["i"] * v["c"] * (v["R"] - v["mu"]),
        "holding rate x unit cost x safety stock",
    ),
    "annual_shortage_cost": (
        'IF({p}="",0,{p}*{D}/{Q}*{n})',
        ("D", "Q", "n"),
        _shortage,
        "shortage cost x orders per year x expected units short per "
        "order cycle (0 when no shortage cost is given)",
    ),
    "annual_total_cost": (
        "{ORD}+{CYC}+{SAF}+{SHO}",
        ("ORD", "CYC", "SAF", "SHO"),
        lambda v: v["ORD"] + v["CYC"] + v["SAF"] + v["SHO"],
        "ordering + cycle stock holding + safety stock holding + shortage",
    ),
    "annual_purchase_cost": (
        "{D}*{c}",
        ("D", "c"),
        lambda v: v["D"] * v["c"],
        "annual demand x unit cost",
    ),
    "average_inventory_value": (
        "{c}*({Q}/2+MAX({R}-{mu},0))",
        ("c", "Q", "R", "mu"),
        lambda v: v["c"] * (v["Q"] / 2 + np.maximum(v["R"] - v["mu"], 0.0)),
        "unit cost x (order quantity / 2 + safety stock, if above 0)",
    ),
    "fill_rate": (
        "MAX(0,1-{n}/{Q})",
        ("n", "Q"),
        lambda v: np.maximum(0.0, 1 - v["n"] / v["Q"]),
        "1 - expected units short per order cycle / order quantity",
    ),
    "simulated_target_extra_holding_cost": (
        "{i}*{c}*({RT}-{R})",
        ("i", "c", "RT", "R"),
        lambda v: v["i"] * v["c"] * (v["RT"] - v["R"]),
        "holding rate x unit price paid x (the reorder point reaching the target in "
        "simulation - the reorder point): each unit added to the reorder point adds one "
        "to the stock held on average",
    ),
    "eoq": (
        "SQRT(2*{D}*{S}/({i}*{c}))",
        ("D", "S", "i", "c"),
        lambda v: np.sqrt(2 * v["D"] * v["S"] / (v["i"] * v["c"])),
        "square root of (2 x annual demand x order cost / (holding rate x unit cost))",
    ),
}

#: The same columns on a periodic-review row, where the order-up-to level and the mean
#: demand over review period + lead time take the place of the reorder point and the
#: lead-time demand (the Policy's other formulas hold on those rows as they are).
PERIODIC_FORMULAS: dict[str, tuple[str, tuple[str, ...], Callable[[Values], np.ndarray], str]] = {
    "safety_stock": (
        "{OUT}-{PM}",
        ("OUT", "PM"),
        lambda v: v["OUT"] - v["PM"],
        "order-up-to level - mean demand over review period + lead time",
    ),
    "annual_safety_holding_cost": (
        "{i}*{c}*({OUT}-{PM})",
        ("i", "c", "OUT", "PM"),
        lambda v: v["i"] * v["c"] * (v["OUT"] - v["PM"]),
        "holding rate x unit cost x safety stock",
    ),
    "average_inventory_value": (
        "{c}*({Q}/2+MAX({OUT}-{PM},0))",
        ("c", "Q", "OUT", "PM"),
        lambda v: v["c"] * (v["Q"] / 2 + np.maximum(v["OUT"] - v["PM"], 0.0)),
        "unit cost x (order quantity / 2 + safety stock, if above 0)",
    ),
}

#: Columns that stay values, and how they are made (shown as a note on the header).
VALUE_NOTES = {
    "order_qty": (
        "A value, not a formula: the EOQ (see 'EOQ before rounding') rounded to a multiple "
        "of the pack size and raised to the minimum order, taking whichever rounding costs "
        "less a year; under the shortage-cost measure, found together with the reorder "
        "point by the iterative (Q, R) method. With price breaks: the allowed quantity "
        "with the lowest ordering + holding + purchase cost a year (all-units discount)."
    ),
    "discount_saving": (
        "A value: for an item with price breaks, the yearly ordering + cycle holding + "
        "purchase cost of the plain EOQ (at the Unit cost, rounded to packs, paying the "
        "price that quantity earns) minus that of the order quantity chosen."
    ),
    "order_up_to_level": (
        "A value, not a formula: periodic review only. At each review, order enough to raise "
        "the stock position to this level; the smallest whole number meeting the service "
        "target for demand over the review period plus the lead time under the item's "
        "demand model (Silver, Pyke & Peterson 1998, ch. 7). For such items the order "
        "quantity is the average order (demand over one review period) and the safety "
        "stock is this level minus the mean demand over review period + lead time."
    ),
    "shelf_life_max_qty": (
        "A value: demand per period x shelf life in periods, rounded down to whole packs. "
        "Where the smallest allowed order is more, that order is used, with a warning."
    ),
    "shelf_life_cost": (
        "A value: the yearly ordering + cycle holding (+ purchase, with price breaks) cost "
        "of the capped order quantity minus that of the quantity without the cap."
    ),
    "reorder_point": (
        "A value, not a formula: the smallest whole number of units that meets the service "
        "target under the item's demand model (a quantile of lead-time demand, or the "
        "fill-rate or shortage-cost condition). It needs the model's distribution, which a "
        "short formula cannot show."
    ),
    "cycle_service": (
        "A value, not a formula: the chance, under the item's demand model, that lead-time "
        "demand does not exceed the reorder point (the model's distribution function)."
    ),
    "expected_units_short_per_cycle": (
        "A value, not a formula: the expected units short per order cycle, E[(lead-time "
        "demand - reorder point)+], from the item's demand model (the loss function)."
    ),
    "lead_time_demand_mean": (
        "A value: demand per period x lead time in periods (days / days per period)."
    ),
    "simulated_cycle_service": (
        "A value from the back-test: the share of simulated order cycles without a "
        "stock-out, each order counted as placed when the stock position reached the "
        "reorder point (as the cycle service column assumes). The band low and high "
        "columns give its 95 % confidence band from the simulation runs."
    ),
    "simulated_fill_rate": (
        "A value from the back-test: 1 - simulated units short per order cycle / units "
        "ordered, as the fill rate column defines it, with its 95 % band beside it."
    ),
    "simulated_target_reorder_point": (
        "A value from the back-test, for items whose simulated service is below target "
        "beyond the simulation's 95 % band, or short of what their model promises: the "
        "smallest reorder point (in whole units above the planned one) at which the same "
        "simulation, on the same demand draws, reaches the target."
    ),
    "lead_time_demand_sd": (
        "A value: square root of (lead time x demand sd squared + demand rate squared x "
        "lead-time sd squared), lead time in periods (Silver, Pyke & Peterson 1998)."
    ),
}

_REL, _ABS = 1e-9, 1e-12


def policy_columns(results: pd.DataFrame) -> list[Col]:
    """Our columns in our order, then any other contract key the results carry."""
    known = {c.key for c in POLICY_COLUMNS}
    cols = [c for c in POLICY_COLUMNS if c.key in results.columns or c.key in ("item", "status")]
    for key in contract.ALL_RESULT_KEYS:
        if key not in known and key in results.columns:
            kind = "demand" if pd.api.types.is_numeric_dtype(results[key]) else "text"
            cols.append(Col(key, key.replace("_", " ").capitalize(), kind))
    return cols


def formula_plan(
    ctx: Context, cols: list[Col]
) -> dict[str, tuple[np.ndarray, np.ndarray, np.ndarray]]:
    """Per formula column: (rows where a formula is written, the rebuilt values, rows
    whose formula is the periodic-review one of PERIODIC_FORMULAS).

    A row gets its formula when the item was planned, every input the formula names is a
    finite number in a visible column, and the rebuilt value equals the report's to 1e-9.
    A periodic-review row is tried with its own formula where PERIODIC_FORMULAS has one.
    """
    df = ctx.results
    present = {c.key for c in cols}
    planned = np.ones(len(df), dtype=bool)
    if "status" in df.columns:
        planned = (df["status"].astype(str) != contract.STATUS_SKIPPED).to_numpy()
    values = {sym: column(df, key) for sym, key in SYMBOLS.items()}
    periodic = (
        (df["review"].astype(str) == "periodic").to_numpy()
        if "review" in df.columns
        else np.zeros(len(df), dtype=bool)
    )

    def rebuild(
        key: str, needs: tuple[str, ...], fn: Callable[[Values], np.ndarray]
    ) -> tuple[np.ndarray, np.ndarray] | None:
        symbols = set(needs) | {"p"} if key == "annual_shortage_cost" else set(needs)
        if any(SYMBOLS[s] not in present for s in symbols):
            return None
        with np.errstate(all="ignore"):
            rebuilt = fn(values)
        reported = column(df, key)
        ok = planned & np.isfinite(reported) & np.isfinite(rebuilt)
        for s in needs:
            ok &= np.isfinite(values[s])
        with np.errstate(all="ignore"):
            close = np.abs(rebuilt - reported) <= np.maximum(_REL * np.abs(reported), _ABS)
        return ok & close, rebuilt

    out: dict[str, tuple[np.ndarray, np.ndarray, np.ndarray]] = {}
    for key, (_template, needs, fn, _words) in FORMULAS.items():
        if key not in present:
            continue
        plain = rebuild(key, needs, fn)
        alt = PERIODIC_FORMULAS.get(key)
        other = rebuild(key, alt[1], alt[2]) if alt is not None and periodic.any() else None
        if plain is None and other is None:
            continue
        n = len(df)
        live, rebuilt = plain if plain is not None else (np.zeros(n, bool), np.full(n, np.nan))
        use_alt = np.zeros(n, dtype=bool)
        if other is not None:
            use_alt = periodic & other[0]
            live = np.where(periodic, use_alt, live)
            rebuilt = np.where(use_alt, other[1], rebuilt)
        out[key] = (live, rebuilt, use_alt)
    return out


def write_policy(ctx: Context, ws: Worksheet) -> None:
    """One row per item read, skipped items included and greyed; costs as formulas."""
    df = ctx.results
    cols = policy_columns(df)
    n = len(df)
    head = ctx.header_props()
    ws.set_row(0, 62)
    for c, col in enumerate(cols):
        ctx.policy_cols[col.key] = c
    plan = formula_plan(ctx, cols)
    for c, col in enumerate(cols):
        props = dict(head)
        if col.key in plan:
            props["bg_color"] = FORMULA_HEADER_FILL
        ctx.w.text(ws, 0, c, col.title, **props)
        note = _header_note(col.key)
        if note:
            ws.write_comment(0, c, note, {"author": "xlpolicy", "x_scale": 2.2, "y_scale": 1.6})
    ctx.policy_row_of = {k: k + 1 for k in range(n)}

    cur_len = len(ctx.currency)
    line = {"bottom": 1, "bottom_color": LIGHT_RULE}
    # The cells go into one block, a column at a time (see bulk.py: xlsxwriter's per-cell
    # objects cost most of a run's time and memory at 100,000 items).
    block = CellBlock(1, n) if n else None
    widths: list[float] = []
    for c, col in enumerate(cols):
        if col.kind in ("text", "code"):
            props = {"num_format": "@", **line}
            data = texts(df, col.key)
            if block is not None:
                block.texts(
                    c, data, ctx.styles.get(**props), ctx.styles.get(**props, quote_prefix=True)
                )
            cap = 45 if col.key in ("description", "model_reason") else 30
            width = min(max(header_width(col.title), longest_line(data) + 2, 8), cap)
        else:
            props = {**ctx.num_props(col.kind), **line}
            fmt = ctx.styles.get(**props)
            live = plan.get(col.key)
            values = df[col.key] if col.key in df.columns else pd.Series(np.nan, index=df.index)
            if live is not None:  # rows where the formula could not be rebuilt
                reported = column(df, col.key)
                ctx.policy_fallbacks.extend(
                    (col.key, int(r) + 1) for r in np.flatnonzero(~live[0] & np.isfinite(reported))
                )
            if block is not None and live is not None and live[0].any():
                # The column's formula with its letters in place, once; each row only adds
                # its row number.
                refs = _refs(ctx)
                pattern: str | list[str] = "=" + FORMULAS[col.key][0].format(**refs)
                if live[2].any():  # periodic-review rows have their own formula
                    alt = "=" + PERIODIC_FORMULAS[col.key][0].format(**refs)
                    pattern = [
                        (alt if p else str(pattern)).replace(ROW, str(r + 2))
                        for r, p in enumerate(live[2])
                    ]
                block.formulas(c, pattern, live[0], reported, fmt, otherwise=reported)
            elif block is not None:
                block.numbers(c, values.tolist() if values.dtype == object else values, fmt)
            data_len = display_len(values, col.kind, cur_len)
            width = min(max(header_width(col.title), data_len + 2, 8), 20)
        if col.key == "description":
            width = min(width, 32)  # the first page stays one page wide
        widths.append(width)
    if block is not None:
        ws.add_block(block)

    last_col = len(cols) - 1
    n_front = sum(1 for col in cols if col.key in FIRST_READ)
    grouped = n_front < len(cols)
    if grouped:
        # the outline's button sits over the last first-read column, which holds the
        # collapsed state of the group after it
        ws.outline_settings(True, True, False, False)
    for c, (col, col_width) in enumerate(zip(cols, widths, strict=True)):
        if col.key not in FIRST_READ:
            ws.set_column(c, c, col_width, None, {"level": 1, "hidden": True})
        elif grouped and c == n_front - 1:
            ws.set_column(c, c, col_width, None, {"collapsed": True})
        else:
            ws.set_column(c, c, col_width)
    ws.freeze_panes(1, 1)
    ws.autofilter(0, 0, max(n, 1), last_col)
    # Codes such as 000123 are text on purpose: no "number stored as text" markers.
    ws.ignore_errors({"number_stored_as_text": f"A2:A{max(n, 1) + 1}"})
    if n:
        ctx.policy_rows = (1, n)
        status = xl_col_to_name(ctx.policy_cols["status"])
        ws.conditional_format(
            1,
            0,
            n,
            last_col,
            {
                "type": "formula",
                "criteria": f'=${status}2="{contract.STATUS_SKIPPED}"',
                "format": ctx.styles.get(bg_color=SKIPPED_FILL, font_color=MUTED),
            },
        )
        ws.conditional_format(
            1,
            0,
            n,
            last_col,
            {
                "type": "formula",
                "criteria": f'=${status}2="{contract.STATUS_WARNING}"',
                "format": ctx.styles.get(bg_color=WARNING_FILL),
            },
        )
    else:
        ctx.w.text(ws, 1, 0, "No items were read.", italic=True, font_color=MUTED)
    # The first-read columns print one page wide; the collapsed audit columns do not
    # print until opened (a reader who opens them prints at full size: set it then).
    ctx.print_setup(ws, ctx.names["policy"], 0, max(n, 1), last_col, fit_width=True)
    ws.repeat_columns(0)


def _refs(ctx: Context) -> dict[str, str]:
    """Each symbol's column letters followed by the row marker (a relative reference)."""
    return {
        sym: xl_col_to_name(c) + ROW
        for sym, key in SYMBOLS.items()
        if (c := ctx.policy_cols.get(key)) is not None
    }


def _header_note(key: str) -> str:
    if key in VALUE_NOTES:
        return VALUE_NOTES[key]
    if key in FORMULAS:
        alt = PERIODIC_FORMULAS.get(key)
        return (
            "A formula over this row's visible inputs: "
            + FORMULAS[key][3]
            + (f" (on a periodic-review row: {alt[3]})" if alt is not None else "")
            + ". The cached result is the tool's own number."
        )
    return ""
