"""The Reorder now sheet: the purchaser's list, grouped by supplier, ready to print.

It holds exactly the report's reorder list (items whose inventory position is at or below
the reorder point), one band per supplier with a subtotal, a grand total, and lines to sign
and date the order. Printed landscape, one page wide, with the header rows on every page.
"""

from __future__ import annotations

from collections.abc import Sequence

import pandas as pd
from xlsxwriter.utility import xl_col_to_name, xl_rowcol_to_cell
from xlsxwriter.worksheet import Worksheet

from ..contract import CAUTION
from .sheetkit import (
    BAND_FILL,
    INK,
    LIGHT_RULE,
    MAX_CELL_TEXT,
    MUTED,
    RULE,
    Col,
    Context,
    clean_text,
    display_len,
    finite,
    header_width,
    same,
)

REORDER_COLUMNS: tuple[Col, ...] = (
    Col("supplier", "Supplier", "text"),
    Col("item", "Item", "code"),
    Col("description", "Description", "text"),
    Col("on_hand", "On hand (units)", "units"),
    Col("on_order", "On order (units)", "units"),
    Col("backordered", "Backordered (units)", "units"),
    Col("inventory_position", "Inventory position (units)", "units"),
    Col("reorder_point", "Reorder point (units)", "units"),
    Col("order_qty", "Order quantity (units)", "units"),
    Col("order_now_qty", "Quantity to order now (units)", "units"),
    Col("unit_cost", "Unit cost", "money"),
    Col("order_now_value", "Order value", "money"),
    Col("abc_class", "ABC class", "text"),
    Col("order_up_to_level", "Periodic review: order up to (units)", "units"),
)

HEADER_ROW = 4
NO_SUPPLIER = "(no supplier given)"


def write_reorder(ctx: Context, ws: Worksheet) -> None:
    """The purchaser's list: items to order now, grouped by supplier, ready to print."""
    cols = REORDER_COLUMNS
    up_to = (
        pd.to_numeric(ctx.reorder["order_up_to_level"], errors="coerce")
        if "order_up_to_level" in ctx.reorder.columns
        else pd.Series([], dtype=float)
    )
    if not up_to.notna().any():  # no item on the list is on periodic review
        cols = tuple(c for c in cols if c.key != "order_up_to_level")
    last_col = len(cols) - 1
    run = ctx.run_text()
    source = clean_text(ctx.report.source_name) or ""
    ws.write_string(0, 0, f"Reorder now, run {run}", ctx.styles.get(bold=True, font_size=14))
    ctx.w.text(ws, 1, 0, f"From {source}" if source else "", font_color=MUTED)
    ws.write_string(
        2,
        0,
        "Items whose inventory position (on hand + on order - backordered) is at or below "
        "the reorder point. Order the quantity shown; it brings the position back above the "
        "reorder point.",
        ctx.styles.get(italic=True, font_color=MUTED),
    )
    ctx.w.text(ws, 3, 0, CAUTION)  # on the printed page, in normal type
    head = ctx.header_props()
    ws.set_row(HEADER_ROW, 48)
    for c, col in enumerate(cols):
        ctx.w.text(ws, HEADER_ROW, c, col.title, **head)

    widths = [max(header_width(col.title), 8) for col in cols]
    df = ctx.reorder
    row = HEADER_ROW + 1
    if df.empty:
        ws.write_string(row, 0, _nothing_to_order(ctx), ctx.styles.get(bold=True))
        last_row = row
    else:
        last_row = _groups(ctx, ws, df, cols, row, widths)
        last_row = _sign_off(ctx, ws, last_row + 2, last_col)
    widths[2] = min(widths[2], 40)
    for c, width in enumerate(widths):
        ws.set_column(c, c, min(width, 40))

    ws.freeze_panes(HEADER_ROW + 1, 0)
    ws.ignore_errors({"number_stored_as_text": f"B{HEADER_ROW + 2}:B{last_row + 1}"})
    ws.hide_gridlines(2)
    ctx.print_setup(ws, "Reorder now", HEADER_ROW, last_row, last_col)


def _nothing_to_order(ctx: Context) -> str:
    """Why the reorder list is empty, in one plain sentence."""
    res = ctx.results
    has_stock = False
    if "inventory_position" in res.columns:
        pos = pd.to_numeric(res["inventory_position"], errors="coerce")
        has_stock = bool(pos.notna().any())
    if not has_stock:
        return (
            "Nothing to list: no stock figures were given (On hand, On order, "
            "Backordered in Items), so the tool cannot tell what to order now."
        )
    return "Nothing to order now: every planned item is above its reorder point."


