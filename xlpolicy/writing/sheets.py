"""The generated output sheets, written with xlsxwriter to a standalone workbook.

Another module splices these sheets into a copy of the user's workbook; writing them to a
file of their own keeps this module simple and lets the sheets be checked on their own.

Reading order: Summary, Policy, Reorder now, Warnings. Summary comes first because it is
what a person should see on opening the file: what was read, the totals, how the numbers
are made and the cautions (including the one for medicine, food and safety-critical stock),
before any per-item number. Policy is the detail behind the totals; Reorder now is the
action list, set up for printing; Warnings is the reference list the Summary points to.

Rules kept here: user text is always written with ``write_string`` (with Excel's quote
prefix when it starts with = + - @, so editing the cell later keeps it text), control
characters are stripped, NaN or infinite numbers become blank cells that keep their
format, and the only formulas are our own SUM, SUMIF and COUNTIF (plus a product for an
order line), each with the computed value as its cached result. A live formula is
written only when it reproduces the computed value; otherwise the plain value is written.
"""

from __future__ import annotations

import datetime as _dt
import math
import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import xlsxwriter
from xlsxwriter.format import Format
from xlsxwriter.utility import xl_col_to_name, xl_rowcol_to_cell
from xlsxwriter.worksheet import Worksheet

from .. import contract
from ..problems import Problem, Severity
from ..report import Report
from .atomic import atomic_output

DEFAULT_SHEET_NAMES = {
    "policy": "Policy",
    "summary": "Summary",
    "reorder": "Reorder now",
    "warnings": "Warnings",
}

#: Reading order of the generated sheets (see the module docstring for why).
SHEET_ORDER: tuple[str, ...] = ("summary", "policy", "reorder", "warnings")

WORKBOOK_OPTIONS = {
    "strings_to_formulas": False,
    "strings_to_urls": False,
    "strings_to_numbers": False,
    "nan_inf_to_errors": False,
}

# Our own restrained palette.
_INK = "#1F2A36"
_MUTED = "#6B7480"
_HEADER_FILL = "#E3E8EE"
_RULE = "#9AA5B1"
_LIGHT_RULE = "#D5DBE1"
_WARNING_FILL = "#FFF3D9"
_SKIPPED_FILL = "#EEEEEE"
_SUPPLIER_FILL = "#EEF2F5"
_SEVERITY_FILL = {
    Severity.FATAL: "#F6D3D0",
    Severity.ERROR: "#FBE3D3",
    Severity.WARNING: "#FFF3D9",
    Severity.INFO: "#E8F0F7",
}
SEVERITY_WORDS = {
    Severity.FATAL: "Fatal",
    Severity.ERROR: "Error (skipped)",
    Severity.WARNING: "Warning",
    Severity.INFO: "Note",
}

_MAX_CELL_TEXT = 32767
_CONTROL = re.compile(r"[\x00-\x08\x0b-\x1f\x7f-\x9f]")
_FORMULA_LEAD = ("=", "+", "-", "@")
_BAD_SHEET_CHARS = re.compile(r"[\[\]:*?/\\]")

# Number formats.
_UNITS = "#,##0"
_UNITS1 = "#,##0.0"
_DEMAND = "#,##0.00"
_PERCENT = "0.0%"
_DATE = "yyyy-mm-dd"


# ---------------------------------------------------------------------------
# Small helpers
# ---------------------------------------------------------------------------


def clean_text(value: Any) -> str | None:
    """User text as it should land in a cell, or None for a missing value.

    Control characters other than tab and newline are removed (they are invalid or
    invisible in a cell); a whole-number float (an item code read as a number) loses its
    ".0"; text longer than Excel's cell limit is cut.
    """
    if value is None:
        return None
    if isinstance(value, float):
        if math.isnan(value):
            return None
        if value.is_integer():
            value = int(value)
    elif isinstance(value, (np.floating, np.integer)):
        return clean_text(value.item())
    elif not isinstance(value, str):
        try:
            if pd.isna(value):
                return None
        except (TypeError, ValueError):
            pass
    text = str(value).replace("\r\n", "\n").replace("\r", "\n")
    text = _CONTROL.sub("", text)
    return text[:_MAX_CELL_TEXT]


def _finite(value: Any) -> float | None:
    """A finite float, or None for missing, NaN, infinite or non-numeric values."""
    if value is None or isinstance(value, (str, bool)):
        return None
    try:
        f = float(value)
    except (TypeError, ValueError):
        return None
    return f if math.isfinite(f) else None


def _floats(values: pd.Series) -> np.ndarray:
    """A column as a float array; text, missing and pd.NA become NaN."""
    return pd.to_numeric(values, errors="coerce").to_numpy(dtype=float, na_value=np.nan)


def money_format(currency: Any, decimals: int = 2) -> str:
    """An Excel number format for money in the given currency.

    A symbol ($, £, €, R$) goes before the number, a letter code (EUR, CHF, kr) after it;
    no currency gives a plain number with thousands separators.
    """
    body = "#,##0" + ("." + "0" * decimals if decimals > 0 else "")
    cur = clean_text(currency)
    cur = (cur or "").replace('"', "").replace("\n", " ").replace("\t", " ").strip()
    if not cur:
        return body
    if cur.isalpha() and len(cur) >= 2:
        return f'{body} "{cur}"'
    return f'"{cur}"{body}'


