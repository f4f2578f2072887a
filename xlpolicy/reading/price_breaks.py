"""Reading and checking the optional Price breaks sheet (all-units quantity discounts).

Long layout: one row per break (Item, Minimum quantity, Unit price). A bad cell skips its
row with a warning naming the cell; the item is still planned, with the breaks that were
readable (or at its Unit cost). The sheet is small, so rows are read one by one.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..contract import PRICE_BREAK_COLUMNS
from ..problems import ProblemLog
from .cells import code_key, describe, is_blank, item_code, parse_number
from .items import ItemTable
from .workbook import RawSheet, cell_ref, find_header

_TITLES = {c.key: c.title for c in PRICE_BREAK_COLUMNS}


@dataclass
class PriceBreaks:
    """Breaks per Items row: ``qty`` and ``price`` are (items, k), NaN-padded."""

    sheet: str
    qty: np.ndarray
    price: np.ndarray

    def count(self) -> np.ndarray:
        """How many breaks each item has."""
        return np.isfinite(self.qty).sum(axis=1)


def read_price_breaks(sheet: RawSheet, items: ItemTable, log: ProblemLog) -> PriceBreaks | None:
    """The breaks per item, or None when the sheet has no usable header (reported)."""
    header = find_header(sheet, PRICE_BREAK_COLUMNS, min_matches=2)
    if header is None or any(c.key not in header.columns for c in PRICE_BREAK_COLUMNS):
        log.warning(
            f"The sheet '{sheet.name}' was ignored: it needs the headers "
            + ", ".join(f"'{c.title}'" for c in PRICE_BREAK_COLUMNS)
            + " (one row per break). Every item was planned at its Unit cost.",
            sheet=sheet.name,
            cell="A1",
            code="price-breaks-no-header",
        )
        return None
    cols = header.columns
    codes = items.df["item"].to_numpy(object)
    row_of = {code_key(code): k for k, code in enumerate(codes)}
    unit_cost = items.df["unit_cost"].to_numpy(float)
    found: dict[int, dict[float, tuple[float, str]]] = {}
    for k in range(header.row_index + 1, len(sheet.rows)):
        values, fmts, rownum = sheet.rows[k], sheet.formats[k], sheet.row_numbers[k]
        if all(is_blank(v) for v in values):
            continue

        def raw(key: str, values: list = values, fmts: list = fmts) -> tuple[object, str]:
            j = cols[key]
            return (values[j] if j < len(values) else None, fmts[j] if j < len(fmts) else "")

        def ref(key: str, rownum: int = rownum) -> str:
            return cell_ref(cols[key], rownum)

        code = item_code(*raw("item"))
        if code is None:
            log.warning(
                "This price break names no item, so it was skipped. Enter the item's "
                "code as in Items.",
                sheet=sheet.name,
                cell=ref("item"),
                code="price-break-item-missing",
            )
            continue
        if code_key(code) not in row_of:
            log.warning(
                f"Price break for item {code!r}, which is not in Items; the row was "
                "skipped. Correct the code or add the item.",
                sheet=sheet.name,
                cell=ref("item"),
                item=code,
                value=code,
                code="price-break-item-unknown",
            )
            continue
        nums: dict[str, float] = {}
        for key, what in (("min_qty", "a quantity of units"), ("unit_price", "a price")):
            value, fmt = raw(key)
            x, why = parse_number(value, number_format=fmt)
            if why or x is None or not np.isfinite(x) or x <= 0:
                reason = f"is {why}" if why else "is blank" if x is None else "must be more than 0"
                log.warning(
                    f"{_TITLES[key]} {describe(value)} {reason}. Enter {what}, more "
                    "than 0. This price break was skipped.",
                    sheet=sheet.name,
                    cell=ref(key),
                    item=code,
                    value=value,
                    code=f"price-break-{key}-bad",
                )
                break
            nums[key] = float(x)
        else:
            i = row_of[code_key(code)]
            at = found.setdefault(i, {})
            q, p = nums["min_qty"], nums["unit_price"]
            if q in at:
                log.warning(
                    f"Item {code!r} already has a price break at {q:g} units "
                    f"({at[q][1]}); this row was skipped. Keep one price per "
                    "quantity.",
                    sheet=sheet.name,
                    cell=ref("min_qty"),
                    item=code,
                    value=q,
                    code="price-break-duplicate",
                )
                continue
            if p >= unit_cost[i]:
                log.warning(
                    f"The price {p:g} from {q:g} units is not below the item's Unit "
                    f"cost ({unit_cost[i]:g}): orders of that size are costed at "
                    "this higher price, so the plan keeps below it where that "
                    "pays. Check the price.",
                    sheet=sheet.name,
                    cell=ref("unit_price"),
                    item=code,
                    value=p,
                    code="price-break-not-cheaper",
                )
            at[q] = (p, ref("min_qty"))
    width = max((len(v) for v in found.values()), default=0)
    qty = np.full((len(codes), max(width, 1)), np.nan)
    price = np.full_like(qty, np.nan)
    for i, breaks in found.items():
        for j, (q, (p, _cell)) in enumerate(sorted(breaks.items())):
            qty[i, j] = q
            price[i, j] = p
    return PriceBreaks(sheet.name, qty, price)


__all__ = ["PriceBreaks", "read_price_breaks"]
