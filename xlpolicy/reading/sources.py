"""Inputs other than .xlsx: OpenDocument (.ods), old Excel (.xls) and a folder of CSV files.

Each reader has the interface of :class:`~xlpolicy.reading.workbook.WorkbookFile` (``open``,
``sheet_names``, ``find_sheet``, ``read``, ``close``) and gives the same Python types in its
rows: str for text, int/float for numbers, datetime for dates, None for an empty cell, with
the cell's number format where the source has one ("" otherwise), so the sheet readers
(items, history, settings) need not know where a sheet came from.

- .ods: the package's content.xml is read directly (stdlib XML, no extra library); a cell's
  value type gives its number format ("0%" for a percentage cell, zero-padding when the
  cell shows a whole number with leading zeros, as "000123").
- .xls: xlrd, with formatting_info so each cell's number format is known; dates come out as
  datetimes via xlrd.xldate.
- a folder: one CSV file per sheet (Items.csv, History.csv, Settings.csv, names matched
  loosely), read with the csv module as text. Only text that is unambiguously a number or
  a date is turned into one (see :func:`csv_value`); "000123" and "n/a" stay text. With a
  semicolon between columns the comma is the decimal mark (European exports).
"""

from __future__ import annotations

import csv
import datetime as _dt
import io
import re
import zipfile
from collections.abc import Iterator
from pathlib import Path
from typing import Any, Protocol
from xml.etree import ElementTree as ET

from defusedxml.ElementTree import fromstring as _safe_fromstring

from ..contract import normalise
from ..problems import ProblemLog
from .filekind import read_head, sniff
from .guard import current_limits, foreign_file_message, refusal, too_many_cells
from .workbook import SHEET_ALIASES, RawSheet, WorkbookFile, cell_ref

CSV_SUFFIXES = (".csv", ".tsv")

#: What each kind of input is called in messages, by kind.
KIND_NAMES = {
    "ods": "an OpenDocument spreadsheet (.ods)",
    "xls": "an old-style Excel file (.xls)",
    "csv": "a folder of CSV files",
}


class SheetSource(Protocol):
    """What read_input needs from an input, whatever its file type."""

    sheet_names: list[str]

    def open(self) -> bool: ...

    def find_sheet(self, canonical: str) -> str | None: ...

    def read(self, name: str) -> RawSheet: ...

    def close(self) -> None: ...


def source_kind(path: str | Path) -> str:
    """ "xlsx", "ods", "xls" or "csv" (a folder, or a .csv file), from the path alone."""
    p = Path(path)
    if p.is_dir():
        return "csv"
    suffix = p.suffix.lower()
    if suffix == ".ods":
        return "ods"
    if suffix == ".xls":
        return "xls"
    if suffix in CSV_SUFFIXES:
        return "csv"
    return "xlsx"


def open_source(path: str | Path, log: ProblemLog) -> SheetSource:
    """The reader for ``path``, chosen by its type (not yet opened)."""
    p = Path(path)
    kind = source_kind(p)
    if kind == "ods":
        return OdsFile(p, log)
    if kind == "xls":
        return XlsFile(p, log)
    if kind == "csv":
        return CsvFolder(p, log)
    return WorkbookFile(p, log)


def _match_sheet(names: list[str], canonical: str, key: Any = None) -> str | None:
    """The first of ``names`` that is one of our sheets' names or aliases, loosely."""
    wanted = {normalise(a) for a in SHEET_ALIASES[canonical]}
    for name in names:
        if normalise(key(name) if key else name) in wanted:
            return name
    return None


# --- a file whose contents are not what its name says (sniffed by filekind.py) ---------


def _renamed_message(name: str, kind: str, found: str) -> str | None:
    """A plain message for a file whose contents are not what its extension says."""
    resave = "Open it in your spreadsheet program and save it as 'Excel Workbook (.xlsx)'."
    foreign = foreign_file_message(name, kind, found, resave)
    if foreign is not None:
        return foreign
    if found == "zip":
        return (
            f"{name} is really an .xlsx workbook saved with {kind} name. Rename it to end "
            "in .xlsx and run again."
        )
    if found in ("ole2", "biff"):
        return (
            f"{name} is really an old-style Excel file (.xls) saved with {kind} name. "
            "Rename it to end in .xls and run again."
        )
    return None


