"""The comparison sheet: the policy a shop uses today against the recommended one.

Only items whose Items row gives both today's order quantity and reorder point appear. For
each: today's and the recommended order quantity and reorder point, what each costs a year
(ordering + holding + shortage; the purchase cost is the same either way), the saving, and
the service each gives. Today's cost is a live formula over the inputs shown on the same
row; the recommended cost points at the item's total on the Policy sheet; the saving is
their difference. A one-line headline on top says what the change is worth.
"""

from __future__ import annotations

import numpy as np
from xlsxwriter.utility import xl_col_to_name
from xlsxwriter.worksheet import Worksheet

from .. import contract
from .bulk import ROW, CellBlock
from .sheetkit import (
    GOOD,
    INK,
    LIGHT_RULE,
    MUTED,
    RULE,
    Col,
    Context,
    abs_cell,
    column,
    display_len,
    header_width,
    longest_line,
    money_text,
    percent_text,
    texts,
)

COMPARE_COLUMNS: tuple[Col, ...] = (
    Col("item", "Item", "code"),
    Col("description", "Description", "text"),
    Col("abc_class", "ABC class", "text"),
    Col("current_order_qty", "Today: order quantity (units)", "units"),
    Col("current_reorder_point", "Today: reorder point (units)", "units"),
    Col("order_qty", "Recommended order quantity (units)", "units"),
    Col("reorder_point", "Recommended reorder point (units)", "units"),
    Col("current_annual_total_cost", "Today: annual cost", "money"),
    Col("annual_total_cost", "Recommended: annual cost", "money"),
    Col("annual_saving", "Saving a year", "money"),
    Col("current_cycle_service", "Today: cycle service", "percent"),
    Col("cycle_service", "Recommended: cycle service", "percent"),
    Col("current_fill_rate", "Today: fill rate", "percent"),
    Col("fill_rate", "Recommended: fill rate", "percent"),
    Col("annual_demand", "Annual demand (units)", "demand"),
    Col("order_cost", "Order cost (per order)", "money"),
    Col("holding_rate", "Holding rate (per year)", "percent"),
    Col("unit_cost", "Unit cost", "money"),
    Col("shortage_cost", "Shortage cost (per unit short)", "money"),
    Col("lead_time_demand_mean", "Lead-time demand, mean (units)", "demand"),
    Col("current_units_short_per_cycle", "Today: expected units short per order cycle", "demand"),
)

#: Today's annual cost, over this sheet's row: ordering + cycle holding + safety holding +
#: shortage, the same formulas as the Policy sheet's with today's Q and R.
CURRENT_COST = '{D}/{Q}*{S}+{i}*{c}*{Q}/2+{i}*{c}*({R}-{mu})+IF({p}="",0,{p}*{D}/{Q}*{n})'
_SYMBOLS = {
    "D": "annual_demand",
    "Q": "current_order_qty",
    "S": "order_cost",
    "i": "holding_rate",
    "c": "unit_cost",
    "R": "current_reorder_point",
    "mu": "lead_time_demand_mean",
    "p": "shortage_cost",
    "n": "current_units_short_per_cycle",
}
HEADER_ROW = 4
_REL, _ABS = 1e-9, 1e-12


def compared_rows(ctx: Context) -> np.ndarray:
    """Indices of the items compared: planned, with today's Q and R, biggest saving first."""
    df = ctx.results
    q, r = column(df, "current_order_qty"), column(df, "current_reorder_point")
    planned = np.ones(len(df), dtype=bool)
    if "status" in df.columns:
        planned = (df["status"].astype(str) != contract.STATUS_SKIPPED).to_numpy()
    idx = np.flatnonzero(np.isfinite(q) & np.isfinite(r) & planned)
    saving = column(df, "annual_saving")[idx]
    order = np.argsort(np.where(np.isfinite(saving), -saving, np.inf), kind="stable")
    return idx[order]


