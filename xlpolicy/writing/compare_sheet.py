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
from xlsxwriter.utility import xl_col_to_name, xl_rowcol_to_cell
from xlsxwriter.worksheet import Worksheet

from .. import contract
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
    Col("current_units_short_per_cycle", "Today: expected units short per order cycle",
        "demand"),
)

#: Today's annual cost, over this sheet's row: ordering + cycle holding + safety holding +
#: shortage, the same formulas as the Policy sheet's with today's Q and R.
CURRENT_COST = ("{D}/{Q}*{S}+{i}*{c}*{Q}/2+{i}*{c}*({R}-{mu})"
                '+IF({p}="",0,{p}*{D}/{Q}*{n})')
_SYMBOLS = {"D": "annual_demand", "Q": "current_order_qty", "S": "order_cost",
            "i": "holding_rate", "c": "unit_cost", "R": "current_reorder_point",
            "mu": "lead_time_demand_mean", "p": "shortage_cost",
            "n": "current_units_short_per_cycle"}
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
        total = (v["D"] / v["Q"] * v["S"] + v["i"] * v["c"] * v["Q"] / 2
                 + v["i"] * v["c"] * (v["R"] - v["mu"]) + short)
    need = [v[s] for s in ("D", "Q", "S", "i", "c", "R", "mu")]
    ok = np.logical_and.reduce([np.isfinite(x) for x in need]) & np.isfinite(total)
    ok &= np.isnan(v["p"]) | np.isfinite(v["n"])
    return np.where(ok, total, np.nan)


def write_compare(ctx: Context, ws: Worksheet) -> None:
    """Today's policy against the recommended one, item by item, with a headline."""
    df = ctx.results
    cols = COMPARE_COLUMNS
    last_col = len(cols) - 1
    ws.write_string(0, 0, "Today's policy against the recommended one",
                    ctx.styles.get(bold=True, font_size=14, font_color=INK))
    rows = compared_rows(ctx)
    if not len(rows):
        q_title = _item_title("current_order_qty", "Current order qty")
        r_title = _item_title("current_reorder_point", "Current reorder point")
        ws.write_string(1, 0, (
            "Nothing to compare yet: no item gives today's order quantity and reorder point. "
            f"Fill in '{q_title}' and '{r_title}' in the Items sheet for the items you want "
            "compared and run again; this sheet will then show what the recommended policy "
            "saves or costs a year, item by item."), ctx.styles.get(bold=True))
        ws.set_column(0, 0, 12)
        ctx.print_setup(ws, ctx.names["compare"], -1, 1, 8)
        return

    head = ctx.header_props()
    ws.set_row(HEADER_ROW, 62)
    where = {c.key: k for k, c in enumerate(cols)}
    for c, col in enumerate(cols):
        ctx.w.text(ws, HEADER_ROW, c, col.title, **head)
    ws.write_comment(HEADER_ROW, where["current_annual_total_cost"], (
        "A formula over this row: annual demand / today's order quantity x order cost + "
        "holding rate x unit cost x (today's order quantity / 2 + today's reorder point - "
        "mean lead-time demand) + shortage cost x annual demand / today's order quantity x "
        "today's expected units short per order cycle."), {"x_scale": 2.2, "y_scale": 1.6})
    ws.write_comment(HEADER_ROW, where["annual_total_cost"], (
        "Points at the item's annual total cost on the Policy sheet."),
        {"x_scale": 1.6, "y_scale": 0.8})
    ws.write_comment(HEADER_ROW, where["current_units_short_per_cycle"], (
        "A value from the item's demand model with today's reorder point, like the "
        "recommended policy's."), {"x_scale": 1.8, "y_scale": 0.9})

    widths = [max(header_width(c.title), 8) for c in cols]
    rebuilt = current_cost(ctx)
    reported_cur = column(df, "current_annual_total_cost")
    rec = column(df, "annual_total_cost")
    saving = column(df, "annual_saving")
    line = {"bottom": 1, "bottom_color": LIGHT_RULE}
    first = HEADER_ROW + 1
    sums = {"cur": 0.0, "rec": 0.0, "sav": 0.0}
    # Each column once as a whole (a row-by-row lookup in the frame costs a copy per cell).
    text_of = {col.key: texts(df, col.key) for col in cols if col.kind in ("text", "code")}
    num_of = {col.key: column(df, col.key) for col in cols
              if col.kind not in ("text", "code")}
    col_props = {col.key: {**ctx.num_props(col.kind), **line} for col in cols
                 if col.kind not in ("text", "code")}
    col_fmt = {key: ctx.styles.get(**props) for key, props in col_props.items()}
    for k, i in enumerate(rows):
        row = first + k
        for c, col in enumerate(cols):
            if col.kind in ("text", "code"):
                value = text_of[col.key][i]
                n = ctx.w.text(ws, row, c, value, num_format="@", **line)
                widths[c] = max(widths[c], min(n, 40) + 2)
                continue
            props = col_props[col.key]
            value = num_of[col.key][i]
            if col.key == "current_annual_total_cost":
                _current_cell(ctx, ws, row, where, float(reported_cur[i]), float(rebuilt[i]),
                              props)
            elif col.key == "annual_total_cost":
                _recommended_cell(ctx, ws, row, c, int(i), float(rec[i]), props)
            elif col.key == "annual_saving":
                _saving_cell(ctx, ws, row, where, float(reported_cur[i]), float(rec[i]),
                             float(saving[i]), props)
            elif np.isfinite(value):  # what ctx.w.number does, with the column's format
                ws.write_number(row, c, float(value), col_fmt[col.key])
            else:
                ws.write_blank(row, c, None, col_fmt[col.key])
            widths[c] = max(widths[c], display_len([value], col.kind, len(ctx.currency)) + 2)
        for key, arr in (("cur", reported_cur), ("rec", rec), ("sav", saving)):
            if np.isfinite(arr[i]):
                sums[key] += float(arr[i])
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