def _exists(path: Path, log: ProblemLog, what: str) -> bool:
    if not path.exists():
        log.fatal(
            f"The {what} {path.name} does not exist. Check the name and folder.",
            value=str(path),
            code="file-missing",
        )
        return False
    if path.is_dir():
        log.fatal(
            f"{path.name} is a folder, not a workbook.", value=str(path), code="file-is-folder"
        )
        return False
    return True


# --- .ods ---------------------------------------------------------------------------------

_NS_OFFICE = "urn:oasis:names:tc:opendocument:xmlns:office:1.0"
_NS_TABLE = "urn:oasis:names:tc:opendocument:xmlns:table:1.0"
_NS_TEXT = "urn:oasis:names:tc:opendocument:xmlns:text:1.0"
_NS_CALCEXT = "urn:org:documentfoundation:names:experimental:calc:xmlns:calcext:1.0"
_NS_MANIFEST = "urn:oasis:names:tc:opendocument:xmlns:manifest:1.0"
_T = f"{{{_NS_TABLE}}}"
_O = f"{{{_NS_OFFICE}}}"
_X = f"{{{_NS_TEXT}}}"
_ROW_GROUPS = {f"{_T}table-header-rows", f"{_T}table-row-group", f"{_T}table-rows"}
_CELLS = {f"{_T}table-cell", f"{_T}covered-table-cell"}
_MAX_COLS = 16384
_MAX_ROWS = 1_048_576
_DURATION = re.compile(r"^-?P(?:(\d+)D)?T?(?:(\d+)H)?(?:(\d+)M)?(?:([\d.]+)S)?$")
_ODS_MIME = "application/vnd.oasis.opendocument.spreadsheet"


