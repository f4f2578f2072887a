"""Opening a workbook and getting its sheets as plain rows of values.

Values are read with python-calamine (a Rust reader, several times faster than openpyxl on
a large sheet). It gives each cell's own value with no guessing of a column's type, so a
stray "n/a" in row 50,000 stays text and "000123" stays "000123". What it does not give is
filled in from the sheet's XML: error values (#N/A) it would show as empty, and the number
formats the checks need (zero-padded codes, percentages), found by a scan of the styles and
of only the cells that carry such a style. openpyxl (read-only, values only) is the fallback
for any sheet the fast path cannot place exactly, and gives the same values.

A formula with no saved result (a file written by a program that never calculated it) is
found by a separate scan of that sheet's XML, so it can be reported by cell instead of
being read as an empty cell.
"""

from __future__ import annotations

import contextlib
import datetime as _dt
import posixpath
import re
import zipfile
import zlib
from collections.abc import Iterator
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
from defusedxml import DefusedXmlException
from defusedxml import ElementTree as ET
from openpyxl import load_workbook
from openpyxl.styles.numbers import BUILTIN_FORMATS
from openpyxl.utils import column_index_from_string, get_column_letter

from .. import fastzlib
from ..contract import Column, normalise
from ..problems import ProblemLog
from ..progress import Progress, silent
from .currency import currency_of
from .guard import refusal, unreadable_message
from .headers import Header
from .headers import find_header as _find_header

SUPPORTED_SUFFIXES = (".xlsx", ".xlsm")

SHEET_ALIASES: dict[str, tuple[str, ...]] = {
    "Items": (
        "items",
        "item list",
        "item master",
        "products",
        "product list",
        "articles",
        "stock items",
        "parts",
        "stock list",
        "stock",
        "stock sheet",
        "inventory",
        "inventory list",
        "catalogue",
        "catalog",
        "range",
    ),
    "History": (
        "history",
        "sales history",
        "demand history",
        "sales",
        "demand",
        "usage",
        "usage history",
        "monthly sales",
        "weekly sales",
        "daily sales",
        "sales by month",
        "sales by week",
        "till export",
        "sales lines",
        "transactions",
        "sales log",
    ),
    "Settings": ("settings", "parameters", "options", "configuration", "config"),
    "Price breaks": (
        "price breaks",
        "quantity discounts",
        "discounts",
        "price list",
        "volume prices",
        "price tiers",
    ),
}

_NS_MAIN = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"
_NS_REL = "http://schemas.openxmlformats.org/officeDocument/2006/relationships"
_NS_PKG_REL = "http://schemas.openxmlformats.org/package/2006/relationships"


@dataclass
class RawSheet:
    """A sheet's cells as rows of values, with their number formats.

    ``rows[k]`` is the k-th row read; ``row_numbers[k]`` its 1-based row number as the user
    sees it. ``formats`` runs parallel to ``rows``.
    """

    name: str
    rows: list[list[Any]] = field(default_factory=list)
    formats: list[list[str]] = field(default_factory=list)
    row_numbers: list[int] = field(default_factory=list)
    uncalculated: set[str] = field(default_factory=set)
    #: The same cells as a 2-D object array (rows x columns, None for blank) and each cell's
    #: Python type, when the reader made them (the fast path); lets History be checked as
    #: whole blocks instead of cell by cell. None otherwise.
    grid: np.ndarray | None = None
    kinds: np.ndarray | None = None

    def block(self, rows: list[int], cols: list[int]) -> tuple[np.ndarray, np.ndarray]:
        """The cells at ``rows`` x ``cols`` (indices into ``rows``, 0-based columns) as an
        object array (None for blank or beyond a row's end), and each cell's Python type."""
        grid = self.grid
        if (
            grid is not None
            and self.kinds is not None
            and grid.shape[0] == len(self.rows)
            and all(j < grid.shape[1] for j in cols)
        ):
            at = np.ix_(np.asarray(rows, dtype=np.int64), np.asarray(cols, dtype=np.int64))
            return grid[at], self.kinds[at]
        blk = np.empty((len(rows), len(cols)), dtype=object)
        for i, k in enumerate(rows):
            values = self.rows[k]
            blk[i] = [values[j] if j < len(values) else None for j in cols]
        return blk, cell_types(blk)


#: What reading a damaged or vanished zip member raises, under either inflate library.
_SCAN_ERRORS: tuple[type[BaseException], ...] = (
    KeyError,
    zipfile.BadZipFile,
    OSError,
    *fastzlib.ERRORS,
    EOFError,
)

_TYPE_OF = np.frompyfunc(type, 1, 1)


def cell_types(grid: np.ndarray) -> np.ndarray:
    """Each cell's Python type, as an object array shaped like ``grid``."""
    return np.asarray(_TYPE_OF(grid))


def kind_is(kinds: np.ndarray, *types: type) -> np.ndarray:
    """Where a cell's Python type (from :func:`cell_types`) is one of ``types``."""
    out = np.zeros(kinds.shape, dtype=bool)
    for t in types:
        out |= kinds == t
    return out


def cell_ref(col_index: int, row_number: int) -> str:
    """A1 reference from a 0-based column index and a 1-based row number."""
    return f"{get_column_letter(col_index + 1)}{row_number}"


