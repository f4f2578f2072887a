"""Big tables written straight to a sheet's XML, a column at a time, in row chunks.

xlsxwriter stores every cell as a Python object and writes each through a chain of calls
when the workbook is closed: for the Policy sheet of 100,000 items (some six million cells)
that is most of a run's time and memory. A :class:`CellBlock` holds a table's columns as
arrays instead (numbers, text, one formula pattern per column with its cached values) and
renders them as ``<row>`` elements when the sheet's XML is written, a few thousand rows at a
time, so memory stays flat. :class:`BlockSheet` is an xlsxwriter worksheet that writes its
blocks in place among its ordinary rows, with everything else (column widths, filters,
conditional formats, notes, print setup) left to xlsxwriter.

A block's cells are what xlsxwriter would write for the same calls (``write_number``,
``write_blank``, ``write_string``, ``write_formula`` with a cached value), except that text
is written as an inline string, as xlsxwriter itself does in its constant-memory mode and
as the splice into the user's workbook needs anyway (it never touches their shared strings).

Deferred blocks: when the sheets are spliced into a copy of the user's workbook, a block is
not rendered into the intermediate workbook at all; a marker stands in its place and the
splice renders the block with the final style numbers (:func:`block_marker`), which saves
writing, compressing, reading and re-numbering the biggest part twice.

Rendering (:meth:`CellBlock.rows_xml`) does no Python work per cell: each row is its row
template (cached per combination of cell kinds) with the row number joined in and the
row's values put in by one ``%`` formatting. Numbers are Python's repr, the shortest text
that reads back as the same float; for big columns that text is made a chunk at a time by
Apache Arrow when it is installed and agrees with repr (:func:`_shortest_texts`).
"""

from __future__ import annotations

import operator
import re
from collections.abc import Callable, Iterable, Iterator, Sequence
from dataclasses import dataclass, field
from itertools import repeat
from operator import mod
from typing import Any, cast

import numpy as np
from xlsxwriter.format import Format
from xlsxwriter.utility import xl_col_to_name
from xlsxwriter.worksheet import Worksheet

from .sheetkit import clean_text, finite

__all__ = ["ROW", "BlockSheet", "CellBlock", "block_marker", "BLOCK_MARKER"]

#: Stands for the row number (1-based, as in A1 references) in a formula pattern.
ROW = "\x00"
#: Rows rendered at a time: big enough to amortise the per-chunk work, small enough that a
#: chunk of a 60-column table stays a few megabytes.
CHUNK_ROWS = 4096
#: What stands in a deferred block's place in the intermediate sheet XML.
BLOCK_MARKER = re.compile(rb"<!--xlpolicy-block (\d+)-->")

_ESCAPE = str.maketrans({"&": "&amp;", "<": "&lt;", ">": "&gt;"})
# A literal _xHHHH_ in a cell is read by spreadsheet programs as an escaped character;
# ECMA-376 Part 1, 22.9.2.19 (ST_Xstring): escape its underscore as _x005F_.
_X_ESCAPE = re.compile(r"_(x[0-9A-Fa-f]{4}_)")
_FORMULA_LEAD = ("=", "+", "-", "@")
_PLAIN_BREAKERS = frozenset(_FORMULA_LEAD)
_NEEDS_ESCAPE = re.compile(r"[&<>]|_x[0-9A-Fa-f]{4}_")
# In a column joined at NULs: a value that starts with a formula sign or a space, and (in
# the reversed text) one that ends with a space. re's \s is str.isspace; the literal NUL
# first lets re scan fast.
_LEADING = re.compile(r"\x00[=+\-@\s]")
_TRAILING = re.compile(r"\x00\s")

XfOf = Callable[[Format], int]


def block_marker(block_id: int) -> str:
    """The XML comment that stands for deferred block ``block_id``."""
    return f"<!--xlpolicy-block {block_id}-->"


def _xml_text(text: str) -> str:
    text = text.translate(_ESCAPE)
    if "_x" in text:
        text = _X_ESCAPE.sub(r"_x005F_\1", text)
    return text


@dataclass
class _Column:
    col: int
    kind: str  # "number", "text", "formula"
    fmt: Format | None
    values: Any  # float array (number, formula cached) or list of str | None (text)
    quoted: Format | None = None  # text: the format with the quote prefix
    pieces: tuple[str, ...] = ()  # formula: the pattern split at the row marker
    each: list[str] | None = None  # formula: or each row's own formula
    live: np.ndarray = field(default_factory=lambda: np.zeros(0, bool))  # formula: rows that get it
    plain: bool = False  # text: no cell needs escaping, a quote prefix or kept spaces