class OdsFile:
    """An OpenDocument spreadsheet (.ods), read from its content.xml."""

    def __init__(self, path: Path, log: ProblemLog):
        self.path = Path(path)
        self.log = log
        self.sheet_names: list[str] = []
        self._tables: dict[str, ET.Element] = {}

    def open(self) -> bool:
        """Open the file; on failure record a fatal problem and return False."""
        p = self.path
        if not _exists(p, self.log, "file"):
            return False
        resave = "Open it in your spreadsheet program and save it again as .ods or .xlsx."
        try:
            found = sniff(read_head(p))
        except OSError as exc:
            self.log.fatal(
                f"{p.name} could not be opened ({exc.strerror or exc}).",
                value=str(p),
                code="file-unreadable",
            )
            return False
        if found != "zip":
            msg = _renamed_message(p.name, "an .ods", found) or (
                f"{p.name} is not a readable .ods spreadsheet (it may be damaged or another "
                f"kind of file renamed). {resave}"
            )
            self.log.fatal(msg, value=str(p), code="file-not-ods")
            return False
        refused = refusal(p, "ods")  # zip bombs, DTDs, truncation: before any parser
        if refused is not None:
            self.log.fatal(refused.message, value=str(p), code=refused.code)
            return False
        try:
            with zipfile.ZipFile(p) as zf:
                names = set(zf.namelist())
                mime = (
                    zf.read("mimetype").decode("ascii", "replace").strip()
                    if "mimetype" in names
                    else ""
                )
                if "META-INF/manifest.xml" in names and b"encryption-data" in zf.read(
                    "META-INF/manifest.xml"
                ):
                    self.log.fatal(
                        f"{p.name} is protected by a password, so it cannot be read. Open it, "
                        "remove the password (File > Properties > Security, or save without "
                        "'Save with password') and run again.",
                        value=str(p),
                        code="file-encrypted",
                    )
                    return False
                if "xl/workbook.xml" in names or "[Content_Types].xml" in names:
                    self.log.fatal(
                        _renamed_message(p.name, "an .ods", "zip") or "",
                        value=str(p),
                        code="file-not-ods",
                    )
                    return False
                if mime and mime != _ODS_MIME:
                    self.log.fatal(
                        f"{p.name} is an OpenDocument file of another kind ({mime}), not a "
                        f"spreadsheet. {resave}",
                        value=mime,
                        code="file-not-ods",
                    )
                    return False
                content = zf.read("content.xml")
            root = _safe_fromstring(content)  # no DTD, no entities (defusedxml)
        except (zipfile.BadZipFile, KeyError, ET.ParseError, OSError, ValueError) as exc:
            self.log.fatal(
                f"{p.name} is not a readable .ods spreadsheet ({type(exc).__name__}: {exc}); "
                f"it may be damaged. {resave}",
                value=str(p),
                code="file-unreadable",
            )
            return False
        body = root.find(f"{_O}body/{_O}spreadsheet")
        if body is None:
            self.log.fatal(
                f"{p.name} holds no spreadsheet. {resave}", value=str(p), code="file-not-ods"
            )
            return False
        for table in body.findall(f"{_T}table"):
            name = table.get(f"{_T}name") or f"Sheet{len(self._tables) + 1}"
            self._tables[name] = table
            self.sheet_names.append(name)
        return True

    def close(self) -> None:
        self._tables = {}

    def find_sheet(self, canonical: str) -> str | None:
        """The user's name for one of our sheets (Items, History, Settings), matched loosely."""
        return _match_sheet(self.sheet_names, canonical)

    def read(self, name: str) -> RawSheet:
        """All rows of a sheet, values and number formats, empty rows dropped."""
        sheet = RawSheet(name)
        rownum = 0
        cells, max_cells = 0, current_limits().max_cells
        for row in _ods_rows(self._tables[name]):
            repeat = _repeat(row, "rows")
            values: list[Any] = []
            formats: list[str] = []
            pending = 0  # empty cells not yet appended (only needed before a value)
            for cell in row:
                if cell.tag not in _CELLS:
                    continue
                n = _repeat(cell, "columns")
                value, fmt, uncalculated = _ods_cell(cell)
                if value is None:
                    if uncalculated:
                        for k in range(n):
                            sheet.uncalculated.add(cell_ref(len(values) + pending + k, rownum + 1))
                    pending += n
                    continue
                if len(values) + pending >= _MAX_COLS:
                    break
                values.extend([None] * pending)
                formats.extend([""] * pending)
                pending = 0
                n = min(n, _MAX_COLS - len(values))
                values.extend([value] * n)
                formats.extend([fmt] * n)
            if values:
                cells += len(values) * min(repeat, _MAX_ROWS - rownum)
                if cells > max_cells:
                    raise too_many_cells(self.path.name, name, max_cells)
                for k in range(min(repeat, _MAX_ROWS - rownum)):
                    sheet.rows.append(list(values))
                    sheet.formats.append(list(formats))
                    sheet.row_numbers.append(rownum + k + 1)
            rownum += repeat
            if rownum >= _MAX_ROWS:
                break
        return sheet


def _repeat(elem: ET.Element, what: str) -> int:
    try:
        return max(1, int(elem.get(f"{_T}number-{what}-repeated", "1")))
    except ValueError:
        return 1


def _ods_rows(elem: ET.Element) -> Iterator[ET.Element]:
    """The table-row elements of a table, in order, through any row groups."""
    for child in elem:
        if child.tag == f"{_T}table-row":
            yield child
        elif child.tag in _ROW_GROUPS:
            yield from _ods_rows(child)


def _ods_text(elem: ET.Element) -> str:
    """A cell's shown text: its paragraphs joined by line breaks."""
    paras = [_para_text(p) for p in elem if p.tag in (f"{_X}p", f"{_X}h")]
    return "\n".join(paras)


def _para_text(elem: ET.Element) -> str:
    parts = [elem.text or ""]
    for child in elem:
        tag = child.tag
        if tag == f"{_X}s":
            parts.append(" " * int(child.get(f"{_X}c", "1") or 1))
        elif tag == f"{_X}tab":
            parts.append("\t")
        elif tag == f"{_X}line-break":
            parts.append("\n")
        elif tag in (f"{_O}annotation", f"{_O}annotation-end"):
            pass  # a comment, not the cell's text
        else:
            parts.append(_para_text(child))
        parts.append(child.tail or "")
    return "".join(parts)


