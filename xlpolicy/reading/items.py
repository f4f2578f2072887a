"""Reading and checking the Items sheet, cell by cell.

A bad cell in a column the policy depends on skips that item (an error naming the cell);
a bad cell in a column used only for the reorder list or the comparison is reported and
left blank. Nothing is turned into a blank without saying so.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd
from openpyxl.utils import column_index_from_string

from ..contract import (
    EXAMPLE_PREFIX,
    ITEM_COLUMN_BY_KEY,
    ITEM_COLUMNS,
    NUMBER,
    RATE,
    SHORTAGE_COST,
    TEXT,
)
from ..problems import ProblemLog, Severity
from .cells import describe, is_blank, item_code, item_codes, parse_number, text, texts
from .settings import parse_model
from .workbook import Header, RawSheet, cell_ref, find_header, kind_is

REQUIRED_ALWAYS = ("item", "unit_cost", "lead_time_days")
NUMERIC_KEYS = tuple(c.key for c in ITEM_COLUMNS if c.kind in (NUMBER, RATE))
TEXT_KEYS = ("description", "category", "supplier")
#: Read as they are and resolved later: the model name, and the start period (a date or a
#: label that must match History, which is read after Items).
OTHER_KEYS = ("demand_model", "history_start")

#: Columns only used for the reorder list and the today-vs-recommended comparison: a bad
#: value there is reported and blanked, but the item is still planned.
SIDE_KEYS = ("on_hand", "on_order", "backordered", "current_order_qty", "current_reorder_point")

# (test, what is wrong, how to fix) per numeric column; the test gets a float or a whole
# column of them (numpy), so it is written with & rather than "and" or chained comparisons.
_RULES: dict[str, tuple[Any, str, str]] = {
    "unit_cost": (
        lambda x: x > 0,
        "must be more than 0",
        "Enter what one unit costs to buy, e.g. 4.75",
    ),
    "order_cost": (
        lambda x: x >= 0,
        "cannot be negative",
        "Enter the cost of placing one order, 0 or more",
    ),
    "holding_rate": (
        lambda x: (x > 0) & (x <= 1),
        "must be more than 0 and at most 1 (100% a year)",
        "Write the yearly holding cost as a fraction or percent, e.g. 0.25 or 25%",
    ),
    "lead_time_days": (
        lambda x: x > 0,
        "must be more than 0 days",
        "Enter the days from ordering to having the goods, e.g. 10",
    ),
    "lead_time_sd_days": (
        lambda x: x >= 0,
        "cannot be negative",
        "Enter the lead time's standard deviation in days, or leave it blank",
    ),
    "service_target": (
        lambda x: (x > 0) & (x < 1),
        "must lie strictly between 0 and 1",
        "Write e.g. 0.95 or 95%, or leave it blank for the Settings default",
    ),
    "shortage_cost": (
        lambda x: x > 0,
        "must be more than 0",
        "Enter the cost of each unit short, or leave it blank",
    ),
    "pack_size": (
        lambda x: (x > 0) & (np.floor(x) == x),
        "must be a whole number of units, 1 or more",
        "Enter how many units come in one pack, e.g. 12, or leave it blank",
    ),
    "minimum_order": (
        lambda x: x >= 0,
        "cannot be negative",
        "Enter the smallest quantity the supplier accepts, or leave it blank",
    ),
    "on_hand": (lambda x: x == x, "", ""),  # (any number: NaN is not one)
    "on_order": (lambda x: x >= 0, "cannot be negative", "Enter units on order, 0 or more"),
    "backordered": (
        lambda x: x >= 0,
        "cannot be negative",
        "Enter units owed to customers, 0 or more",
    ),
    "current_order_qty": (lambda x: x > 0, "must be more than 0", "Enter today's order quantity"),
    "current_reorder_point": (lambda x: x == x, "", ""),
    "annual_demand": (lambda x: x >= 0, "cannot be negative", "Enter units sold per year"),
    "demand_sd": (
        lambda x: x >= 0,
        "cannot be negative",
        "Enter the standard deviation of demand per period",
    ),
    "shelf_life_days": (
        lambda x: x > 0,
        "must be more than 0 days",
        "Enter the days a unit stays usable, e.g. 30, or leave it blank",
    ),
    "review_period_days": (
        lambda x: x >= 0,
        "cannot be negative",
        "Enter the days between reviews, e.g. 7, or 0 for continuous review",
    ),
}


@dataclass
class ItemTable:
    """The Items sheet as columns, plus where each value came from.

    ``df`` has one row per data row that names an item (duplicates and bad rows included,
    ``usable`` False for them), columns: every contract key, ``row`` (the sheet row number).
    """

    sheet: str
    df: pd.DataFrame
    columns: dict[str, int]
    header_row: int
    usable: np.ndarray
    units: dict[str, str] = field(default_factory=dict)
    #: True where the item's own Service target cell gave the target (not a default).
    own_target: np.ndarray | None = None

    def cell(self, key: str, row: int) -> str:
        """A1 reference of ``key``'s cell in sheet row ``row`` ("" if the column is absent)."""
        j = self.columns.get(key)
        return cell_ref(j, row) if j is not None else ""