def current_cost(ctx: Context) -> np.ndarray:
    """Today's annual cost rebuilt from the inputs shown, per item (NaN where incomplete)."""
    v = {s: column(ctx.results, k) for s, k in _SYMBOLS.items()}
    with np.errstate(all="ignore"):
        short = np.where(np.isnan(v["p"]), 0.0, v["p"] * v["D"] / v["Q"] * v["n"])
        total = (
            v["D"] / v["Q"] * v["S"]
            + v["i"] * v["c"] * v["Q"] / 2
            + v["i"] * v["c"] * (v["R"] - v["mu"])
            + short
        )
    need = [v[s] for s in ("D", "Q", "S", "i", "c", "R", "mu")]
    ok = np.logical_and.reduce([np.isfinite(x) for x in need]) & np.isfinite(total)
    ok &= np.isnan(v["p"]) | np.isfinite(v["n"])
    return np.where(ok, total, np.nan)


def write_compare(ctx: Context, ws: Worksheet) -> None:
    """Today's policy against the recommended one, item by item, with a headline."""
    df = ctx.results
    cols = COMPARE_COLUMNS
    last_col = len(cols) - 1
    ws.write_string(
        0,
        0,
        "Today's policy against the recommended one",
        ctx.styles.get(bold=True, font_size=14, font_color=INK),
    )
    rows = compared_rows(ctx)
    if not len(rows):
        q_title = _item_title("current_order_qty", "Current order qty")
        r_title = _item_title("current_reorder_point", "Current reorder point")
        ws.write_string(
            1,
            0,
            (
                "Nothing to compare yet: no item gives today's order quantity and reorder point. "
                f"Fill in '{q_title}' and '{r_title}' in the Items sheet for the items you want "
                "compared and run again; this sheet will then show what the recommended policy "
                "saves or costs a year, item by item."
            ),
            ctx.styles.get(bold=True),
        )
        ws.set_column(0, 0, 12)
        ctx.print_setup(ws, ctx.names["compare"], -1, 1, 8)
        return

    head = ctx.header_props()
    ws.set_row(HEADER_ROW, 62)
    where = {c.key: k for k, c in enumerate(cols)}
    for c, col in enumerate(cols):
        ctx.w.text(ws, HEADER_ROW, c, col.title, **head)
    ws.write_comment(
        HEADER_ROW,
        where["current_annual_total_cost"],
        (
            "A formula over this row: annual demand / today's order quantity x order cost + "
            "holding rate x unit cost x (today's order quantity / 2 + today's reorder point - "
            "mean lead-time demand) + shortage cost x annual demand / today's order quantity x "
            "today's expected units short per order cycle."
        ),
        {"x_scale": 2.2, "y_scale": 1.6},
    )
    ws.write_comment(
        HEADER_ROW,
        where["annual_total_cost"],
        ("Points at the item's annual total cost on the Policy sheet."),
        {"x_scale": 1.6, "y_scale": 0.8},
    )
    ws.write_comment(
        HEADER_ROW,
        where["current_units_short_per_cycle"],
        (
            "A value from the item's demand model with today's reorder point, like the "
            "recommended policy's."
        ),
        {"x_scale": 1.8, "y_scale": 0.9},
    )

    widths = [max(header_width(c.title), 8) for c in cols]
    line = {"bottom": 1, "bottom_color": LIGHT_RULE}
    first = HEADER_ROW + 1
    # The rows go into one block, a column at a time (see bulk.py).
    block = CellBlock(first, len(rows))
    for c, col in enumerate(cols):
        if col.kind in ("text", "code"):
            props = {"num_format": "@", **line}
            # cleaned for the compared rows only (taken from the one column, not the table)
            data = texts(
                df[[col.key]].iloc[rows] if col.key in df.columns else df.iloc[rows, :0], col.key
            )
            block.texts(
                c, data, ctx.styles.get(**props), ctx.styles.get(**props, quote_prefix=True)
            )
            widths[c] = max(widths[c], min(longest_line(data), 40) + 2)
            continue
        fmt = ctx.styles.get(**ctx.num_props(col.kind), **line)
        values = column(df, col.key)[rows]
        formula: str | list[str]
        if col.key == "current_annual_total_cost":
            values, live, formula = _current_cells(ctx, rows, where)
        elif col.key == "annual_total_cost":
            live, formula = _recommended_cells(ctx, rows, values)
        elif col.key == "annual_saving":
            values, live, formula = _saving_cells(ctx, rows, where)
        else:
            block.numbers(c, values, fmt)
            live = None
        if live is not None:
            block.formulas(c, formula, live, values, fmt, otherwise=values)
        widths[c] = max(widths[c], display_len(values, col.kind, len(ctx.currency)) + 2)
    ws.add_block(block)
    sums = {
        key: float(np.nansum(column(df, k)[rows]))
        for key, k in (
            ("cur", "current_annual_total_cost"),
            ("rec", "annual_total_cost"),
            ("sav", "annual_saving"),
        )
    }
    last = first + len(rows) - 1
    total_row = last + 1
    _total_row(ctx, ws, total_row, first, last, where, sums, rows)
    _headline(ctx, ws, rows, sums)

    for c, width in enumerate(widths):
        ws.set_column(c, c, min(width, 40 if c == 1 else 18))
    ws.freeze_panes(HEADER_ROW + 1, 1)
    ws.autofilter(HEADER_ROW, 0, last, last_col)
    ws.ignore_errors({"number_stored_as_text": f"A{first + 1}:A{last + 1}"})
    # Print what the owner reads (up to the fill rates); the inputs to the right are there
    # for the formulas and stay on screen.
    ctx.print_setup(ws, ctx.names["compare"], HEADER_ROW, total_row, where["fill_rate"])