def _number(text: str) -> int | float:
    """A number from an ODF value attribute; whole numbers as int, as openpyxl gives them."""
    x = float(text)
    if x.is_integer() and abs(x) < 1e15:
        return int(x)
    return x


def _ods_cell(cell: ET.Element) -> tuple[Any, str, bool]:
    """(value, number format, formula without a result) of one table cell."""
    vtype = cell.get(f"{_O}value-type")
    if cell.tag != f"{_T}table-cell":
        return None, "", False  # covered by a merged cell: empty, as in .xlsx
    try:
        if vtype in ("float", "currency", "percentage"):
            x = _number(cell.get(f"{_O}value", ""))
            shown = _ods_text(cell).strip()
            if _shown_as_yes_no(cell, x, shown):
                return x == 1, "General", False
            if vtype == "percentage":
                return x, "0%", False
            if (
                isinstance(x, int)
                and x >= 0
                and len(shown) > len(str(x))
                and shown.isdigit()
                and shown.startswith("0")
            ):
                return x, "0" * len(shown), False  # zero-padded code, e.g. 000123
            return x, "#,##0.00" if vtype == "currency" else "General", False
        if vtype == "date":
            raw = cell.get(f"{_O}date-value", "")
            return _iso_datetime(raw), "yyyy-mm-dd", False
        if vtype == "time":
            return _duration(cell.get(f"{_O}time-value", "")), "hh:mm:ss", False
        if vtype == "boolean":
            return cell.get(f"{_O}boolean-value", "").lower() == "true", "General", False
    except ValueError:
        pass  # a malformed value attribute: fall back on the text shown
    if vtype == "string":
        sv = cell.get(f"{_O}string-value")
        text = sv if sv else _ods_text(cell)
        return (text if text != "" else None), "General", False
    text = _ods_text(cell)
    if text != "":
        return text, "General", False
    return None, "", cell.get(f"{_T}formula") is not None


#: How spreadsheet programs show TRUE and FALSE in some common languages (common practice:
#: LibreOffice and Excel translate the words; the value beneath is 1 or 0).
_YES_NO_WORDS = {
    "true", "false", "wahr", "falsch", "vrai", "faux", "verdadero", "falso", "vero",
    "waar", "onwaar", "sann", "usann", "prawda", "fałsz",
}  # fmt: skip
_BOOLEAN_FORMULAS = ("of:=true()", "of:=false()", "=true()", "=false()")


def _shown_as_yes_no(cell: ET.Element, x: float, shown: str) -> bool:
    """Whether a number cell is really TRUE or FALSE, as LibreOffice saves a yes/no cell
    (a float 1 or 0 with the formula TRUE() or a yes/no display), so that it goes to the
    same checks as a yes/no cell of an .xlsx or .xls file rather than counting as 1 or 0."""
    if x not in (0, 1):
        return False
    ext = cell.get(
        "{urn:org:documentfoundation:names:experimental:calc:xmlns:calcext:1.0}value-type"
    )
    formula = (cell.get(f"{_T}formula") or "").replace(" ", "").lower()
    return ext == "boolean" or formula in _BOOLEAN_FORMULAS or shown.lower() in _YES_NO_WORDS


def _iso_datetime(raw: str) -> _dt.datetime:
    raw = raw.strip()
    try:
        return _dt.datetime.fromisoformat(raw)
    except ValueError:
        return _dt.datetime.fromisoformat(raw[:19])


def _duration(raw: str) -> _dt.time | _dt.timedelta:
    m = _DURATION.match(raw.strip())
    if not m:
        raise ValueError(raw)
    d, h, mi, s = (float(g) if g else 0.0 for g in m.groups())
    td = _dt.timedelta(days=d, hours=h, minutes=mi, seconds=s)
    if td < _dt.timedelta(days=1) and not raw.strip().startswith("-"):
        return (_dt.datetime.min + td).time()
    return td


# --- .xls ---------------------------------------------------------------------------------