class CellBlock:
    """A rectangle of rows ``first_row`` .. ``first_row + n_rows - 1`` filled by columns.

    Each column is given whole (one array or list per column, one entry per row); rows are
    0-based like xlsxwriter's. Columns may be given in any order and may leave gaps.
    """

    def __init__(self, first_row: int, n_rows: int) -> None:
        if first_row < 0 or n_rows < 1:
            raise ValueError("a block needs a first row >= 0 and at least one row")
        self.first_row = first_row
        self.n_rows = n_rows
        self._cols: dict[int, _Column] = {}
        #: Set when the splice renders this block (see the module docstring): its number.
        self.deferred_id: int | None = None

    @property
    def last_row(self) -> int:
        return self.first_row + self.n_rows - 1

    @property
    def columns(self) -> list[int]:
        return sorted(self._cols)

    def _add(self, column: _Column, length: int) -> None:
        if length != self.n_rows:
            raise ValueError(f"column {column.col} has {length} values for {self.n_rows} rows")
        if column.col in self._cols:
            raise ValueError(f"column {column.col} is given twice")
        self._cols[column.col] = column

    def numbers(self, col: int, values: Any, fmt: Format | None) -> None:
        """Numbers; NaN, infinite or missing values become blank cells that keep ``fmt``.

        A text value among them (which a number column should not hold) is kept as text
        rather than lost.
        """
        try:
            arr = np.asarray(values, dtype=float)
        except (TypeError, ValueError):
            mixed = [clean_text(v) if isinstance(v, str) else finite(v) for v in values]
            self._add(_Column(col, "mixed", fmt, mixed), len(mixed))
            return
        arr = np.where(np.isfinite(arr), arr, np.nan)
        self._add(_Column(col, "number", fmt, arr), len(arr))

    def texts(self, col: int, values: Sequence[str | None], fmt: Format, quoted: Format) -> None:
        """Text cells, already cleaned (sheetkit.clean_text); None or "" gives a blank cell.

        Text that starts with = + - or @ gets ``quoted`` (the same format with the quote
        prefix), so editing the cell later keeps it text, as sheetkit.Writer.text does.
        """
        values = list(values)
        # Most columns need no escaping, no quote prefix and no kept spaces: one check of
        # the whole column lets each cell be a single format string. The check is one
        # search of the column joined at NULs (which cleaned text never holds, so a value's
        # start and end are where the NULs are).
        try:
            # typed as all text: join raises TypeError on the first None
            joined = "\x00" + "\x00".join(cast("list[str]", values)) + "\x00"
        except TypeError:  # None among them
            joined = "\x00" + "\x00".join([v or "" for v in values]) + "\x00"
        plain = not (
            _LEADING.search(joined)
            or _TRAILING.search(joined[::-1])
            or "&" in joined
            or "<" in joined
            or ">" in joined
            or ("_x" in joined and _NEEDS_ESCAPE.search(joined))
        )
        self._add(_Column(col, "text", fmt, values, quoted=quoted, plain=plain), len(values))

    def formulas(
        self,
        col: int,
        pattern: str | Sequence[str],
        live: np.ndarray,
        cached: Any,
        fmt: Format | None,
        otherwise: Any | None = None,
    ) -> None:
        """One formula per row from ``pattern`` (``ROW`` marks the row number), where ``live``.

        ``pattern`` may instead be a list with each row's own formula. ``cached`` is each
        formula's value, stored with it so programs that do not recalculate (and readers)
        see the tool's own number. Rows where ``live`` is False get the number in
        ``otherwise`` (blank where that is NaN or not given). Formulas are our own, built
        from cell references (sheetkit.ALLOWED_FUNCTIONS), never user text.
        """
        live = np.asarray(live, dtype=bool)
        cached = np.asarray(cached, dtype=float)
        values = np.where(
            live, cached, np.nan if otherwise is None else np.asarray(otherwise, dtype=float)
        )
        values = np.where(np.isfinite(values), values, np.nan)
        live = live & np.isfinite(values)
        if isinstance(pattern, str):
            body = pattern[1:] if pattern.startswith("=") else pattern
            pieces = tuple(_xml_text(body).split(ROW))
            self._add(_Column(col, "formula", fmt, values, pieces=pieces, live=live), len(live))
            return
        if len(pattern) != len(live):
            raise ValueError(f"column {col} has {len(pattern)} formulas for {len(live)} rows")
        each = [f[1:] if f.startswith("=") else f for f in pattern]
        joined = "\x00".join(each)
        if "&" in joined or "<" in joined or ">" in joined or "_x" in joined:
            each = [_xml_text(f) for f in each]  # else none needs escaping: kept as they are
        self._add(_Column(col, "formula", fmt, values, each=each, live=live), len(live))

    def formats(self) -> list[Format]:
        """Every format a cell of the block may use."""
        return [f for c in self._cols.values() for f in (c.fmt, c.quoted) if f is not None]

    def rows_xml(self, xf_of: XfOf, chunk_rows: int = CHUNK_ROWS) -> Iterator[str]:
        """The block's ``<row>`` elements, ``chunk_rows`` rows per string.

        ``xf_of`` gives a format's style number in the package being written.

        Millions of cells make any per-cell Python expression the writer's main cost, so a
        row is built by two calls in C: the row number joined into the row's template
        (every cell reference and formula names its row), then one ``%`` formatting with
        the row's values. Each column gives a few cell templates (a value, a blank, a
        formula...) and its values for the chunk; rows whose cells take the same templates
        share one row template (usually all rows of a chunk do).
        """
        slots = [_slot(self._cols[c], xf_of) for c in self.columns]
        templates: dict[bytes, list[str]] = {}
        for a in range(0, self.n_rows, chunk_rows):
            b = min(a + chunk_rows, self.n_rows)
            rows = [str(r) for r in range(self.first_row + a + 1, self.first_row + b + 1)]
            args: list[Sequence[Any]] = []
            states = np.empty((len(slots), b - a), dtype=np.uint8)
            for j, slot in enumerate(slots):
                state, more = slot.chunk(a, b)
                if (state == _BLANK).all():  # a blank column takes no arguments at all
                    states[j] = _EMPTY
                else:
                    states[j] = state
                    args.extend(more())
            states = np.ascontiguousarray(states.T)
            if (states == states[0]).all():
                skeletons: Iterable[list[str]] = repeat(_row_template(slots, states[0], templates))
            else:
                kinds, which = np.unique(states, axis=0, return_inverse=True)
                each = [_row_template(slots, k, templates) for k in kinds]
                skeletons = map(each.__getitem__, which.ravel().tolist())
            yield "".join(map(mod, map(str.join, rows, skeletons), zip(*args, strict=True)))


