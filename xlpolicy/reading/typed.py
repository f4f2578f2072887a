"""A wide History sheet read as typed columns, without a Python object per cell.

At 100,000 items a wide History holds ten million cells. python-calamine gives each as a
Python object, and turning those into arrays costs more than parsing the file. fastexcel
(the same Rust parser, through Apache Arrow) gives each column as an array instead: here
the item-code column as text and every other column as numbers, so the quantities arrive
as float arrays in one step.

Asking for numbers is not allowed to hide anything. A cell that is not a number comes
back as a conversion error with its position and its value, and is checked one by one as
always. What the conversion would make of a cell silently is caught otherwise: TRUE/FALSE
(read as 1 and 0) by the XML scan that runs beside the parse, which then sends the sheet
the general way; a number in the code column shown with a zero-padded format by the same
scan; error values (#N/A) by the scan, with their text. Text holding a number ("12") is
read as that number, as the general path does. Anything this module cannot place exactly
(a date in the code column, a value it cannot decode, another layout) returns None, and
the sheet is read the general way, with the same result.
"""

from __future__ import annotations

import datetime as _dt
import re
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np
from openpyxl.utils.datetime import CALENDAR_MAC_1904, CALENDAR_WINDOWS_1900, from_excel

from .workbook import WorkbookFile

if TYPE_CHECKING:
    from fastexcel import DTypeMap

#: Columns of a sheet can be at most 16,384 (XFD): every one is asked for as numbers.
MAX_COLUMNS = 16384


@dataclass
class WideCells:
    """The data rows below a wide History header, as arrays.

    ``row_numbers``: each data row's 1-based number (rows holding nothing are left out).
    ``codes``: each row's code cell, text as written, a number as float, None for blank.
    ``numbers``: columns x rows, the numbers (NaN where a cell is not one); ``present``
    says which cells hold a number at all. ``col_of`` maps a 0-based sheet column to its
    row of ``numbers``. ``cells``: (row position, sheet column) -> the value of every cell
    that is not a plain number (text, a date, an error's text).
    """

    row_numbers: np.ndarray
    codes: list[Any]
    code_formats: dict[int, str]
    numbers: np.ndarray
    present: np.ndarray
    col_of: dict[int, int]
    cells: dict[tuple[int, int], Any] = field(default_factory=dict)
    uncalculated: set[str] = field(default_factory=set)
    #: False when some code cell may hold a number that came back as text ("123"): a
    #: problem that quotes such a code's cell must then come from the general path.
    codes_exact: bool = True


class NotTyped(Exception):
    """Raised before anything is logged: this sheet must be read the general way."""


NUMBER_TEXT = re.compile(r"^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$")


def available() -> bool:
    """Whether fastexcel and pyarrow are installed (the optional extra ``large``)."""
    try:
        import fastexcel  # noqa: F401
        import pyarrow  # noqa: F401
    except ImportError:
        return False
    return True


def read_wide_cells(
    wb: WorkbookFile, name: str, header_row: int, code_col: int, head_texts: int = 0
) -> WideCells | None:
    """The rows below ``header_row`` (1-based) with codes in ``code_col`` (0-based).

    ``head_texts``: how many text cells the rows down to the header hold. None when the
    typed read cannot be exact for this sheet; nothing is logged then.
    """
    try:
        import fastexcel
    except ImportError:
        return None
    dtypes: DTypeMap = dict.fromkeys(range(MAX_COLUMNS), "float")
    dtypes[code_col] = "string"
    with ThreadPoolExecutor(max_workers=1, thread_name_prefix="xlpolicy-scan") as pool:
        scanning = pool.submit(wb._scan, name)
        try:
            sheet = fastexcel.read_excel(str(wb.path)).load_sheet(
                name, header_row=None, skip_rows=header_row, dtypes=dtypes
            )
            batch, errors = sheet.to_arrow_with_errors()
            columns = [c.absolute_index for c in sheet.available_columns()]
        except Exception:  # any surprise: the general path reads the sheet
            return None
        scan = scanning.result()
    if scan is None or scan.bools or not columns:
        return None
    try:
        return _assemble(wb, name, header_row, code_col, batch, errors, columns, scan, head_texts)
    except _NotExact:
        return None


class _NotExact(Exception):
    """Something in the sheet that this reader cannot give exactly as the general one."""