def find_header(
    sheet: RawSheet,
    columns: tuple[Column, ...],
    *,
    scan_rows: int = 30,
    min_matches: int = 2,
    mapping: dict[str, str] | None = None,
) -> Header | None:
    """Find the first row whose cells name at least ``min_matches`` known columns (see
    :func:`xlpolicy.reading.headers.find_header`: units, the owner's own names)."""
    return _find_header(
        sheet, columns, scan_rows=scan_rows, min_matches=min_matches, mapping=mapping
    )


class WorkbookFile:
    """An opened input workbook: its sheet names and a way to read each as a RawSheet."""

    def __init__(self, path: Path, log: ProblemLog):
        self.path = Path(path)
        self.log = log
        self._wb: Any = None
        self._fast: Any = None  # a python-calamine workbook, when it opened the file
        self._styles: dict[int, str] | None = None  # style index -> format, checks need
        self.sheet_names: list[str] = []
        self._sheet_parts: dict[str, str] = {}
        #: Sheets whose XML the fast path scanned and found without the words "hidden" and
        #: "mergeCell": layout_notes has nothing to find there and skips its own pass.
        self.plain_layout: set[str] = set()

    def open(self) -> bool:
        """Open the file; on failure record a fatal problem and return False."""
        p = self.path
        if not p.exists():
            self.log.fatal(
                f"The file {p.name} does not exist. Check the name and folder.",
                value=str(p),
                code="file-missing",
            )
            return False
        if p.is_dir():
            self.log.fatal(
                f"{p.name} is a folder, not a workbook. Give the path of an .xlsx file.",
                value=str(p),
                code="file-is-folder",
            )
            return False
        refused = refusal(p, "xlsx")  # lock files, fakes, zip bombs, DTDs: before any parser
        if refused is not None:
            self.log.fatal(refused.message, value=str(p), code=refused.code)
            return False
        if p.suffix.lower() not in SUPPORTED_SUFFIXES:
            self.log.fatal(
                f"{p.name} is not an .xlsx or .xlsm workbook. Save it from your spreadsheet "
                "program as 'Excel Workbook (.xlsx)' and try again.",
                value=p.suffix,
                code="file-type",
            )
            return False
        if not zipfile.is_zipfile(p):
            self.log.fatal(
                f"{p.name} is not a readable .xlsx workbook (it may be damaged, password-"
                "protected, or another kind of file renamed). Open it in your spreadsheet "
                "program and save it again as .xlsx.",
                value=str(p),
                code="file-not-zip",
            )
            return False
        self._sheet_parts = _sheet_parts(p)
        self._fast = _open_calamine(p)
        if self._fast is not None and set(self._fast.sheet_names) == set(self._sheet_parts):
            self.sheet_names = list(self._fast.sheet_names)
            return True
        self._fast = None
        return self._open_openpyxl()

    def _open_openpyxl(self) -> bool:
        """Open with openpyxl (the fallback); on failure record a fatal problem."""
        p = self.path
        try:
            self._wb = load_workbook(p, read_only=True, data_only=True, keep_links=False)
        except Exception as exc:  # openpyxl raises many kinds; none may reach the user raw
            message, code = unreadable_message(p.name, exc)
            self.log.fatal(message, value=str(p), code=code)
            return False
        self.sheet_names = list(self._wb.sheetnames)
        _ignore_recorded_size(self._wb)
        return True

    def close(self) -> None:
        if self._wb is not None:
            self._wb.close()
            self._wb = None
        if self._fast is not None:
            close = getattr(self._fast, "close", None)
            if close is not None:
                close()
            self._fast = None

    def find_sheet(self, canonical: str) -> str | None:
        """The user's name for one of our sheets (Items, History, Settings), matched loosely."""
        wanted = {normalise(a) for a in SHEET_ALIASES[canonical]}
        for name in self.sheet_names:
            if normalise(name) in wanted:
                return name
        return None

    def read(self, name: str, progress: Progress = silent) -> RawSheet:
        """All rows of a sheet, values and number formats, empty rows dropped."""
        if self._fast is not None:
            sheet = self._read_fast(name, progress)
            if sheet is not None:
                return sheet
        if self._wb is None and not self._open_openpyxl():
            return RawSheet(name)
        return self._read_openpyxl(name, progress)

    def _read_fast(self, name: str, progress: Progress) -> RawSheet | None:
        """The sheet via python-calamine plus an XML scan; None where it cannot be exact."""
        stage = f"Reading {name}"
        progress(stage, 0, None)
        # The XML scan runs beside calamine's parse: both spend their time outside the
        # interpreter lock (zlib, Rust), so on two cores the scan costs next to nothing.
        with ThreadPoolExecutor(max_workers=1, thread_name_prefix="xlpolicy-scan") as pool:
            scanning = pool.submit(self._scan, name)
            try:
                raw = self._fast.get_sheet_by_name(name).to_python(skip_empty_area=False)
            except Exception:  # a sheet calamine cannot read goes the openpyxl way
                raw = None
            scan = scanning.result()
        if scan is None or raw is None:
            return None
        width = max((len(r) for r in raw), default=0)
        if not raw or width == 0:
            sheet = RawSheet(name)
            sheet.uncalculated = self._uncalculated_cells(name) if scan.formulas else set()
            progress(stage, 0, 0)
            return sheet
        if any(len(r) != width for r in raw):
            raw = [list(r) + [""] * (width - len(r)) for r in raw]
        grid = np.empty((len(raw), width), dtype=object)
        grid[:] = raw
        del raw
        blank = grid == ""
        grid[blank] = None
        # Errors (#N/A, #DIV/0!) come back empty: put their text back, as openpyxl gives it.
        for (r, c), text in scan.errors.items():
            if r < grid.shape[0] and c < width:
                grid[r, c] = text
                blank[r, c] = False
        kinds = cell_types(grid)
        # Whole numbers are stored without a decimal point, and openpyxl reads those as int;
        # calamine gives every number as a float. Give them as int here too.
        floats = kind_is(kinds, float)
        if floats.any():
            x = grid[floats].astype(float)
            whole = np.isfinite(x) & (np.abs(x) < 1e15)
            whole[whole] = x[whole] == np.trunc(x[whole])
            if whole.any():
                at = tuple(ix[whole] for ix in np.nonzero(floats))
                grid[at] = x[whole].astype(np.int64).astype(object)
                kinds[at] = int
        # openpyxl gives a date cell as a datetime; so does this path.
        for r, c in zip(*np.nonzero(kinds == _dt.date), strict=True):
            grid[r, c] = _dt.datetime.combine(grid[r, c], _dt.time())
            kinds[r, c] = _dt.datetime
        keep = ~blank.all(axis=1)
        last_col = np.flatnonzero(~blank.all(axis=0))
        full = width
        width = int(last_col[-1]) + 1 if last_col.size else 0
        row_numbers = (np.flatnonzero(keep) + 1).tolist()
        if not keep.all() or width != full:  # (a copy of the whole grid otherwise)
            grid = grid[keep, :width]
            kinds = kinds[keep, :width]
        sheet = RawSheet(name, grid.tolist(), [], row_numbers, grid=grid, kinds=kinds)
        general = ["General"] * width
        sheet.formats = [general] * len(row_numbers)
        special = scan.formats
        if special:
            index_of = {n: k for k, n in enumerate(row_numbers)}
            for (r, c), fmt in special.items():
                k = index_of.get(r + 1)
                if k is None or c >= width:
                    continue
                if sheet.formats[k] is general:
                    sheet.formats[k] = list(general)
                sheet.formats[k][c] = fmt
        sheet.uncalculated = self._uncalculated_cells(name) if scan.formulas else set()
        progress(stage, len(row_numbers), len(row_numbers))
        return sheet

    def _scan(self, name: str) -> _Scan | None:
        """One streamed pass over the sheet's XML for what calamine does not give.

        Finds error cells (#N/A), the cells whose number format the checks read, and
        whether there are formulas at all; None when the sheet cannot be placed exactly
        (cells without their own reference, a namespace prefix, no such part).

        Only zero-padded formats (item codes shown as 000123) and percentages (rates)
        change what a value means; every other cell reads as General. The styles tell which
        style indices carry such a format, and a search finds the cells that use them.
        """
        part = self._sheet_parts.get(name)
        if not part:
            return None
        if self._styles is None:
            self._styles = _formats_that_matter(self.path)
        styled = None
        if self._styles:
            alts = b"|".join(str(k).encode() for k in self._styles)
            styled = re.compile(rb'<c\b[^>]*?\ss="(' + alts + rb')"[^>]*>')
        scan = _Scan()
        first = True
        layout_words = False
        try:
            with _open_part(self.path, part) as fh:
                for piece in _row_pieces(fh, 1 << 22):  # (4 MB: the tally's arrays stay small)
                    if first:
                        root = _ROOT.search(piece[:8192])
                        if root is None or root.group(1):
                            return None
                        first = False
                    tally = _tally(piece)
                    scan.text_cells += tally.text_cells
                    scan.bools = scan.bools or tally.bools
                    scan.formulas = scan.formulas or tally.formulas
                    layout_words = layout_words or tally.layout_words
                    if tally.errors:
                        errors = _error_cells(piece)
                        if errors is None:
                            return None
                        scan.errors.update(errors)
                    if styled is not None:
                        for m in styled.finditer(piece):
                            ref = _REF.search(m.group(0))
                            if ref is None:
                                return None  # a cell without its reference: not placed here
                            at = (
                                int(ref.group(2)) - 1,
                                column_index_from_string(ref.group(1).decode()) - 1,
                            )
                            scan.formats[at] = self._styles[int(m.group(1))]
                            if _TEXT_TYPE.search(m.group(0)):
                                scan.styled_text.add(at)
        except _SCAN_ERRORS:
            return None
        if not layout_words:
            self.plain_layout.add(name)
        return scan

    def peek(self, name: str, rows: int = 30) -> RawSheet | None:
        """The first ``rows`` rows of a sheet that hold anything, via openpyxl.

        openpyxl streams a sheet, so this reads only the top of it: enough to find a
        header before the sheet is read the fast way. None if the file will not open.
        """
        try:  # a workbook object of its own: this may run beside another sheet's read
            wb = load_workbook(self.path, read_only=True, data_only=True, keep_links=False)
        except Exception:  # the general path reports what is wrong with the file
            return None
        try:
            _ignore_recorded_size(wb)
            ws = wb[name]
            cap = 1000 if ws.max_row != 1000 else 1001  # (recorded size: "to the end")
            sheet = RawSheet(name)
            self._fill_openpyxl(sheet, ws.iter_rows(max_row=cap), silent, None, stop=rows)
        finally:
            wb.close()
        return sheet

    def _read_openpyxl(self, name: str, progress: Progress = silent) -> RawSheet:
        """All rows of a sheet via openpyxl, values and number formats, empty rows dropped."""
        ws = self._wb[name]
        sheet = RawSheet(name)
        expected = ws.max_row if isinstance(ws.max_row, int) and ws.max_row > 0 else None
        stage = f"Reading {name}"
        progress(stage, 0, expected)
        self._fill_openpyxl(sheet, ws.iter_rows(), progress, expected)
        sheet.uncalculated = self._uncalculated_cells(name)
        progress(stage, expected or len(sheet.rows), expected)
        return sheet

    @staticmethod
    def _fill_openpyxl(
        sheet: RawSheet,
        rows: Any,
        progress: Progress,
        expected: int | None,
        stop: int | None = None,
    ) -> None:
        """Append the rows openpyxl gives that hold anything, up to ``stop`` of them."""
        stage = f"Reading {sheet.name}"
        for k, row in enumerate(rows, start=1):
            if stop is not None and len(sheet.rows) >= stop:
                return
            if k % 5000 == 0:
                progress(stage, k, expected)
            values = []
            formats = []
            rownum = None
            for cell in row:
                v = getattr(cell, "value", None)
                values.append(v)
                formats.append(
                    getattr(cell, "number_format", "General") or "General" if v is not None else ""
                )
                if rownum is None:
                    rownum = getattr(cell, "row", None)
            while values and values[-1] is None:
                values.pop()
                formats.pop()
            if not values:
                continue
            sheet.rows.append(values)
            sheet.formats.append(formats)
            sheet.row_numbers.append(rownum if rownum is not None else len(sheet.rows))

    def _uncalculated_cells(self, name: str) -> set[str]:
        """A1 references of formula cells that carry no saved result."""
        part = self._sheet_parts.get(name)
        if not part:
            return set()
        try:
            with zipfile.ZipFile(self.path) as zf:
                formulas, prefixed = _formula_kinds(zf, part)
                if not formulas:
                    return set()
                if prefixed:
                    with zf.open(part) as src:
                        return _formulas_without_result_parsed(src)
                with zf.open(part) as src:
                    return _formulas_without_result(src)
        except (KeyError, zipfile.BadZipFile, OSError, zlib.error, EOFError):
            return set()


