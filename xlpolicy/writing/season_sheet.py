"""The Year ahead sheet: when to raise and lower each seasonal or trending item's policy.

Written only when some item is planned with its season or trend (xlpolicy.seasons). One
block of three rows per item (reorder point, order quantity, safety stock) and one column
per month of the coming year, starting with the plan date's month, so an owner can see at a
glance, and print on one page width, when each figure goes up and down. The figures are
values computed by the planner (core.policy at each month's start), not formulas.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from xlsxwriter.worksheet import Worksheet

from .sheetkit import LIGHT_RULE, MUTED, Context, clean_text, finite

HEADER_ROW = 4
_FIGURES = (
    ("reorder_point", "Reorder point"),
    ("order_qty", "Order quantity"),
    ("safety_stock", "Safety stock"),
)


def write_seasons(ctx: Context, ws: Worksheet) -> None:
    """The title, a note on what the figures are, then the item blocks."""
    plan = ctx.report.season_plan
    if plan is None or plan.empty:
        return
    months = list(dict.fromkeys(plan["month"].tolist()))
    n_months = len(months)
    last_col = 2 + n_months
    ws.set_column(0, 0, 12)
    ws.set_column(1, 1, 26)
    ws.set_column(2, 2, 15)
    ws.set_column(3, last_col, 9)
    ctx.w.text(ws, 0, 0, "Year ahead: the policy month by month", bold=True, font_size=15)
    as_of = (ctx.report.settings or {}).get("plan_as_of") or ctx.report.run_date
    note = (
        "For each item planned with its season or trend: the reorder point, order quantity "
        "and safety stock to use from the start of each month (the first column from "
        f"{as_of}), from the forecast of its demand over the lead time then. Change the "
        "figures in your system when a month starts; run xlpolicy again as sales come in."
    )
    ctx.paragraph(ws, 1, note, last_col + 1, 150, font_color=MUTED)
    caution = (
        "A forecast from past sales: check it against what you know is coming (promotions, "
        "new ranges, a supplier's holidays). Where stock is medicine, food or anything "
        "safety-critical, these numbers support, and do not replace, the judgement of "
        "licensed staff and your local rules."
    )
    ctx.paragraph(ws, 2, caution, last_col + 1, 150, font_color=MUTED, italic=True)
    head = ctx.header_props()
    for c, title in enumerate(("Item", "Description", "Figure", *months)):
        ctx.w.text(ws, HEADER_ROW, c, title, **head)
    results = ctx.results
    row = HEADER_ROW + 1
    rule = {"top": 1, "top_color": LIGHT_RULE}
    grouped = plan.groupby("row", sort=False)
    for res_row, block in grouped:
        values = {key: block[key].to_numpy(float) for key, _ in _FIGURES}
        desc = results["description"].iat[int(res_row)] if "description" in results else None
        label = results["forecast"].iat[int(res_row)] if "forecast" in results else ""
        for k, (key, title) in enumerate(_FIGURES):
            props = rule if k == 0 else {}
            if k == 0:
                ctx.w.text(ws, row, 0, clean_text(block["item"].iat[0]) or "", bold=True, **props)
                ctx.w.text(ws, row, 1, clean_text(desc) or "", **props)
            elif k == 1:
                ctx.w.text(ws, row, 0, "", **props)
                ctx.w.text(ws, row, 1, clean_text(label) or "", font_color=MUTED)
            else:
                ctx.w.text(ws, row, 0, "")
                ctx.w.text(ws, row, 1, "")
            ctx.w.text(ws, row, 2, title, font_color=MUTED, **props)
            vals = values[key]
            top = np.nanmax(vals) if np.isfinite(vals).any() else np.nan
            for j in range(n_months):
                v = finite(vals[j]) if j < len(vals) else None
                if v is None:
                    ws.write_blank(row, 3 + j, None, ctx.styles.get(**props))
                    continue
                bold = key == "reorder_point" and v == top
                ctx.w.number(ws, row, 3 + j, v, num_format="#,##0", bold=bold, **props)
            row += 1
    ws.freeze_panes(HEADER_ROW + 1, 3)
    ctx.print_setup(ws, "Year ahead", HEADER_ROW, row - 1, last_col)


def season_rows(plan: pd.DataFrame | None) -> int:
    """Rows the sheet takes (for the size check): the title block and three per item."""
    if plan is None or plan.empty:
        return 0
    return HEADER_ROW + 1 + 3 * int(plan["row"].nunique())