def read_items(sheet: RawSheet, settings: dict[str, Any], log: ProblemLog) -> ItemTable | None:
    """Read and check the Items sheet. Returns None (with a fatal problem) if unusable."""
    header = find_header(sheet, ITEM_COLUMNS)
    if header is None:
        log.fatal(
            f"The sheet '{sheet.name}' has no header row naming the item columns. Put a row "
            "with headers such as Item, Unit cost, Lead time days at the top of the table "
            "(run 'xlpolicy template' for an example).",
            sheet=sheet.name,
            cell="A1",
            code="items-no-header",
        )
        return None
    hrow = sheet.row_numbers[header.row_index]
    cols = header.columns
    missing = [k for k in REQUIRED_ALWAYS if k not in cols]
    for key in ("order_cost", "holding_rate"):
        if key not in cols and settings.get(key) is None:
            missing.append(key)
    if missing:
        names = ", ".join(f"'{ITEM_COLUMN_BY_KEY[k].title}'" for k in missing)
        extra = ""
        if any(k in ("order_cost", "holding_rate") for k in missing):
            extra = " (order cost and holding rate may instead be set once in a Settings sheet)"
        log.fatal(
            f"The sheet '{sheet.name}' has no column {names}{extra}. Add the column to the "
            f"header row (row {hrow}); headers match loosely, e.g. 'Lead time (days)'.",
            sheet=sheet.name,
            cell=cell_ref(0, hrow),
            value=None,
            code="items-missing-column",
        )
        return None
    for key, idxs in header.duplicates.items():
        for j in idxs[1:]:
            log.warning(
                f"Two columns mean '{ITEM_COLUMN_BY_KEY[key].title}'; the first "
                f"({cell_ref(idxs[0], hrow)}) was used. Rename or delete the other.",
                sheet=sheet.name,
                cell=cell_ref(j, hrow),
                value=sheet.rows[header.row_index][j],
                code="items-duplicate-column",
            )

    measure = settings.get("service_measure")
    first = header.row_index + 1
    clean = _clean_rows(sheet, header, settings, measure)
    records: list[dict[str, Any] | None] = []  # None: a clean row, taken from ``clean``
    kept: list[int] = []  # position (from the first data row) of each item kept
    usable: list[bool] = []
    first_row_of: dict[str, int] = {}
    for pos, k in enumerate(range(first, len(sheet.rows))):
        values, rownum = sheet.rows[k], sheet.row_numbers[k]
        code = clean.codes[pos]
        if clean.ok[pos] and code is not None:  # a clean row always has its code
            # Nothing to report in this row: its values were read with the whole column.
            rec, ok = None, True
        else:
            if all(is_blank(v) for v in values):
                continue
            rec, ok = _read_row(
                values, sheet.formats[k], rownum, header, sheet, settings, measure, log
            )
            if rec is None:
                continue
            code = rec["item"]
        if code in first_row_of:
            log.error(
                f"Item code {code!r} appears again (first in row {first_row_of[code]}); this "
                "row was skipped. Give each item one row and its own code.",
                sheet=sheet.name,
                cell=cell_ref(cols["item"], rownum),
                item=code,
                value=code,
                code="item-duplicate",
            )
            continue
        first_row_of[code] = rownum
        records.append(rec)
        kept.append(pos)
        usable.append(ok)

    keys = [c.key for c in ITEM_COLUMNS]
    at = np.asarray(kept, dtype=np.int64)
    data: dict[str, Any] = {}
    for key in keys + ["row"]:
        column = clean.columns[key]
        out = (
            column[at]
            if isinstance(column, np.ndarray)
            else np.asarray([column[p] for p in kept], dtype=object)
        )
        for n, rec in enumerate(records):
            if rec is not None:
                out[n] = rec.get(key)
        data[key] = out
    df = pd.DataFrame(data, columns=keys + ["row"])
    for key in NUMERIC_KEYS:
        df[key] = pd.to_numeric(df[key], errors="coerce").astype(float)
    for key in ("item",) + TEXT_KEYS + OTHER_KEYS:
        df[key] = df[key].astype(object)
    df["row"] = df["row"].astype(int)
    return ItemTable(
        sheet.name, df, dict(cols), hrow, np.asarray(usable, dtype=bool), dict(header.units)
    )


