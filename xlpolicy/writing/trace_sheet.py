"""The Stock trace sheet: the back-test's simulated stock of a few items, period by period.

Written only when a back-test ran (xlpolicy.backtest picks the items whose simulated
service falls furthest below the promise). Per item: a short heading, a table of demand,
net stock and stock position at the end of each period and the quantity ordered, and a
line chart of the stock against the reorder point, so an owner can see how the policy
would have run on the item's own demand.
"""

from __future__ import annotations

from typing import Any

from xlsxwriter.worksheet import Worksheet

from .sheetkit import LIGHT_RULE, MUTED, SERIES_COLOURS, Context, finite

_COLUMNS = ("Period", "Demand", "Net stock", "Stock position", "Ordered", "Reorder point")
_CHART_ROWS = 18
#: The last column printed: the chart (620 pixels from column H) ends in column Q.
_LAST_COL = 17
#: Characters across columns A to R at the sheet's widths, for wrapping the subtitle.
_PAGE_CHARS = 160


def write_trace(ctx: Context, ws: Worksheet) -> None:
    """One block per traced item: heading, table (columns A to F), chart beside it."""
    trace = ctx.report.trace or {}
    items: list[dict[str, Any]] = list(trace.get("items") or [])
    ws.set_column(0, 0, 12)
    ws.set_column(1, 5, 11)
    ctx.w.text(ws, 0, 0, "Stock trace: the policy run on past demand", bold=True, font_size=15)
    ctx.paragraph(
        ws,
        1,
        "Simulated stock at the end of each period, for the items whose "
        "simulated service falls furthest below what their model promises. Demand "
        f"that found no stock was {trace.get('unmet', 'backordered')}; net stock is on "
        "hand less what customers wait for, so below 0 they are waiting.",
        _LAST_COL + 1,
        _PAGE_CHARS,
        font_color=MUTED,
    )
    row = 3
    head = ctx.header_props()
    name = ctx.names["trace"]
    breaks: list[int] = []
    for it in items:
        if row > 3:  # each item after the first starts a page, so no break cuts a chart
            breaks.append(row)
        ctx.w.text(ws, row, 0, f"{it['item']}", bold=True, font_size=12)
        desc = it.get("description")
        label = (f"{desc}; " if isinstance(desc, str) and desc else "") + (
            f"order quantity {it['order_qty']:g}, reorder point {it['reorder_point']:g}; "
            f"demand from {it['source']}"
        )
        ctx.w.text(ws, row + 1, 0, label, font_color=MUTED)
        top = row + 2
        ws.set_row(top, 30)  # the two-line headers stay inside their row
        for c, title in enumerate(_COLUMNS):
            ctx.w.text(ws, top, c, title, **head)
        n = len(it["labels"])
        for k in range(n):
            r = top + 1 + k
            ctx.w.text(ws, r, 0, it["labels"][k])
            for c, key in enumerate(("demand", "net_stock", "position", "ordered"), start=1):
                v = finite(it[key][k])
                if v is None:
                    ws.write_blank(r, c, None)
                else:
                    ctx.w.number(ws, r, c, v, num_format="#,##0.##")
            ctx.w.number(ws, r, 5, it["reorder_point"], num_format="#,##0.##")
        if n:
            last = top + n
            chart = ctx.wb.add_chart({"type": "line"})
            _straight_lines(chart)
            for k, (c, title) in enumerate(
                ((2, "Net stock"), (3, "Stock position"), (5, "Reorder point"))
            ):
                chart.add_series(
                    {
                        "name": title,
                        "categories": [name, top + 1, 0, last, 0],
                        "values": [name, top + 1, c, last, c],
                        "line": {
                            "color": SERIES_COLOURS[k],
                            "width": 1.5,
                            "dash_type": "dash" if c == 5 else "solid",
                        },
                    }
                )
            chart.set_title(
                {"name": f"{it['item']}: simulated stock", "name_font": {"size": 11, "bold": True}}
            )
            chart.set_y_axis(
                {
                    "name": "units",
                    "major_gridlines": {"visible": True, "line": {"color": LIGHT_RULE}},
                }
            )
            chart.set_x_axis({"num_font": {"rotation": -45}, "interval_unit": max(1, n // 12)})
            chart.set_legend({"position": "bottom"})
            chart.set_size({"width": 620, "height": 20 * _CHART_ROWS})
            ws.insert_chart(top, 7, chart, {"x_offset": 4, "y_offset": 2})
        row = top + max(n, _CHART_ROWS) + 3
    if breaks:
        ws.set_h_pagebreaks(breaks)
    if not items:
        ctx.w.text(ws, row, 0, "No item was simulated.", italic=True, font_color=MUTED)
    ctx.print_setup(ws, name, -1, max(row, 1), _LAST_COL)


def _straight_lines(chart: Any) -> None:
    """Have the chart's lines drawn straight between points in every program.

    xlsxwriter writes no smoothing element unless smoothing is asked for, and a program
    may then draw the line smoothed (LibreOffice does), overshooting the data: a dip
    drawn below the lowest value in the table. Writing the element with 0 says "straight"
    (ECMA-376 Part 1, 21.2.2.194 smooth; from memory).
    """
    write = getattr(chart, "_xml_empty_tag", None)
    if write is None or not hasattr(chart, "_write_c_smooth"):  # another xlsxwriter
        return

    def smooth(on: Any) -> None:
        write("c:smooth", [("val", "1" if on else "0")])

    chart._write_c_smooth = smooth
