"""Shared pieces of the generated sheets: formats, safe cell writing, and the run's context.

Rules kept here for every sheet: user text is always written with ``write_string`` (with
the quote prefix when it starts with = + - @, so editing the cell later keeps it text),
control characters are stripped, NaN or infinite numbers become blank cells that keep their
format. Formulas are only ever our own, built from cell references and a short list of
functions that every spreadsheet program evaluates alike (:data:`ALLOWED_FUNCTIONS`).
"""

from __future__ import annotations

import datetime as _dt
import math
import re
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd
import xlsxwriter
from xlsxwriter.format import Format
from xlsxwriter.utility import xl_col_to_name
from xlsxwriter.worksheet import Worksheet

from ..problems import Problem, Severity
from ..report import Report

#: Every function a generated formula may use: all in OpenFormula (ISO/IEC 26300-2) and
#: in Excel since 2007, none an array or dynamic-array function.
ALLOWED_FUNCTIONS = frozenset(
    {"SUM", "SUMIF", "COUNTIF", "COUNTIFS", "IF", "MAX", "MIN", "SQRT", "SUMPRODUCT", "EXACT"}
)

# Our own restrained palette.
INK = "#1F2A36"
MUTED = "#6B7480"
HEADER_FILL = "#E3E8EE"
RULE = "#9AA5B1"
LIGHT_RULE = "#D5DBE1"
WARNING_FILL = "#FFF3D9"
SKIPPED_FILL = "#EEEEEE"
BAND_FILL = "#EEF2F5"
GOOD = "#2E6B4F"
SERIES_COLOURS = ("#3E6A8A", "#C98B2B", "#9A3B2E", "#6F8F5A")
SEVERITY_FILL = {
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

MAX_CELL_TEXT = 32767
_CONTROL = re.compile(r"[\x00-\x08\x0b-\x1f\x7f-\x9f]")
_FORMULA_LEAD = ("=", "+", "-", "@")

# Number formats.
UNITS = "#,##0"
UNITS1 = "#,##0.0"
DEMAND = "#,##0.00"
PERCENT = "0.00%"  # two decimals, so 99.96 % never shows as 100.0 %
DATE = "yyyy-mm-dd"

NUM_FORMAT = {
    "units": UNITS,
    "units1": UNITS1,
    "demand": DEMAND,
    "days": "#,##0.0",
    "percent": PERCENT,
    "count": "#,##0",
    "decimal1": "#,##0.0",
    "decimal2": "#,##0.00",
}


# ---------------------------------------------------------------------------
# Values
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
    return text[:MAX_CELL_TEXT]


def finite(value: Any) -> float | None:
    """A finite float, or None for missing, NaN, infinite or non-numeric values."""
    if value is None or isinstance(value, (str, bool)):
        return None
    try:
        f = float(value)
    except (TypeError, ValueError):
        return None
    return f if math.isfinite(f) else None


def floats(values: Any) -> np.ndarray:
    """A column as a float array; text, missing, pd.NA and infinities become NaN."""
    arr = pd.to_numeric(pd.Series(values), errors="coerce").to_numpy(dtype=float, na_value=np.nan)
    arr = arr.astype(float, copy=True)
    arr[~np.isfinite(arr)] = np.nan
    return arr


def column(df: pd.DataFrame, key: str) -> np.ndarray:
    """A numeric column of ``df`` as floats; all NaN when the column is absent."""
    if key in df.columns:
        return floats(df[key])
    return np.full(len(df), np.nan)


_UNCLEAN = re.compile(r"[\r\x00-\x08\x0b-\x1f\x7f-\x9f]")


def texts(df: pd.DataFrame, key: str) -> list[str]:
    """A text column as cleaned strings ("" for missing); all "" when absent.

    A column of plain text that clean_text would leave as it is (the usual case) is
    checked as a whole, with one search, rather than value by value.
    """
    if key not in df.columns:
        return [""] * len(df)
    values = df[key].tolist()
    if (
        set(map(type, values)) <= {str}
        and not _UNCLEAN.search("\n".join(values))
        and max(map(len, values), default=0) <= MAX_CELL_TEXT
    ):
        return values
    return [(clean_text(v) or "") for v in values]


def longest_line(values: list[str]) -> int:
    """The length of the longest line among cleaned texts, for a column's width."""
    if set(map(type, values)) <= {str} and "\n" not in "".join(values):
        return max(map(len, values), default=0)  # one line each: no split needed
    return max(
        (max(map(len, t.split("\n"))) if "\n" in t else len(t) for t in values if t), default=0
    )


def same(a: float | None, b: float | None, rel: float = 1e-9, abs_tol: float = 1e-9) -> bool:
    """Whether a formula's value matches the computed one (to rounding noise)."""
    if a is None or b is None:
        return False
    return math.isclose(a, b, rel_tol=rel, abs_tol=abs_tol)


def money_format(currency: Any, decimals: int = 2) -> str:
    """An Excel number format for money in the given currency.

    A symbol ($, £, €, R$) goes before the number, a letter code (EUR, CHF, kr) after it;
    no currency gives a plain number with thousands separators.
    """
    body = "#,##0" + ("." + "0" * decimals if decimals > 0 else "")
    cur = _currency(currency)
    if not cur:
        return body
    if cur.isalpha() and len(cur) >= 2:
        return f'{body} "{cur}"'
    return f'"{cur}"{body}'


def _currency(currency: Any) -> str:
    cur = clean_text(currency)
    return (cur or "").replace('"', "").replace("\n", " ").replace("\t", " ").strip()


def money_text(value: float, currency: Any) -> str:
    """An amount in words' company: "$1,240", "1,240 EUR"; cents only below 100."""
    cur = _currency(currency)
    amount = f"{abs(value):,.0f}" if abs(value) >= 100 else f"{abs(value):,.2f}"
    if not cur:
        return amount
    if cur.isalpha() and len(cur) >= 2:
        return f"{amount} {cur}"
    return f"{cur}{amount}"


def percent_text(value: float) -> str:
    """A share as text with two decimals, e.g. "97.25%"."""
    return f"{value * 100:.2f}%"


def quote_sheet(name: str) -> str:
    """A sheet name as it appears in a formula reference, always quoted."""
    return "'" + name.replace("'", "''") + "'"


def abs_range(sheet: str, col: int, first_row: int, last_row: int) -> str:
    """An absolute one-column range on a sheet, e.g. 'Policy'!$Q$2:$Q$40."""
    letter = xl_col_to_name(col)
    return f"{quote_sheet(sheet)}!${letter}${first_row + 1}:${letter}${last_row + 1}"


def abs_cell(sheet: str, row: int, col: int) -> str:
    """An absolute cell on a sheet, e.g. 'Policy'!$Q$7."""
    return f"{quote_sheet(sheet)}!${xl_col_to_name(col)}${row + 1}"


def severity(p: Problem) -> Severity:
    """A problem's severity as the enum, tolerating a plain string."""
    try:
        return Severity(p.severity)
    except ValueError:
        return Severity.WARNING


def header_width(title: str) -> int:
    """Width that lets a header wrap onto at most three lines."""
    longest = max((len(w) for w in title.split()), default=4)
    return max(longest, math.ceil(len(title) / 3)) + 2


def display_len(values: Any, kind: str, currency_len: int) -> int:
    """Roughly how many characters the widest formatted value takes."""
    if (
        isinstance(values, list)
        and len(values) == 1
        and isinstance(values[0], (int, float, np.integer, np.floating))
        and not isinstance(values[0], (bool, np.bool_))
    ):
        # One plain number (a cell at a time, the common case): no arrays at all.
        x = float(values[0])
        if not math.isfinite(x):
            return 0
        big, neg = abs(x), 1 if x < 0 else 0
    else:
        nums = floats(values)
        nums = nums[np.isfinite(nums)]
        if nums.size == 0:
            return 0
        big = float(np.max(np.abs(nums)))
        neg = 1 if (nums < 0).any() else 0
    if kind == "percent":
        return len(f"{big * 100:.2f}%") + neg
    decimals = {"units": 0, "count": 0, "units1": 1, "decimal1": 1, "days": 1}.get(kind, 2)
    extra = currency_len + 1 if kind == "money" and currency_len else 0
    return len(f"{big:,.{decimals}f}") + neg + extra


@dataclass(frozen=True)
class Col:
    """One column of a generated table: result key, header, kind of value."""

    key: str
    title: str
    kind: str  # text, code, units, units1, demand, days, percent, money, count, decimal1


# ---------------------------------------------------------------------------
# Formats and writing
# ---------------------------------------------------------------------------


#: Functions xlsxwriter stores as written (no _xlfn. prefix, no dynamic-array handling).
_CLASSIC_FUNCTIONS = frozenset(
    {
        "ABS",
        "AND",
        "AVERAGE",
        "CEILING",
        "COUNT",
        "COUNTA",
        "COUNTIF",
        "EXACT",
        "FLOOR",
        "HYPERLINK",
        "IF",
        "IFERROR",
        "INDEX",
        "INT",
        "ISBLANK",
        "ISNUMBER",
        "LEN",
        "MATCH",
        "MAX",
        "MIN",
        "MOD",
        "NOT",
        "OR",
        "ROUND",
        "ROUNDDOWN",
        "ROUNDUP",
        "SQRT",
        "SUM",
        "SUMIF",
        "SUMIFS",
        "SUMPRODUCT",
        "TEXT",
        "VLOOKUP",
    }
)
_FUNCTION_NAME = re.compile(r"([A-Za-z_][\w.]*)\(")
try:  # xlsxwriter's own cell record; without it every formula goes the public way
    from xlsxwriter.worksheet import CellFormulaTuple as _CellFormula
except ImportError:  # pragma: no cover - other xlsxwriter versions
    _CellFormula = None


def write_formula(
    ws: Worksheet, row: int, col: int, formula: str, fmt: Format | None, value: Any
) -> None:
    """``ws.write_formula``, minus its cost where it would store the formula unchanged.

    xlsxwriter runs some thirty regular-expression substitutions on every formula (for
    newer functions that need a prefix); at ~90 us a cell that is two minutes for the
    Policy sheet of 100,000 items. A formula that names only classic functions comes out
    of those substitutions as it went in, so it is stored directly, as write_formula
    would store it; anything else goes through write_formula.
    """
    body = formula[1:] if formula.startswith("=") else formula
    if (
        _CellFormula is None
        or getattr(ws, "use_future_functions", True)
        or not body
        or body[0] == "{"
        or body[-1] == "}"
        or not all(f.upper() in _CLASSIC_FUNCTIONS for f in _FUNCTION_NAME.findall(body))
    ):
        ws.write_formula(row, col, formula, fmt, value)
        return
    if ws._check_dimensions(row, col):
        return
    if ws.constant_memory and row > ws.previous_row:
        ws._write_single_row(row)
    ws.table[row][col] = _CellFormula(body, fmt, value)


class Styles:
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


class Writer:
    """Cell writing with the project's rules applied (text as text, NaN as blank)."""

    def __init__(self, styles: Styles):
        self.styles = styles

    def text(self, ws: Worksheet, row: int, col: int, value: Any, **props: Any) -> int:
        """Write user or our text as a string; blank (keeping the format) when missing.

        Returns the length of the longest line written, for column widths.
        """
        text = clean_text(value)
        if text is None or text == "":
            ws.write_blank(row, col, None, self.styles.get(**props))
            return 0
        if text.startswith(_FORMULA_LEAD):
            props = {**props, "quote_prefix": True}
        ws.write_string(row, col, text, self.styles.get(**props))
        if "\n" not in text:
            return len(text)
        return max(len(line) for line in text.split("\n"))

    def number(self, ws: Worksheet, row: int, col: int, value: Any, **props: Any) -> None:
        """Write a number; a missing, NaN or infinite value becomes a formatted blank.

        A non-numeric value where a number belongs is written as text so it is not lost.
        """
        if isinstance(value, str):
            self.text(ws, row, col, value, **props)
            return
        f = finite(value)
        fmt = self.styles.get(**props)
        if f is None:
            ws.write_blank(row, col, None, fmt)
        else:
            ws.write_number(row, col, f, fmt)

    def formula(
        self, ws: Worksheet, row: int, col: int, formula: str, value: float, **props: Any
    ) -> None:
        """Write one of our formulas with its computed value as the cached result."""
        write_formula(ws, row, col, formula, self.styles.get(**props), value)

    def any(self, ws: Worksheet, row: int, col: int, value: Any, **props: Any) -> None:
        """Write a value of unknown kind: date, number or text."""
        if isinstance(value, np.datetime64):
            value = pd.Timestamp(value)
        if isinstance(value, (_dt.date, _dt.datetime)) and not (
            isinstance(value, pd.Timestamp) and pd.isna(value)
        ):
            if isinstance(value, _dt.datetime):
                value = value.replace(tzinfo=None)
            ws.write_datetime(row, col, value, self.styles.get(**props, num_format=DATE))
        elif isinstance(value, (int, float, np.integer, np.floating)) and not isinstance(
            value, bool
        ):
            self.number(ws, row, col, value, **props)
        else:
            self.text(ws, row, col, value, **props)


# ---------------------------------------------------------------------------
# The run's context, shared by the sheet writers
# ---------------------------------------------------------------------------


@dataclass
class Context:
    """What every sheet writer needs, and what earlier sheets tell later ones.

    The Policy writer records where each item's row and column landed (``policy_cols``,
    ``policy_row_of``) so the Summary and the comparison can point at its cells; the
    reorder and comparison writers record their total cells for the Summary.
    """

    wb: xlsxwriter.Workbook
    report: Report
    names: Mapping[str, str]
    link_to_input: bool = True
    styles: Styles = field(init=False)
    w: Writer = field(init=False)
    currency: str = field(init=False)
    money: str = field(init=False)
    results: pd.DataFrame = field(init=False)
    reorder: pd.DataFrame = field(init=False)
    policy_cols: dict[str, int] = field(default_factory=dict)
    policy_rows: tuple[int, int] | None = None  # first, last data row (0-based)
    policy_row_of: dict[int, int] = field(default_factory=dict)  # results index -> row
    policy_fallbacks: list[tuple[str, int]] = field(default_factory=list)  # (key, row)
    reorder_total_cell: tuple[int, int] | None = None
    reorder_total_value: float | None = None
    compare_totals: dict[str, tuple[int, int, float]] = field(default_factory=dict)
    compare_headline: str = ""

    def __post_init__(self) -> None:
        self.styles = Styles(self.wb)
        self.w = Writer(self.styles)
        settings = self.report.settings or {}
        self.currency = _currency(settings.get("currency"))
        self.money = money_format(self.currency)
        results = self.report.results
        self.results = (results if results is not None else pd.DataFrame()).reset_index(drop=True)
        reorder = self.report.reorder
        self.reorder = (reorder if reorder is not None else pd.DataFrame()).reset_index(drop=True)

    def header_props(self) -> dict[str, Any]:
        return {
            "bold": True,
            "font_color": INK,
            "bg_color": HEADER_FILL,
            "bottom": 1,
            "bottom_color": RULE,
            "text_wrap": True,
            "valign": "bottom",
        }

    def num_props(self, kind: str) -> dict[str, Any]:
        if kind == "money":
            return {"num_format": self.money}
        return {"num_format": NUM_FORMAT.get(kind, "General")}

    def run_text(self) -> str:
        run = self.report.run_date
        return run.isoformat() if run else ""

    def block_title(self, ws: Worksheet, row: int, title: str, width: int = 4) -> int:
        """A section heading ruled across ``width`` columns; returns the next row."""
        props = {
            "bold": True,
            "font_size": 12,
            "font_color": INK,
            "bottom": 1,
            "bottom_color": RULE,
        }
        for c in range(width):
            ws.write_blank(row, c, None, self.styles.get(**props))
        ws.write_string(row, 0, title, self.styles.get(**props))
        return row + 1

    def paragraph(
        self, ws: Worksheet, row: int, text: str, width: int, chars: int, **props: Any
    ) -> int:
        """A wrapped sentence merged across ``width`` columns, sized to ``chars`` per line."""
        fmt = self.styles.get(text_wrap=True, valign="top", **props)
        if width > 1:
            ws.merge_range(row, 0, row, width - 1, "", fmt)
        ws.write_string(row, 0, text, fmt)
        lines = max(1, math.ceil(len(text) * 1.1 / max(chars, 20)))
        ws.set_row(row, 15 * lines + 3)
        return row + 1

    def print_setup(
        self,
        ws: Worksheet,
        title: str,
        header_row: int,
        last_row: int,
        last_col: int,
        landscape: bool = True,
        fit_width: bool = True,
    ) -> None:
        """Landscape, one page wide, header rows repeated, run date and page numbers.

        fit_width=False prints at full size across several pages (for sheets too wide to
        read when shrunk to one page; the caller repeats the identifying columns).
        """
        if landscape:
            ws.set_landscape()
        else:
            ws.set_portrait()
        if fit_width:
            ws.fit_to_pages(1, 0)
        if header_row >= 0:
            ws.repeat_rows(header_row)
        ws.print_area(0, 0, max(last_row, header_row, 0), max(last_col, 0))
        ws.set_margins(left=0.5, right=0.5, top=0.75, bottom=0.75)
        run = self.run_text()
        source = (clean_text(self.report.source_name) or "").replace("&", "&&")
        source = source.replace("\n", " ")[:80]
        ws.set_header(f'&L{source}&C&"-,Bold"{title.replace("&", "&&")}&RRun {run}')
        ws.set_footer(f"&LRun {run}&RPage &P of &N")