#: Stands for the row number in a cell template (never in XML: a control character).
_R = "\x01"


def _row_template(
    slots: list[_Slot], state: np.ndarray, cache: dict[bytes, list[str]]
) -> list[str]:
    """A row's %-template cut where its row number goes; column j takes ``state[j]``."""
    key = state.tobytes()
    found = cache.get(key)
    if found is None:
        found = cache[key] = (
            f'<row r="{_R}">'
            + "".join([s.cells[k] for s, k in zip(slots, state.tolist(), strict=True)])
            + "</row>"
        ).split(_R)
    return found


def _style(xf_of: XfOf, fmt: Format | None) -> str:
    """The end of a cell's reference and its style attribute: '" s="7"' (or '"': none)."""
    return '"' if fmt is None else f'" s="{xf_of(fmt)}"'


def _pct(text: str) -> str:
    return text.replace("%", "%%")


@dataclass
class _Slot:
    """How one column renders: its cell templates, indexed by a cell's state.

    ``cells[_EMPTY]`` is the blank without arguments, for a column blank over a whole chunk;
    every other template takes the same arguments. ``chunk(a, b)`` gives the states of rows
    a..b-1 of the block and a function for the column's argument lists for those rows.
    """

    cells: tuple[str, ...]  # %-templates with _R for the row number
    chunk: Callable[[int, int], tuple[np.ndarray, Callable[[], list[Sequence[Any]]]]]


# A cell's state: its column's first template (a value, a formula), a blank, the other one
# (a cell rendered on its own, a cached value without its formula), a blank of a column
# that is blank over the whole chunk.
_VALUE, _BLANK, _OTHER, _EMPTY = 0, 1, 2, 3


