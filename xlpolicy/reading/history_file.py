"""Sales history from a CSV or Parquet file beside the workbook, for catalogues past a sheet.

A sheet holds at most 1,048,576 rows, so the long layout (one row per item and period) of
100,000 items over two years of weeks does not fit in a workbook. The Settings row
"History file" (or ``--history``) names a file that holds the same three columns (Item,
Period, Quantity, matched loosely like the sheet's headers); it is read whole by a columnar
engine (pyarrow where installed, else pandas' C parser) and checked a column at a time:

- item codes are read as text, so 000123 stays 000123 (a Parquet column of whole numbers
  gives 123 for 123, as a sheet cell would);
- quantities are read as text too and then parsed, so a stray "n/a" on line 5,000,000 is
  reported by its line, never turned silently into a blank or a zero;
- periods are worked out once per distinct value (dates, ISO text, period numbers or
  labels, the same rules as the History sheet), not once per row.

Problems name the file and the cell as in a sheet: ``sales.csv!C7`` is line 7 (the header
is line 1), third column. Only the first few of each kind are listed one by one, with a
count of the rest, so that a bad column of millions of rows stays readable.
"""

from __future__ import annotations

import csv
import datetime as _dt
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from ..contract import HISTORY_LONG_COLUMNS, header_forms
from ..problems import ProblemLog
from .cells import describe, item_code, parse_number
from .history import History, _period_axis
from .sources import csv_value, sniff_delimiter
from .workbook import cell_ref

__all__ = ["HISTORY_FILE_TYPES", "read_history_file"]

#: File types a history file may have, by extension.
HISTORY_FILE_TYPES = (".csv", ".txt", ".parquet", ".pq")
#: Problems of one kind listed one by one before the rest are only counted.
LISTED = 20


def read_history_file(
    path: Path, known_items: set[str], settings: dict[str, Any], log: ProblemLog
) -> History | None:
    """The long-layout history in ``path``; None (a fatal problem logged) if unusable."""
    name = path.name
    if not path.is_file():
        log.fatal(
            f"The history file {path} does not exist. Check the 'History file' setting "
            "(a path relative to the workbook's folder) or the --history option.",
            sheet=name,
            value=str(path),
            code="history-file-missing",
        )
        return None
    if path.suffix.lower() not in HISTORY_FILE_TYPES:
        log.fatal(
            f"The history file {name} is neither CSV nor Parquet. Save the history as "
            ".csv (Item, Period, Quantity columns) or .parquet.",
            sheet=name,
            value=str(path),
            code="history-file-type",
        )
        return None
    try:
        headers, columns = _load(path)
    except _NeedsPyarrow:
        log.fatal(
            f"Reading the Parquet file {name} needs the pyarrow package: install it with "
            "pip install 'xlpolicy[large]' (or save the history as CSV).",
            sheet=name,
            value=str(path),
            code="history-file-pyarrow",
        )
        return None
    except Exception as exc:  # a damaged or foreign file: a message, never a traceback
        log.fatal(
            f"The history file {name} cannot be read ({type(exc).__name__}: "
            f"{str(exc)[:200]}). Save it again as CSV (comma or semicolon separated, "
            "UTF-8) or Parquet.",
            sheet=name,
            value=str(path),
            code="history-file-unreadable",
        )
        return None
    cols = _columns(headers)
    missing = [c.title for c in HISTORY_LONG_COLUMNS if c.key not in cols]
    if missing:
        log.fatal(
            f"The history file {name} has no column {', '.join(missing)} (columns found: "
            + ", ".join(repr(str(c)) for c in headers[:12])
            + "). Its first line must name the columns Item, Period and Quantity.",
            sheet=name,
            cell="A1",
            code="history-file-columns",
        )
        return None
    picked = {key: columns(headers.index(col)) for key, col in cols.items()}
    letters = {key: _letter(headers.index(col)) for key, col in cols.items()}
    return _history(picked, letters, name, known_items, settings, log)


class _NeedsPyarrow(Exception):
    """A Parquet file was given but pyarrow is not installed."""


