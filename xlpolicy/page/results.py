"""What the page shows of a run: the report turned into plain data for the page's script.

The numbers are the report's own (the same the console prints and the CSV holds); money is
also given as text formatted the way the console formats it, so the page and the terminal
read alike. Problems keep the console's words: where (sheet!cell), item and message.
"""

from __future__ import annotations

import math
from typing import Any

import pandas as pd

from ..problems import Problem, Severity
from ..report import Report

#: At most this many reorder lines and problems go to the page; the rest are in the
#: workbook (the page says how many were left out and where they are).
MAX_ROWS = 2000

#: The caution the page shows under the headlines (the README's and the workbook's words).
CAUTION = (
    "The numbers are estimates from past demand. New, promoted, seasonal or discontinued "
    "items need your judgement. Where stock is medicine, food or anything safety-critical, "
    "shortages can hurt people: the numbers support, and do not replace, the judgement of "
    "licensed staff and your local rules."
)


def money_format(report: Report) -> Any:
    """The console's money format: "$1,234.50" for a symbol, "1,234.50 EUR" for a code."""
    cur = str(report.settings.get("currency") or "")

    def money(x: float) -> str:
        if x is None or (isinstance(x, float) and math.isnan(x)):
            return ""
        return f"{cur}{x:,.2f}" if len(cur) <= 1 else f"{x:,.2f} {cur}"

    return money


def _number(x: Any) -> float | None:
    """A JSON-safe number: NaN and missing become None."""
    if x is None:
        return None
    try:
        f = float(x)
    except (TypeError, ValueError):
        return None
    return None if math.isnan(f) or math.isinf(f) else f


def _text(x: Any) -> str:
    if x is None or (not isinstance(x, str) and pd.isna(x)):
        return ""
    if isinstance(x, float) and x.is_integer():
        return str(int(x))
    return str(x)


def _quantity(x: Any) -> str:
    f = _number(x)
    if f is None:
        return ""
    return f"{f:,.0f}" if float(f).is_integer() else f"{f:,.2f}"


def problem_data(p: Problem) -> dict[str, Any]:
    """One problem as the console prints it: severity, where, item, message."""
    return {
        "severity": p.severity.value,
        "where": p.where(),
        "item": p.item,
        "message": p.message,
        "code": p.code,
    }


def problems_data(problems: list[Problem]) -> dict[str, Any]:
    """The problems (most severe first, as the report orders them) and their counts."""
    counts = {s.value: sum(1 for p in problems if p.severity is s) for s in Severity}
    return {
        "counts": counts,
        "list": [problem_data(p) for p in problems[:MAX_ROWS]],
        "left_out": max(0, len(problems) - MAX_ROWS),
    }


def headline_data(report: Report) -> dict[str, Any]:
    """The figures an owner reads first, raw and as the console formats them."""
    t = report.totals
    money = money_format(report)
    compared = int(t.get("items_compared") or 0)
    saving = _number(t.get("annual_saving"))
    return {
        "items_to_order": int(t.get("items_to_reorder") or 0),
        "order_value": _number(t.get("reorder_value")),
        "order_value_text": money(t.get("reorder_value") or 0.0),
        "yearly_cost": _number(t.get("annual_total_cost")),
        "yearly_cost_text": money(t.get("annual_total_cost") or 0.0),
        "items_compared": compared,
        "saving": saving if compared else None,
        "saving_text": money(saving) if compared and saving is not None else "",
        "today_cost_text": (money(t.get("current_annual_total_cost") or 0.0) if compared else ""),
    }


_REORDER_COLUMNS = (
    ("item", "Item", _text),
    ("description", "Description", _text),
    ("inventory_position", "Stock position", _quantity),
    ("reorder_point", "Reorder point", _quantity),
    ("order_now_qty", "Order now", _quantity),
)


def reorder_data(report: Report) -> dict[str, Any]:
    """The reorder list grouped by supplier, in the report's order (supplier, then item)."""
    money = money_format(report)
    frame = report.reorder
    groups: list[dict[str, Any]] = []
    if frame is None or frame.empty:
        return {"columns": [], "groups": [], "left_out": 0, "note": ""}
    shown = frame.iloc[:MAX_ROWS]
    spec = list(_REORDER_COLUMNS)
    if "order_up_to_level" in frame and frame["order_up_to_level"].notna().any():
        # items on periodic review order up to a level instead of at a reorder point
        spec.insert(4, ("order_up_to_level", "Order up to", _quantity))
    columns = [title for _, title, _ in spec] + ["Value"]
    current: dict[str, Any] | None = None
    for row in shown.to_dict("records"):
        supplier = _text(row.get("supplier")) or "(no supplier given)"
        if current is None or current["supplier"] != supplier:
            current = {"supplier": supplier, "rows": [], "total": 0.0}
            groups.append(current)
        cells = [fmt(row.get(key)) for key, _, fmt in spec]
        value = _number(row.get("order_now_value")) or 0.0
        cells.append(money(value))
        current["rows"].append({"cells": cells, "item": _text(row.get("item"))})
        current["total"] += value
    for g in groups:
        g["total_text"] = money(g.pop("total"))
    note = (
        "Order up to: an item reviewed on a schedule (periodic review) is ordered up to this "
        "level instead of at a reorder point."
        if len(spec) > len(_REORDER_COLUMNS)
        else ""
    )
    return {
        "columns": columns,
        "groups": groups,
        "left_out": max(0, len(frame) - MAX_ROWS),
        "note": note,
    }


_CHOICES = ("service_measure", "service_target", "holding_rate", "order_cost")


def choices_data(report: Report) -> dict[str, Any]:
    """The owner's choices as this run used them, and where each came from."""
    sources = report.settings.get("sources") or {}
    out: dict[str, Any] = {}
    for key in _CHOICES:
        value = report.settings.get(key)
        out[key] = {
            "value": value if isinstance(value, str) else _number(value),
            "source": str(sources.get(key, "")),
        }
    return out


def result_data(report: Report, output_name: str, standalone: bool) -> dict[str, Any]:
    """Everything the page shows after a run."""
    s = report.input_summary
    return {
        "file": s.get("file"),
        "items_read": s.get("items_read"),
        "items_planned": s.get("items_planned"),
        "items_skipped": s.get("items_skipped"),
        "headline": headline_data(report),
        "reorder": reorder_data(report),
        "problems": problems_data(report.problems),
        "choices": choices_data(report),
        "output_name": output_name,
        "standalone": standalone,
        "caution": CAUTION,
    }