def _slot(c: _Column, xf_of: XfOf) -> _Slot:
    """The cell templates of column ``c`` and how to get its arguments chunk by chunk."""
    plain, quoted = _style(xf_of, c.fmt), _style(xf_of, c.quoted)
    open_ = _pct(f'<c r="{xl_col_to_name(c.col)}{_R}')
    blank = open_ + _pct(f"{plain}/>")
    if c.kind in ("text", "mixed"):
        if c.kind == "text" and c.plain:
            values = c.values
            states = np.fromiter(map(operator.not_, values), dtype=np.uint8, count=len(values))
        else:
            values, states = _own_cells(c, plain, quoted)
        # a value, a blank, a cell's own rendering after its reference (rare cells)
        cells = (
            open_ + _pct(f'{plain} t="inlineStr"><is><t>') + "%s</t></is></c>",
            blank + "%.0s",
            open_ + "%s",
            blank,
        )

        def text_chunk(a: int, b: int) -> tuple[np.ndarray, Callable[[], list[Any]]]:
            return states[a:b], lambda: [values[a:b]]

        return _Slot(cells, text_chunk)
    # A number's text: Python's repr (%r), the shortest text that reads back as the same
    # float; or that same text made for the whole chunk at once (%s, see _shortest_texts).
    texts = _shortest_texts if _use_shortest_texts(c.values) else None
    num = "%r" if texts is None else "%s"

    def numbers(v: np.ndarray) -> list[Any]:
        return v.tolist() if texts is None else texts(v)

    value = open_ + _pct(f"{plain}><v>") + num + "</v></c>"
    if c.kind == "number":

        def number_chunk(a: int, b: int) -> tuple[np.ndarray, Callable[[], list[Any]]]:
            v = c.values[a:b]
            return np.isnan(v).view(np.uint8), lambda: [numbers(v)]

        return _Slot((value, blank + "%.0s", "", blank), number_chunk)
    if c.each is not None:  # each row's own formula: an argument of its own
        cells = (
            open_ + _pct(f"{plain}><f>") + "%s</f><v>" + num + "</v></c>",
            blank + "%.0s%.0s",
            open_ + _pct(plain + ">") + "%.0s<v>" + num + "</v></c>",
            blank,
        )
    else:
        cells = (
            open_ + _pct(f"{plain}><f>" + _R.join(c.pieces)) + "</f><v>" + num + "</v></c>",
            blank + "%.0s",
            value,
            blank,
        )

    def formula_chunk(a: int, b: int) -> tuple[np.ndarray, Callable[[], list[Any]]]:
        v = c.values[a:b]
        states = np.where(c.live[a:b], _VALUE, np.where(np.isnan(v), _BLANK, _OTHER))

        def more() -> list[Any]:
            return [c.each[a:b], numbers(v)] if c.each is not None else [numbers(v)]

        return states, more

    return _Slot(cells, formula_chunk)


#: Columns with fewer rows than this, or with mostly whole numbers (whose repr is quick),
#: are rendered with repr cell by cell.
_SHORTEST_MIN_ROWS = 2048
_shortest_ok: bool | None = None  # whether Arrow's formatting passed its check (None: not yet)


def _use_shortest_texts(values: np.ndarray) -> bool:
    """Whether column ``values`` is worth :func:`_shortest_texts` (and it is available)."""
    global _shortest_ok
    if len(values) < _SHORTEST_MIN_ROWS:
        return False
    with np.errstate(invalid="ignore"):
        if np.count_nonzero(values % 1 > 0) * 4 < len(values):
            return False
    if _shortest_ok is None:
        _shortest_ok = _check_shortest_texts()
    return _shortest_ok


def _shortest_texts(v: np.ndarray) -> list[str]:
    """``repr`` of each value of ``v``, the costly ones made by Apache Arrow in one call.

    Python's repr is the shortest text that reads back as the same float (David Gay's
    algorithm, one call a value: most of the rendering's time). Arrow's cast to text
    gives the same shortest digits (double-conversion's ToShortest) for a whole array in
    C++; it writes them in the same positional form for |x| >= 1e-4 except for whole
    numbers and where it chooses an exponent, so those values (and NaN) take repr itself.
    Arrow is optional (xlpolicy[large]); the result is checked against repr once
    (_check_shortest_texts) before it is used.
    """
    import pyarrow as pa
    import pyarrow.compute as pc

    cast = pc.cast(pa.array(v), pa.string())
    out = cast.to_numpy(zero_copy_only=False)
    with np.errstate(invalid="ignore"):
        own = ~(np.abs(v) >= 1e-4) | (v % 1 == 0)
    own |= pc.match_substring(cast, "e").to_numpy(zero_copy_only=False)
    where = np.flatnonzero(own)
    if where.size:
        out[where] = list(map(repr, v[where].tolist()))
    return out.tolist()