def _quote_sheet(name: str) -> str:
    """A sheet name as it appears in a formula reference, always quoted."""
    return "'" + name.replace("'", "''") + "'"


def _abs_range(sheet: str, col: int, first_row: int, last_row: int) -> str:
    """An absolute one-column range on another sheet, e.g. 'Policy'!$Q$2:$Q$40."""
    letter = xl_col_to_name(col)
    return f"{_quote_sheet(sheet)}!${letter}${first_row + 1}:${letter}${last_row + 1}"


def _same(a: float | None, b: float | None) -> bool:
    """Whether a formula's value matches the computed one (to rounding noise)."""
    if a is None or b is None:
        return False
    return math.isclose(a, b, rel_tol=1e-9, abs_tol=1e-6)


def resolve_sheet_names(sheet_names: Mapping[str, str] | None) -> dict[str, str]:
    """The final sheet names: defaults overridden by ``sheet_names``, made valid for Excel.

    Characters Excel forbids are removed, names are cut to 31 characters and made unique
    (case-insensitively) by a numeric suffix, so a bad request never stops the run.
    """
    wanted = dict(DEFAULT_SHEET_NAMES)
    if sheet_names:
        unknown = set(sheet_names) - set(DEFAULT_SHEET_NAMES)
        if unknown:
            raise ValueError(f"unknown sheet keys: {sorted(unknown)}")
        wanted.update(sheet_names)
    out: dict[str, str] = {}
    taken: set[str] = set()
    for key in SHEET_ORDER:
        name = _BAD_SHEET_CHARS.sub("", clean_text(wanted[key]) or "").replace("\n", " ")
        name = name.strip().strip("'").strip()[:31] or DEFAULT_SHEET_NAMES[key]
        base, n = name, 2
        while name.lower() in taken:
            suffix = f" ({n})"
            name = base[: 31 - len(suffix)] + suffix
            n += 1
        taken.add(name.lower())
        out[key] = name
    return out


class _Styles:
    """Formats made on demand and cached by their properties."""

    def __init__(self, workbook: xlsxwriter.Workbook):
        self._wb = workbook
        self._cache: dict[tuple, Format] = {}

    def get(self, **props: Any) -> Format:
        key = tuple(sorted(props.items()))
        fmt = self._cache.get(key)
        if fmt is None:
            fmt = self._wb.add_format(dict(props))
            self._cache[key] = fmt
        return fmt


class _Writer:
    """Cell writing with the project's rules applied (text as text, NaN as blank)."""

    def __init__(self, styles: _Styles):
        self.styles = styles

    def text(self, ws: Worksheet, row: int, col: int, value: Any, **props: Any) -> int:
        """Write user or our text as a string; blank (keeping the format) when missing.

        Returns the length of the text written, for column widths.
        """
        text = clean_text(value)
        if text is None or text == "":
            ws.write_blank(row, col, None, self.styles.get(**props))
            return 0
        if text.startswith(_FORMULA_LEAD):
            props = {**props, "quote_prefix": True}
        ws.write_string(row, col, text, self.styles.get(**props))
        return max(len(line) for line in text.split("\n"))

    def number(self, ws: Worksheet, row: int, col: int, value: Any, **props: Any) -> None:
        """Write a number; a missing, NaN or infinite value becomes a formatted blank.

        A non-numeric value where a number belongs is written as text so it is not lost.
        """
        if isinstance(value, str):
            self.text(ws, row, col, value, **props)
            return
        f = _finite(value)
        fmt = self.styles.get(**props)
        if f is None:
            ws.write_blank(row, col, None, fmt)
        else:
            ws.write_number(row, col, f, fmt)

    def any(self, ws: Worksheet, row: int, col: int, value: Any, **props: Any) -> None:
        """Write a value of unknown kind: date, number or text."""
        if isinstance(value, np.datetime64):
            value = pd.Timestamp(value)
        if isinstance(value, (_dt.date, _dt.datetime)) and not (
            isinstance(value, pd.Timestamp) and pd.isna(value)
        ):
            if isinstance(value, _dt.datetime):
                value = value.replace(tzinfo=None)
            ws.write_datetime(row, col, value, self.styles.get(**props, num_format=_DATE))
        elif isinstance(value, (int, float, np.integer, np.floating)) and not isinstance(
            value, bool
        ):
            self.number(ws, row, col, value, **props)
        else:
            self.text(ws, row, col, value, **props)


# ---------------------------------------------------------------------------
# Policy sheet layout
# ---------------------------------------------------------------------------


@dataclass(frozen=True)
class _Col:
    key: str
    title: str
    kind: str  # text, code, units, units1, demand, days, percent, money, count, decimal1