def _item_title(key: str, default: str) -> str:
    col = contract.ITEM_COLUMN_BY_KEY.get(key)
    return col.title if col is not None else default


def _current_cells(
    ctx: Context, rows: np.ndarray, where: dict[str, int]
) -> tuple[np.ndarray, np.ndarray, str]:
    """Today's annual cost: a formula over this row where it rebuilds the report's number."""
    reported = column(ctx.results, "current_annual_total_cost")[rows]
    rebuilt = current_cost(ctx)[rows]
    with np.errstate(invalid="ignore"):
        live = (
            np.isfinite(reported)
            & np.isfinite(rebuilt)
            & (np.abs(rebuilt - reported) <= np.maximum(_REL * np.abs(reported), _ABS))
        )
    refs = {s: xl_col_to_name(where[k]) + ROW for s, k in _SYMBOLS.items()}
    return reported, live, "=" + CURRENT_COST.format(**refs)


def _recommended_cells(
    ctx: Context, rows: np.ndarray, values: np.ndarray
) -> tuple[np.ndarray, list[str]]:
    """The recommended cost: a reference to the item's total on the Policy sheet."""
    pc = ctx.policy_cols.get("annual_total_cost")
    prs = [ctx.policy_row_of.get(int(i)) for i in rows]
    live = np.isfinite(values) & np.array([pr is not None for pr in prs], dtype=bool)
    if pc is None:
        return np.zeros(len(rows), dtype=bool), [""] * len(rows)
    head = abs_cell(ctx.names["policy"], 0, pc)[:-1]  # ...!$X$ without the row number
    return live, [f"={head}{pr + 1}" if pr is not None else "" for pr in prs]


def _saving_cells(
    ctx: Context, rows: np.ndarray, where: dict[str, int]
) -> tuple[np.ndarray, np.ndarray, str]:
    """The saving: today's cost less the recommended one, as a formula where it agrees."""
    df = ctx.results
    cur = column(df, "current_annual_total_cost")[rows]
    rec = column(df, "annual_total_cost")[rows]
    saving = column(df, "annual_saving")[rows]
    diff = cur - rec
    # The report has no saving yet: it is today's cost less the plan's.
    saving = np.where(~np.isfinite(saving) & np.isfinite(diff), diff, saving)
    with np.errstate(invalid="ignore"):
        live = (
            np.isfinite(saving)
            & np.isfinite(diff)
            & (
                np.abs(diff - saving)
                <= np.maximum(_REL * np.maximum(np.abs(cur), np.abs(rec)), _ABS)
            )
        )
    a = xl_col_to_name(where["current_annual_total_cost"]) + ROW
    b = xl_col_to_name(where["annual_total_cost"]) + ROW
    return saving, live, f"={a}-{b}"