class XlsFile:
    """An old-style Excel workbook (.xls, BIFF), read with xlrd."""

    def __init__(self, path: Path, log: ProblemLog):
        self.path = Path(path)
        self.log = log
        self.sheet_names: list[str] = []
        self._book: Any = None

    def open(self) -> bool:
        """Open the file; on failure record a fatal problem and return False."""
        p = self.path
        if not _exists(p, self.log, "file"):
            return False
        resave = "Open it in your spreadsheet program and save it as 'Excel Workbook (.xlsx)'."
        try:
            found = sniff(read_head(p))
        except OSError as exc:
            self.log.fatal(
                f"{p.name} could not be opened ({exc.strerror or exc}).",
                value=str(p),
                code="file-unreadable",
            )
            return False
        if found not in ("ole2", "biff"):
            msg = _renamed_message(p.name, "an .xls", found) or (
                f"{p.name} is not a readable .xls workbook (it may be damaged or another kind "
                f"of file renamed). {resave}"
            )
            self.log.fatal(msg, value=str(p), code="file-not-xls")
            return False
        try:
            import xlrd
        except ImportError:
            self.log.fatal(
                f"{p.name} is an .xls workbook, and reading .xls needs the Python package "
                f"xlrd, which is not installed (pip install xlrd). Or: {resave}",
                value=str(p),
                code="xls-needs-xlrd",
            )
            return False
        quiet = io.StringIO()  # xlrd writes its warnings to a log file; keep them off stdout
        try:
            try:
                self._book = xlrd.open_workbook(
                    str(p), formatting_info=True, logfile=quiet, on_demand=True
                )
            except NotImplementedError:
                self._book = xlrd.open_workbook(str(p), logfile=quiet, on_demand=True)
            self.sheet_names = list(self._book.sheet_names())
        except Exception as exc:  # xlrd raises many kinds; none may reach the user raw
            text = str(exc)
            if "encrypt" in text.lower():
                msg = (
                    f"{p.name} is protected by a password, so it cannot be read. Open it, "
                    f"remove the password and {resave[0].lower()}{resave[1:]}"
                )
                code = "file-encrypted"
            else:
                msg = (
                    f"{p.name} is not a readable .xls workbook ({type(exc).__name__}: "
                    f"{text}); it may be damaged. {resave}"
                )
                code = "file-unreadable"
            self.log.fatal(msg, value=str(p), code=code)
            self._book = None
            return False
        return True

    def close(self) -> None:
        if self._book is not None:
            self._book.release_resources()
            self._book = None

    def find_sheet(self, canonical: str) -> str | None:
        """The user's name for one of our sheets (Items, History, Settings), matched loosely."""
        return _match_sheet(self.sheet_names, canonical)

    def read(self, name: str) -> RawSheet:
        """All rows of a sheet, values and number formats, empty rows dropped."""
        import xlrd

        book = self._book
        sheet = RawSheet(name)
        try:
            ws = book.sheet_by_name(name)
        except Exception as exc:  # a damaged sheet record
            self.log.error(
                f"The sheet '{name}' could not be read ({exc}); it was left out.",
                sheet=name,
                code="sheet-unreadable",
            )
            return sheet
        has_xf = bool(getattr(book, "formatting_info", False))
        for r in range(ws.nrows):
            types = ws.row_types(r)
            raw = ws.row_values(r)
            values: list[Any] = []
            formats: list[str] = []
            for c, (t, v) in enumerate(zip(types, raw, strict=False)):
                fmt = _xls_format(book, ws, r, c) if has_xf else ""
                value = _xls_value(xlrd, book, t, v, fmt)
                values.append(value)
                formats.append((fmt or "General") if value is not None else "")
            while values and values[-1] is None:
                values.pop()
                formats.pop()
            if values:
                sheet.rows.append(values)
                sheet.formats.append(formats)
                sheet.row_numbers.append(r + 1)
        return sheet


def _xls_format(book: Any, ws: Any, r: int, c: int) -> str:
    try:
        xf = book.xf_list[ws.cell_xf_index(r, c)]
        fmt = book.format_map.get(xf.format_key)
        return (fmt.format_str or "") if fmt is not None else ""
    except (IndexError, AttributeError, KeyError):
        return ""


