"""The owner's own column names: "my column X is your Y", said once and kept.

Two places say it, and both give the same mapping:

- a sheet in the workbook named **Column names** (also "My columns", "Column map", "Header
  map"), two columns: our column (Item, Unit cost, Lead time days, Quantity, ...) and the
  header in your sheet, one row per column; a header row above them is optional;
- ``--column 'Lead time days=Supplier LT (wks)'`` on the command line (repeatable), or
  ``columns={"Lead time days": "Supplier LT (wks)"}`` in the Python API.

A unit in your header is still read ("Supplier LT (wks)" is in weeks). The command line
wins over the sheet for the same column of ours.
"""

from __future__ import annotations

from typing import Any

from ..contract import HISTORY_LONG_COLUMNS, ITEM_COLUMNS, PRICE_BREAK_COLUMNS, Column, normalise
from ..problems import ProblemLog
from .cells import is_blank
from .headers import closest

#: What the mapping sheet may be called (matched loosely).
MAP_SHEET_NAMES: tuple[str, ...] = (
    "column names",
    "my columns",
    "column map",
    "header map",
    "my headers",
    "columns",
)

_OURS: tuple[Column, ...] = ITEM_COLUMNS + HISTORY_LONG_COLUMNS[1:] + PRICE_BREAK_COLUMNS[1:]


def our_column(name: object) -> Column | None:
    """The column of ours a name means (its title, key or an alias), loosely."""
    n = normalise(name)
    for col in _OURS:
        if n in col.names():
            return col
    return None


def parse_pairs(
    pairs: dict[str, str], log: ProblemLog, *, sheet: str = "", cells: dict[str, str] | None = None
) -> dict[str, str]:
    """{our column: your header} -> {your header, normalised: our key}; a name of ours
    that is unknown, or a header given for two of our columns, is reported and left out."""
    out: dict[str, str] = {}
    seen: dict[str, str] = {}
    for ours, theirs in pairs.items():
        where = (cells or {}).get(ours, "")
        col = our_column(ours)
        if col is None:
            near = closest(Column("", ours, "", "", ""), [c.title for c in _OURS])
            log.error(
                f"'{ours}' is not a column I read"
                + (f" (did you mean '{near}'?)" if near else "")
                + "; this mapping was not used. Name one of: "
                + ", ".join(c.title for c in _OURS[:8])
                + ", ... (see docs/workbook.md).",
                sheet=sheet,
                cell=where,
                value=ours,
                code="column-map-unknown",
            )
            continue
        h = normalise(theirs)
        if not h:
            continue
        if h in out and out[h] != col.key:
            log.error(
                f"The header '{theirs}' is given for both {seen[h]} and {col.title}; the "
                f"first was kept. Give each of your headers to one column of ours.",
                sheet=sheet,
                cell=where,
                value=theirs,
                code="column-map-twice",
            )
            continue
        out[h] = col.key
        seen[h] = col.title
    return out


def read_map_sheet(sheet: Any, log: ProblemLog) -> dict[str, str]:
    """{your header, normalised: our key} from a Column names sheet (two columns a row)."""
    pairs: dict[str, str] = {}
    cells: dict[str, str] = {}
    for k, row in enumerate(sheet.rows):
        values = list(row[:2])
        if len(values) < 2 or is_blank(values[0]) or is_blank(values[1]):
            continue
        ours, theirs = str(values[0]).strip(), " ".join(str(values[1]).split())
        if k == 0 and our_column(ours) is None:
            continue  # a header row ("Our column | Your header")
        pairs[ours] = theirs
        cells[ours] = f"A{sheet.row_numbers[k]}"
    return parse_pairs(pairs, log, sheet=sheet.name, cells=cells)


def combine(from_sheet: dict[str, str], given: dict[str, str]) -> dict[str, str]:
    """The sheet's mapping with the command line's on top: a column of ours named on the
    command line takes only the header given there."""
    keys = set(given.values())
    out = {h: k for h, k in from_sheet.items() if k not in keys}
    out.update(given)
    return out