def _current_cell(ctx: Context, ws: Worksheet, row: int, where: dict[str, int],
                  reported: float, rebuilt: float, props: dict) -> None:
    c = where["current_annual_total_cost"]
    if np.isfinite(reported) and np.isfinite(rebuilt) and abs(rebuilt - reported) <= max(
            _REL * abs(reported), _ABS):
        refs = {s: xl_rowcol_to_cell(row, where[k]) for s, k in _SYMBOLS.items()}
        ctx.w.formula(ws, row, c, "=" + CURRENT_COST.format(**refs), reported, **props)
    else:
        ctx.w.number(ws, row, c, reported, **props)


def _recommended_cell(ctx: Context, ws: Worksheet, row: int, c: int, i: int, value: float,
                      props: dict) -> None:
    pc = ctx.policy_cols.get("annual_total_cost")
    pr = ctx.policy_row_of.get(i)
    if np.isfinite(value) and pc is not None and pr is not None:
        ctx.w.formula(ws, row, c, "=" + abs_cell(ctx.names["policy"], pr, pc), value, **props)
    else:
        ctx.w.number(ws, row, c, value, **props)


def _saving_cell(ctx: Context, ws: Worksheet, row: int, where: dict[str, int], cur: float,
                 rec: float, saving: float, props: dict) -> None:
    c = where["annual_saving"]
    diff = cur - rec
    if not np.isfinite(saving) and np.isfinite(diff):
        saving = diff  # the report has no saving yet: it is today's cost less the plan's
    if np.isfinite(saving) and np.isfinite(diff) and abs(diff - saving) <= max(
            _REL * max(abs(cur), abs(rec)), _ABS):
        a = xl_rowcol_to_cell(row, where["current_annual_total_cost"])
        b = xl_rowcol_to_cell(row, where["annual_total_cost"])
        ctx.w.formula(ws, row, c, f"={a}-{b}", saving, **props)
    else:
        ctx.w.number(ws, row, c, saving, **props)


def _total_row(ctx: Context, ws: Worksheet, row: int, first: int, last: int,
               where: dict[str, int], sums: dict[str, float], rows: np.ndarray) -> None:
    top = {"bold": True, "top": 1, "top_color": RULE}
    ws.write_string(row, 0, f"Total, {len(rows)} item{'s' if len(rows) != 1 else ''}",
                    ctx.styles.get(**top))
    for c in range(1, len(COMPARE_COLUMNS)):
        ws.write_blank(row, c, None, ctx.styles.get(**top))
    for key, col_key in (("cur", "current_annual_total_cost"), ("rec", "annual_total_cost"),
                         ("sav", "annual_saving")):
        c = where[col_key]
        letter = xl_col_to_name(c)
        ctx.w.formula(ws, row, c, f"=SUM({letter}{first + 1}:{letter}{last + 1})", sums[key],
                      num_format=ctx.money, **top)
        ctx.compare_totals[key] = (row, c, sums[key])
    # Demand-weighted fill rates: the share of all these items' demand met from the shelf.
    for col_key in ("current_fill_rate", "fill_rate"):
        value = weighted_fill(ctx, rows, col_key)
        if value is not None:
            ctx.w.number(ws, row, where[col_key], value, num_format="0.00%", italic=True,
                         **top)
    ws.write_comment(row, where["fill_rate"], (
        "Fill rates in this row are weighted by annual demand: the share of all these "
        "items' demand met straight from the shelf."), {"x_scale": 1.8, "y_scale": 0.9})


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
        service = (f" and {verb} the share of demand met from the shelf from "
                   f"{percent_text(before)} to {percent_text(after)}" if verb != "keeps"
                   else f" and keeps the share of demand met from the shelf at "
                   f"{percent_text(after)}")
    if saving >= 0.005:
        share = (f" ({saving / sums['cur'] * 100:.0f}% of what they cost today)"
                 if sums["cur"] > 0 else "")
        return (f"Changing to the recommended policy for {items} saves about "
                f"{money_text(saving, ctx.currency)} a year{share}{service}.")
    if saving <= -0.005:
        joint = service.replace(" and ", " but ", 1) if "raises" in service else service
        return (f"Changing to the recommended policy for {items} costs about "
                f"{money_text(-saving, ctx.currency)} more a year{joint}.")
    return f"Changing to the recommended policy for {items} costs the same a year{service}."


def _headline(ctx: Context, ws: Worksheet, rows: np.ndarray, sums: dict[str, float]) -> None:
    text = headline(ctx, rows, sums)
    colour = GOOD if sums["sav"] >= 0 else INK
    ctx.compare_headline = text
    fmt = ctx.styles.get(bold=True, font_size=12, font_color=colour)
    ws.write_string(1, 0, text, fmt)
    ws.write_string(2, 0, (
        "Annual cost here = ordering + holding + shortage; the purchase cost is the same under "
        "both policies and is left out. Today's figures are costed with the same demand model "
        "and the same formulas as the recommended ones. Biggest saving first."),
        ctx.styles.get(italic=True, font_color=MUTED))