def _xls_value(xlrd: Any, book: Any, ctype: int, v: Any, fmt: str) -> Any:
    """One xlrd cell as the Python value openpyxl would give for the same cell."""
    if ctype in (xlrd.XL_CELL_EMPTY, xlrd.XL_CELL_BLANK):
        return None
    if ctype == xlrd.XL_CELL_TEXT:
        return v if v != "" else None
    if ctype == xlrd.XL_CELL_NUMBER:
        return _number(repr(float(v)))
    if ctype == xlrd.XL_CELL_DATE:
        try:
            d = xlrd.xldate.xldate_as_datetime(v, book.datemode)
        except Exception:  # out of the calendar's range: keep the number, it will be reported
            return float(v)
        if 0 <= v < 1 and not any(ch in fmt.lower() for ch in "dy"):
            return d.time()
        return d
    if ctype == xlrd.XL_CELL_BOOLEAN:
        return bool(v)
    if ctype == xlrd.XL_CELL_ERROR:
        return xlrd.error_text_from_code.get(v, "#ERROR!")
    return v


# --- a folder of CSV files ----------------------------------------------------------------

_INT = re.compile(r"^-?(0|[1-9]\d*)$")
_DEC = re.compile(r"^-?(0|[1-9]\d*)\.\d+$")
_EU_NUMBER = re.compile(r"^([+-]?)(\d{1,3}(?:\.\d{3})+|\d+)(?:,(\d+))?(%?)$")
_DOT_DECIMAL = re.compile(r"^[+-]?\d+\.\d+%?$")
_DOT_THOUSANDS = re.compile(r"^[+-]?\d{1,3}(\.\d{3})+$")
_COMMA_DECIMAL = re.compile(r"^[+-]?\d+(\.\d{3})*,\d+%?$")
_ISO = re.compile(r"^(\d{4})-(\d{2})-(\d{2})(?:[ T](\d{2}):(\d{2})(?::(\d{2}))?)?$")
_DOTTED = re.compile(r"^(\d{1,2})\.(\d{1,2})\.(\d{4})$")
_SLASHED = re.compile(r"^(\d{1,2})/(\d{1,2})/(\d{4})$")
_SPACES = re.compile(r"[\s\u00a0\u2007\u202f]+")


def sniff_delimiter(text: str) -> str:
    """Comma, semicolon or tab: the one that splits the first lines most consistently."""
    lines = [ln for ln in text.splitlines() if ln.strip()][:50]
    if not lines:
        return ","
    best, best_score = ",", (0, 0)
    for delim in (",", ";", "\t"):
        counts = [len(r) for r in csv.reader(lines, delimiter=delim)]
        widths = [c for c in counts if c > 1]
        if not widths:
            continue
        modal = max(set(widths), key=lambda w: (widths.count(w), w))
        score = (widths.count(modal), modal)
        if score > best_score:
            best, best_score = delim, score
    return best


def decimal_comma(cells: list[str]) -> bool:
    """Whether a semicolon-separated file writes its decimals with a comma.

    Yes, unless the file holds numbers with a decimal point and none with a decimal comma.
    """
    comma = any(_COMMA_DECIMAL.match(s) for s in cells)
    dot = any(_DOT_DECIMAL.match(s) and not _DOT_THOUSANDS.match(s) for s in cells)
    return comma or not dot


def slash_order(cells: list[str]) -> str | None:
    """ "dmy" or "mdy" for dates like 03/04/2024, when the file's own dates settle it."""
    day_first = month_first = False
    for s in cells:
        m = _SLASHED.match(s)
        if m:
            a, b = int(m.group(1)), int(m.group(2))
            day_first |= a > 12
            month_first |= b > 12
    if day_first and not month_first:
        return "dmy"
    if month_first and not day_first:
        return "mdy"
    return None