_POLICY_COLUMNS: tuple[_Col, ...] = (
    _Col("item", "Item", "code"),
    _Col("description", "Description", "text"),
    _Col("category", "Category", "text"),
    _Col("supplier", "Supplier", "text"),
    _Col("status", "Status", "text"),
    _Col("model", "Demand model", "text"),
    _Col("model_reason", "Why this model", "text"),
    _Col("demand_class", "Demand pattern", "text"),
    _Col("demand_source", "Demand taken from", "text"),
    _Col("history_start", "History counted from", "text"),
    _Col("history_periods", "History periods", "count"),
    _Col("rate_method", "Demand rate estimated by", "text"),
    _Col("adi", "Average periods between sales", "demand"),
    _Col("cv2", "Variability of sale sizes (CV squared)", "demand"),
    _Col("annual_demand", "Annual demand (units)", "demand"),
    _Col("demand_per_period", "Demand per period (units)", "demand"),
    _Col("demand_sd_per_period", "Demand sd per period (units)", "demand"),
    _Col("lead_time_days", "Lead time (days)", "days"),
    _Col("lead_time_demand_mean", "Lead-time demand, mean (units)", "demand"),
    _Col("lead_time_demand_sd", "Lead-time demand, sd (units)", "demand"),
    _Col("service_measure", "Service measure", "text"),
    _Col("service_target", "Service target", "percent"),
    _Col("order_qty", "Order quantity (units)", "units"),
    _Col("reorder_point", "Reorder point (units)", "units"),
    _Col("safety_stock", "Safety stock (units)", "units1"),
    _Col("cycle_service", "Cycle service achieved", "percent"),
    _Col("fill_rate", "Fill rate achieved", "percent"),
    _Col("orders_per_year", "Orders per year", "decimal1"),
    _Col("annual_ordering_cost", "Annual ordering cost", "money"),
    _Col("annual_cycle_holding_cost", "Annual cycle stock holding cost", "money"),
    _Col("annual_safety_holding_cost", "Annual safety stock holding cost", "money"),
    _Col("annual_shortage_cost", "Annual shortage cost", "money"),
    _Col("annual_total_cost", "Annual total cost", "money"),
    _Col("annual_purchase_cost", "Annual purchase cost", "money"),
    _Col("average_inventory_value", "Average inventory value", "money"),
    _Col("unit_cost", "Unit cost", "money"),
    _Col("order_cost", "Order cost (per order)", "money"),
    _Col("holding_rate", "Holding rate (per year)", "percent"),
    _Col("shortage_cost", "Shortage cost (per unit short)", "money"),
    _Col("pack_size", "Pack size (units)", "units"),
    _Col("minimum_order", "Minimum order (units)", "units"),
    _Col("eoq", "EOQ before rounding (units)", "demand"),
    _Col("expected_units_short_per_cycle", "Expected units short per order cycle", "demand"),
    _Col("inventory_position", "Inventory position (units)", "units"),
    _Col("order_now_qty", "Quantity to order now (units)", "units"),
)

_NUM_FORMAT = {
    "units": _UNITS,
    "units1": _UNITS1,
    "demand": _DEMAND,
    "days": "#,##0.0",
    "percent": _PERCENT,
    "count": "#,##0",
    "decimal1": "#,##0.0",
}


def _policy_columns(results: pd.DataFrame) -> list[_Col]:
    """Our columns in our order, then any other contract key the results carry."""
    known = {c.key for c in _POLICY_COLUMNS}
    cols = [c for c in _POLICY_COLUMNS if c.key in results.columns or c.key in ("item", "status")]
    for key in contract.ALL_RESULT_KEYS:
        if key not in known and key in results.columns:
            kind = "demand" if pd.api.types.is_numeric_dtype(results[key]) else "text"
            cols.append(_Col(key, key.replace("_", " ").capitalize(), kind))
    return cols


def _display_len(values: pd.Series, kind: str, currency_len: int) -> int:
    """Roughly how many characters the widest formatted value takes."""
    nums = _floats(values)
    nums = nums[np.isfinite(nums)]
    if nums.size == 0:
        return 0
    big = float(np.max(np.abs(nums)))
    neg = 1 if (nums < 0).any() else 0
    if kind == "percent":
        return len(f"{big * 100:.1f}%") + neg
    decimals = {"units": 0, "count": 0, "units1": 1, "decimal1": 1, "days": 1}.get(kind, 2)
    extra = currency_len + 1 if kind == "money" and currency_len else 0
    return len(f"{big:,.{decimals}f}") + neg + extra


def _header_width(title: str) -> int:
    """Width that lets a header wrap onto at most three lines."""
    longest = max(len(w) for w in title.split())
    return max(longest, math.ceil(len(title) / 3)) + 2


# ---------------------------------------------------------------------------
# The writer
# ---------------------------------------------------------------------------