class _Column:
    """One column as codes into its distinct values: row k holds ``values[codes[k]]``.

    Working on the distinct values (a few hundred periods, one code per item) instead of on
    millions of rows keeps the checks fast and never makes a Python object per row.
    ``codes`` is -1 for a missing value (null). ``numbers`` is set instead for a column the
    file stores as numbers (``codes`` and ``values`` are then empty).
    """

    def __init__(
        self, codes: np.ndarray, values: list[Any], numbers: np.ndarray | None = None
    ) -> None:
        self.codes = codes
        self.values = values
        self.numbers = numbers

    def __len__(self) -> int:
        return len(self.numbers if self.numbers is not None else self.codes)

    def raw(self, k: int) -> Any:
        """Row k's value as the file holds it (for a message)."""
        if self.numbers is not None:
            return self.numbers[k].item()
        c = int(self.codes[k])
        return self.values[c] if c >= 0 else None


def _load(path: Path) -> tuple[list[str], Any]:
    """The header and a function giving column j as a :class:`_Column`."""
    if path.suffix.lower() in (".parquet", ".pq"):
        try:
            import pyarrow.parquet as pq
        except ImportError as exc:
            raise _NeedsPyarrow from exc
        pf = pq.ParquetFile(path)
        names = list(pf.schema_arrow.names)
        # One column at a time, each made compact (codes) before the next is read.
        return [str(n) for n in names], lambda j: _arrow_column(
            pf.read(columns=[names[j]]).column(0)
        )
    with open(path, encoding="utf-8-sig", newline="") as fh:
        head = fh.read(64 * 1024)
    sep = sniff_delimiter(head)
    first = next(csv.reader([head.splitlines()[0] if head else ""], delimiter=sep), [])
    try:
        import pyarrow as pa
        import pyarrow.csv as pacsv
    except ImportError:
        frame = pd.read_csv(path, sep=sep, dtype=str, keep_default_na=False, encoding="utf-8-sig")
        return [str(c) for c in frame.columns], lambda j: _pandas_column(frame.iloc[:, j])
    # Every column as text: codes keep their zeros and a stray word stays visible.
    table = pacsv.read_csv(
        path,
        parse_options=pacsv.ParseOptions(delimiter=sep),
        convert_options=pacsv.ConvertOptions(
            column_types={c: pa.string() for c in first},
            strings_can_be_null=False,
            quoted_strings_can_be_null=False,
        ),
    )
    return [str(n) for n in table.column_names], lambda j: _arrow_column(table.column(j))


def _arrow_column(col: Any) -> _Column:
    import pyarrow as pa

    col = col.combine_chunks() if isinstance(col, pa.ChunkedArray) else col
    if pa.types.is_integer(col.type) or pa.types.is_floating(col.type):
        numbers = col.to_numpy(zero_copy_only=False).astype(float)
        return _Column(np.zeros(0, dtype=np.int32), [], numbers)
    enc = col if pa.types.is_dictionary(col.type) else col.dictionary_encode()
    codes = enc.indices.fill_null(-1).to_numpy(zero_copy_only=False).astype(np.int32)
    return _Column(codes, enc.dictionary.to_pylist())


def _pandas_column(series: pd.Series) -> _Column:
    codes, uniques = pd.factorize(series, sort=False, use_na_sentinel=True)
    return _Column(codes.astype(np.int32), list(uniques))


def _columns(headers: list[str]) -> dict[str, str]:
    """Our column key -> the file's header, matched like the History sheet's headers."""
    out: dict[str, str] = {}
    for col in headers:
        forms = header_forms(col)
        for spec in HISTORY_LONG_COLUMNS:
            if spec.key not in out and (forms[0] in spec.names() or forms[1] in spec.names()):
                out[spec.key] = col
                break
    return out