def _assemble(
    wb: WorkbookFile,
    name: str,
    header_row: int,
    code_col: int,
    batch: Any,
    errors: Any,
    columns: list[int],
    scan: Any,
    head_texts: int,
) -> WideCells:
    n = batch.num_rows
    if code_col in columns:
        code_array = batch.column(columns.index(code_col))
        if str(code_array.type) not in ("string", "large_string", "null"):
            raise _NotExact
        codes: list[Any] = code_array.to_pylist()
    else:
        codes = [None] * n
    code_texts = sum(isinstance(c, str) for c in codes)
    number_cols = [c for c in columns if c != code_col]
    numbers = np.empty((len(number_cols), n), dtype=float)
    present = np.ones((len(number_cols), n), dtype=bool)
    for k, c in enumerate(number_cols):
        arr = batch.column(columns.index(c))
        numbers[k] = arr.to_numpy(zero_copy_only=False)
        if arr.null_count:
            present[k] = arr.is_valid().to_numpy(zero_copy_only=False)
    col_of = {c: k for k, c in enumerate(number_cols)}
    cells: dict[tuple[int, int], Any] = {}
    decoded_texts = 0
    for err in errors.errors if errors is not None else []:
        row, col = err.position
        if row - err.offset_position[0] != header_row or col >= len(columns):
            raise _NotExact  # positions not where they are expected: do not guess
        value = _decoded(err.detail, scan, (row, columns[col]))
        decoded_texts += isinstance(value, str)
        cells[(err.offset_position[0], columns[col])] = value
    for (r, c), text in scan.errors.items():  # #N/A and the like, with their own text
        pos = r - header_row
        if 0 <= pos < n:
            if c == code_col:
                codes[pos] = text
            else:
                cells[(pos, c)] = text
    code_formats: dict[int, str] = {}
    for (r, c), fmt in scan.formats.items():
        pos = r - header_row
        if c != code_col or not 0 <= pos < n:
            continue
        code_formats[pos] = fmt
        if (r, c) not in scan.styled_text and isinstance(codes[pos], str):
            codes[pos] = _number(codes[pos])  # a number shown zero-padded: keep it a number
    for code in codes:
        if isinstance(code, str) and _DATE_TEXT.match(code):
            raise _NotExact  # a date in the code column came back as text: go the long way
    # Text that reads as a number ("12") became that number, as the general path reads it
    # too; but a problem's message quotes text as text, so where a number that has a
    # problem (negative) may have been text, the general path must tell. A number can only
    # have been text when the sheet holds more text cells than are accounted for here.
    if len(number_cols):
        # (a blank is NaN in ``numbers``: only a NaN or infinity that is present counts)
        if np.count_nonzero(~np.isfinite(numbers)) != np.count_nonzero(~present):
            raise _NotExact  # "inf", "nan" typed as text: quoted as text by the general path
        text_seen = decoded_texts + code_texts + head_texts
        if scan.text_cells != text_seen and bool((numbers < 0).any()):
            raise _NotExact
    codes_exact = scan.text_cells == decoded_texts + code_texts + head_texts
    # Rows that hold nothing at all are dropped, as the general path drops them.
    filled = present.any(axis=0) if len(number_cols) else np.zeros(n, dtype=bool)
    filled |= np.fromiter((c is not None for c in codes), dtype=bool, count=n)
    for pos, _c in cells:
        filled[pos] = True
    keep = np.flatnonzero(filled)
    if keep.size != n:
        remap = {int(p): k for k, p in enumerate(keep)}
        codes = [codes[p] for p in keep]
        numbers, present = numbers[:, keep], present[:, keep]
        cells = {(remap[p], c): v for (p, c), v in cells.items()}
        code_formats = {remap[p]: f for p, f in code_formats.items() if p in remap}
    out = WideCells(
        keep + header_row + 1,
        codes,
        code_formats,
        numbers,
        present,
        col_of,
        cells,
        codes_exact=codes_exact,
    )
    if scan.formulas:
        out.uncalculated = wb._uncalculated_cells(name)
    return out


def _number(text: str) -> Any:
    try:
        x = float(text)
    except ValueError:
        raise _NotExact from None
    return int(x) if x.is_integer() and abs(x) < 1e15 else x


_DATE_TEXT = re.compile(r"^\d{4}-\d{2}-\d{2}([ T]\d{2}:\d{2}(:\d{2}(\.\d+)?)?)?$")
_DETAIL = re.compile(r"^Expected float but got '(.*)'$", re.S)
_STRING = re.compile(r'^String\("(.*)"\)$', re.S)
_DATETIME = re.compile(
    r"^DateTime\(ExcelDateTime \{ value: ([-0-9.eE+]+), "
    r"datetime_type: (DateTime|TimeDelta), is_1904: (true|false) \}\)$"
)
_ESCAPE = re.compile(r"\\(u\{[0-9a-fA-F]{1,6}\}|.)", re.S)
_ESCAPES = {"t": "\t", "r": "\r", "n": "\n", "0": "\0", "\\": "\\", '"': '"', "'": "'"}


def _decoded(detail: str, scan: Any, at: tuple[int, int]) -> Any:
    """The value of a cell that did not convert to a number, from the converter's message."""
    m = _DETAIL.match(detail)
    if m is None:
        raise _NotExact
    inner = m.group(1)
    s = _STRING.match(inner)
    if s is not None:
        return _unescape(s.group(1))
    if inner.startswith("Error("):
        if at not in scan.errors:
            raise _NotExact
        return scan.errors[at]
    d = _DATETIME.match(inner)
    if d is not None:
        value = float(d.group(1))
        if d.group(2) == "TimeDelta":
            return _dt.timedelta(days=value)
        epoch = CALENDAR_MAC_1904 if d.group(3) == "true" else CALENDAR_WINDOWS_1900
        return from_excel(value, epoch)
    raise _NotExact


def _unescape(text: str) -> str:
    """A string as Rust's Debug format wrote it, back to itself."""
    if "\\" not in text:
        return text

    def one(m: re.Match) -> str:
        e = m.group(1)
        if e.startswith("u{"):
            return chr(int(e[2:-1], 16))
        if e not in _ESCAPES:
            raise _NotExact
        return _ESCAPES[e]

    return _ESCAPE.sub(one, text)
