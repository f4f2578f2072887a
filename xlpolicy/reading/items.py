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
    DURATION_KEYS,
    EXAMPLE_PREFIX,
    ITEM_COLUMN_BY_KEY,
    ITEM_COLUMNS,
    NUMBER,
    RATE,
    SHORTAGE_COST,
    TEXT,
)
from ..problems import ProblemLog, Severity
from .cells import code_key, describe, is_blank, item_code, item_codes, parse_number, text, texts
from .decimals import Convention, column_convention, settle
from .headers import missing_message, report_header
from .settings import parse_model
from .units import cell_duration, units_from_headers
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
    header = find_header(sheet, ITEM_COLUMNS, mapping=settings.get("column_map"))
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
    report_header(
        header, ITEM_COLUMNS, sheet.name, hrow, log, cell=cell_ref, required=REQUIRED_ALWAYS
    )
    if log.has_fatal:
        return None
    missing = [k for k in REQUIRED_ALWAYS if k not in cols]
    for key in ("order_cost", "holding_rate"):
        if key not in cols and settings.get(key) is None:
            missing.append(key)
    if missing:
        message = missing_message(
            sheet.name,
            [ITEM_COLUMN_BY_KEY[k] for k in missing],
            list(header.texts.values()),
            hrow,
        )
        if any(k in ("order_cost", "holding_rate") for k in missing):
            message += " Order cost and holding rate may instead be set once in a Settings sheet."
        log.fatal(
            message,
            sheet=sheet.name,
            cell=cell_ref(0, hrow),
            value=None,
            code="items-missing-column",
        )
        return None
    units_from_headers(header, settings, sheet.name, log)

    measure = settings.get("service_measure")
    first = header.row_index + 1
    clean = _clean_rows(sheet, header, settings, measure)
    marks = _decimal_marks(sheet, header) if not clean.ok.all() else {}
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
                values, sheet.formats[k], rownum, header, sheet, settings, measure, log, marks
            )
            if rec is None:
                continue
            code = rec["item"]
        key = code_key(code) if code is not None else ""
        if key in first_row_of:
            log.error(
                f"Item code {code!r} appears again (first in row {first_row_of[key]}); this "
                "row was skipped. Give each item one row and its own code.",
                sheet=sheet.name,
                cell=cell_ref(cols["item"], rownum),
                item=code,
                value=code,
                code="item-duplicate",
            )
            continue
        first_row_of[key] = rownum
        records.append(rec)
        kept.append(pos)
        usable.append(ok)

    _report_cell_units(header, sheet.name, log)
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
        if key in DURATION_KEYS and header.days(key) != 1.0:
            x[good] *= header.days(key)  # weeks, months or working days -> days
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


def _decimal_marks(sheet: RawSheet, header: Header) -> dict[str, Convention]:
    """Each numeric column's decimal mark, from its text cells (see reading.decimals)."""
    cols = header.columns
    first = header.row_index + 1
    keys = [key for key in NUMERIC_KEYS if key in cols]
    blk, kinds = sheet.block(list(range(first, len(sheet.rows))), [cols[key] for key in keys])
    out = {}
    for q, key in enumerate(keys):
        at = np.flatnonzero([k is str for k in kinds[:, q]])
        if at.size:
            out[key] = column_convention(
                [(cell_ref(cols[key], sheet.row_numbers[first + i]), blk[i, q]) for i in at]
            )
    return out


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
    marks: dict[str, Convention] | None = None,
) -> tuple[dict[str, Any] | None, bool]:
    """One Items row: (record, usable) or (None, False) when it names no item.

    ``marks``: each numeric column's decimal mark, which settles a cell like 1.200.
    """
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
        typed = value
        if marks and key in marks:
            typed, note, level = settle(value, marks[key])
            if note is not None and level == "error":
                log.add(
                    _sev(policy_col),
                    f"{name} {note}. {consequence}",
                    sheet=sheet.name,
                    cell=cell,
                    item=code,
                    value=value,
                    code=f"{key}-decimal-mark-unclear",
                )
                ok = ok and not policy_col
                continue
            if note is not None:
                log.add(
                    Severity(level),
                    f"{name} {note}",
                    sheet=sheet.name,
                    cell=cell,
                    item=code,
                    value=value,
                    code="number-decimal-mark",
                )
        own_unit = cell_duration(typed) if key in DURATION_KEYS else None
        if own_unit is not None:  # "2 weeks" in the cell: its own unit wins
            x, why = own_unit[0], own_unit[2]
            if why is None:
                header.cell_units.append((key, cell, value, own_unit[1]))
        else:
            x, why = parse_number(
                typed, rate=col.kind == RATE, percent_unit=units.get(key) == "%", number_format=fmt
            )
            if x is not None and key in DURATION_KEYS:
                x *= header.days(key)
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


def _report_cell_units(header: Header, sheet: str, log: ProblemLog) -> None:
    """One note per column whose cells carried a unit of their own ("2 weeks")."""
    by_key: dict[str, list[tuple[str, Any, str]]] = {}
    for key, cell, value, unit in header.cell_units:
        by_key.setdefault(key, []).append((cell, value, unit))
    for key, cells in by_key.items():
        shown = ", ".join(f"{c} {v!r}" for c, v, _ in cells[:5])
        more = f" ... and {len(cells) - 5} more" if len(cells) > 5 else ""
        log.info(
            f"{len(cells)} cell(s) of '{header.titles.get(key, key)}' gave a unit of their own "
            f"and were turned into days ({shown}{more}); the cell's unit wins over the "
            "header's.",
            sheet=sheet,
            cell=cells[0][0],
            code="read-as-cell-unit",
        )


def _sev(policy_col: bool) -> Severity:
    return Severity.ERROR if policy_col else Severity.WARNING


__all__ = ["ItemTable", "read_items", "REQUIRED_ALWAYS", "TEXT", "NUMERIC_KEYS"]