def _history(
    cols: dict[str, _Column],
    letters: dict[str, str],
    name: str,
    known: set[str],
    settings: dict[str, Any],
    log: ProblemLog,
) -> History:
    def cell(key: str, k: int) -> str:
        return f"{letters[key]}{k + 2}"  # the header is line 1

    # Item codes: each distinct value cleaned once, then known or not.
    item_col = cols["item"]
    code_values, item_codes = _item_codes(item_col)
    blank_u = np.array([c == "" for c in code_values], dtype=bool)
    known_u = np.array([c in known for c in code_values], dtype=bool)
    blank = blank_u[item_codes]
    unknown = ~blank & ~known_u[item_codes]

    def code_of(k: int) -> str:
        return code_values[int(item_codes[k])]

    _report(
        log,
        blank,
        "A History row has no item code; it was ignored. Fill in the item code or delete the row.",
        name,
        lambda k: cell("item", k),
        lambda k: "",
        item_col.raw,
        "history-item-missing",
        with_value=False,
    )
    if unknown.any():
        where = np.flatnonzero(unknown)
        u, first = np.unique(item_codes[where], return_index=True)
        order = np.argsort(where[first], kind="stable")
        for j in order[:LISTED].tolist():
            k = int(where[first[j]])
            code = code_values[int(u[j])]
            log.warning(
                f"History has item {code!r}, which is not in the Items sheet; its rows "
                "were ignored. Add the item to Items or correct the code.",
                sheet=name,
                cell=cell("item", k),
                item=code,
                value=item_col.raw(k),
                code="history-unknown-item",
            )
        if len(u) > LISTED:
            log.warning(
                f"... and {len(u) - LISTED:,} more item codes in {name} that are not in "
                "the Items sheet; their rows were ignored.",
                sheet=name,
                code="history-unknown-item",
            )
    keep = ~blank & ~unknown

    q_col = cols["quantity"]
    qty, bad_qty, negative = _quantities(q_col)
    _report(
        log,
        keep & bad_qty,
        "Quantity {value} is not a number; this period was left out "
        "of the item's statistics. Enter the units sold as a number (0 if none).",
        name,
        lambda k: cell("quantity", k),
        code_of,
        q_col.raw,
        "history-quantity-not-number",
    )
    _report(
        log,
        keep & negative,
        "Quantity {value} is negative (a return?); it was counted as "
        "0. Record returns elsewhere so they don't lower the demand estimate.",
        name,
        lambda k: cell("quantity", k),
        code_of,
        q_col.raw,
        "history-quantity-negative",
    )

    # Periods: the distinct values of the kept rows go through the History sheet's rules.
    p_col = cols["period"]
    p_codes, p_values = _period_codes(p_col)
    used = np.unique(p_codes[keep & (p_codes >= 0)])
    # (values _period_axis cannot use come back as -1 and are reported below, by row)
    idx_u, labels, period, _ = _period_axis(
        [p_values[j] for j in used.tolist()], settings, name, log
    )
    axis = np.full(len(p_values) + 1, -1, dtype=np.int64)  # the last slot: a missing period
    axis[used] = idx_u
    pidx = axis[np.where(p_codes >= 0, p_codes, len(p_values))]
    _report(
        log,
        keep & (pidx < 0),
        "Period {value} is not a date like the others (or is "
        "blank); the row was ignored. Write the period as a date.",
        name,
        lambda k: cell("period", k),
        code_of,
        p_col.raw,
        "history-period-bad",
    )

    use = np.flatnonzero(keep & (pidx >= 0))
    order_items, first_at = np.unique(item_codes[use], return_index=True)
    # Items in the order of their first row, as the History sheet's reader gives them.
    rank = np.argsort(first_at, kind="stable")
    items_u = order_items[rank]
    pos = np.empty(len(code_values), dtype=np.int64)
    pos[items_u] = np.arange(len(items_u))
    n_periods = len(labels)
    matrix: np.ndarray = np.zeros((len(items_u), n_periods), dtype=float)
    if len(use):
        flat = pos[item_codes[use]] * n_periods + pidx[use]
        # Sums per (item, period): several transactions in one period add up, and NaN (an
        # unreadable quantity) makes its bucket NaN, left out of the statistics.
        q = qty[use]
        nan_at = np.isnan(q)
        matrix = np.bincount(flat, weights=np.where(nan_at, 0.0, q), minlength=matrix.size).reshape(
            matrix.shape
        )
        if nan_at.any():
            matrix.reshape(-1)[flat[nan_at]] = np.nan
    items = [code_values[int(c)] for c in items_u.tolist()]
    first_cell = {
        code: cell("item", int(use[first_at[j]]))
        for code, j in zip(items, rank.tolist(), strict=True)
    }
    return History(name, "long", items, matrix, labels, period, first_cell)