def _total_row(
    ctx: Context,
    ws: Worksheet,
    row: int,
    first: int,
    last: int,
    where: dict[str, int],
    sums: dict[str, float],
    rows: np.ndarray,
) -> None:
    top = {"bold": True, "top": 1, "top_color": RULE}
    ws.write_string(
        row, 0, f"Total, {len(rows)} item{'s' if len(rows) != 1 else ''}", ctx.styles.get(**top)
    )
    for c in range(1, len(COMPARE_COLUMNS)):
        ws.write_blank(row, c, None, ctx.styles.get(**top))
    for key, col_key in (
        ("cur", "current_annual_total_cost"),
        ("rec", "annual_total_cost"),
        ("sav", "annual_saving"),
    ):
        c = where[col_key]
        letter = xl_col_to_name(c)
        ctx.w.formula(
            ws,
            row,
            c,
            f"=SUM({letter}{first + 1}:{letter}{last + 1})",
            sums[key],
            num_format=ctx.money,
            **top,
        )
        ctx.compare_totals[key] = (row, c, sums[key])
    # Demand-weighted fill rates: the share of all these items' demand met from the shelf.
    for col_key in ("current_fill_rate", "fill_rate"):
        value = weighted_fill(ctx, rows, col_key)
        if value is not None:
            ctx.w.number(ws, row, where[col_key], value, num_format="0.00%", italic=True, **top)
    ws.write_comment(
        row,
        where["fill_rate"],
        (
            "Fill rates in this row are weighted by annual demand: the share of all these "
            "items' demand met straight from the shelf."
        ),
        {"x_scale": 1.8, "y_scale": 0.9},
    )


def weighted_fill(ctx: Context, rows: np.ndarray, key: str) -> float | None:
    """Demand-weighted fill rate over the compared items, or None."""
    demand = column(ctx.results, "annual_demand")[rows]
    rate = column(ctx.results, key)[rows]
    ok = np.isfinite(rate) & np.isfinite(demand)
    if not ok.any() or demand[ok].sum() <= 0:
        return None
    return float(np.sum(rate[ok] * demand[ok]) / demand[ok].sum())


def headline(ctx: Context, rows: np.ndarray, sums: dict[str, float]) -> str:
    """One plain sentence: what changing to the recommended policy is worth a year."""
    n = len(rows)
    items = f"{n} item{'s' if n != 1 else ''}"
    saving = sums["sav"]
    before = weighted_fill(ctx, rows, "current_fill_rate")
    after = weighted_fill(ctx, rows, "fill_rate")
    service = ""
    if before is not None and after is not None:
        verb = "raises" if after > before else "lowers" if after < before else "keeps"
        service = (
            f" and {verb} the share of demand met from the shelf from "
            f"{percent_text(before)} to {percent_text(after)}"
            if verb != "keeps"
            else f" and keeps the share of demand met from the shelf at {percent_text(after)}"
        )
    if saving >= 0.005:
        share = (
            f" ({saving / sums['cur'] * 100:.0f}% of what they cost today)"
            if sums["cur"] > 0
            else ""
        )
        return (
            f"Changing to the recommended policy for {items} saves about "
            f"{money_text(saving, ctx.currency)} a year{share}{service}."
        )
    if saving <= -0.005:
        joint = service.replace(" and ", " but ", 1) if "raises" in service else service
        return (
            f"Changing to the recommended policy for {items} costs about "
            f"{money_text(-saving, ctx.currency)} more a year{joint}."
        )
    return f"Changing to the recommended policy for {items} costs the same a year{service}."


def _headline(ctx: Context, ws: Worksheet, rows: np.ndarray, sums: dict[str, float]) -> None:
    text = headline(ctx, rows, sums)
    colour = GOOD if sums["sav"] >= 0 else INK
    ctx.compare_headline = text
    fmt = ctx.styles.get(bold=True, font_size=12, font_color=colour)
    ws.write_string(1, 0, text, fmt)
    ws.write_string(
        2,
        0,
        (
            "Annual cost here = ordering + holding + shortage; the purchase cost is the same under "
            "both policies and is left out. Today's figures are costed with the same demand model "
            "and the same formulas as the recommended ones. Biggest saving first."
        ),
        ctx.styles.get(italic=True, font_color=MUTED),
    )