@dataclass
class _CleanRows:
    """Every data row's values read a column at a time, and which rows need no message.

    ``ok[p]`` is True for a row with nothing to report (its code, numbers and defaults all
    fine); such rows take their values from ``columns`` without a look at each cell. Any
    other row is read by :func:`_read_row`, which writes its problems exactly as before.
    """

    ok: np.ndarray
    codes: list[str | None]
    columns: dict[str, Any]


def _clean_rows(
    sheet: RawSheet, header: Header, settings: dict[str, Any], measure: str | None
) -> _CleanRows:
    cols, units = header.columns, header.units
    first = header.row_index + 1
    rows = list(range(first, len(sheet.rows)))
    n = len(rows)
    ok = np.ones(n, dtype=bool)
    columns: dict[str, Any] = {}
    keys = [key for key in ITEM_COLUMN_BY_KEY if key in cols]
    blk, kinds = sheet.block(rows, [cols[key] for key in keys])
    at = {key: q for q, key in enumerate(keys)}

    def raw(key: str) -> np.ndarray:
        q = at.get(key)
        return blk[:, q] if q is not None else np.full(n, None, dtype=object)

    def formats(key: str) -> list[str]:
        j = cols.get(key)
        if j is None:
            return [""] * n
        return [f[j] if j < len(f) else "" for f in sheet.formats[first:]]

    codes = item_codes(raw("item").tolist(), formats("item"))
    ok &= np.fromiter((c is not None for c in codes), dtype=bool, count=n)
    columns["item"] = np.asarray(codes, dtype=object)
    columns["row"] = np.asarray(sheet.row_numbers[first:], dtype=np.int64)
    for key in TEXT_KEYS:
        columns[key] = np.asarray(texts(raw(key).tolist()), dtype=object)
    ok &= np.fromiter(
        (not (d or "").startswith(EXAMPLE_PREFIX) for d in columns["description"]),
        dtype=bool,
        count=n,
    )
    columns["history_start"] = np.asarray(
        [None if v is None or is_blank(v) else v for v in raw("history_start").tolist()],
        dtype=object,
    )
    models: dict[Any, Any] = {}
    model_raw = raw("demand_model").tolist()
    for v in model_raw:
        if v not in models:
            models[v] = parse_model(v)
    columns["demand_model"] = np.asarray([models[v] for v in model_raw], dtype=object)
    fine = {v: models[v] is not None or is_blank(v) for v in models}
    ok &= np.fromiter((fine[v] for v in model_raw), dtype=bool, count=n)

    uncalculated = _cells_by_column(sheet, cols) if sheet.uncalculated else {}
    for key in NUMERIC_KEYS:
        q = at.get(key)
        x = np.full(n, np.nan)
        columns[key] = x
        if q is None:
            continue
        kind = kinds[:, q]
        num = kind_is(kind, int, float)
        blank = kind_is(kind, type(None))
        if num.any():
            x[num] = blk[num, q].astype(float)
        good = num & np.isfinite(x)
        col = ITEM_COLUMN_BY_KEY[key]
        if col.kind == RATE and units.get(key) == "%":
            shown_pct = np.fromiter(("%" in f for f in formats(key)), dtype=bool, count=n)
            scale = good & ~shown_pct & (x > 1)
            x[scale] /= 100.0
        test = _RULES[key][0]
        if good.any():  # (each rule works on a whole column as on one number)
            good[good] = np.asarray(test(x[good]), dtype=bool)
        x[~good] = np.nan
        ok &= good | blank
        for i in uncalculated.get(cols[key], ()):
            ok[i - first] = False

    for key in REQUIRED_ALWAYS[1:]:
        ok &= np.isfinite(columns[key])
    for key in ("order_cost", "holding_rate", "service_target"):
        missing = np.isnan(columns[key])
        default = settings.get(key)
        if default is not None:
            columns[key][missing] = float(default)
        else:
            ok &= ~missing
    if measure == SHORTAGE_COST:
        ok &= np.isfinite(columns["shortage_cost"])
    return _CleanRows(ok, codes, columns)


