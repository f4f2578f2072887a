"""Reading the History sheet in either layout into an items x periods matrix.

Long layout: one row per item and period (Item, Period, Quantity); several rows for the
same item and period are added up, so a list of sales transactions works too.
Wide layout: one row per item, one column per period.

A period with no row (long) or an empty cell (wide) inside the span counts as zero demand;
the span runs from the first period in the sheet to the last. A cell that cannot be read
becomes NaN in the matrix (left out of that item's statistics) and is reported.
"""

from __future__ import annotations

import datetime as _dt
import re
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..contract import HISTORY_LONG_COLUMNS, ITEM_COLUMNS, PERIODS, normalise
from ..problems import ProblemLog
from .cells import describe, is_blank, item_code, item_codes, parse_number, typed_periods
from .decimals import Convention, settle
from .headers import missing_message, report_header
from .typed import NUMBER_TEXT, NotTyped, WideCells
from .workbook import RawSheet, cell_ref, find_header, kind_is

_ISO_DATE = re.compile(r"^\d{4}-\d{2}-\d{2}([ T].*)?$")
_ISO_MONTH = re.compile(r"^(\d{4})-(\d{2})$")
_PERIOD_ORDER = {"day": 0, "week": 1, "month": 2}
_MONTHS = {
    m: k
    for k, m in enumerate(
        ("jan", "feb", "mar", "apr", "may", "jun", "jul", "aug", "sep", "oct", "nov", "dec"), 1
    )
}
_MONTH_LABEL = re.compile(
    r"^(jan(?:uary)?|feb(?:ruary)?|mar(?:ch)?|apr(?:il)?|may|june?|july?|aug(?:ust)?"
    r"|sep(?:t(?:ember)?)?|oct(?:ober)?|nov(?:ember)?|dec(?:ember)?)\.?[\s\-/']*(\d{4}|\d{2})$",
    re.IGNORECASE,
)


@dataclass
class History:
    """Demand per item and period.

    ``matrix[i, t]`` is the demand of ``items[i]`` in period ``t``; NaN marks a cell that
    could not be read. ``period`` is the period length used ("day", "week", "month") when
    the periods are dates, else None (labels or numbers; the Settings period applies).
    """

    sheet: str
    layout: str
    items: list[str]
    matrix: np.ndarray
    labels: list[Any]
    period: str | None
    first_cell: dict[str, str] = field(default_factory=dict)

    def index(self) -> dict[str, int]:
        return {code: i for i, code in enumerate(self.items)}


def _as_date(value: Any) -> _dt.date | None:
    """A period value as a date, if it is one (a real date or ISO text)."""
    if isinstance(value, _dt.datetime):
        return value.date()
    if isinstance(value, _dt.date):
        return value
    if isinstance(value, str):
        s = value.strip()
        if _ISO_DATE.match(s):
            try:
                return _dt.date.fromisoformat(s[:10])
            except ValueError:
                return None
        m = _ISO_MONTH.match(s)
        if m and 1 <= int(m.group(2)) <= 12:
            return _dt.date(int(m.group(1)), int(m.group(2)), 1)
        m = _MONTH_LABEL.match(s)
        if m:  # "Jan 2024", "January 2024", "Jan-24": the month's first day
            year = int(m.group(2))
            return _dt.date(year + 2000 if year < 100 else year, _MONTHS[m.group(1)[:3].lower()], 1)
    return None


def infer_period(dates: list[_dt.date]) -> str | None:
    """day, week or month from the typical spacing of distinct dates, or None if unclear."""
    uniq = sorted(set(dates))
    if len(uniq) < 2:
        return None
    gaps = np.diff(np.array([d.toordinal() for d in uniq]))
    g = float(np.median(gaps))
    if g <= 1.5:
        return "day"
    if 5 <= g <= 9:
        return "week"
    if 27 <= g <= 32:
        return "month"
    return None