class _Inflating:
    """A zip member's data, inflated by fastzlib (ISA-L where installed) as it is read.

    zipfile inflates with zlib; for the scan of a 300 MB sheet ISA-L takes half the time.
    It reads the member's compressed bytes itself, from the offset its local header gives;
    CRCs are not checked here (the sheet's readers read the same bytes through zipfile).
    """

    def __init__(self, path: Path, info: zipfile.ZipInfo) -> None:
        self._fh = open(path, "rb")  # noqa: SIM115 (closed by __exit__)
        self._fh.seek(info.header_offset)
        header = self._fh.read(30)
        if len(header) != 30 or header[:4] != b"PK\x03\x04":
            self._fh.close()
            raise zipfile.BadZipFile("a part's local header is not where the directory says")
        name_len, extra_len = (
            int.from_bytes(header[26:28], "little"),
            int.from_bytes(header[28:30], "little"),
        )
        self._fh.seek(info.header_offset + 30 + name_len + extra_len)
        self._left = info.compress_size
        self._inflate = fastzlib.decompressobj()
        self._tail = b""  # compressed input not yet inflated (output was at its limit)

    def read(self, size: int) -> bytes:
        """Up to ``size`` inflated bytes; b"" only at the end. Never more than ``size``:
        sheet XML can shrink a thousandfold (a million formatted empty rows), so one
        megabyte of input must not become a gigabyte of output at once."""
        while True:
            if self._tail:
                raw = self._tail
            elif self._left > 0:
                raw = self._fh.read(min(self._left, 1 << 20))
                if not raw:
                    raise EOFError("the part ends early")
                self._left -= len(raw)
            else:
                return b"" if self._inflate.eof else self._inflate.flush()
            out = self._inflate.decompress(raw, size)
            self._tail = self._inflate.unconsumed_tail
            if out:
                return out

    def __enter__(self) -> _Inflating:
        return self

    def __exit__(self, *exc: object) -> None:
        self._fh.close()