def _groups(
    ctx: Context, ws: Worksheet, df: pd.DataFrame, cols: Sequence[Col], row: int, widths: list[int]
) -> int:
    """Supplier band, its items, its subtotal; then a grand total. Returns the last row."""
    keys = [c.key for c in cols]
    value_col = keys.index("order_now_value")
    qty_col, cost_col, item_col = (keys.index(k) for k in ("order_now_qty", "unit_cost", "item"))
    if "supplier" in df.columns:
        suppliers = df["supplier"].map(clean_text)
    else:
        suppliers = pd.Series([None] * len(df))
    suppliers = suppliers.fillna("").astype(str).str.strip()
    suppliers = suppliers.where(suppliers != "", NO_SUPPLIER)
    line = {"bottom": 1, "bottom_color": LIGHT_RULE}
    first_data = row
    grand = 0.0
    for supplier, group in df.groupby(suppliers.to_numpy(), sort=False):
        band = {"bold": True, "bg_color": BAND_FILL}
        for c in range(len(cols)):
            ws.write_blank(row, c, None, ctx.styles.get(**band))
        ctx.w.text(ws, row, 0, supplier, **band)
        row += 1
        first = row
        sub = 0.0
        for rec in group.to_dict("records"):
            for c, col in enumerate(cols):
                v = rec.get(col.key)
                if col.key == "abc_class":  # a letter, centred clear of the money beside it
                    n = ctx.w.text(ws, row, c, v, num_format="@", align="center", **line)
                    widths[c] = max(widths[c], n + 2)
                elif col.kind in ("text", "code"):
                    n = ctx.w.text(ws, row, c, v, num_format="@", **line)
                    widths[c] = max(widths[c], n + 2)
                elif c == value_col:
                    sub += _order_value(ctx, ws, row, rec, (qty_col, cost_col, c), line)
                else:
                    ctx.w.number(ws, row, c, v, **ctx.num_props(col.kind), **line)
                    widths[c] = max(widths[c], display_len([v], col.kind, len(ctx.currency)) + 2)
            row += 1
        letter = xl_col_to_name(value_col)
        ws.write_string(
            row,
            value_col - 1,
            f"Total for {clean_text(supplier) or ''}"[:MAX_CELL_TEXT],
            ctx.styles.get(bold=True, align="right"),
        )
        ctx.w.formula(
            ws,
            row,
            value_col,
            f"=SUM({letter}{first + 1}:{letter}{row})",
            sub,
            bold=True,
            num_format=ctx.money,
            top=1,
            top_color=RULE,
        )
        grand += sub
        row += 2  # a blank line between suppliers
    last_data = row - 2
    item_letter = xl_col_to_name(item_col)
    letter = xl_col_to_name(value_col)
    ws.write_string(
        row,
        value_col - 1,
        "Total to order now",
        ctx.styles.get(bold=True, align="right", font_size=12),
    )
    ctx.w.formula(
        ws,
        row,
        value_col,
        f'=SUMIF({item_letter}{first_data + 1}:{item_letter}{last_data + 1},"<>",'
        f"{letter}{first_data + 1}:{letter}{last_data + 1})",
        grand,
        bold=True,
        font_size=12,
        num_format=ctx.money,
        top=6,
        top_color=INK,
    )
    ctx.reorder_total_cell = (row, value_col)
    ctx.reorder_total_value = grand
    money_len = display_len([grand], "money", len(ctx.currency)) + 2
    widths[value_col] = max(widths[value_col], money_len)
    return row


def _order_value(
    ctx: Context, ws: Worksheet, row: int, rec: dict, cols: tuple[int, int, int], line: dict
) -> float:
    """Write one line's order value: a live product when it matches. Returns the value."""
    qty_col, cost_col, col = cols
    value = finite(rec.get("order_now_value"))
    qty, cost = finite(rec.get("order_now_qty")), finite(rec.get("unit_cost"))
    props = {"num_format": ctx.money, **line}
    if value is not None and qty is not None and cost is not None and same(qty * cost, value):
        formula = f"={xl_rowcol_to_cell(row, qty_col)}*{xl_rowcol_to_cell(row, cost_col)}"
        ctx.w.formula(ws, row, col, formula, value, **props)
    else:
        ctx.w.number(ws, row, col, value, **props)
    return value or 0.0


def _sign_off(ctx: Context, ws: Worksheet, row: int, last_col: int) -> int:
    """Lines to write who approved the order, when, and the order numbers given."""
    label = ctx.styles.get(bold=True, align="right")
    blank = ctx.styles.get(bottom=1, bottom_color=INK)
    for text, first, last in (("Approved by", 1, 3), ("Signature", 5, 6), ("Date", 8, 9)):
        ws.write_string(row, first - 1, text, label)
        ws.merge_range(row, first, row, last, "", blank)
    row += 2
    ws.write_string(row, 0, "Order numbers", label)
    ws.merge_range(row, 1, row, last_col, "", blank)
    ws.set_row(row - 2, 24)
    ws.set_row(row, 24)
    return row