def _bucket(dates: list[_dt.date], period: str) -> tuple[np.ndarray, list[_dt.date]]:
    """Period index of each date from the earliest, and each period's first day."""
    d0 = min(dates)
    if period == "month":
        base = d0.year * 12 + d0.month - 1
        idx = np.array([d.year * 12 + d.month - 1 - base for d in dates], dtype=np.int64)
        n = int(idx.max()) + 1 if len(idx) else 0
        labels = [_dt.date((base + k) // 12, (base + k) % 12 + 1, 1) for k in range(n)]
        return idx, labels
    step = 1 if period == "day" else 7
    o0 = d0.toordinal()
    idx = np.array([(d.toordinal() - o0) // step for d in dates], dtype=np.int64)
    n = int(idx.max()) + 1 if len(idx) else 0
    labels = [_dt.date.fromordinal(o0 + k * step) for k in range(n)]
    return idx, labels


def choose_period(
    dates: list[_dt.date], settings: dict[str, Any], sheet: str, log: ProblemLog
) -> str:
    """The period to bucket dated history into, reconciling the dates with Settings."""
    inferred = infer_period(dates)
    explicit = not str(settings["sources"].get("period", "default")).startswith("default")
    wanted = settings["period"]
    if inferred is None:
        if not explicit:
            log.warning(
                "The History dates are not evenly spaced by day, week or month, so the period "
                f"could not be inferred; '{wanted}' was used. Set 'Period' in Settings if that "
                "is wrong.",
                sheet=sheet,
                code="history-period-unclear",
            )
        return wanted
    if explicit and _PERIOD_ORDER[wanted] > _PERIOD_ORDER[inferred]:
        log.info(
            f"History dates are {inferred}ly; they were added up into {wanted}s as Settings asks.",
            sheet=sheet,
            code="history-aggregated",
        )
        return wanted
    if explicit and wanted != inferred:
        log.warning(
            f"Settings says the period is '{wanted}' but the History dates are {inferred}ly; "
            f"'{inferred}' was used. Correct the Settings period or the dates.",
            sheet=sheet,
            code="history-period-mismatch",
        )
    return inferred


def read_history(
    sheet: RawSheet, known_items: set[str], settings: dict[str, Any], log: ProblemLog
) -> History | None:
    """Read History in whichever layout its header shows; None (fatal) if neither."""
    mapping = settings.get("column_map")
    long_header = find_header(sheet, HISTORY_LONG_COLUMNS, min_matches=3, mapping=mapping)
    if long_header is not None:
        hrow = sheet.row_numbers[long_header.row_index]
        report_header(long_header, HISTORY_LONG_COLUMNS, sheet.name, hrow, log, cell=cell_ref)
        return _read_long(
            sheet, long_header.columns, long_header.row_index, known_items, settings, log
        )
    # Two of the three long-layout headers (Item and Date, say) is a long layout short of
    # a column, not a row of period labels: say which column is missing.
    partial = find_header(sheet, HISTORY_LONG_COLUMNS, min_matches=2, mapping=mapping)
    wide = _find_wide_header(sheet) if partial is None else None
    if wide is not None:
        return _read_wide(sheet, *wide, known_items, settings, log)
    if partial is not None:
        hrow = sheet.row_numbers[partial.row_index]
        missing = [c for c in HISTORY_LONG_COLUMNS if c.key not in partial.columns]
        log.fatal(
            missing_message(sheet.name, missing, list(partial.texts.values()), hrow),
            sheet=sheet.name,
            cell=cell_ref(0, hrow),
            code="history-missing-column",
        )
        return None
    log.fatal(
        f"The sheet '{sheet.name}' has no header row that I can read. Use either columns "
        "Item, Period, Quantity (one row per item and period), or Item followed by one "
        "column per period with dates or labels as headers.",
        sheet=sheet.name,
        cell="A1",
        code="history-no-header",
    )
    return None


def _find_wide_header(sheet: RawSheet, scan_rows: int = 30) -> tuple[int, int, list[int]] | None:
    """(row index, item column, period columns) of a wide-layout header, or None."""
    item_names = next(c for c in ITEM_COLUMNS if c.key == "item").names()
    text_names = set().union(*(c.names() for c in ITEM_COLUMNS if c.key != "item"))
    for idx, row in enumerate(sheet.rows[:scan_rows]):
        item_col = next(
            (j for j, v in enumerate(row) if isinstance(v, str) and normalise(v) in item_names),
            None,
        )
        if item_col is None:
            continue
        periods = [
            j
            for j, v in enumerate(row)
            if j > item_col
            and not is_blank(v)
            and not (isinstance(v, str) and normalise(v) in text_names)
        ]
        if len(periods) >= 2:
            return idx, item_col, periods
    return None


def _period_axis(
    raw_periods: list[Any], settings: dict[str, Any], sheet: str, log: ProblemLog
) -> tuple[np.ndarray, list[Any], str | None, list[int]]:
    """Map raw period values to column indices of the matrix.

    Returns (index per value, -1 where unusable), the labels of the axis, the period if
    dates, and the positions of unusable values.
    """
    raw_periods, note, level = typed_periods(raw_periods)
    if note:
        getattr(log, level)(note, sheet=sheet, code=f"history-typed-dates-{level}")
    dates = [_as_date(v) for v in raw_periods]
    n_dates = sum(d is not None for d in dates)
    bad: list[int] = []
    if n_dates and n_dates >= len(raw_periods) / 2:
        good = [d for d in dates if d is not None]
        period = choose_period(good, settings, sheet, log)
        idx_good, labels = _bucket(good, period)
        idx = np.full(len(raw_periods), -1, dtype=np.int64)
        k = 0
        for pos, d in enumerate(dates):
            if d is None:
                bad.append(pos)
            else:
                idx[pos] = idx_good[k]
                k += 1
        return idx, labels, period, bad
    # Period numbers or labels: numbers span min..max (gaps are zero); labels keep the
    # order in which they first appear.
    nums = [v for v in raw_periods if isinstance(v, (int, float)) and not isinstance(v, bool)]
    if nums and len(nums) == len(raw_periods) and all(float(v).is_integer() for v in nums):
        ints = np.array([int(v) for v in nums], dtype=np.int64)
        lo = int(ints.min())
        return ints - lo, list(range(lo, int(ints.max()) + 1)), None, bad
    order: dict[str, int] = {}
    idx = np.full(len(raw_periods), -1, dtype=np.int64)
    for pos, v in enumerate(raw_periods):
        if is_blank(v):
            bad.append(pos)
            continue
        key = str(v).strip()
        idx[pos] = order.setdefault(key, len(order))
    return idx, list(order), None, bad


def _read_long(
    sheet: RawSheet,
    cols: dict[str, int],
    hidx: int,
    known: set[str],
    settings: dict[str, Any],
    log: ProblemLog,
) -> History:
    ji, jp, jq = cols["item"], cols["period"], cols["quantity"]
    codes: list[str] = []
    periods: list[Any] = []
    qty: list[float] = []
    rows: list[int] = []
    unknown_seen: set[str] = set()
    first_cell: dict[str, str] = {}
    # The three columns as one block: plain quantities are read all at once; only cells
    # that are not (text, negatives, formulas without a result) are checked one by one.
    at = list(range(hidx + 1, len(sheet.rows)))
    blk, kinds = sheet.block(at, [ji, jp, jq])
    num = kind_is(kinds[:, 2], int, float)
    qv = np.zeros(len(at), dtype=float)
    if num.any():
        qv[num] = blk[num, 2].astype(float)
    slow = (~num & ~kind_is(kinds[:, 2], type(None))) | (num & ~(np.isfinite(qv) & (qv >= 0)))
    raw_codes, raw_periods, raw_qty = (blk[:, q].tolist() for q in range(3))
    qv_list, slow_list = qv.tolist(), slow.tolist()
    code_of: dict[tuple[Any, ...], str | None] = {}  # codes repeat: each is worked out once
    for pos, k in enumerate(at):
        rownum, fmts, v = sheet.row_numbers[k], sheet.formats[k], raw_codes[pos]
        fmt = fmts[ji] if ji < len(fmts) else ""
        key = (type(v), v, fmt)
        code = code_of[key] if key in code_of else code_of.setdefault(key, item_code(v, fmt))
        if code is None:
            if all(is_blank(x) for x in sheet.rows[k]):
                continue
            log.warning(
                "A History row has no item code; it was ignored. Fill in the item code "
                "or delete the row.",
                sheet=sheet.name,
                cell=cell_ref(ji, rownum),
                code="history-item-missing",
            )
            continue
        if code not in known:
            if code not in unknown_seen:
                unknown_seen.add(code)
                log.warning(
                    f"History has item {code!r}, which is not in the Items sheet; its rows were "
                    "ignored. Add the item to Items or correct the code.",
                    sheet=sheet.name,
                    cell=cell_ref(ji, rownum),
                    item=code,
                    value=v,
                    code="history-unknown-item",
                )
            continue
        if code not in first_cell:
            first_cell[code] = cell_ref(ji, rownum)
        if slow_list[pos] or sheet.uncalculated:
            ref = cell_ref(jq, rownum)
            x = _quantity(
                raw_qty[pos], ref, sheet.name, code, log, uncalculated=ref in sheet.uncalculated
            )
        else:
            x = qv_list[pos]
        codes.append(code)
        periods.append(raw_periods[pos])
        qty.append(x)
        rows.append(rownum)
    pidx, labels, period, bad = _period_axis(periods, settings, sheet.name, log)
    for pos in bad:
        log.warning(
            f"Period {describe(periods[pos])} is not a date like the others (or is blank); "
            "the row was ignored. Write the period as a date.",
            sheet=sheet.name,
            cell=cell_ref(jp, rows[pos]),
            item=codes[pos],
            value=periods[pos],
            code="history-period-bad",
        )
    items = list(dict.fromkeys(codes))
    pos_of = {c: i for i, c in enumerate(items)}
    matrix = np.zeros((len(items), len(labels)), dtype=float)
    keep = pidx >= 0
    if keep.any():
        r = np.fromiter((pos_of[c] for c in codes), dtype=np.int64, count=len(codes))[keep]
        # np.add.at adds duplicates (several transactions in one period); NaN propagates,
        # so a bucket with an unreadable row is excluded from the statistics.
        np.add.at(matrix, (r, pidx[keep]), np.asarray(qty, dtype=float)[keep])
    return History(sheet.name, "long", items, matrix, labels, period, first_cell)


def _read_wide(
    sheet: RawSheet,
    hidx: int,
    ji: int,
    pcols: list[int],
    known: set[str],
    settings: dict[str, Any],
    log: ProblemLog,
) -> History:
    header = sheet.rows[hidx]
    pidx, labels, period, used = _wide_axis(
        [header[j] for j in pcols], pcols, sheet.row_numbers[hidx], sheet.name, settings, log
    )
    below = range(hidx + 1, len(sheet.rows))
    codes = [sheet.rows[k][ji] if ji < len(sheet.rows[k]) else None for k in below]
    formats = [sheet.formats[k][ji] if ji < len(sheet.formats[k]) else "" for k in below]
    rownums = sheet.row_numbers[hidx + 1 :]
    items, first_cell, picked, row_problems = _wide_items(
        sheet.name,
        ji,
        codes,
        formats,
        rownums,
        lambda pos: all(is_blank(v) for v in sheet.rows[hidx + 1 + pos]),
        known,
    )
    # The quantities as one block: plain numbers are taken as they are, all at once; only
    # the cells that are not (text, dates, negatives, formulas without a result) go one by
    # one through the same check as always, which reports each by its cell.
    cols = [pcols[p] for p in used]
    blk, kinds = sheet.block([hidx + 1 + pos for pos in picked], cols)
    num = kind_is(kinds, int, float)
    vals = np.zeros(blk.shape, dtype=float)
    if num.any():
        vals[num] = blk[num].astype(float)
    slow = ~num & ~kind_is(kinds, type(None))
    slow |= num & ~(np.isfinite(vals) & (vals >= 0))
    picked_rows = [rownums[pos] for pos in picked]
    return _wide_finish(
        sheet.name,
        items,
        first_cell,
        picked,
        picked_rows,
        row_problems,
        cols,
        vals,
        slow,
        lambda i, q: blk[i, q],
        sheet.uncalculated,
        pidx,
        used,
        labels,
        period,
        log,
    )


def read_wide_typed(
    head: RawSheet, cells: WideCells, known: set[str], settings: dict[str, Any], log: ProblemLog
) -> History:
    """A wide History read as typed columns (see xlpolicy.reading.typed): the same History
    and the same problems as the general path, from arrays instead of a cell grid."""
    found = _find_wide_header(head)
    if found is None:  # not so (typed cells are read under a wide header): the general path
        raise NotTyped
    hidx, ji, pcols = found
    rownums = cells.row_numbers.tolist()
    formats = [cells.code_formats.get(pos, "") for pos in range(len(rownums))]
    holds: set[int] = {pos for (pos, _c), v in cells.cells.items() if not is_blank(v)}

    def blank(pos: int) -> bool:
        return pos not in holds and not any(
            cells.present[k, pos] for k in range(cells.present.shape[0])
        )

    items, first_cell, picked, row_problems = _wide_items(
        head.name, ji, cells.codes, formats, rownums, blank, known
    )
    if not cells.codes_exact and any(
        isinstance(kw.get("value"), str) and NUMBER_TEXT.match(kw["value"])
        for _pos, kw in row_problems
    ):
        raise NotTyped  # the problem would quote a number as text: the general path can tell
    header = head.rows[hidx]
    pidx, labels, period, used = _wide_axis(
        [header[j] for j in pcols], pcols, head.row_numbers[hidx], head.name, settings, log
    )
    cols = [pcols[p] for p in used]
    at = np.asarray(picked, dtype=np.int64)
    # Columns x rows, as the typed reader keeps them; ``vals`` and ``num`` below are their
    # transposes (views), so each column stays one contiguous run.
    rows_t = np.zeros((len(cols), len(picked)), dtype=float)
    num_t = np.zeros(rows_t.shape, dtype=bool)
    ks = [cells.col_of.get(c) for c in cols]
    have = [q for q, k in enumerate(ks) if k is not None]
    if have:
        src = np.asarray([ks[q] for q in have], dtype=np.int64)
        everything = at.size == cells.numbers.shape[1] and bool(
            np.array_equal(at, np.arange(at.size))
        )
        rows_t[have] = cells.numbers[src] if everything else cells.numbers[src][:, at]
        num_t[have] = cells.present[src] if everything else cells.present[src][:, at]
    rows_t[~num_t] = 0.0
    vals, num = rows_t.T, num_t.T
    other = np.zeros(vals.shape, dtype=bool)
    if cells.cells:
        row_at = {int(p): i for i, p in enumerate(picked)}
        col_at = {c: q for q, c in enumerate(cols)}
        for pos, c in cells.cells:
            if pos in row_at and c in col_at:
                other[row_at[pos], col_at[c]] = True
    num &= ~other
    slow = other | (num & ~(np.isfinite(vals) & (vals >= 0)))

    def value_at(i: int, q: int) -> Any:
        key = (int(picked[i]), cols[q])
        if key in cells.cells:
            return cells.cells[key]
        x = float(vals[i, q])
        return int(x) if np.isfinite(x) and x.is_integer() and abs(x) < 1e15 else x

    picked_rows = [rownums[pos] for pos in picked]
    return _wide_finish(
        head.name,
        items,
        first_cell,
        picked,
        picked_rows,
        row_problems,
        cols,
        vals,
        slow,
        value_at,
        cells.uncalculated,
        pidx,
        used,
        labels,
        period,
        log,
    )


def _wide_axis(
    raw_periods: list[Any],
    pcols: list[int],
    hrow: int,
    sheet: str,
    settings: dict[str, Any],
    log: ProblemLog,
) -> tuple[np.ndarray, list[Any], str | None, np.ndarray]:
    """The period axis of a wide header: (index per column, labels, period, usable ones)."""
    pidx, labels, period, bad = _period_axis(raw_periods, settings, sheet, log)
    for pos in bad:
        log.warning(
            f"Column header {describe(raw_periods[pos])} is not a date like the others; "
            "the column was ignored.",
            sheet=sheet,
            cell=cell_ref(pcols[pos], hrow),
            value=raw_periods[pos],
            code="history-period-bad",
        )
    return pidx, labels, period, np.flatnonzero(pidx >= 0)


def _wide_items(
    sheet: str,
    ji: int,
    codes: list[Any],
    formats: list[str],
    rownums: list[int],
    blank_row: Any,
    known: set[str],
) -> tuple[list[str], dict[str, str], list[int], list[tuple[int, dict]]]:
    """Which rows below a wide header are items: (items, first cell of each, their
    positions, the other rows' problems with their positions), in sheet order."""
    items: list[str] = []
    first_cell: dict[str, str] = {}
    picked: list[int] = []
    row_problems: list[tuple[int, dict[str, Any]]] = []
    letter = cell_ref(ji, 1)[:-1]
    for pos, (v, code, rownum) in enumerate(
        zip(codes, item_codes(codes, formats), rownums, strict=True)
    ):
        ref = f"{letter}{rownum}"
        if code is None:
            if not blank_row(pos):
                row_problems.append(
                    (
                        pos,
                        dict(
                            message="A History row has no item code; it was ignored.",
                            sheet=sheet,
                            cell=ref,
                            code="history-item-missing",
                        ),
                    )
                )
            continue
        if code not in known:
            row_problems.append(
                (
                    pos,
                    dict(
                        message=f"History has item {code!r}, which is not in the Items sheet; "
                        "its row was ignored. Add the item to Items or correct the code.",
                        sheet=sheet,
                        cell=ref,
                        item=code,
                        value=v,
                        code="history-unknown-item",
                    ),
                )
            )
            continue
        if code in first_cell:
            row_problems.append(
                (
                    pos,
                    dict(
                        message=f"Item {code!r} has a second History row "
                        f"(first at {first_cell[code]}); the second was ignored. "
                        "Keep one row per item.",
                        sheet=sheet,
                        cell=ref,
                        item=code,
                        value=v,
                        code="history-duplicate-item",
                    ),
                )
            )
            continue
        first_cell[code] = ref
        items.append(code)
        picked.append(pos)
    return items, first_cell, picked, row_problems


def _wide_finish(
    sheet: str,
    items: list[str],
    first_cell: dict[str, str],
    picked: list[int],
    picked_rows: list[int],
    row_problems: list[tuple[int, dict]],
    cols: list[int],
    vals: np.ndarray,
    slow: np.ndarray,
    value_at: Any,
    uncalculated: set[str],
    pidx: np.ndarray,
    used: np.ndarray,
    labels: list[Any],
    period: str | None,
    log: ProblemLog,
) -> History:
    """Check the cells marked ``slow`` one by one, log every problem in sheet order, and
    add the columns up into the History's matrix."""
    if uncalculated:
        at_row = {r: i for i, r in enumerate(picked_rows)}
        at_col = {j: q for q, j in enumerate(cols)}
        for ref in uncalculated:
            r, c = _split_ref(ref)
            if r in at_row and c in at_col:
                slow[at_row[r], at_col[c]] = True
    cell_problems = np.nonzero(slow)  # row-major: sheet order
    events = sorted(
        [(pos, -1, i) for i, (pos, _) in enumerate(row_problems)]
        + [(picked[i], q, i) for i, q in zip(*cell_problems, strict=True)]
    )
    for _pos, q, i in events:
        if q < 0:
            kw = row_problems[i][1]
            log.warning(kw.pop("message"), **kw)
            continue
        ref = cell_ref(cols[q], picked_rows[i])
        vals[i, q] = _quantity(
            value_at(i, q), ref, sheet, items[i], log, uncalculated=ref in uncalculated
        )
    matrix = np.zeros((len(items), len(labels)), dtype=float)
    target = pidx[used]
    if np.unique(target).size == target.size:  # a column per period: placed in one step
        matrix[:, target] = vals
        matrix += 0.0  # (as 0 + x: a -0.0 in the sheet becomes 0.0, as it always did)
    else:  # several columns in one period (days summed into weeks): added up
        for q, p in enumerate(used):
            matrix[:, pidx[p]] += vals[:, q]
    return History(sheet, "wide", items, matrix, labels, period, first_cell)


def wide_header(sheet: RawSheet) -> tuple[int, int, list[int]] | None:
    """(row index, item column, period columns) when ``sheet`` opens with a wide-layout
    History header (and not a long one), else None."""
    if find_header(sheet, HISTORY_LONG_COLUMNS, min_matches=2) is not None:
        return None  # long, or long short of a column (read_history says which)
    return _find_wide_header(sheet)


_REF_PARTS = re.compile(r"^\$?([A-Za-z]{1,3})\$?(\d+)$")


def _split_ref(ref: str) -> tuple[int, int]:
    """(1-based row, 0-based column) of an A1 reference; (0, -1) if it is not one."""
    m = _REF_PARTS.match(ref)
    if m is None:
        return 0, -1
    col = 0
    for ch in m.group(1).upper():
        col = col * 26 + ord(ch) - 64
    return int(m.group(2)), col - 1


def _quantity(
    value: Any, ref: str, sheet: str, code: str, log: ProblemLog, uncalculated: bool = False
) -> float:
    """One demand cell: a number >= 0, 0 for blank, NaN (reported) if unreadable."""
    if uncalculated:
        log.warning(
            "This quantity is a formula with no saved result; the period was left out "
            "of the item's statistics. Open the workbook, let it calculate, save it.",
            sheet=sheet,
            cell=ref,
            item=code,
            code="cell-uncalculated",
        )
        return float("nan")
    x, why = parse_number(value)
    _, unclear, _ = settle(value, Convention(None))  # a typed 1.200: reported, not guessed
    if unclear is not None and not why:
        log.warning(
            f"Quantity {unclear}",
            sheet=sheet,
            cell=ref,
            item=code,
            value=value,
            code="number-decimal-mark",
        )
    if why:
        log.warning(
            f"Quantity {describe(value)} is {why}; this period was left out of the "
            "item's statistics. Enter the units sold as a number (0 if none).",
            sheet=sheet,
            cell=ref,
            item=code,
            value=value,
            code="history-quantity-not-number",
        )
        return float("nan")
    if x is None:
        return 0.0
    if x < 0:
        log.warning(
            f"Quantity {describe(value)} is negative (a return?); it was counted as 0. "
            "Record returns elsewhere so they don't lower the demand estimate.",
            sheet=sheet,
            cell=ref,
            item=code,
            value=value,
            code="history-quantity-negative",
        )
        return 0.0
    return x


__all__ = ["History", "read_history", "infer_period", "PERIODS"]


def aggregate_daily_to_weeks(history: History) -> History:
    """Sum a daily history into weeks (7-day blocks from the first day).

    Used when the lead times are a week or longer: weekly sums smooth out weekday patterns
    that daily figures would otherwise count as independent noise, so the spread over the
    lead time is estimated more steadily. A week holding an unreadable day is left out
    (NaN), like the day itself. A last, partial week is dropped rather than counted short.
    """
    n_items, n_days = history.matrix.shape
    weeks = n_days // 7
    m = history.matrix[:, : weeks * 7].reshape(n_items, weeks, 7).sum(axis=2)
    labels = history.labels[: weeks * 7 : 7]
    return History(
        history.sheet, history.layout, history.items, m, labels, "week", history.first_cell
    )