def _open_part(path: Path, part: str) -> Any:
    """A readable stream of a zip member's bytes: ISA-L inflating where it can, else zipfile."""
    with zipfile.ZipFile(path) as zf:
        info = zf.getinfo(part)
    if fastzlib.FAST and info.compress_type == zipfile.ZIP_DEFLATED and not info.flag_bits & 1:
        return _Inflating(path, info)
    return contextlib.closing(_ZipMember(path, part))


class _ZipMember:
    """zipfile's reader of one member, closing its archive with it."""

    def __init__(self, path: Path, part: str) -> None:
        self._zf = zipfile.ZipFile(path)
        self._fh = self._zf.open(part)

    def read(self, size: int) -> bytes:
        return self._fh.read(size)

    def close(self) -> None:
        self._fh.close()
        self._zf.close()


def _row_pieces(src: Any, chunk: int) -> Iterator[bytes]:
    """A sheet's XML from ``src`` in pieces of about ``chunk`` bytes that each hold whole
    rows (the last piece: whatever is left), so that nothing sought is cut in two."""
    carry = b""
    while True:
        data = src.read(chunk)
        if not data:
            if carry:
                yield carry
            return
        buf = carry + data
        cut = _whole_rows(buf)
        if cut > 0:
            yield buf[:cut]
        carry = buf[cut:]