def csv_value(s: str, *, comma_decimals: bool = False, slashes: str | None = None) -> Any:
    """A CSV cell as the value a spreadsheet cell would hold, without guessing.

    Empty -> None. Text is turned into a number only when it is one written plainly, so that
    writing the number back gives the same text: "12" -> 12, "2.5" -> 2.5, but "000123",
    "2.50", "12.0", "-0", "1e5", "+3" and "n/a" stay text (the checks still read "2.50" as
    a number where a number belongs; codes keep their form). With ``comma_decimals`` "1,5"
    and "1.234,5" are first rewritten as "1.5" and "1234.5" ("14,5%" as "14.5%"). Dates written as
    2024-01-31 (and 31.01.2024 in decimal-comma files; 01/31/2024 when ``slashes`` says the
    order) become datetimes.
    """
    if s is None or s.strip() == "":
        return None
    t = s.strip()
    if comma_decimals:
        m = _EU_NUMBER.match(_SPACES.sub("", t))
        if m and (m.group(3) is not None or "." in m.group(2)):
            sign, whole, frac, pct = m.groups()
            t = f"{sign}{whole.replace('.', '')}" + (f".{frac}" if frac else "") + pct
    if _INT.match(t) and str(int(t)) == t:  # ("-0" stays text: a code shown as -0)
        return int(t)
    if _DEC.match(t) and repr(float(t)) == t and not float(t).is_integer():
        return float(t)  # ("12.0" and "-0.0" stay text, as typed: a code keeps its form)
    d = _csv_date(t, comma_decimals, slashes)
    if d is not None:
        return d
    return t if t != s.strip() else s


def _csv_date(t: str, dotted: bool, slashes: str | None) -> _dt.datetime | None:
    try:
        m = _ISO.match(t)
        if m:
            y, mo, d, hh, mi, ss = (int(g) if g else 0 for g in m.groups())
            return _dt.datetime(y, mo, d, hh, mi, ss)
        m = _DOTTED.match(t) if dotted else None
        if m:
            return _dt.datetime(int(m.group(3)), int(m.group(2)), int(m.group(1)))
        m = _SLASHED.match(t) if slashes else None
        if m:
            a, b, y = int(m.group(1)), int(m.group(2)), int(m.group(3))
            return _dt.datetime(y, b, a) if slashes == "dmy" else _dt.datetime(y, a, b)
    except ValueError:
        return None
    return None