def _check_shortest_texts() -> bool:
    """Whether :func:`_shortest_texts` works here and equals repr on awkward values."""
    rng = np.random.default_rng(20240531)
    values = np.concatenate(
        [
            [
                0.1,
                0.2 + 0.1,
                1 / 3,
                2 / 3,
                4.35,
                0.0001,
                0.00012345,
                9.999e-5,
                1e-4 - 1e-20,
                99999.99999,
                1e14 + 0.5,
                1e15 - 0.5,
                1e15 + 0.5,
                9999999999999998.0,
                1e16,
                -0.0,
                0.0,
                -1.5,
                123456789.125,
                5e-324,
                1.7976931348623157e308,
                np.nan,
                377.0,
            ],
            10.0 ** rng.uniform(-5, 17, 4000) * rng.choice([-1.0, 1.0], 4000),
            np.round(rng.uniform(-1e6, 1e6, 2000), 2),
            rng.integers(1, 10**6, 2000) / 7.0,
        ]
    )
    try:
        return _shortest_texts(values) == list(map(repr, values.tolist()))
    except Exception:  # no pyarrow, or one that cannot do this: repr cell by cell
        return False


def _own_cells(c: _Column, plain: str, quoted: str) -> tuple[list[str | None], np.ndarray]:
    """A text or mixed column's cells rendered one by one (after their references).

    For the columns that need escaping, a quote prefix or kept spaces somewhere; a cell
    that needs none of it still takes the plain template.
    """
    out: list[str | None] = []
    states = np.empty(len(c.values), dtype=np.uint8)
    for k, v in enumerate(c.values):
        if c.kind == "mixed" and isinstance(v, float):
            out.append(f"{plain}><v>{v!r}</v></c>")
            states[k] = _OTHER
        elif not v:
            out.append(None)
            states[k] = _BLANK
        elif c.kind == "text" and _simple(v):
            out.append(v)
            states[k] = _VALUE
        else:
            out.append(_text_cell("", plain, quoted if c.kind == "text" else plain, v))
            states[k] = _OTHER
    return out, states


def _simple(v: str) -> bool:
    """Whether text ``v`` (not empty) goes into a cell as it is."""
    return not (
        v[0] in _PLAIN_BREAKERS or v[0].isspace() or v[-1].isspace() or _NEEDS_ESCAPE.search(v)
    )


def _text_cell(start: str, plain: str, quoted: str, v: str) -> str:
    """An inline-string cell; ``start`` is '<c r="B7', the styles are ' s="n"' pieces."""
    style = quoted if v.startswith(_FORMULA_LEAD) else plain
    space = ' xml:space="preserve"' if v[0].isspace() or v[-1].isspace() else ""
    return f'{start}{style} t="inlineStr"><is><t{space}>{_xml_text(v)}</t></is></c>'


class BlockSheet(Worksheet):
    """An xlsxwriter worksheet that also writes :class:`CellBlock` rectangles.

    Add it with ``workbook.add_worksheet(name, worksheet_class=BlockSheet)``. Ordinary
    cells may sit above, below or beside a block's rows, not on them.
    """

    #: The used range's first and last row, as xlsxwriter keeps them (None while empty).
    dim_rowmin: int | None
    dim_rowmax: int | None

    def __init__(self) -> None:
        super().__init__()
        self.blocks: list[CellBlock] = []

    def add_block(self, block: CellBlock) -> None:
        """Place ``block`` on this sheet (its dimensions count for the sheet's used range)."""
        cols = block.columns
        if not cols:
            raise ValueError("a block needs at least one column")
        for row, col in ((block.first_row, cols[0]), (block.last_row, cols[-1])):
            if self._check_dimensions(row, col):
                raise ValueError("a block lies outside the sheet's limits")
        self.blocks.append(block)

    def _write_rows(self) -> None:
        if not self.blocks:
            super()._write_rows()
            return
        blocks = sorted(self.blocks, key=lambda b: b.first_row)
        for block in blocks:
            clash = [
                r
                for r, cells in self.table.items()
                if cells and block.first_row <= r <= block.last_row
            ]
            if clash:
                raise ValueError(f"ordinary cells written on a block's rows ({clash[:3]})")
        lo, hi = self.dim_rowmin, self.dim_rowmax
        if lo is None or hi is None:  # never so: add_block counts each block's rows
            raise ValueError("a block sheet without a used range")
        start = lo
        try:
            for block in blocks:
                if start <= block.first_row - 1:
                    self.dim_rowmin, self.dim_rowmax = start, block.first_row - 1
                    super()._write_rows()
                self._write_block(block)
                start = block.last_row + 1
            if start <= hi:
                self.dim_rowmin, self.dim_rowmax = start, hi
                super()._write_rows()
        finally:
            self.dim_rowmin, self.dim_rowmax = lo, hi

    def _write_block(self, block: CellBlock) -> None:
        if block.deferred_id is not None:
            for fmt in block.formats():  # registered now, so the styles part lists them
                fmt._get_xf_index()
            self.fh.write(block_marker(block.deferred_id))
            return
        for text in block.rows_xml(lambda f: f._get_xf_index()):
            self.fh.write(text)