def _whole_rows(buf: bytes) -> int:
    """Where to cut ``buf`` so that the part before holds whole rows only: after the last
    </row>, or before the last <row when no row in it closes that way (rows written as
    <row r="9" s="1"/>, as a million formatted empty rows are); 0 if neither."""
    end = buf.rfind(b"</row>")
    start = buf.rfind(b"<row")
    if end >= 0 and end > start:
        return end + len(b"</row>")
    return max(start, end + len(b"</row>") if end >= 0 else 0)


def _formula_kinds(zf: zipfile.ZipFile, part: str, chunk: int = 1 << 22) -> tuple[bool, bool]:
    """(whether a sheet part holds a formula element, whether one is written with a namespace
    prefix as <x:f>), in one pass 4 MB at a time (bounded memory)."""
    found = False
    with zf.open(part) as src:
        tail = b""
        while True:
            data = src.read(chunk)
            if not data:
                return found, False
            buf = tail + data
            found = found or b"<f" in buf or b":f" in buf
            for m in _PREFIXED_END.finditer(buf):  # ':f' is rare; then look back to '<'
                lt = buf.rfind(b"<", max(0, m.start() - 64), m.start())
                if lt >= 0 and _PREFIXED_TAG.match(buf, lt, m.start()):
                    return True, True
            tail = buf[-64:]


_NO_RESULT_AFTER_BODY = re.compile(rb"</f>\s*(?:<v\s*/>|<v>\s*</v>)?\s*</c>")
_NO_RESULT_AFTER_EMPTY = re.compile(rb"<f\b[^>]*/>\s*(?:<v\s*/>|<v>\s*</v>)?\s*</c>")
_PREFIXED_END = re.compile(rb":f[\s>/]")
_PREFIXED_TAG = re.compile(rb"</?[A-Za-z_][\w.-]*$")


def _formulas_without_result(src: Any, chunk: int = 1 << 24) -> set[str]:
    """A1 references of formula cells with no saved value.

    A formula cell with no result is one whose formula is followed, inside the cell, by no
    value (or an empty one): two searches that start with a literal find exactly those, so
    a sheet full of calculated formulas costs one quick pass, not a parse of every element
    (the XML parse below took 26 s for a 100,000-item History). Sheets that write their
    elements with a namespace prefix (<x:f>) get the parse.
    """
    out: set[str] = set()
    for piece in _row_pieces(src, chunk):
        for pattern in (_NO_RESULT_AFTER_BODY, _NO_RESULT_AFTER_EMPTY):
            for m in pattern.finditer(piece):
                start = max(
                    piece.rfind(b"<c ", 0, m.start()),
                    piece.rfind(b"<c\t", 0, m.start()),
                    piece.rfind(b"<c\n", 0, m.start()),
                )
                if start < 0 or piece.find(b"</c>", start, m.start()) >= 0:
                    continue  # a cell without attributes: no reference of its own
                ref = _REF.search(piece, start, piece.find(b">", start) + 1)
                if ref is not None:
                    out.add((ref.group(1) + ref.group(2)).decode())
    return out


def _formulas_without_result_parsed(src: Any) -> set[str]:
    """A1 references of formula cells with no saved value, parsed as a stream (defusedxml).

    Each cell, and each row once read, is cleared, so memory stays small however long the
    sheet.
    """
    out: set[str] = set()
    c_tag, f_tag, v_tag = f"{{{_NS_MAIN}}}c", f"{{{_NS_MAIN}}}f", f"{{{_NS_MAIN}}}v"
    row_tag = f"{{{_NS_MAIN}}}row"
    try:
        for _event, elem in ET.iterparse(src, events=("end",)):
            if elem.tag == c_tag:
                f = elem.find(f_tag)
                if f is not None:
                    v = elem.find(v_tag)
                    if v is None or not (v.text or "").strip():
                        out.add(elem.get("r", ""))
                elem.clear()
            elif elem.tag == row_tag:
                elem.clear()
    except (ET.ParseError, DefusedXmlException):
        pass
    out.discard("")
    return out


_REF = re.compile(rb'\sr="\$?([A-Z]{1,3})\$?(\d+)"')
_TEXT_TYPE = re.compile(rb'\st="(?:s|str|inlineStr)"')
_ERROR_CELL = re.compile(rb'<c\b([^>]*\st="e"[^>]*)>(.*?)</c>', re.S)
_VALUE = re.compile(rb"<v>([^<]*)</v>")
_ZERO_PAD_FORMAT = re.compile(r"^0+$")
_ROOT = re.compile(rb"<([A-Za-z_][\w.-]*:)?worksheet[\s>]")


@dataclass
class _Tally:
    """What one piece of a sheet's XML holds, as :func:`_tally` counts it."""

    text_cells: int = 0  # cells typed t="s", t="str" or t="inlineStr"; negative: unknown
    bools: bool = False  # a cell typed t="b"
    errors: bool = False  # a cell typed t="e"
    formulas: bool = False  # a formula element: <f>, <f .../>, <x:f>
    layout_words: bool = False  # the words "hidden" or "mergeCell"


