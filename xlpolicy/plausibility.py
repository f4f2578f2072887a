"""Numbers that must not reach a total, and numbers that deserve a second look.

Two checks on a plan, both over whole columns:

- **unsafe amounts** (:func:`unsafe_items`): an item whose inputs or plan reach infinity,
  or an amount beyond :data:`~xlpolicy.contract.MAX_PLAN_AMOUNT`, is reported by its cell
  and left out of the plan, so no total (Summary, CSV, JSON) can become infinite, NaN or
  silently rounded. A unit cost of 1e308 is the usual way in: its yearly purchase cost
  overflows.
- **implausible plans** (:func:`plausibility_notes`): an order quantity that would last
  more than :data:`~xlpolicy.contract.MAX_ORDER_YEARS` years of demand, and a lead time over
  :data:`~xlpolicy.contract.MAX_LEAD_TIME_DAYS` days, are planned but reported with the
  cell to check: both usually come from a slip of the keyboard.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd

from .contract import MAX_LEAD_TIME_DAYS, MAX_ORDER_YEARS, MAX_PLAN_AMOUNT
from .problems import ProblemLog

__all__ = ["input_amounts_unsafe", "plausibility_notes", "report_unsafe", "unsafe_items"]

#: The Items inputs whose size is checked before planning.
_INPUTS = ("unit_cost", "order_cost", "shortage_cost", "lead_time_days", "lead_time_sd_days")


def _too_big(x: np.ndarray) -> np.ndarray:
    """True where a value is infinite or larger than MAX_PLAN_AMOUNT (NaN is blank: False)."""
    with np.errstate(invalid="ignore"):
        return np.isinf(x) | (np.abs(np.nan_to_num(x, nan=0.0, posinf=np.inf)) > MAX_PLAN_AMOUNT)


def input_amounts_unsafe(df: pd.DataFrame, annual_demand: np.ndarray) -> np.ndarray:
    """Items whose inputs, or yearly spend (demand x unit cost), pass MAX_PLAN_AMOUNT."""
    bad = np.zeros(len(df), dtype=bool)
    for key in _INPUTS:
        bad |= _too_big(df[key].to_numpy(float))
    demand = np.asarray(annual_demand, dtype=float)
    with np.errstate(all="ignore"):
        bad |= _too_big(demand) | _too_big(demand * df["unit_cost"].to_numpy(float))
    return bad


def unsafe_items(pol: pd.DataFrame) -> np.ndarray:
    """Items (rows of a policy table) with an infinite or too-large number anywhere."""
    bad = np.zeros(len(pol), dtype=bool)
    for key in pol.columns:
        col = pol[key]
        if col.dtype.kind == "f":
            bad |= _too_big(col.to_numpy(float))
    return bad


def report_unsafe(items: Any, rows: np.ndarray, log: ProblemLog) -> None:
    """An error per item left out for unsafe amounts, naming its row's Unit cost cell."""
    df = items.df
    for k in rows:
        row, code = int(df["row"].iat[k]), df["item"].iat[k]
        log.error(
            "This item's numbers are too large to plan reliably (a cost, demand or lead "
            f"time so large or small that a yearly amount passes {MAX_PLAN_AMOUNT:,.0f} or "
            "overflows), so it was left out of the plan and of every total. Check its Unit "
            "cost, Order cost, Shortage cost, Lead time and demand for a typing slip.",
            sheet=items.sheet,
            cell=items.cell("unit_cost", row) or items.cell("item", row),
            item=code,
            value=df["unit_cost"].iat[k],
            code="item-amount-overflow",
        )


def plausibility_notes(
    results: pd.DataFrame, items: Any, planned: np.ndarray, log: ProblemLog
) -> None:
    """Warnings for an order lasting years of demand and for a very long lead time."""
    df = items.df
    q = results["order_qty"].to_numpy(float)
    demand = results["annual_demand"].to_numpy(float)
    lead = df["lead_time_days"].to_numpy(float)
    with np.errstate(all="ignore"):
        years = np.where(demand > 0, q / demand, np.nan)
    long_order = planned & (years > MAX_ORDER_YEARS)
    long_lead = planned & (lead > MAX_LEAD_TIME_DAYS)
    for k in np.flatnonzero(long_order):
        row, code = int(df["row"].iat[k]), df["item"].iat[k]
        log.warning(
            f"The order quantity, {q[k]:,.0f} units, would last {years[k]:,.0f} years at this "
            f"item's demand of {demand[k]:,.4g} a year (more than {MAX_ORDER_YEARS:g} years "
            "is reported). A unit cost or holding rate typed far too small, or an order cost "
            "far too large, gives this: check them.",
            sheet=items.sheet,
            cell=items.cell("unit_cost", row) or items.cell("item", row),
            item=code,
            value=df["unit_cost"].iat[k],
            code="order-covers-years",
        )
    for k in np.flatnonzero(long_lead):
        row, code = int(df["row"].iat[k]), df["item"].iat[k]
        log.warning(
            f"A lead time of {lead[k]:,.0f} days is more than {MAX_LEAD_TIME_DAYS:,.0f} days "
            "(two years), which is usually a slip (weeks or months typed as days, an extra "
            "zero). It was planned as given: check it.",
            sheet=items.sheet,
            cell=items.cell("lead_time_days", row),
            item=code,
            value=df["lead_time_days"].iat[k],
            code="lead-time-implausible",
        )