class _Book:
    """One run of writing the generated sheets."""

    def __init__(self, wb: xlsxwriter.Workbook, report: Report, names: dict[str, str]):
        self.wb = wb
        self.report = report
        self.names = names
        self.styles = _Styles(wb)
        self.w = _Writer(self.styles)
        settings = report.settings or {}
        cur = clean_text(settings.get("currency"))
        self.currency = (cur or "").strip()
        self.money = money_format(self.currency)
        self.results = (
            report.results if report.results is not None else pd.DataFrame()
        ).reset_index(drop=True)
        self.reorder = (
            report.reorder if report.reorder is not None else pd.DataFrame()
        ).reset_index(drop=True)
        # Filled in by the sheet writers, used by the Summary's live formulas.
        self.policy_cols: dict[str, int] = {}
        self.policy_rows: tuple[int, int] | None = None  # first, last data row (0-based)
        self.reorder_total_cell: tuple[int, int] | None = None
        self.reorder_total_value: float | None = None

    # -- common pieces -----------------------------------------------------

    def header_props(self) -> dict[str, Any]:
        return {
            "bold": True,
            "font_color": _INK,
            "bg_color": _HEADER_FILL,
            "bottom": 1,
            "bottom_color": _RULE,
            "text_wrap": True,
            "valign": "bottom",
        }

    def num_props(self, kind: str) -> dict[str, Any]:
        if kind == "money":
            return {"num_format": self.money}
        return {"num_format": _NUM_FORMAT.get(kind, "General")}

    # -- Policy --------------------------------------------------------------

    def write_policy(self, ws: Worksheet) -> None:
        """One row per item read, skipped items included and greyed."""
        df = self.results
        cols = _policy_columns(df)
        n = len(df)
        head = self.header_props()
        ws.set_row(0, 48)
        for c, col in enumerate(cols):
            self.w.text(ws, 0, c, col.title, **head)
            self.policy_cols[col.key] = c

        cur_len = len(self.currency)
        for c, col in enumerate(cols):
            values = df[col.key] if col.key in df.columns else pd.Series([None] * n, dtype=object)
            data = values.tolist()
            if col.kind in ("text", "code"):
                props = {"num_format": "@"}
                longest = 0
                for r, v in enumerate(data, start=1):
                    longest = max(longest, self.w.text(ws, r, c, v, **props))
                cap = 45 if col.key == "description" else 30
                width = min(max(_header_width(col.title), longest + 2, 8), cap)
            else:
                props = self.num_props(col.kind)
                for r, v in enumerate(data, start=1):
                    self.w.number(ws, r, c, v, **props)
                data_len = _display_len(values, col.kind, cur_len)
                width = min(max(_header_width(col.title), data_len + 2, 8), 20)
            ws.set_column(c, c, width)

        last_col = len(cols) - 1
        ws.freeze_panes(1, 1)
        ws.autofilter(0, 0, max(n, 1), last_col)
        # Codes such as 000123 are text on purpose: no "number stored as text" markers.
        ws.ignore_errors({"number_stored_as_text": f"A2:A{max(n, 1) + 1}"})
        if n:
            self.policy_rows = (1, n)
            status = xl_col_to_name(self.policy_cols["status"])
            ws.conditional_format(
                1, 0, n, last_col,
                {
                    "type": "formula",
                    "criteria": f'=${status}2="{contract.STATUS_SKIPPED}"',
                    "format": self.styles.get(bg_color=_SKIPPED_FILL, font_color=_MUTED),
                },
            )
            ws.conditional_format(
                1, 0, n, last_col,
                {
                    "type": "formula",
                    "criteria": f'=${status}2="{contract.STATUS_WARNING}"',
                    "format": self.styles.get(bg_color=_WARNING_FILL),
                },
            )
        else:
            self.w.text(ws, 1, 0, "No items were read.", italic=True, font_color=_MUTED)

    # -- Reorder now -----------------------------------------------------------

    _REORDER_COLUMNS: tuple[_Col, ...] = (
        _Col("supplier", "Supplier", "text"),
        _Col("item", "Item", "code"),
        _Col("description", "Description", "text"),
        _Col("on_hand", "On hand (units)", "units"),
        _Col("on_order", "On order (units)", "units"),
        _Col("backordered", "Backordered (units)", "units"),
        _Col("inventory_position", "Inventory position (units)", "units"),
        _Col("reorder_point", "Reorder point (units)", "units"),
        _Col("order_qty", "Order quantity (units)", "units"),
        _Col("order_now_qty", "Quantity to order now (units)", "units"),
        _Col("unit_cost", "Unit cost", "money"),
        _Col("order_now_value", "Order value", "money"),
    )

    def write_reorder(self, ws: Worksheet) -> None:
        """The purchaser's list: items to order now, grouped by supplier, ready to print."""
        cols = self._REORDER_COLUMNS
        last_col = len(cols) - 1
        run = self.report.run_date.isoformat() if self.report.run_date else ""
        source = clean_text(self.report.source_name) or ""
        ws.write_string(0, 0, f"Reorder now, run {run}", self.styles.get(bold=True, font_size=14))
        self.w.text(ws, 1, 0, f"From {source}" if source else "", font_color=_MUTED)
        ws.write_string(
            2, 0,
            "Items whose inventory position (on hand + on order - backordered) is at or "
            "below the reorder point.",
            self.styles.get(italic=True, font_color=_MUTED),
        )
        header_row = 4
        head = self.header_props()
        ws.set_row(header_row, 48)
        for c, col in enumerate(cols):
            self.w.text(ws, header_row, c, col.title, **head)

        widths = [max(_header_width(col.title), 8) for col in cols]
        df = self.reorder
        row = header_row + 1
        if df.empty:
            ws.write_string(row, 0, self._nothing_to_order(), self.styles.get(bold=True))
            last_row = row
        else:
            row, last_row = self._reorder_groups(ws, df, cols, row, widths)
        widths[2] = min(widths[2], 40)
        for c, width in enumerate(widths):
            ws.set_column(c, c, min(width, 40))

        ws.freeze_panes(header_row + 1, 0)
        ws.ignore_errors({"number_stored_as_text": f"B{header_row + 2}:B{last_row + 1}"})
        ws.set_landscape()
        ws.fit_to_pages(1, 0)
        ws.repeat_rows(header_row)
        ws.print_area(0, 0, last_row, last_col)
        ws.hide_gridlines(2)
        ws.set_margins(left=0.5, right=0.5, top=0.75, bottom=0.75)
        header_source = source.replace("&", "&&").replace("\n", " ")[:80]
        ws.set_header(f"&L{header_source}&C&\"-,Bold\"Reorder now&RRun {run}")
        ws.set_footer(f"&LRun {run}&RPage &P of &N")

    def _nothing_to_order(self) -> str:
        """Why the reorder list is empty, in one plain sentence."""
        res = self.results
        has_stock = False
        if "inventory_position" in res.columns:
            pos = pd.to_numeric(res["inventory_position"], errors="coerce")
            has_stock = bool(pos.notna().any())
        if not has_stock:
            return (
                "Nothing to list: no stock figures were given (On hand, On order, "
                "Backordered in Items), so the tool cannot tell what to order now."
            )
        return "Nothing to order now: every planned item is above its reorder point."

    def _reorder_groups(
        self, ws: Worksheet, df: pd.DataFrame, cols: Sequence[_Col], row: int, widths: list[int]
    ) -> tuple[int, int]:
        """Supplier heading, its items, its subtotal; then a grand total. Returns rows."""
        value_col = len(cols) - 1
        qty_col = [c.key for c in cols].index("order_now_qty")
        cost_col = [c.key for c in cols].index("unit_cost")
        item_col = [c.key for c in cols].index("item")
        suppliers = df["supplier"].map(clean_text) if "supplier" in df.columns else None
        if suppliers is None:
            suppliers = pd.Series([None] * len(df))
        suppliers = suppliers.fillna("").astype(str).str.strip()
        suppliers = suppliers.where(suppliers != "", "(no supplier given)")
        line = {"bottom": 1, "bottom_color": _LIGHT_RULE}
        first_data = row
        grand = 0.0
        for supplier, group in df.groupby(suppliers.to_numpy(), sort=False):
            band = {"bold": True, "bg_color": _SUPPLIER_FILL}
            for c in range(len(cols)):
                ws.write_blank(row, c, None, self.styles.get(**band))
            self.w.text(ws, row, 0, supplier, **band)
            row += 1
            first = row
            sub = 0.0
            for rec in group.to_dict("records"):
                for c, col in enumerate(cols):
                    v = rec.get(col.key)
                    if col.kind in ("text", "code"):
                        n = self.w.text(ws, row, c, v, num_format="@", **line)
                        widths[c] = max(widths[c], n + 2)
                    elif c == value_col:
                        sub += self._order_value(ws, row, rec, (qty_col, cost_col, c), line)
                    else:
                        self.w.number(ws, row, c, v, **self.num_props(col.kind), **line)
                        widths[c] = max(widths[c], _display_len(pd.Series([v]), col.kind,
                                                                len(self.currency)) + 2)
                row += 1
            letter = xl_col_to_name(value_col)
            ws.write_string(row, value_col - 1, f"Total for {supplier}"[:_MAX_CELL_TEXT],
                            self.styles.get(bold=True, align="right"))
            ws.write_formula(
                row, value_col, f"=SUM({letter}{first + 1}:{letter}{row})",
                self.styles.get(bold=True, num_format=self.money, top=1, top_color=_RULE),
                sub,
            )
            grand += sub
            row += 2  # a blank line between suppliers
        last_data = row - 2
        item_letter = xl_col_to_name(item_col)
        letter = xl_col_to_name(value_col)
        ws.write_string(row, value_col - 1, "Total to order now",
                        self.styles.get(bold=True, align="right", font_size=12))
        ws.write_formula(
            row, value_col,
            f'=SUMIF({item_letter}{first_data + 1}:{item_letter}{last_data + 1},"<>",'
            f"{letter}{first_data + 1}:{letter}{last_data + 1})",
            self.styles.get(bold=True, font_size=12, num_format=self.money, top=6,
                            top_color=_INK),
            grand,
        )
        self.reorder_total_cell = (row, value_col)
        self.reorder_total_value = grand
        money_len = _display_len(pd.Series([grand]), "money", len(self.currency)) + 2
        widths[value_col] = max(widths[value_col], money_len)
        return row, row

    def _order_value(
        self, ws: Worksheet, row: int, rec: dict, cols: tuple[int, int, int], line: dict
    ) -> float:
        """Write one line's order value: a live product when it matches. Returns the value."""
        qty_col, cost_col, col = cols
        value = _finite(rec.get("order_now_value"))
        qty, cost = _finite(rec.get("order_now_qty")), _finite(rec.get("unit_cost"))
        props = {"num_format": self.money, **line}
        if value is not None and qty is not None and cost is not None and _same(qty * cost, value):
            formula = f"={xl_rowcol_to_cell(row, qty_col)}*{xl_rowcol_to_cell(row, cost_col)}"
            ws.write_formula(row, col, formula, self.styles.get(**props), value)
        else:
            self.w.number(ws, row, col, value, **props)
        return value or 0.0

    # -- Warnings --------------------------------------------------------------

    def write_warnings(self, ws: Worksheet) -> None:
        """One row per problem, most severe first."""
        problems: list[Problem] = sorted(
            self.report.problems or [], key=lambda p: _severity(p).rank
        )
        if not problems:
            ws.write_string(0, 0, "No problems found.", self.styles.get(bold=True))
            ws.set_column(0, 0, 24)
            return
        titles = ("Severity", "Sheet", "Cell", "Item", "Value found", "Message")
        head = self.header_props()
        for c, title in enumerate(titles):
            self.w.text(ws, 0, c, title, **head)
        widths = [len(t) + 2 for t in titles]
        for r, p in enumerate(problems, start=1):
            sev = _severity(p)
            tint = {
                "bg_color": _SEVERITY_FILL[sev],
                "valign": "top",
                "bottom": 1,
                "bottom_color": "#FFFFFF",
            }
            cells = (SEVERITY_WORDS[sev], p.sheet, p.cell, p.item)
            for c, v in enumerate(cells):
                n = self.w.text(ws, r, c, v, **tint)
                widths[c] = max(widths[c], n + 2)
            self.w.any(ws, r, 4, p.value, **tint)
            widths[4] = max(widths[4], len(clean_text(p.value) or "") + 2)
            self.w.text(ws, r, 5, p.message, text_wrap=True, **tint)
        for c in range(5):
            ws.set_column(c, c, min(max(widths[c], 8), 30))
        ws.set_column(5, 5, 80)
        ws.freeze_panes(1, 0)
        ws.autofilter(0, 0, len(problems), len(titles) - 1)
        ws.ignore_errors({"number_stored_as_text": f"C2:E{len(problems) + 1}"})

    # -- Summary ---------------------------------------------------------------

    def write_summary(self, ws: Worksheet) -> None:
        """Title, what was read, totals, settings, method and cautions."""
        r = self.report
        ws.set_column(0, 0, 42)
        ws.set_column(1, 1, 22)
        ws.set_column(2, 2, 26)
        ws.set_column(3, 3, 16)
        source = clean_text(r.source_name) or "(unnamed workbook)"
        run = r.run_date.isoformat() if r.run_date else ""
        self.w.text(ws, 0, 0, f"Stock policy for {source}", bold=True, font_size=15,
                    font_color=_INK)
        self.w.text(ws, 1, 0, f"Run on {run}", font_color=_MUTED)
        row = 3
        row = self._summary_read(ws, row)
        row = self._summary_totals(ws, row + 1)
        row = self._summary_settings(ws, row + 1)
        row = self._summary_paragraphs(ws, row + 1, "How the numbers are made", self._method())
        row = self._summary_paragraphs(ws, row + 1, "Cautions", self._cautions())
        ws.set_portrait()
        ws.fit_to_pages(1, 0)
        ws.print_area(0, 0, row, 3)
        ws.hide_gridlines(2)

    def _block_title(self, ws: Worksheet, row: int, title: str) -> int:
        props = {"bold": True, "font_size": 12, "font_color": _INK, "bottom": 1,
                 "bottom_color": _RULE}
        for c in range(4):
            ws.write_blank(row, c, None, self.styles.get(**props))
        ws.write_string(row, 0, title, self.styles.get(**props))
        return row + 1

    def _summary_read(self, ws: Worksheet, row: int) -> int:
        info = dict(self.report.input_summary or {})
        row = self._block_title(ws, row, "What was read")
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
        if "file" not in info and self.report.source_name:
            info["file"] = self.report.source_name
        keys = [k for k in labels if k in info] + [k for k in info if k not in labels]
        for key in keys:
            label = labels.get(key) or key.replace("_", " ").capitalize()
            self.w.text(ws, row, 0, label)
            value = info[key]
            if isinstance(value, (int, np.integer)) and not isinstance(value, bool):
                self.w.number(ws, row, 1, value, num_format="#,##0", align="left")
            elif isinstance(value, (list, tuple, dict, set)):
                self.w.text(ws, row, 1, ", ".join(map(str, value)))
            else:
                self.w.any(ws, row, 1, value, align="left")
            row += 1
        counts = {s: 0 for s in Severity}
        for p in self.report.problems or []:
            counts[_severity(p)] += 1
        parts = [f"{counts[s]} {SEVERITY_WORDS[s].split()[0].lower()}"
                 f"{'' if counts[s] == 1 else 's'}" for s in Severity if counts[s]]
        self.w.text(ws, row, 0, "Problems found")
        self.w.text(ws, row, 1,
                    ("; ".join(parts) + f" (see the {self.names['warnings']} sheet)")
                    if parts else "none")
        return row + 1

    _TOTAL_LABELS: tuple[tuple[str, str, str], ...] = (
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
        ("safety_stock_value", "Safety stock value", "money"),
        ("inventory_turns", "Inventory turns (per year)", "decimal1"),
        ("orders_per_year", "Orders per year, all items", "decimal1"),
        ("items_to_reorder", "Items to reorder now", "count"),
        ("reorder_value", "Value to reorder now", "money"),
    )

    _SUM_TOTALS = {
        "annual_demand_units": "annual_demand",
        "annual_ordering_cost": "annual_ordering_cost",
        "annual_cycle_holding_cost": "annual_cycle_holding_cost",
        "annual_safety_holding_cost": "annual_safety_holding_cost",
        "annual_shortage_cost": "annual_shortage_cost",
        "annual_total_cost": "annual_total_cost",
        "annual_purchase_cost": "annual_purchase_cost",
        "average_inventory_value": "average_inventory_value",
        "orders_per_year": "orders_per_year",
    }

    def _total_formula(self, key: str) -> tuple[str, float] | None:
        """A live formula for a total and the value it gives, when one applies."""
        res = self.results
        if key == "reorder_value":
            if self.reorder_total_cell is None:
                return None
            ref = xl_rowcol_to_cell(*self.reorder_total_cell, row_abs=True, col_abs=True)
            return f"={_quote_sheet(self.names['reorder'])}!{ref}", self.reorder_total_value or 0.0
        if self.policy_rows is None:
            return None
        first, last = self.policy_rows
        sheet = self.names["policy"]
        if key in self._SUM_TOTALS:
            col_key = self._SUM_TOTALS[key]
            if col_key not in self.policy_cols or col_key not in res.columns:
                return None
            nums = _floats(res[col_key])
            value = float(np.sum(nums[np.isfinite(nums)]))
            rng = _abs_range(sheet, self.policy_cols[col_key], first, last)
            return f"=SUM({rng})", value
        status_rng = _abs_range(sheet, self.policy_cols["status"], first, last)
        status = res["status"].astype(str) if "status" in res.columns else pd.Series([], dtype=str)
        ok, warn, skip = contract.STATUS_OK, contract.STATUS_WARNING, contract.STATUS_SKIPPED
        if key == "items_planned":
            value = float(status.isin([ok, warn]).sum())
            return f'=COUNTIF({status_rng},"{ok}")+COUNTIF({status_rng},"{warn}")', value
        if key == "items_warning":
            return f'=COUNTIF({status_rng},"{warn}")', float((status == warn).sum())
        if key == "items_skipped":
            return f'=COUNTIF({status_rng},"{skip}")', float((status == skip).sum())
        if key == "items_to_reorder" and "order_now_qty" in self.policy_cols:
            nums = _floats(res["order_now_qty"])
            rng = _abs_range(sheet, self.policy_cols["order_now_qty"], first, last)
            return f'=COUNTIF({rng},">0")', float(np.sum(np.isfinite(nums) & (nums > 0)))
        return None

    def _summary_totals(self, ws: Worksheet, row: int) -> int:
        totals = dict(self.report.totals or {})
        row = self._block_title(ws, row, "Totals for the planned items")
        known = {k for k, _, _ in self._TOTAL_LABELS}
        rows = [t for t in self._TOTAL_LABELS if t[0] in totals]
        rows += [(k, k.replace("_", " ").capitalize(), "decimal1") for k in totals
                 if k not in known]
        for key, label, kind in rows:
            self.w.text(ws, row, 0, label)
            value = _finite(totals.get(key))
            props = self.num_props(kind)
            live = self._total_formula(key)
            if live is not None and _same(live[1], value):
                ws.write_formula(row, 1, live[0], self.styles.get(**props), value)
            else:
                self.w.number(ws, row, 1, value, **props)
            row += 1
        return row

    def _summary_settings(self, ws: Worksheet, row: int) -> int:
        settings = dict(self.report.settings or {})
        sources = settings.get("sources") or {}
        row = self._block_title(ws, row, "Settings used")
        sub = {"italic": True, "font_color": _MUTED}
        for c, t in enumerate(("Setting", "Value", "Where it came from")):
            ws.write_string(row, c, t, self.styles.get(**sub))
        row += 1
        entries: list[tuple[str, str]] = [(s.key, s.title) for s in contract.SETTINGS]
        entries.append(("days_per_period", "Days per period"))
        known = {k for k, _ in entries} | {"sources"}
        entries += [(k, k.replace("_", " ").capitalize()) for k in settings if k not in known]
        for key, title in entries:
            self.w.text(ws, row, 0, title)
            value = settings.get(key)
            if _finite(value) is None and not isinstance(value, str) and clean_text(value) is None:
                self.w.text(ws, row, 1, "not set", font_color=_MUTED, align="left")
            elif key in ("service_target", "holding_rate") and _finite(value) is not None:
                self.w.number(ws, row, 1, value, num_format=_PERCENT, align="left")
            elif key == "order_cost" and _finite(value) is not None:
                self.w.number(ws, row, 1, value, num_format=self.money, align="left")
            elif _finite(value) is not None:
                f = _finite(value)
                fmt = "#,##0" if f is not None and f.is_integer() else "#,##0.00"
                self.w.number(ws, row, 1, value, num_format=fmt, align="left")
            else:
                self.w.any(ws, row, 1, value, align="left")
            self.w.text(ws, row, 2, sources.get(key, ""), font_color=_MUTED)
            row += 1
        return row

    def _summary_paragraphs(self, ws: Worksheet, row: int, title: str,
                            sentences: Sequence[str]) -> int:
        row = self._block_title(ws, row, title)
        per_line = 42 + 22 + 26 + 16  # characters across the merged columns, roughly
        fmt = self.styles.get(text_wrap=True, valign="top")
        for text in sentences:
            ws.merge_range(row, 0, row, 3, "", fmt)
            ws.write_string(row, 0, text, fmt)
            lines = max(1, math.ceil(len(text) * 1.1 / per_line))
            ws.set_row(row, 15 * lines + 3)
            row += 1
        return row

    def _method(self) -> list[str]:
        measure = str((self.report.settings or {}).get("service_measure") or
                      contract.CYCLE_SERVICE)
        service = {
            contract.CYCLE_SERVICE: (
                "cycle service, the chance of getting through the wait for an order without "
                "running out. The reorder point is the smallest whole number of units whose "
                "chance of covering the lead-time demand meets the target."
            ),
            contract.FILL_RATE: (
                "fill rate, the share of demand met straight from the shelf. With the order "
                "quantity fixed, the reorder point is the smallest one whose expected units "
                "short per order (from the normal loss function, Silver, Pyke & Peterson "
                "1998) keep the fill rate at or above the target."
            ),
            contract.SHORTAGE_COST: (
                "shortage cost. No service target is set; the order quantity and reorder "
                "point are found together so that the cost of units short balances the "
                "cost of holding more stock (Hadley & Whitin 1963)."
            ),
        }
        others = {
            contract.CYCLE_SERVICE: "cycle service",
            contract.FILL_RATE: "fill rate (normal loss function, Silver, Pyke & Peterson 1998)",
            contract.SHORTAGE_COST: "shortage cost (Hadley & Whitin 1963)",
        }
        chosen = service.get(measure, f"{clean_text(measure)}.")
        rest = " and ".join(v for k, v in others.items() if k != measure)
        service_text = (
            f"Service measure used: {chosen} The other measures, chosen in Settings, "
            f"are {rest}."
        )
        return [
            "Order quantity: the economic order quantity (EOQ, Harris 1913; Wilson 1934), "
            "which balances the yearly cost of placing orders against the yearly cost of "
            "holding stock, then rounded to the pack size and raised to the minimum order, "
            "taking whichever rounding costs less.",
            "Lead-time demand: the mean and spread of demand while an order is on its way, "
            "from each item's demand history and lead time (Silver, Pyke & Peterson 1998, "
            "ch. 7). Each item's history counts from its first sale. Intermittent and lumpy "
            "items (Syntetos, Boylan & Croston 2005 classes) use the Syntetos-Boylan "
            "correction of Croston's estimate for the demand rate.",
            "Demand model: the shape of lead-time demand, chosen per item and explained in "
            "the 'Why this model' column: normal for steady items with enough demand, Poisson "
            "or negative binomial for slow and lumpy counts, gamma for skewed fractional "
            "quantities, unless you set one.",
            "Reorder point: order when the inventory position (on hand + on order - "
            "backordered) falls to this level. It is set from the lead-time demand so that "
            "the service measure is met.",
            service_text,
            "Safety stock is the reorder point minus the mean lead-time demand: the stock "
            "kept for demand above average while waiting for an order.",
            "Yearly costs: ordering = orders per year x order cost; cycle stock holding = "
            "half the order quantity x unit cost x holding rate; safety stock holding = "
            "safety stock x unit cost x holding rate; shortage = expected units short per "
            "year x shortage cost. The total adds these four; purchase cost is shown apart.",
            "Cycle service and fill rate achieved are those the rounded policy gives under "
            "the demand model named for each item.",
        ]

    @staticmethod
    def _cautions() -> list[str]:
        return [
            "These policies are estimates from past demand and the costs entered; they are "
            "no better than those figures.",
            "New, promoted, seasonal or discontinued items, and items with a short history, "
            "need judgement: the past may not describe the months ahead.",
            "Where the stock is medicine, food or anything safety-critical, running short "
            "can hurt people: these numbers support, and do not replace, the judgement of "
            "licensed staff and local rules.",
            "Read the Warnings sheet before acting on a number.",
        ]