_U8 = np.uint8


def _tally(piece: bytes) -> _Tally:
    """Count what the scan needs in one piece of sheet XML, with numpy.

    Each thing sought starts from a letter that is rare in a sheet's XML (the t of t="s",
    the f of <f>, the h of hidden, the C of mergeCell): numpy finds every such letter and
    compares the bytes around them as whole arrays. numpy does this outside the interpreter
    lock, so the scan no longer holds up the Items sheet's checks running beside it (byte
    searches and regular expressions hold the lock). A type written another way than
    t="..." after a space (t = "s") makes the count unknown, on the safe side.
    """
    out = _Tally()
    a = np.frombuffer(piece, dtype=_U8)
    if not a.size:
        return out
    pad = np.zeros(a.size + 16, dtype=_U8)
    pad[8:-8] = a

    def at(where: np.ndarray, k: int) -> np.ndarray:
        return pad[where + (8 + k)]

    def space(x: np.ndarray) -> np.ndarray:
        return (x == 32) | (x == 9) | (x == 10) | (x == 13)

    def quote(x: np.ndarray) -> np.ndarray:
        return (x == 34) | (x == 39)

    t = np.flatnonzero(a == ord("t"))
    typed = t[space(at(t, -1)) & (at(t, 1) == ord("=")) & quote(at(t, 2))]
    v1, v2 = at(typed, 3), at(typed, 4)
    text = ((v1 == ord("s")) & (quote(v2) | (v2 == ord("t")))) | (v1 == ord("i"))
    out.text_cells = int(np.count_nonzero(text))
    out.bools = bool(np.any((v1 == ord("b")) & quote(v2)))
    out.errors = bool(np.any((v1 == ord("e")) & quote(v2)))
    loose = (
        space(at(t, -1))
        & space(at(t, 1))
        & ((at(t, 2) == ord("=")) | (space(at(t, 2)) & (at(t, 3) == ord("="))))
    )
    if np.any(loose):  # "t =": another way of writing it
        out.text_cells = -(1 << 40)
        out.bools = out.bools or b"b" in piece
        out.errors = True
    f = np.flatnonzero(a == ord("f"))
    before, after = at(f, -1), at(f, 1)
    out.formulas = bool(
        np.any(
            ((before == ord("<")) | (before == ord(":")))
            & (space(after) | (after == ord(">")) | (after == ord("/")))
        )
    )
    h = np.flatnonzero(a == ord("h"))
    hidden = np.ones(h.size, dtype=bool)
    for k, ch in enumerate(b"idden", start=1):
        hidden &= at(h, k) == ch
    c = np.flatnonzero(a == ord("C"))
    merge = np.ones(c.size, dtype=bool)
    for k, ch in enumerate(b"merge"):
        merge &= at(c, k - 5) == ch
    merge &= (at(c, 1) == ord("e")) & (at(c, 2) == ord("l")) & (at(c, 3) == ord("l"))
    out.layout_words = bool(hidden.any() or merge.any())
    return out


@dataclass
class _Scan:
    """What the fast path learns from a sheet's XML (see WorkbookFile._scan)."""

    formulas: bool = False
    errors: dict[tuple[int, int], str] = field(default_factory=dict)
    formats: dict[tuple[int, int], str] = field(default_factory=dict)
    #: Of the cells in ``formats``, those that hold text (a text cell ignores its format).
    styled_text: set[tuple[int, int]] = field(default_factory=set)
    #: Whether the sheet holds any TRUE/FALSE cell (the typed reader would see 1 and 0).
    bools: bool = False
    #: How many cells hold text (shared, inline or a formula's text); negative: unknown.
    text_cells: int = 0


def _open_calamine(path: Path) -> Any:
    """A python-calamine workbook, or None when it is not installed or cannot open the file."""
    try:
        from python_calamine import CalamineWorkbook
    except ImportError:
        return None
    try:
        return CalamineWorkbook.from_path(str(path))
    except Exception:  # the openpyxl path gives the user a proper message
        return None


def _error_cells(data: bytes) -> dict[tuple[int, int], str] | None:
    """(row, column) -> error text (#N/A, #DIV/0!) for cells of type error, 0-based; None
    when an error cell has no reference of its own (it cannot be placed)."""
    if b't="e"' not in data:
        return {}
    out: dict[tuple[int, int], str] = {}
    for m in _ERROR_CELL.finditer(data):
        ref = _REF.search(b" " + m.group(1))
        v = _VALUE.search(m.group(2))
        if ref is None:
            return None
        if v is None:
            continue
        text = v.group(1).decode("utf-8", "replace")
        out[(int(ref.group(2)) - 1, column_index_from_string(ref.group(1).decode()) - 1)] = text
    return out