class CsvFolder:
    """A folder with one CSV file per sheet: Items.csv, History.csv, Settings.csv.

    Sheet names are the file names ("Items.csv"), so problems point at "Items.csv!D7": row 7
    is the line number in the file, D the fourth column.
    """

    def __init__(self, path: Path, log: ProblemLog):
        self.path = Path(path)
        self.log = log
        self.sheet_names: list[str] = []
        self._sheets: dict[str, RawSheet] = {}

    def open(self) -> bool:
        """Find and read the CSV files; on failure record a fatal problem and return False."""
        p = self.path
        if not p.exists():
            self.log.fatal(
                f"The folder or file {p.name} does not exist. Check the name.",
                value=str(p),
                code="file-missing",
            )
            return False
        if not p.is_dir():
            self.log.fatal(
                f"{p.name} is a single CSV file. Give xlpolicy the folder that holds your CSV "
                "files instead: Items.csv (one row per item), History.csv (sales per item and "
                "period) and, if you like, Settings.csv.",
                value=str(p),
                code="file-type",
            )
            return False
        files = sorted(
            f
            for f in p.iterdir()
            if f.is_file() and not f.name.startswith(".") and f.suffix.lower() in CSV_SUFFIXES
        )
        names = [f.name for f in files]
        folder = p.name or str(p)
        if _match_sheet(names, "Items", key=lambda n: Path(n).stem) is None:
            found = (
                (" (CSV files found: " + ", ".join(names) + ")")
                if names
                else (" (it holds no CSV files)")
            )
            self.log.fatal(
                f"The folder {folder} has no Items CSV file{found}. Save the list of items, "
                "one row per item with the headers in the first row, as Items.csv in that "
                "folder (sales go in History.csv), or give the path of a workbook instead.",
                value=str(p),
                code="items-sheet-missing",
            )
            return False
        for f in files:
            sheet = self._read_file(f)
            if sheet is None:
                return False
            self._sheets[f.name] = sheet
            self.sheet_names.append(f.name)
        return True

    def close(self) -> None:
        self._sheets = {}

    def find_sheet(self, canonical: str) -> str | None:
        """The file for one of our sheets: Items.csv, items.csv, "Sales history.csv", ..."""
        return _match_sheet(self.sheet_names, canonical, key=lambda n: Path(n).stem)

    def read(self, name: str) -> RawSheet:
        """The file's rows; row numbers are line numbers in the file."""
        return self._sheets[name]

    def _read_file(self, f: Path) -> RawSheet | None:
        try:
            data = f.read_bytes()
        except OSError as exc:
            self.log.fatal(
                f"{f.name} could not be read ({exc.strerror or exc}). If it is open "
                "in another program, close it and try again.",
                sheet=f.name,
                value=str(f),
                code="file-unreadable",
            )
            return None
        text = self._decode(f, data)
        if text is None:
            return None
        delim = "\t" if f.suffix.lower() == ".tsv" else sniff_delimiter(text)
        try:
            records = _csv_records(text, delim)
        except csv.Error as exc:
            self.log.fatal(
                f"{f.name} is not a readable CSV file ({exc}). Save it again from "
                "your spreadsheet program as CSV.",
                sheet=f.name,
                value=str(f),
                code="csv-unreadable",
            )
            return None
        cells = [c.strip() for _, rec in records for c in rec if c.strip()]
        commas = delim == ";" and decimal_comma(cells)
        slashes = slash_order(cells)
        sheet = RawSheet(f.name)
        for line, rec in records:
            values = [csv_value(c, comma_decimals=commas, slashes=slashes) for c in rec]
            while values and values[-1] is None:
                values.pop()
            if not values:
                continue
            sheet.rows.append(values)
            sheet.formats.append(["" for _ in values])
            sheet.row_numbers.append(line)
        rewritten = commas and any(
            _COMMA_DECIMAL.match(c.replace(" ", "")) or _DOT_THOUSANDS.match(c) for c in cells
        )
        if rewritten:
            self.log.info(
                f"{f.name} separates its columns with semicolons, so a comma in a number was "
                "read as the decimal mark (1,5 is one and a half) and a point as the thousands "
                "separator.",
                sheet=f.name,
                code="csv-decimal-comma",
            )
        if slashes is None and any(_SLASHED.match(c) for c in cells):
            self.log.warning(
                f"{f.name} writes dates like 03/04/2024, which could be day/month or "
                "month/day, and nothing in the file settles it, so they were read as labels. "
                "Write dates as 2024-04-03 (year-month-day).",
                sheet=f.name,
                code="csv-date-ambiguous",
            )
        return sheet

    def _decode(self, f: Path, data: bytes) -> str | None:
        if data.startswith((b"\xff\xfe", b"\xfe\xff")):
            try:
                return data.decode("utf-16")
            except UnicodeDecodeError:
                pass
        elif b"\x00" in data[:4096]:
            self.log.fatal(
                f"{f.name} is not a text file (it may be a spreadsheet saved with a .csv name). "
                "Open it in your spreadsheet program and save it as CSV.",
                sheet=f.name,
                value=str(f),
                code="csv-not-text",
            )
            return None
        try:
            return data.decode("utf-8-sig")
        except UnicodeDecodeError:
            pass
        self.log.info(
            f"{f.name} is not saved as UTF-8, so it was read as Windows (Western European) "
            "text. If accented letters look wrong in the results, save it as 'CSV UTF-8' and "
            "run again.",
            sheet=f.name,
            code="csv-encoding",
        )
        return data.decode("cp1252", errors="replace")


def _csv_records(text: str, delim: str) -> list[tuple[int, list[str]]]:
    """(first line number, fields) of every record; quoted line breaks stay in their field."""
    reader = csv.reader(io.StringIO(text, newline=""), delimiter=delim)
    out = []
    start = 1
    for rec in reader:
        out.append((start, rec))
        start = reader.line_num + 1
    return out