def _item_codes(col: _Column) -> tuple[list[str], np.ndarray]:
    """(distinct cleaned codes, "" among them for blanks; each row's index into them)."""
    if col.numbers is not None:  # a column of numbers: 123.0 and 123 are the code "123"
        x = col.numbers
        missing = np.isnan(x)
        values, codes = np.unique(np.where(missing, 0.0, x), return_inverse=True)
        cleaned = [item_code(v) or "" for v in values.tolist()]
    else:
        cleaned = [item_code(v) or "" if v is not None else "" for v in col.values]
        codes = col.codes
        missing = codes < 0
    # Cleaning may make two spellings one code (" A1" and "A1"): merge them.
    merged, remap = np.unique(np.array(cleaned + [""], dtype=object), return_inverse=True)
    remap = remap.astype(np.int64)
    names = [str(m) for m in merged]
    blank_slot = remap[-1]
    out = np.where(missing, blank_slot, remap[np.where(missing, 0, codes)])
    return names, out.astype(np.int64)


def _period_codes(col: _Column) -> tuple[np.ndarray, list[Any]]:
    """Each row's index into the distinct periods (-1: missing), and those periods."""
    if col.numbers is not None:
        x = col.numbers
        values, codes = np.unique(np.where(np.isnan(x), np.inf, x), return_inverse=True)
        vals = [v if np.isfinite(v) else None for v in values.tolist()]
        codes = np.where(np.isnan(x), -1, codes)
        return codes.astype(np.int64), [_period_value(v) for v in vals]
    codes = np.where(np.array([v is None for v in col.values] + [False])[col.codes], -1, col.codes)
    return codes.astype(np.int64), [_period_value(v) for v in col.values]


def _quantities(col: _Column) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(quantity, not a number, negative) per row: blank is 0, bad is NaN, negative 0."""
    if col.numbers is not None:
        x = col.numbers.copy()
        bad = np.isinf(x)
        x[np.isnan(x)] = 0.0
    else:
        parsed = [_quantity_value(v) for v in col.values]
        vals = np.array([*parsed, 0.0], dtype=float)  # the last: a null
        x = vals[np.where(col.codes >= 0, col.codes, len(parsed))]
        bad = np.isnan(x)
    x = np.where(bad, np.nan, x)
    negative = ~bad & (x < 0)
    x = np.where(negative, 0.0, x)
    return x, bad, negative


def _quantity_value(v: Any) -> float:
    """One distinct quantity text as a number: blank is 0, anything unreadable NaN."""
    if v is None or (isinstance(v, str) and not v.strip()):
        return 0.0
    x, why = parse_number(v)
    if why or x is None:
        return float("nan") if why else 0.0
    return float(x) if np.isfinite(x) else float("nan")


def _period_value(v: Any) -> Any:
    """One distinct period as a sheet cell would hold it (date, number or label)."""
    if isinstance(v, pd.Timestamp):
        return v.to_pydatetime().replace(tzinfo=None)
    if isinstance(v, _dt.date) and not isinstance(v, _dt.datetime):
        return _dt.datetime.combine(v, _dt.time())
    if isinstance(v, str):
        return csv_value(v)
    if isinstance(v, float) and v.is_integer():
        return int(v)
    return v


def _report(
    log: ProblemLog,
    mask: np.ndarray,
    message: str,
    sheet: str,
    where: Any,
    item: Any,
    raw: Any,
    code: str,
    with_value: bool = True,
) -> None:
    """A warning for each of the first rows in ``mask``, then one counting the rest."""
    rows = np.flatnonzero(mask)
    for k in rows[:LISTED].tolist():
        value = raw(k)
        log.warning(
            message.format(value=describe(value)),
            sheet=sheet,
            cell=where(k),
            item=item(k),
            value=value if with_value else None,
            code=code,
        )
    if len(rows) > LISTED:
        log.warning(
            f"... and {len(rows) - LISTED:,} more rows like {where(int(rows[LISTED - 1]))} "
            f"in {sheet}.",
            sheet=sheet,
            code=code,
        )


def _letter(index: int) -> str:
    """The column letters of a 0-based column index ("A", "B", ... "AA")."""
    return cell_ref(index, 1)[:-1]