def _formats_that_matter(path: Path) -> dict[int, str]:
    """Style index -> number format, for the styles whose format changes a value's meaning.

    Those are zero-padded formats (000000, for item codes) and percentages (for rates),
    and formats that show a currency (the output shows money in the input's currency).
    """
    try:
        with zipfile.ZipFile(path) as zf:
            names = zf.namelist()
            part = next((n for n in names if n.lower() == "xl/styles.xml"), None)
            if part is None:
                return {}
            root = ET.fromstring(zf.read(part))
    except (KeyError, ET.ParseError, DefusedXmlException, zipfile.BadZipFile, OSError, zlib.error):
        return {}
    custom = {
        int(f.get("numFmtId", "-1")): f.get("formatCode", "")
        for f in root.iter(f"{{{_NS_MAIN}}}numFmt")
    }
    out: dict[int, str] = {}
    xfs = root.find(f"{{{_NS_MAIN}}}cellXfs")
    if xfs is None:
        return {}
    for k, xf in enumerate(xfs.findall(f"{{{_NS_MAIN}}}xf")):
        try:
            fid = int(xf.get("numFmtId", "0"))
        except ValueError:
            continue
        fmt = custom.get(fid, BUILTIN_FORMATS.get(fid, "General"))
        if "%" in fmt or _ZERO_PAD_FORMAT.match(fmt) or currency_of(fmt):
            out[k] = fmt
    return out


def _sheet_parts(path: Path) -> dict[str, str]:
    """Map sheet name -> its part name in the package, via the workbook's relationships."""
    try:
        with zipfile.ZipFile(path) as zf:
            names = set(zf.namelist())
            root_rels = ET.fromstring(zf.read("_rels/.rels"))
            wb_part = "xl/workbook.xml"
            for rel in root_rels.iter(f"{{{_NS_PKG_REL}}}Relationship"):
                if rel.get("Type", "").endswith("/officeDocument"):
                    wb_part = rel.get("Target", wb_part).lstrip("/")
            base = posixpath.dirname(wb_part)
            rels_part = posixpath.join(base, "_rels", posixpath.basename(wb_part) + ".rels")
            rels = ET.fromstring(zf.read(rels_part))
            targets = {}
            for rel in rels.iter(f"{{{_NS_PKG_REL}}}Relationship"):
                t = rel.get("Target", "")
                t = (
                    t.lstrip("/")
                    if t.startswith("/")
                    else posixpath.normpath(posixpath.join(base, t))
                )
                targets[rel.get("Id")] = t
            wb = ET.fromstring(zf.read(wb_part))
            out = {}
            for s in wb.iter(f"{{{_NS_MAIN}}}sheet"):
                target = targets.get(s.get(f"{{{_NS_REL}}}id"))
                if target in names:
                    out[s.get("name")] = target
            return out
    except (
        KeyError,
        ET.ParseError,
        DefusedXmlException,
        zipfile.BadZipFile,
        OSError,
        zlib.error,
        EOFError,
        ValueError,
    ):
        return {}


def _hidden_sheets(path: Path) -> set[str]:
    """Names of the sheets the workbook marks hidden (state="hidden" or "veryHidden")."""
    try:
        with zipfile.ZipFile(path) as zf:
            part = next((n for n in zf.namelist() if n.lower() == "xl/workbook.xml"), None)
            if part is None:
                return set()
            root = ET.fromstring(zf.read(part))
    except (
        KeyError,
        ET.ParseError,
        DefusedXmlException,
        zipfile.BadZipFile,
        OSError,
        zlib.error,
        EOFError,
        ValueError,
    ):
        return set()
    return {
        s.get("name", "")
        for s in root.iter(f"{{{_NS_MAIN}}}sheet")
        if s.get("state") in ("hidden", "veryHidden")
    }


_ROW_OR_MERGE = re.compile(rb"<(?:[A-Za-z_][\w.-]*:)?(row|mergeCell)\b([^>]*)>")
_HIDDEN = re.compile(rb"\bhidden\s*=\s*[\"'](?:1|true)[\"']")
_MERGE_REF = re.compile(rb"\bref\s*=\s*[\"']([A-Z]{1,3})(\d+):([A-Z]{1,3})(\d+)[\"']")


def layout_notes(wb: WorkbookFile, name: str, sheet: RawSheet, log: ProblemLog) -> None:
    """Tell the user about a sheet's hidden parts and merged cells that touch its data.

    Hidden rows are read like the others (a sheet's data is what it holds, not what is on
    screen), with a warning naming them; a hidden sheet is found and read all the same, with
    a note. A merged range over several rows of data keeps its value in its first row only,
    so the rows below read as blank there: a warning names the range. The sheet's XML is
    scanned once in 1 MB pieces, so this costs little even for a large sheet.
    """
    if name in _hidden_sheets(wb.path):
        log.info(
            f"The sheet '{name}' is hidden in the workbook; it was read all the same. "
            "Unhide it (right-click a sheet tab > Unhide) to see what was read.",
            sheet=name,
            code="sheet-hidden",
        )
    part = wb._sheet_parts.get(name)
    if not part or not sheet.row_numbers or name in wb.plain_layout:
        return
    data_rows = set(sheet.row_numbers)
    hidden: list[int] = []
    merged: list[bytes] = []
    try:
        with zipfile.ZipFile(wb.path) as zf, zf.open(part) as src:
            carry = b""
            while True:
                data = src.read(1 << 20)
                buf = carry + data
                cut = buf.rfind(b">") + 1 if data else len(buf)
                # Most sheets have neither: two searches in C skip the tag-by-tag scan.
                maybe = buf.find(b"hidden", 0, cut) >= 0 or buf.find(b"mergeCell", 0, cut) >= 0
                for m in _ROW_OR_MERGE.finditer(buf, 0, cut if maybe else 0):
                    if m.group(1) == b"row":
                        if _HIDDEN.search(m.group(2)):
                            r = _ROW_NUMBER.search(m.group(2))
                            if r is not None and int(r.group(1)) in data_rows:
                                hidden.append(int(r.group(1)))
                    else:
                        ref = _MERGE_REF.search(m.group(2))
                        if ref is not None and len(merged) < 1000 and _spans_data(ref, data_rows):
                            merged.append(ref.group(0).split(b"=", 1)[1].strip(b"\"' "))
                carry = buf[cut:]
                if not data or len(carry) > (16 << 20):
                    break
    except Exception:  # a scan for notes must never stop a run
        return
    if hidden:
        log.warning(
            f"The sheet '{name}' has {len(hidden)} hidden row(s) with data "
            f"({_ranges(hidden)}); they were read like the others. Unhide them to "
            "check them, and delete any row that should not be planned.",
            sheet=name,
            code="rows-hidden",
        )
    for span in merged[:20]:
        text = span.decode()
        log.warning(
            f"The cells {text} of '{name}' are merged: only the first row holds the "
            "value, so the rows below read as blank there. Unmerge them and fill the "
            "value into each row.",
            sheet=name,
            cell=text.split(":")[0],
            code="cells-merged",
        )


