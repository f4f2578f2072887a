"""The Summary sheet: what the owner and the accountant read first.

Top to bottom: a few plain headlines; the totals (live formulas over the Policy sheet);
items by status; two charts (annual cost by category, average inventory investment by ABC
class); breakdowns by ABC class, category and supplier (live exact-match SUMPRODUCT formulas); the
ten items that cost most a year; and what was read. The method, settings and cautions are
on the "How it works" sheet, which the Summary points to.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import pandas as pd
from xlsxwriter.utility import xl_col_to_name, xl_rowcol_to_cell
from xlsxwriter.worksheet import Worksheet

from .. import contract
from ..problems import Severity
from ..season_backtest import summary_line
from .portfolio_block import cap_headline, write_portfolio
from .sheetkit import (
    GOOD,
    INK,
    LIGHT_RULE,
    MUTED,
    RULE,
    SERIES_COLOURS,
    SEVERITY_WORDS,
    Context,
    abs_cell,
    abs_range,
    clean_text,
    column,
    finite,
    money_text,
    same,
    severity,
    texts,
)

_WIDTH = 9  # columns A..I
_CHARS = 34 + 8 * 15
_CHART_ROWS = 17
_TOP = 10
_TOP_LINE_CHARS = 16  # characters of text a 15-wide column holds on a line
_CHART_GROUPS = 12

TOTAL_LABELS: tuple[tuple[str, str, str], ...] = (
    ("items_planned", "Items planned", "count"),
    ("items_warning", "Items planned with a warning", "count"),
    ("items_skipped", "Items skipped", "count"),
    ("annual_demand_units", "Annual demand, all items (units)", "units"),
    ("annual_ordering_cost", "Annual ordering cost", "money"),
    ("annual_cycle_holding_cost", "Annual cycle stock holding cost", "money"),
    ("annual_safety_holding_cost", "Annual safety stock holding cost", "money"),
    ("annual_shortage_cost", "Annual shortage cost (expected)", "money"),
    ("annual_total_cost", "Annual total cost (the four above)", "money"),
    ("annual_purchase_cost", "Annual purchase cost", "money"),
    ("average_inventory_value", "Average inventory value", "money"),
    ("safety_stock_value", "Safety stock value (at the price paid)", "money"),
    ("inventory_turns", "Inventory turns (per year)", "decimal1"),
    ("orders_per_year", "Orders per year, all items", "decimal1"),
    ("rounding_penalty", "Yearly cost of ordering in whole packs and minimums", "money"),
    ("items_with_price_breaks", "Items with price breaks", "count"),
    ("discount_saving", "Yearly saving from price breaks, against the plain EOQ", "money"),
    ("items_capped_by_shelf_life", "Items whose order is capped by shelf life", "count"),
    ("shelf_life_cost", "Yearly cost of the shelf-life caps", "money"),
    ("items_to_reorder", "Items to reorder now", "count"),
    ("reorder_value", "Value to reorder now", "money"),
    ("items_compared", "Items compared with today's policy", "count"),
    ("current_annual_total_cost", "Today's policy: annual cost of those items", "money"),
    (
        "compared_recommended_annual_total_cost",
        "Recommended policy: annual cost of those items",
        "money",
    ),
    ("annual_saving", "Annual saving from the change", "money"),
    ("items_simulated", "Items back-tested in simulation", "count"),
    ("items_with_target_simulated", "Of those, with a service target", "count"),
    ("items_meeting_target_in_simulation", "Of those, at or above target in simulation", "count"),
    ("items_below_target_in_simulation", "Of those, below target in simulation", "count"),
    (
        "items_clearly_below_target_in_simulation",
        "Of those below, whole 95 % band below target",
        "count",
    ),
    ("items_short_in_simulation", "Short of their model's promise in simulation", "count"),
    ("season_backtest_items", "Season-planned items replayed on history", "count"),
    ("season_backtest_target", "Their average service target", "percent"),
    ("season_backtest_service", "No-shortage cycles, with the season", "percent"),
    ("season_backtest_flat_service", "No-shortage cycles, year-round average", "percent"),
    ("season_backtest_stock_value", "Average stock value, with the season", "money"),
    ("season_backtest_flat_stock_value", "Average stock value, year-round average", "money"),
)

SUM_TOTALS = {
    "annual_demand_units": "annual_demand",
    "annual_ordering_cost": "annual_ordering_cost",
    "annual_cycle_holding_cost": "annual_cycle_holding_cost",
    "annual_safety_holding_cost": "annual_safety_holding_cost",
    "annual_shortage_cost": "annual_shortage_cost",
    "annual_total_cost": "annual_total_cost",
    "annual_purchase_cost": "annual_purchase_cost",
    "average_inventory_value": "average_inventory_value",
    "orders_per_year": "orders_per_year",
    "rounding_penalty": "rounding_penalty",
    "discount_saving": "discount_saving",
    "shelf_life_cost": "shelf_life_cost",
}

#: Breakdown table columns: (title, kind, result keys summed).
BREAKDOWN: tuple[tuple[str, str, tuple[str, ...]], ...] = (
    ("Items planned", "count", ()),
    ("Annual purchase cost", "money", ("annual_purchase_cost",)),
    ("Share of purchase cost", "percent", ()),
    ("Average inventory value", "money", ("average_inventory_value",)),
    ("Annual ordering cost", "money", ("annual_ordering_cost",)),
    ("Annual holding cost", "money", ("annual_cycle_holding_cost", "annual_safety_holding_cost")),
    ("Annual shortage cost", "money", ("annual_shortage_cost",)),
    ("Annual total cost", "money", ("annual_total_cost",)),
)


@dataclass
class Table:
    """Where a breakdown table landed: for the charts."""

    first: int  # first group row
    last: int  # last group row
    title: str


def write_summary(ctx: Context, ws: Worksheet) -> None:
    """Headlines, totals, status, charts, breakdowns, top items, what was read."""
    ws.set_column(0, 0, 44)  # the longest total's label fits
    ws.set_column(1, _WIDTH - 1, 15)
    source = clean_text(ctx.report.source_name) or "(unnamed workbook)"
    ctx.w.text(ws, 0, 0, f"Stock policy for {source}", bold=True, font_size=15, font_color=INK)
    ctx.w.text(ws, 1, 0, f"Run on {ctx.run_text()}", font_color=MUTED)
    ctx.paragraph(ws, 2, contract.CAUTION, _WIDTH, _CHARS)  # in normal type, where it is read
    row = 3
    for text, colour in headlines(ctx):
        # merged across the page and wrapped, so a long headline is read, not cut off
        row = ctx.paragraph(ws, row, text, _WIDTH, _CHARS, bold=True, font_color=colour)
    row = _totals(ctx, ws, row + 1)
    row = _status(ctx, ws, row + 1)
    glance = row + 1
    row = glance + 1 + _CHART_ROWS
    # the charts have a page of their own, so no page break cuts through them
    ws.set_h_pagebreaks([glance, row])
    abc = _breakdown(ctx, ws, row + 1, "By ABC class", "abc_class", abc=True)
    row = abc.last + 2 if abc else row + 1
    cat = _breakdown(ctx, ws, row + 1, "By category", "category")
    row = cat.last + 2 if cat else row + 1
    sup = _breakdown(ctx, ws, row + 1, "By supplier", "supplier")
    row = sup.last + 2 if sup else row + 1
    row = _top_items(ctx, ws, row + 1)
    row = write_portfolio(ctx, ws, row + 1)
    row = _read(ctx, ws, row + 1)
    row = ctx.paragraph(
        ws,
        row + 1,
        (
            f"How these numbers are made, the settings used and the cautions (including those "
            f"for medicine, food and safety-critical stock): see the '{ctx.names['method']}' "
            "sheet."
        ),
        _WIDTH,
        _CHARS,
        italic=True,
        font_color=MUTED,
    )
    _charts(ctx, ws, glance, cat, abc)
    ws.hide_gridlines(2)
    ctx.print_setup(ws, ctx.names["summary"], -1, row, _WIDTH - 1)


# ---------------------------------------------------------------------------
# Headlines
# ---------------------------------------------------------------------------


def headlines(ctx: Context) -> list[tuple[str, str]]:
    """A few plain sentences: what was planned, what to order, what the change is worth."""
    t = ctx.report.totals or {}
    out: list[tuple[str, str]] = []
    planned = finite(t.get("items_planned"))
    if planned is not None:
        warn = int(finite(t.get("items_warning")) or 0)
        skipped = int(finite(t.get("items_skipped")) or 0)
        out.append(
            (
                f"{int(planned)} item{'s' if planned != 1 else ''} planned; {warn} with a "
                f"warning to read, {skipped} skipped (see '{ctx.names['warnings']}').",
                INK,
            )
        )
    n_order = finite(t.get("items_to_reorder"))
    value = finite(t.get("reorder_value")) or 0.0
    if n_order:
        out.append(
            (
                f"{int(n_order)} item{'s' if n_order != 1 else ''} to order now, worth "
                f"about {money_text(value, ctx.currency)} (see '{ctx.names['reorder']}').",
                INK,
            )
        )
    elif n_order is not None:
        out.append((f"Nothing to order now (see '{ctx.names['reorder']}').", INK))
    if ctx.compare_headline:
        colour = GOOD if (finite(t.get("annual_saving")) or 0) >= 0 else INK
        out.append((ctx.compare_headline.rstrip(".") + f" (see '{ctx.names['compare']}').", colour))
    cap = cap_headline(ctx)
    if cap:
        out.append((cap, INK))
    simulated = finite(t.get("items_with_target_simulated"))
    if simulated:
        meets = int(finite(t.get("items_meeting_target_in_simulation")) or 0)
        below = int(finite(t.get("items_below_target_in_simulation")) or 0)
        clearly = int(finite(t.get("items_clearly_below_target_in_simulation")) or 0)
        short = int(finite(t.get("items_short_in_simulation")) or 0)
        out.append(
            (
                f"Back-test: of {int(simulated)} item{'s' if simulated != 1 else ''} "
                f"simulated on their own demand, {meets} reach their service target, "
                f"{below} fall below it ({clearly} by more than the simulation's 95 % "
                f"band); {short} fall short of what their model promises (see "
                f"'{ctx.names['warnings']}').",
                INK if below else GOOD,
            )
        )
    seasons = summary_line(t, ctx.currency)  # planning with seasons, back-tested
    if seasons:
        out.append((seasons.rstrip(".") + f" (see '{ctx.names['seasons']}').", INK))
    avg = finite(t.get("average_inventory_value"))
    turns = finite(t.get("inventory_turns"))
    if avg is not None and turns is not None:
        out.append(
            (
                f"Stock held on average is worth about {money_text(avg, ctx.currency)} and "
                f"turns over {turns:.1f} times a year.",
                INK,
            )
        )
    return out


# ---------------------------------------------------------------------------
# Totals and status
# ---------------------------------------------------------------------------


def _policy_range(ctx: Context, key: str) -> str | None:
    if ctx.policy_rows is None or key not in ctx.policy_cols:
        return None
    first, last = ctx.policy_rows
    return abs_range(ctx.names["policy"], ctx.policy_cols[key], first, last)


def _planned(ctx: Context) -> np.ndarray:
    df = ctx.results
    if "status" not in df.columns:
        return np.ones(len(df), dtype=bool)
    return (df["status"].astype(str) != contract.STATUS_SKIPPED).to_numpy()


def _total_formula(ctx: Context, key: str) -> tuple[str, float] | None:
    """A live formula for a total and the value it gives, when one applies."""
    res = ctx.results
    if key == "reorder_value":
        if ctx.reorder_total_cell is None:
            return None
        return (
            f"={abs_cell(ctx.names['reorder'], *ctx.reorder_total_cell)}",
            ctx.reorder_total_value or 0.0,
        )
    compare = {
        "current_annual_total_cost": "cur",
        "compared_recommended_annual_total_cost": "rec",
        "annual_saving": "sav",
    }
    if key in compare:
        cell = ctx.compare_totals.get(compare[key])
        if cell is None:
            return None
        return f"={abs_cell(ctx.names['compare'], cell[0], cell[1])}", cell[2]
    if key in SUM_TOTALS:
        rng = _policy_range(ctx, SUM_TOTALS[key])
        if rng is None or SUM_TOTALS[key] not in res.columns:
            return None
        nums = column(res, SUM_TOTALS[key])
        return f"=SUM({rng})", float(np.nansum(nums))
    if key == "safety_stock_value":
        ss_rng, c_rng = _policy_range(ctx, "safety_stock"), _policy_range(ctx, "unit_price")
        if ss_rng is None or c_rng is None:
            return None
        ss, c = column(res, "safety_stock"), column(res, "unit_price")
        with np.errstate(invalid="ignore"):
            value = float(np.nansum(np.where(ss > 0, ss, 0.0) * c * _planned(ctx)))
        # safety stock above 0 times the price paid; text and blank cells count as 0
        return f"=SUMPRODUCT(--({ss_rng}>0),{ss_rng},{c_rng})", value
    status_rng = _policy_range(ctx, "status")
    if status_rng is None:
        return None
    status = res["status"].astype(str)
    ok, warn, skip = contract.STATUS_OK, contract.STATUS_WARNING, contract.STATUS_SKIPPED
    if key == "items_planned":
        value = float(status.isin([ok, warn]).sum())
        return f'=COUNTIF({status_rng},"{ok}")+COUNTIF({status_rng},"{warn}")', value
    if key == "items_warning":
        return f'=COUNTIF({status_rng},"{warn}")', float((status == warn).sum())
    if key == "items_skipped":
        return f'=COUNTIF({status_rng},"{skip}")', float((status == skip).sum())
    if key == "items_to_reorder":
        rng = _policy_range(ctx, "order_now_qty")
        if rng is None:
            return None
        nums = column(res, "order_now_qty")
        return f'=COUNTIF({rng},">0")', float(np.sum(np.isfinite(nums) & (nums > 0)))
    return None


def _totals(ctx: Context, ws: Worksheet, row: int) -> int:
    totals = dict(ctx.report.totals or {})
    row = ctx.block_title(ws, row, "Totals for the planned items", _WIDTH)
    known = {k for k, _, _ in TOTAL_LABELS}
    rows = [t for t in TOTAL_LABELS if t[0] in totals]
    rows += [(k, k.replace("_", " ").capitalize(), "decimal1") for k in totals if k not in known]
    where: dict[str, tuple[int, bool]] = {}
    for key, label, kind in rows:
        ctx.w.text(ws, row, 0, label)
        value = finite(totals.get(key))
        props = {**ctx.num_props(kind), "align": "right"}
        live = _total_formula(ctx, key)
        if key == "inventory_turns":
            live = _turns_formula(where, value)
        if live is not None and value is not None and same(live[1], value):
            ctx.w.formula(ws, row, 1, live[0], value, **props)
            where[key] = (row, True)
        else:
            ctx.w.number(ws, row, 1, value, **props)
            where[key] = (row, False)
        row += 1
    return row


def _turns_formula(
    where: dict[str, tuple[int, bool]], value: float | None
) -> tuple[str, float] | None:
    """Turns = purchase cost / average inventory value, over the two cells above."""
    p, a = where.get("annual_purchase_cost"), where.get("average_inventory_value")
    if p is None or a is None or value is None:
        return None
    f = f"={xl_rowcol_to_cell(p[0], 1)}/{xl_rowcol_to_cell(a[0], 1)}"
    return f, value


def _status(ctx: Context, ws: Worksheet, row: int) -> int:
    row = ctx.block_title(ws, row, "Items by status", _WIDTH)
    sub = ctx.styles.get(italic=True, font_color=MUTED)
    ws.write_string(row, 0, "Status", sub)
    ws.write_string(row, 1, "Items", sub)
    ws.write_string(row, 2, "What it means", sub)
    row += 1
    rng = _policy_range(ctx, "status")
    status = (
        ctx.results["status"].astype(str)
        if "status" in ctx.results.columns
        else pd.Series([], dtype=str)
    )
    meaning = {
        contract.STATUS_OK: "planned, nothing to check",
        contract.STATUS_WARNING: f"planned; read its lines in '{ctx.names['warnings']}' first",
        contract.STATUS_SKIPPED: "no policy: the input has a problem to fix",
    }
    for word, text in meaning.items():
        ctx.w.text(ws, row, 0, word)
        value = float((status == word).sum())
        if rng is not None:
            ctx.w.formula(ws, row, 1, f'=COUNTIF({rng},"{word}")', value, num_format="#,##0")
        else:
            ctx.w.number(ws, row, 1, value, num_format="#,##0")
        ctx.w.text(ws, row, 2, text, font_color=MUTED)
        row += 1
    counts = {s: 0 for s in Severity}
    for p in ctx.report.problems or []:
        counts[severity(p)] += 1
    parts = [
        f"{counts[s]} {SEVERITY_WORDS[s].split()[0].lower()}{'' if counts[s] == 1 else 's'}"
        for s in Severity
        if counts[s]
    ]
    ctx.w.text(ws, row, 0, "Problems found")
    ctx.w.text(
        ws, row, 1, ("; ".join(parts) + f" (see '{ctx.names['warnings']}')") if parts else "none"
    )
    return row + 1


# ---------------------------------------------------------------------------
# Breakdowns
# ---------------------------------------------------------------------------


def _exact(grp_rng: str, crit: str) -> str:
    """1 for each row of grp_rng whose text is exactly crit (case and every character
    counted), else 0: an array for SUMPRODUCT.

    EXACT compares text as it is, so no character of a group name is read as a pattern or
    a comparison, unlike a SUMIF criterion (where "." "(" "*" "?" "~" or a leading "<" can
    be a wildcard, a regular expression or an operator, depending on the program and its
    settings). EXACT and SUMPRODUCT are in OpenFormula (ISO/IEC 26300-2) and in Excel.
    """
    return f"--EXACT({grp_rng},{crit})"


def _breakdown(
    ctx: Context, ws: Worksheet, row: int, title: str, key: str, abc: bool = False
) -> Table | None:
    df = ctx.results
    if key not in df.columns or not len(df):
        return None
    planned = _planned(ctx)
    groups = np.array(texts(df, key), dtype=object)
    blank = "(no class)" if abc else f"(no {key} given)"
    row = ctx.block_title(ws, row, title, _WIDTH)
    head = ctx.header_props()
    ws.set_row(row, 32)
    ctx.w.text(ws, row, 0, "ABC class" if abc else key.capitalize(), **head)
    for c, (t, _k, _s) in enumerate(BREAKDOWN, start=1):
        ctx.w.text(ws, row, c, t, **head)
    row += 1
    names = sorted({g for g, ok in zip(groups, planned, strict=True) if ok})
    if abc:
        names = [n for n in names if n]  # skipped items have no class; planned should
    sums = {n: _group_sums(df, planned & (groups == n)) for n in names}
    if not abc:
        names.sort(key=lambda n: (-sums[n]["Annual total cost"], n))
    if not names:
        ctx.w.text(ws, row, 0, "No planned item has a value here.", italic=True, font_color=MUTED)
        return Table(row, row - 1, title)
    grp_rng = _policy_range(ctx, key)
    status_rng = _policy_range(ctx, "status")
    first = row
    total_row = first + len(names)
    line = {"bottom": 1, "bottom_color": LIGHT_RULE}
    for n in names:
        ctx.w.text(ws, row, 0, n or blank, **line)
        live = grp_rng is not None and status_rng is not None
        # the group's own cell, or "" for the row of items with the column left blank
        crit = xl_rowcol_to_cell(row, 0, col_abs=True) if n else '""'
        match = _exact(str(grp_rng), crit)
        for c, (t, kind, keys) in enumerate(BREAKDOWN, start=1):
            props = {**ctx.num_props(kind), **line}
            value = sums[n].get(t, 0.0)
            if t == "Share of purchase cost":
                total = sum(s["Annual purchase cost"] for s in sums.values())
                value = sums[n]["Annual purchase cost"] / total if total > 0 else float("nan")
                if total > 0:
                    share = (
                        f"={xl_rowcol_to_cell(row, 2)}/"
                        f"{xl_rowcol_to_cell(total_row, 2, row_abs=True)}"
                    )
                    ctx.w.formula(ws, row, c, share, value, **props)
                else:
                    ctx.w.number(ws, row, c, value, **props)
                continue
            formula: str | None = None
            if live and kind == "count":
                formula = f'=SUMPRODUCT({match},--({status_rng}<>"{contract.STATUS_SKIPPED}"))'
            elif live and all(k in ctx.policy_cols for k in keys):
                formula = "=" + "+".join(
                    f"SUMPRODUCT({match},{_policy_range(ctx, k)})" for k in keys
                )
            if formula is not None:
                ctx.w.formula(ws, row, c, formula, value, **props)
            else:
                ctx.w.number(ws, row, c, value, **props)
        row += 1
    top = {"bold": True, "top": 1, "top_color": RULE}
    ctx.w.text(ws, row, 0, "All", **top)
    for c, (t, kind, _keys) in enumerate(BREAKDOWN, start=1):
        letter = xl_col_to_name(c)
        value = sum(s.get(t, 0.0) for s in sums.values())
        if t == "Share of purchase cost":
            purchase = sum(s["Annual purchase cost"] for s in sums.values())
            value = 1.0 if purchase > 0 else float("nan")
        props = {**ctx.num_props(kind), **top}
        if np.isfinite(value):
            ctx.w.formula(ws, row, c, f"=SUM({letter}{first + 1}:{letter}{row})", value, **props)
        else:
            ctx.w.number(ws, row, c, value, **props)
    return Table(first, row - 1, title)


def _group_sums(df: pd.DataFrame, mask: np.ndarray) -> dict[str, float]:
    out: dict[str, float] = {}
    for title, _kind, keys in BREAKDOWN:
        if title == "Items planned":
            out[title] = float(mask.sum())
        elif keys:
            out[title] = float(sum(np.nansum(column(df, k)[mask]) for k in keys))
    return out


# ---------------------------------------------------------------------------
# Top items, what was read
# ---------------------------------------------------------------------------

_TOP_COLUMNS = (
    ("Item", "item", "code"),
    ("Description", "description", "text"),
    ("Category", "category", "text"),
    ("Supplier", "supplier", "text"),
    ("ABC class", "abc_class", "text"),
    ("Annual total cost", "annual_total_cost", "money"),
    ("Annual purchase cost", "annual_purchase_cost", "money"),
    ("Average inventory value", "average_inventory_value", "money"),
)


def top_items(ctx: Context, k: int = _TOP) -> np.ndarray:
    """Indices of the planned items that cost most a year, most first (ties: in order)."""
    cost = column(ctx.results, "annual_total_cost")
    ok = np.flatnonzero(_planned(ctx) & np.isfinite(cost))
    order = np.argsort(-cost[ok], kind="stable")
    return ok[order][:k]


def _top_items(ctx: Context, ws: Worksheet, row: int) -> int:
    idx = top_items(ctx)
    row = ctx.block_title(
        ws,
        row,
        f"The {len(idx) or _TOP} items that cost most a year (ordering, holding and shortage)",
        _WIDTH,
    )
    if not len(idx):
        ctx.w.text(ws, row, 0, "No planned items.", italic=True, font_color=MUTED)
        return row + 1
    head = ctx.header_props()
    ws.set_row(row, 32)  # two-line headers
    ctx.w.text(ws, row, 0, "Rank", **head)
    for c, (t, _k, _kind) in enumerate(_TOP_COLUMNS, start=1):
        ctx.w.text(ws, row, c, t, **head)
    row += 1
    df = ctx.results
    line = {"bottom": 1, "bottom_color": LIGHT_RULE}
    for rank, i in enumerate(idx, start=1):
        ctx.w.number(ws, row, 0, rank, num_format="0", align="left", valign="top", **line)
        lines = 1
        for c, (_t, key, kind) in enumerate(_TOP_COLUMNS, start=1):
            if kind in ("text", "code"):
                # wrapped, and the row made tall enough, so no name is cut off
                text = texts(df.iloc[[i]], key)[0]
                ctx.w.text(ws, row, c, text, num_format="@", text_wrap=True, valign="top", **line)
                lines = max(lines, math.ceil(len(text or "") / _TOP_LINE_CHARS))
                continue
            value = column(df.iloc[[i]], key)[0]
            props = {**ctx.num_props(kind), **line, "valign": "top"}
            pc, pr = ctx.policy_cols.get(key), ctx.policy_row_of.get(int(i))
            if np.isfinite(value) and pc is not None and pr is not None:
                ctx.w.formula(
                    ws, row, c, "=" + abs_cell(ctx.names["policy"], pr, pc), value, **props
                )
            else:
                ctx.w.number(ws, row, c, value, **props)
        if lines > 1:
            ws.set_row(row, 15 * lines + 1)
        row += 1
    return row


def _read(ctx: Context, ws: Worksheet, row: int) -> int:
    info = dict(ctx.report.input_summary or {})
    row = ctx.block_title(ws, row, "What was read", _WIDTH)
    labels = {
        "file": "File",
        "items_read": "Items read",
        "items_planned": "Items planned",
        "items_skipped": "Items skipped",
        "history_layout": "History layout",
        "periods": "History periods",
        "first_period": "First period",
        "last_period": "Last period",
    }
    if "file" not in info and ctx.report.source_name:
        info["file"] = ctx.report.source_name
    keys = [k for k in labels if k in info] + [k for k in info if k not in labels]
    for key in keys:
        label = labels.get(key) or key.replace("_", " ").capitalize()
        ctx.w.text(ws, row, 0, label)
        value = info[key]
        if isinstance(value, (int, np.integer)) and not isinstance(value, bool):
            ctx.w.number(ws, row, 1, value, num_format="#,##0", align="left")
        elif isinstance(value, (list, tuple, dict, set)):
            ctx.w.text(ws, row, 1, ", ".join(map(str, value)))
        else:
            ctx.w.any(ws, row, 1, value, align="left")
        row += 1
    return row


# ---------------------------------------------------------------------------
# Charts
# ---------------------------------------------------------------------------


def _charts(ctx: Context, ws: Worksheet, row: int, cat: Table | None, abc: Table | None) -> None:
    """Annual cost by category (stacked bars) and inventory investment by ABC class."""
    ctx.block_title(ws, row, "At a glance", _WIDTH)
    sheet = ctx.names["summary"]
    placed = 0
    if cat is not None and cat.last >= cat.first:
        last = min(cat.last, cat.first + _CHART_GROUPS - 1)
        chart = ctx.wb.add_chart({"type": "bar", "subtype": "stacked"})
        series = (
            (5, "Annual ordering cost"),
            (6, "Annual holding cost"),
            (7, "Annual shortage cost"),
        )
        shortage = column(ctx.results, "annual_shortage_cost")
        for k, (col, name) in enumerate(series):
            if name == "Annual shortage cost" and not np.nansum(np.abs(shortage)) > 0:
                continue
            chart.add_series(
                {
                    "name": name,
                    "categories": [sheet, cat.first, 0, last, 0],
                    "values": [sheet, cat.first, col, last, col],
                    "fill": {"color": SERIES_COLOURS[k]},
                    "gap": 60,
                }
            )
        more = cat.last - last
        chart.set_title(
            {
                "name": "Annual cost by category"
                + (f" ({_CHART_GROUPS} largest)" if more > 0 else ""),
                "name_font": {"size": 11, "bold": True},
            }
        )
        chart.set_x_axis(
            {
                "num_format": ctx.money.replace(".00", ""),
                "major_gridlines": {"visible": True, "line": {"color": LIGHT_RULE}},
            }
        )
        chart.set_y_axis({"reverse": True})
        chart.set_legend({"position": "bottom"})
        chart.set_size({"width": 540, "height": 20 * _CHART_ROWS - 10})
        ws.insert_chart(row + 1, 0, chart, {"x_offset": 2, "y_offset": 4})
        placed += 1
    if abc is not None and abc.last >= abc.first:
        chart = ctx.wb.add_chart({"type": "column"})
        chart.add_series(
            {
                "name": "Average inventory value",
                "categories": [sheet, abc.first, 0, abc.last, 0],
                "values": [sheet, abc.first, 4, abc.last, 4],
                "fill": {"color": SERIES_COLOURS[0]},
                # no data labels: some programs add the series and class names to each,
                # cluttering the bars; the figures are in the ABC table below
                "gap": 80,
            }
        )
        chart.set_title(
            {
                "name": "Average inventory investment by ABC class",
                "name_font": {"size": 11, "bold": True},
            }
        )
        chart.set_y_axis(
            {
                "num_format": ctx.money.replace(".00", ""),
                "major_gridlines": {"visible": True, "line": {"color": LIGHT_RULE}},
            }
        )
        chart.set_legend({"none": True})
        chart.set_size({"width": 500, "height": 20 * _CHART_ROWS - 10})
        ws.insert_chart(row + 1, 0, chart, {"x_offset": 560 if placed else 2, "y_offset": 4})
        placed += 1
    if not placed:
        ctx.w.text(ws, row + 1, 0, "No planned items to draw.", italic=True, font_color=MUTED)
