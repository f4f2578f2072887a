"""Summary blocks for the decisions across all items: the cap and the exchange curve.

Written by the Summary sheet (summary_sheet.write_summary) below its other tables. The
numbers are core.portfolio's (Report.portfolio); this module only lays them out and says
in plain words what they mean.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd
from xlsxwriter.worksheet import Worksheet

from ..core.portfolio import BUDGET, CapResult
from .sheetkit import GOOD, INK, LIGHT_RULE, MUTED, SERIES_COLOURS, Context, money_text

_WIDTH = 9
_CHARS = 34 + 8 * 15
_CHART_ROWS = 18


def cap_headline(ctx: Context) -> str | None:
    """One sentence for the Summary's headlines when a cap was set."""
    cap = (ctx.report.portfolio or {}).get("cap")
    if not isinstance(cap, CapResult):
        return None
    what = "stock budget" if cap.kind == BUDGET else "cap on orders a year"
    if not cap.binding:
        return f"The {what} is not reached, so the policy is as without it."
    if not cap.feasible:
        return (
            f"The {what} cannot be met with these service targets and minimum orders; "
            "see 'Limits across all items' below."
        )
    if cap.cost_of_cap < 0:
        return (
            f"The {what} is met, and the capped policy even costs about "
            f"{money_text(-cap.cost_of_cap, ctx.currency)} a year less (see 'Limits "
            "across all items' below)."
        )
    return (
        f"The {what} is met; keeping to it costs about "
        f"{money_text(cap.cost_of_cap, ctx.currency)} a year more than without it."
    )


def cap_sentence(cap: CapResult, currency: Any) -> str:
    """What the Lagrange multiplier means, in plain words."""
    lam = cap.multiplier
    if not cap.binding:
        return "The cap is not reached: nothing was changed."
    if not cap.feasible:
        return (
            "Even the smallest orders the packs and minimum orders allow"
            + (", with the reorder points the service targets need," if cap.kind == BUDGET else "")
            + " do not meet the cap, so the policy that comes closest is "
            "used. Raise the cap, or lower the service targets."
        )
    cheaper = (
        " The capped policy costs less than the plan without the cap: under the "
        "fill-rate measure the order quantity is set by the EOQ and the reorder point "
        "then follows it, so a larger order that lets the reorder point fall can cost "
        "less in all."
        if cap.cost_of_cap < 0
        else ""
    )
    if cap.kind == BUDGET:
        return (
            f"Each extra {money_text(1.0, currency)} of stock budget would save about "
            f"{money_text(lam, currency)} a year (the Lagrange multiplier): keeping to "
            f"the budget works as if each {money_text(1.0, currency)} of stock held for a "
            f"year cost {money_text(lam, currency)} more than its holding rate says "
            f"(a holding rate {lam:.1%} higher), so order quantities are smaller and "
            "orders more frequent." + cheaper
        )
    return (
        f"Each extra order a year the cap allowed would save about "
        f"{money_text(lam, currency)} a year (the Lagrange multiplier): keeping to the cap "
        f"works as if every order cost {money_text(lam, currency)} more, so order "
        "quantities are larger and stock higher." + cheaper
    )


def write_portfolio(ctx: Context, ws: Worksheet, row: int) -> int:
    """The cap block (if a cap was set) and the exchange curve (if computed)."""
    port = ctx.report.portfolio or {}
    cap = port.get("cap")
    if isinstance(cap, CapResult):
        row = _cap_block(ctx, ws, row, cap) + 1
    curve = port.get("exchange_curve")
    if isinstance(curve, pd.DataFrame) and len(curve):
        row = _curve_block(ctx, ws, row, curve) + 1
    return row