def _spans_data(ref: re.Match, data_rows: set[int]) -> bool:
    """Whether a merged range covers a row of data below its first row."""
    r1, r2 = int(ref.group(2)), int(ref.group(4))
    return any(r in data_rows for r in range(r1 + 1, min(r2, r1 + 5000) + 1))


def _ranges(rows: list[int]) -> str:
    """1, 2, 3, 7 -> '1-3, 7' (at most ten runs shown)."""
    runs: list[list[int]] = []
    for r in sorted(set(rows)):
        if runs and r == runs[-1][1] + 1:
            runs[-1][1] = r
        else:
            runs.append([r, r])
    text = ", ".join(f"{a}" if a == b else f"{a}-{b}" for a, b in runs[:10])
    return text + (", ..." if len(runs) > 10 else "")


def _ignore_recorded_size(wb: Any) -> None:
    """Make openpyxl read each sheet's real rows, not the size the file records for it.

    A sheet records its used range ("A1:G200"), and openpyxl's read-only mode trusts it: a
    range that is too small silently drops the rows beyond it, and one that is too large
    ("A1:XFD1048576") pads every row to 16,384 cells and fills the gaps with empty rows.
    Writers that get it wrong exist, so rows are read as they are in the file; the recorded
    size stays readable (``ws.max_row``) for the progress bar only. Reading also stops after
    the last row that holds a value or formula (found by a quick scan of the sheet's bytes),
    so a million formatted empty rows below the data cost neither time nor memory.
    """
    for ws in getattr(wb, "worksheets", []):
        if hasattr(ws, "reset_dimensions") and hasattr(ws, "_cells_by_row"):
            ws._cells_by_row = _rows_as_present(ws)


def _rows_as_present(ws: Any) -> Any:
    """A replacement for ``ws._cells_by_row`` that ignores the recorded used range."""
    original = type(ws)._cells_by_row

    def rows(
        min_col: int,
        min_row: int,
        max_col: int | None,
        max_row: int | None,
        values_only: bool = False,
    ) -> Any:
        claimed = (ws._max_row, ws._max_column)
        if max_row == claimed[0]:
            max_row = None
        if max_col == claimed[1]:
            max_col = None
        if max_row is None:
            max_row = _last_row_with_content(ws)  # None: unknown, read to the end
        ws._max_row = ws._max_column = None
        try:
            for k, row in enumerate(original(ws, min_col, min_row, max_col, max_row, values_only)):
                if max_row is not None and min_row + k > max_row:
                    return
                yield row
        finally:
            ws._max_row, ws._max_column = claimed

    return rows


_CONTENT_TAGS = re.compile(rb"<(?:[A-Za-z_][\w.-]*:)?(row|v|is|f)\b([^>]*)>")
_ROW_NUMBER = re.compile(rb"\br\s*=\s*[\"'](\d+)[\"']")


def _last_row_with_content(ws: Any, chunk: int = 1 << 20) -> int | None:
    """The number of the last row holding a value, text or formula; None if it can't be told.

    Streams the sheet's XML once (1 MB at a time, in bounded memory) looking only at tags:
    the last ``<row r="N">`` seen before a ``<v>``, ``<is>`` or ``<f>``. 0 for a sheet with
    no content at all.
    """
    try:
        src = ws.parent._archive.open(ws._worksheet_path)
    except Exception:  # no archive to look at (a different openpyxl): read everything
        return None
    last, current = 0, None
    try:
        with src:
            carry = b""
            while True:
                data = src.read(chunk)
                buf = carry + data
                cut = buf.rfind(b">") + 1 if data else len(buf)
                for m in _CONTENT_TAGS.finditer(buf, 0, cut):
                    if m.group(1) == b"row":
                        r = _ROW_NUMBER.search(m.group(2))
                        if r is None:
                            return None  # rows without numbers: count them the slow way
                        current = int(r.group(1))
                    elif current is None:
                        return None
                    else:
                        last = current
                if not data:
                    break
                carry = buf[cut:]
                if len(carry) > 16 * chunk:  # no '>' for megabytes: not a sheet we can scan
                    return None
    except Exception:  # damaged data: the parser will say so with a message
        return None
    return last