def _cells_by_column(sheet: RawSheet, cols: dict[str, int]) -> dict[int, list[int]]:
    """Column -> row indices (into ``sheet.rows``) of formula cells with no saved result."""
    index_of = {r: k for k, r in enumerate(sheet.row_numbers)}
    wanted = set(cols.values())
    out: dict[int, list[int]] = {}
    for ref in sheet.uncalculated:
        m = _A1.match(ref)
        if m is None:
            continue
        j = column_index_from_string(m.group(1)) - 1
        k = index_of.get(int(m.group(2)))
        if j in wanted and k is not None:
            out.setdefault(j, []).append(k)
    return out


_A1 = re.compile(r"^\$?([A-Z]{1,3})\$?(\d+)$")


def _read_row(
    values: list[Any],
    fmts: list[str],
    rownum: int,
    header: Header,
    sheet: RawSheet,
    settings: dict[str, Any],
    measure: str | None,
    log: ProblemLog,
) -> tuple[dict[str, Any] | None, bool]:
    """One Items row: (record, usable) or (None, False) when it names no item."""
    cols, units = header.columns, header.units

    def title(key: str) -> str:
        """The column's header as the user wrote it, so messages use their words."""
        return header.titles.get(key) or ITEM_COLUMN_BY_KEY[key].title

    def raw(key: str) -> tuple[Any, str]:
        j = cols.get(key)
        if j is None or j >= len(values):
            return None, ""
        return values[j], fmts[j]

    def ref(key: str) -> str:
        j = cols.get(key)
        return cell_ref(j, rownum) if j is not None else ""

    code_raw, code_fmt = raw("item")
    code = item_code(code_raw, code_fmt)
    if code is None:
        log.error(
            "This row has data but no item code, so it was skipped. Enter the item's code in "
            f"the '{ITEM_COLUMN_BY_KEY['item'].title}' column.",
            sheet=sheet.name,
            cell=ref("item"),
            value=None,
            code="item-code-missing",
        )
        return None, False

    rec: dict[str, Any] = {"item": code, "row": rownum}
    ok = True
    reported: set[str] = set()  # keys whose cell already has a problem in this row
    for key in TEXT_KEYS:
        rec[key] = text(raw(key)[0])
    if (rec["description"] or "").startswith(EXAMPLE_PREFIX):
        log.warning(
            "This is one of the template's example rows. It was planned like any "
            "other; delete it (and its History rows) once your own items are in.",
            sheet=sheet.name,
            cell=ref("description"),
            item=code,
            value=rec["description"],
            code="template-example-row",
        )
    rec["history_start"] = None if is_blank(raw("history_start")[0]) else raw("history_start")[0]
    model_raw = raw("demand_model")[0]
    rec["demand_model"] = parse_model(model_raw)
    if rec["demand_model"] is None and not is_blank(model_raw):
        log.warning(
            f"{title('demand_model')} {describe(model_raw)} is not a model I know; the model "
            "was chosen from the history. Write normal, poisson, negative binomial, gamma or "
            "auto.",
            sheet=sheet.name,
            cell=ref("demand_model"),
            item=code,
            value=model_raw,
            code="demand_model-unknown",
        )
    for key in NUMERIC_KEYS:
        value, fmt = raw(key)
        col = ITEM_COLUMN_BY_KEY[key]
        name = title(key)
        rec[key] = math.nan
        cell = ref(key)
        policy_col = key not in SIDE_KEYS
        reported.add(key)
        consequence = "The item was skipped." if policy_col else "The cell was left out."
        if cell and cell in sheet.uncalculated:
            log.add(
                _sev(policy_col),
                f"{name} is a formula with no saved result. Open the workbook in your "
                "spreadsheet program, let it calculate, save it, and run again. " + consequence,
                sheet=sheet.name,
                cell=cell,
                item=code,
                value=None,
                code="cell-uncalculated",
            )
            ok = ok and not policy_col
            continue
        x, why = parse_number(
            value, rate=col.kind == RATE, percent_unit=units.get(key) == "%", number_format=fmt
        )
        if why:
            fix = _RULES[key][2]
            log.add(
                _sev(policy_col),
                f"{name} {describe(value)} is {why}. {fix}. {consequence}",
                sheet=sheet.name,
                cell=cell,
                item=code,
                value=value,
                code=f"{key}-not-number",
            )
            ok = ok and not policy_col
            continue
        if x is None:
            reported.discard(key)
            continue
        test, wrong, fix = _RULES[key]
        if not test(x):
            log.add(
                _sev(policy_col),
                f"{name} {describe(value)} {wrong}. {fix}. {consequence}",
                sheet=sheet.name,
                cell=cell,
                item=code,
                value=value,
                code=f"{key}-out-of-range",
            )
            ok = ok and not policy_col
            continue
        rec[key] = x
        reported.discard(key)

    # Required per item, with Settings defaults where the contract allows them.
    for key in REQUIRED_ALWAYS[1:]:
        if math.isnan(rec[key]) and ok and key not in reported:
            log.error(
                f"{title(key)} is blank. {_RULES[key][2]}. The item was skipped.",
                sheet=sheet.name,
                cell=ref(key),
                item=code,
                value=None,
                code=f"{key}-missing",
            )
            ok = False
    for key in ("order_cost", "holding_rate", "service_target"):
        if math.isnan(rec[key]) and key not in reported:
            default = settings.get(key)
            if default is not None:
                rec[key] = float(default)
            elif ok:
                log.error(
                    f"{title(key)} is blank and Settings gives no default. Fill the cell, or "
                    f"set '{ITEM_COLUMN_BY_KEY[key].title}' once in the Settings sheet for all "
                    "items. The item was skipped.",
                    sheet=sheet.name,
                    cell=ref(key) or cell_ref(0, rownum),
                    item=code,
                    value=None,
                    code=f"{key}-missing",
                )
                ok = False
    if (
        measure == SHORTAGE_COST
        and ok
        and math.isnan(rec["shortage_cost"])
        and ("shortage_cost" not in reported)
    ):
        log.error(
            "The service measure is 'shortage cost' but this item has no shortage cost. Enter "
            "the cost of each unit short, or choose another service measure. The item was skipped.",
            sheet=sheet.name,
            cell=ref("shortage_cost") or cell_ref(0, rownum),
            item=code,
            value=None,
            code="shortage_cost-missing",
        )
        ok = False
    return rec, ok


def _sev(policy_col: bool) -> Severity:
    return Severity.ERROR if policy_col else Severity.WARNING


__all__ = ["ItemTable", "read_items", "REQUIRED_ALWAYS", "TEXT", "NUMERIC_KEYS"]
