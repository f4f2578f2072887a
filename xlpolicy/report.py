"""What one planning run produced, handed from the computation to the writers.

The writers of each output sheet, the CSV/JSON writers and the console all read a
:class:`Report`; none of them computes policy numbers of its own.
"""

from __future__ import annotations

import datetime as _dt
from dataclasses import dataclass, field
from typing import Any

import pandas as pd

from .problems import Problem


@dataclass
class Report:
    """Everything a run found and computed.

    ``results``: one row per item read from Items (skipped ones too), columns
    ``contract.ALL_RESULT_KEYS`` in that order; a skipped item has NaN numbers.
    ``reorder``: the items to order now (inventory position at or below the reorder point),
    sorted by supplier then item, columns ``REORDER_KEYS``.
    ``settings``: the resolved settings (keys of ``contract.SETTINGS``, ``days_per_period``,
    and ``sources``: for each setting where its value came from: "Settings", "command line",
    "default" or "inferred from dates").
    ``totals``: totals over planned items (keys ``TOTAL_KEYS``).
    ``input_summary``: what was read: file name, items read/planned/skipped, history layout,
    number of periods, first and last period.
    """

    results: pd.DataFrame
    reorder: pd.DataFrame
    problems: list[Problem]
    settings: dict[str, Any]
    totals: dict[str, float]
    input_summary: dict[str, Any]
    source_name: str
    run_date: _dt.date = field(default_factory=_dt.date.today)
    #: Decisions across all items (core.portfolio): "exchange_curve" (a DataFrame of
    #: EXCHANGE_COLUMNS) and "cap" (a CapResult), each present when computed.
    portfolio: dict[str, Any] = field(default_factory=dict)
    #: the back-test's stock trace of a few items (xlpolicy.backtest), or None
    trace: dict[str, Any] | None = None
    #: the season plan (xlpolicy.seasons.SEASON_PLAN_COLUMNS, "row" = the Items row
    #: position), one row per item planned with its season or trend and month; or None
    season_plan: pd.DataFrame | None = None


REORDER_KEYS: tuple[str, ...] = (
    "supplier",
    "item",
    "description",
    "on_hand",
    "on_order",
    "backordered",
    "inventory_position",
    "reorder_point",
    "order_qty",
    "order_now_qty",
    "unit_cost",
    "order_now_value",
    "abc_class",
    "order_up_to_level",
)

TOTAL_KEYS: tuple[str, ...] = (
    "items_planned",
    "items_warning",
    "items_skipped",
    "annual_demand_units",
    "annual_purchase_cost",
    "annual_ordering_cost",
    "annual_cycle_holding_cost",
    "annual_safety_holding_cost",
    "annual_shortage_cost",
    "annual_total_cost",
    "average_inventory_value",
    "safety_stock_value",
    "inventory_turns",
    "orders_per_year",
    "items_to_reorder",
    "reorder_value",
    "items_compared",
    "current_annual_total_cost",
    "compared_recommended_annual_total_cost",
    "annual_saving",
    "rounding_penalty",
    "discount_saving",
    "items_with_price_breaks",
    "shelf_life_cost",
    "items_capped_by_shelf_life",
)