def _cap_block(ctx: Context, ws: Worksheet, row: int, cap: CapResult) -> int:
    row = ctx.block_title(ws, row, "Limits across all items", _WIDTH)
    money = ctx.num_props("money")
    count = ctx.num_props("decimal1")
    usage_props = money if cap.kind == BUDGET else count
    head = ctx.header_props()
    what = (
        "Average stock value (the stock budget)"
        if cap.kind == BUDGET
        else "Orders a year, all items (the cap)"
    )
    for c, t in enumerate(("", "Without the cap", "With the cap", "Cap")):
        ctx.w.text(ws, row, c, t, **head)
    row += 1
    line = {"bottom": 1, "bottom_color": LIGHT_RULE}
    ctx.w.text(ws, row, 0, what, **line)
    ctx.w.number(ws, row, 1, cap.uncapped_usage, **usage_props, **line)
    ctx.w.number(ws, row, 2, cap.usage, **usage_props, **line)
    ctx.w.number(ws, row, 3, cap.cap, **usage_props, **line)
    row += 1
    ctx.w.text(ws, row, 0, "Annual total cost (ordering, holding, shortage)", **line)
    ctx.w.number(ws, row, 1, cap.uncapped_cost, **money, **line)
    ctx.w.number(ws, row, 2, cap.cost, **money, **line)
    ctx.w.text(ws, row, 3, "", **line)
    row += 1
    ctx.w.text(ws, row, 0, "Yearly cost of keeping to the cap", bold=True)
    ctx.w.number(ws, row, 2, cap.cost_of_cap, **money, bold=True)
    row += 1
    ctx.w.text(ws, row, 0, "Items whose policy the cap changed")
    ctx.w.number(ws, row, 2, float(np.sum(cap.changed)), num_format="#,##0")
    row += 1
    if cap.binding and cap.feasible:
        ctx.w.text(
            ws,
            row,
            0,
            "Lagrange multiplier"
            + (
                " (yearly cost per unit of money in stock)"
                if cap.kind == BUDGET
                else " (yearly cost per order)"
            ),
        )
        ctx.w.number(
            ws, row, 2, cap.multiplier, num_format="0.0000" if cap.kind == BUDGET else ctx.money
        )
        row += 1
    colour = GOOD if cap.feasible else INK
    row = ctx.paragraph(ws, row, cap_sentence(cap, ctx.currency), _WIDTH, _CHARS, font_color=colour)
    return ctx.paragraph(
        ws,
        row,
        (
            "How: the cap's Lagrange multiplier is added to every holding rate (a budget) or "
            "order cost (an orders cap), each item's policy is worked out as usual with it, and "
            "the multiplier is raised by bisection until the whole-pack policies meet the cap; "
            "the slack left by whole packs is then spent on the single-item steps that save most. "
            "The Policy sheet shows the capped policy and, at its right, the order quantity, "
            "reorder point and cost without the cap."
        ),
        _WIDTH,
        _CHARS,
        italic=True,
        font_color=MUTED,
    )


_CURVE_COLUMNS = (
    ("Safety stock investment", "safety_stock_investment", "money"),
    ("Units short a year (expected)", "units_short_per_year", "decimal1"),
    ("Stockout occasions a year (expected)", "stockout_occasions_per_year", "decimal1"),
    ("Share of demand met from stock", "fill_rate_overall", "percent"),
    ("Yearly holding cost of safety stock", "annual_safety_holding_cost", "money"),
)