def _severity(p: Problem) -> Severity:
    """A problem's severity as the enum, tolerating a plain string."""
    try:
        return Severity(p.severity)
    except ValueError:
        return Severity.WARNING


# ---------------------------------------------------------------------------
# Public entry point
# ---------------------------------------------------------------------------


def write_generated_workbook(
    path: Path, report: Report, sheet_names: Mapping[str, str] | None = None
) -> list[str]:
    """Write the generated sheets to a new .xlsx at ``path``; return their names in order.

    The order is Summary, Policy, Reorder now, Warnings (why: module docstring).
    ``sheet_names`` overrides any of the default names by key ("policy", "summary",
    "reorder", "warnings"); Summary's formulas refer to the final names. The file is
    written beside ``path`` under a temporary name and moved into place when complete
    (``atomic_output``), so a failure never leaves half a workbook.
    """
    names = resolve_sheet_names(sheet_names)
    path = Path(path)
    with atomic_output(path) as tmp:
        wb = xlsxwriter.Workbook(str(tmp), WORKBOOK_OPTIONS)
        try:
            book = _Book(wb, report, names)
            sheets = {key: wb.add_worksheet(names[key]) for key in SHEET_ORDER}
            wb.set_properties({"title": f"Stock policy for {clean_text(report.source_name)}",
                               "comments": "Generated by xlpolicy"})
            book.write_policy(sheets["policy"])
            book.write_reorder(sheets["reorder"])
            book.write_warnings(sheets["warnings"])
            book.write_summary(sheets["summary"])
            sheets["summary"].activate()
        finally:
            wb.close()
    return [names[key] for key in SHEET_ORDER]