def _curve_block(ctx: Context, ws: Worksheet, row: int, curve: pd.DataFrame) -> int:
    sheet = ctx.names["summary"]
    by_cost = curve["default_target"].isna().all()
    row = ctx.block_title(ws, row, "Exchange curve: safety stock against shortages", _WIDTH)
    row = ctx.paragraph(
        ws,
        row,
        (
            "Each row plans every item again with "
            + (
                "every shortage cost multiplied by the factor shown"
                if by_cost
                else "another service target for the items on the Settings default "
                "(items with a target of their own move with it: their odds of running short "
                "are scaled by the same factor)"
            )
            + ", under each item's own demand model. Safety stock investment and its yearly "
            "holding cost are on one basis: the price paid, counting each item's safety "
            "stock where it is above 0 (the holding cost is the holding rate times the "
            "investment). Read down: more money in safety stock, "
            "fewer shortages. Today's settings are marked. To choose another point, set its "
            + ("shortage costs" if by_cost else "service target")
            + " in Settings and run again. "
            "Source: Silver, Pyke & Peterson (1998), exchange curves."
        ),
        _WIDTH,
        _CHARS,
        font_color=INK,
    )
    head = ctx.header_props()
    ws.set_row(row, 45)
    first_title = "Shortage cost multiplier" if by_cost else "Service target (Settings default)"
    ctx.w.text(ws, row, 0, first_title, **head)
    for c, (t, _k, _kind) in enumerate(_CURVE_COLUMNS, start=1):
        ctx.w.text(ws, row, c, t, **head)
    ctx.w.text(ws, row, len(_CURVE_COLUMNS) + 1, "", **head)
    row += 1
    first = row
    today_row = None
    for _, point in curve.iterrows():  # a dozen rows, not items
        now = bool(point["current"])
        props: dict[str, Any] = {"bottom": 1, "bottom_color": LIGHT_RULE}
        if now:
            props["bold"] = True
            today_row = row
        if by_cost:
            ctx.w.number(
                ws,
                row,
                0,
                point["shortage_cost_multiplier"],
                num_format='0.0#"x"',
                align="left",
                **props,
            )
        else:
            ctx.w.number(
                ws, row, 0, point["default_target"], num_format="0.0%", align="left", **props
            )
        for c, (_t, key, kind) in enumerate(_CURVE_COLUMNS, start=1):
            ctx.w.number(ws, row, c, point[key], **ctx.num_props(kind), **props)
        ctx.w.text(ws, row, len(_CURVE_COLUMNS) + 1, "today's settings" if now else "", **props)
        row += 1
    last = row - 1
    chart = ctx.wb.add_chart({"type": "scatter", "subtype": "straight_with_markers"})
    chart.add_series(
        {
            "name": "Settings tried",
            "categories": [sheet, first, 1, last, 1],
            "values": [sheet, first, 2, last, 2],
            "line": {"color": SERIES_COLOURS[0], "width": 2},
            "marker": {
                "type": "circle",
                "size": 5,
                "fill": {"color": SERIES_COLOURS[0]},
                "border": {"none": True},
            },
        }
    )
    if today_row is not None:
        chart.add_series(
            {
                "name": "Today's settings",
                "categories": [sheet, today_row, 1, today_row, 1],
                "values": [sheet, today_row, 2, today_row, 2],
                "line": {"none": True},
                "marker": {
                    "type": "diamond",
                    "size": 11,
                    "fill": {"color": SERIES_COLOURS[1]},
                    "border": {"color": INK},
                },
            }
        )
    chart.set_title(
        {
            "name": "Safety stock investment against units short a year",
            "name_font": {"size": 11, "bold": True},
        }
    )
    chart.set_x_axis(
        {
            "name": "Safety stock investment",
            "num_format": ctx.money.replace(".00", ""),
            "major_gridlines": {"visible": True, "line": {"color": LIGHT_RULE}},
        }
    )
    chart.set_y_axis(
        {
            "name": "Units short a year",
            "num_format": "#,##0",
            "major_gridlines": {"visible": True, "line": {"color": LIGHT_RULE}},
        }
    )
    chart.set_legend({"position": "bottom"})
    chart.set_size({"width": 760, "height": 20 * _CHART_ROWS - 10})
    ws.insert_chart(row + 1, 0, chart, {"x_offset": 2, "y_offset": 4})
    return row + 1 + _CHART_ROWS


def method_sentences(ctx: Context) -> list[str]:
    """For the 'How it works' sheet: how the cap and the exchange curve are made."""
    port = ctx.report.portfolio or {}
    out = [
        "Exchange curve (Silver, Pyke & Peterson 1998): every item is planned again at a "
        "range of one common setting, the service target of the items on the Settings "
        "default (items with a target of their own move with it, their odds of running "
        "short scaled by the same factor) or, under the shortage-cost measure, every "
        "shortage cost times a common multiplier. For each point: the money in safety "
        "stock (price paid x safety stock, where above 0) and its yearly holding cost "
        "(holding rate x that money), the expected units short a year "
        "(orders a year x expected units short per order cycle) and the expected stockout "
        "occasions a year (orders a year x the chance that lead-time demand exceeds the "
        "reorder point), each under the item's own demand model. Today's settings are one "
        "of the points, worked out by the same calculation as the Policy sheet.",
    ]
    if "exchange_curve" not in port:
        out[0] += " (Left out of this run: Settings 'Exchange curve' is no.)"
    cap = port.get("cap")
    if isinstance(cap, CapResult):
        out.append(
            "Stock budget or orders cap (Lagrangian relaxation): the cap's multiplier is added "
            "to every item's holding rate (a stock budget) or order cost (an orders cap); "
            "with it, each item's order quantity (and, under the shortage-cost measure, its "
            "reorder point) is worked out as usual, whole packs and minimum orders included. "
            "The multiplier is raised by bisection until the policies meet the cap; the slack "
            "that whole packs leave is then spent on one-item steps (one pack, one unit of "
            "reorder point) that lower the yearly cost most per unit of the cap. Service "
            "targets are kept: the cap changes order quantities, not the chance of running "
            "short in a cycle, except under the shortage-cost measure, where reorder points "
            "fall too."
        )
        out.append(
            "Where stock is medicine, food or anything safety-critical, check every item a "
            "cap changed before acting: smaller orders mean more orders to place on time, and "
            "under the shortage-cost measure lower reorder points mean more shortages."
        )
    return out
