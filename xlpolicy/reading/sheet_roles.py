"""Which of the owner's sheets is the item list, the sales history, the settings.

First by name, loosely (case, spaces and punctuation do not count; "Stock list", "Sales",
"Monthly sales" and the like are known). Two sheets with names that fit the same role
("items_" and "ITEMS.") are not guessed between: the one named exactly as ours is used and
the other named, or, with no exact name, the run stops and names both.

Where no name fits, each remaining sheet's header row says what it holds: item codes and
unit costs make an item list; item codes, dates or periods and quantities (one row per sale
or period) or item codes followed by a row of periods (one column per period) make a sales
history. One candidate is used, and the console and the "How it works" sheet say so;
several, or none, stop the run (or, for the history, leave it out) with a message that
names each sheet and what it lacked.
"""

from __future__ import annotations

import datetime as _dt
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from ..contract import HISTORY_LONG_COLUMNS, ITEM_COLUMNS, normalise
from ..problems import ProblemLog
from .column_map import MAP_SHEET_NAMES
from .headers import find_header
from .history import _as_date, _find_wide_header
from .workbook import SHEET_ALIASES

#: The roles a sheet can play, and what the console calls each.
ROLE_WORDS = {
    "Items": "the item list",
    "History": "the sales history",
    "Settings": "the settings",
    "Price breaks": "the price breaks",
    "Column names": "your column names",
}


@dataclass
class SheetRoles:
    """Sheet name per role, and how each was found (for the console and the method sheet)."""

    names: dict[str, str] = field(default_factory=dict)
    how: dict[str, str] = field(default_factory=dict)

    def get(self, role: str) -> str | None:
        return self.names.get(role)


def _aliases(role: str) -> set[str]:
    if role == "Column names":
        return {normalise(a) for a in MAP_SHEET_NAMES}
    return {normalise(a) for a in SHEET_ALIASES[role]}


def by_name(
    sheet_names: list[str], role: str, log: ProblemLog, *, stem: bool = False
) -> str | None:
    """The sheet whose name fits ``role``; with two or more, the one named exactly as ours
    (the others are named in a warning), else a fatal problem naming them all."""
    wanted = _aliases(role)
    key = (lambda n: Path(n).stem) if stem else (lambda n: n)
    fits = [n for n in sheet_names if normalise(key(n)) in wanted]
    if len(fits) <= 1:
        return fits[0] if fits else None
    exact = [n for n in fits if key(n).strip().casefold() == role.casefold()]
    listed = ", ".join(f"'{n}'" for n in fits)
    if len(exact) == 1:
        others = ", ".join(f"'{n}'" for n in fits if n != exact[0])
        log.warning(
            f"The sheets {listed} could each be {ROLE_WORDS[role]}; '{exact[0]}' was used, as "
            f"it is named exactly so, and {others} was not read. Rename or delete the one "
            "that should not be read.",
            sheet=exact[0],
            code="sheet-names-ambiguous",
        )
        return exact[0]
    log.fatal(
        f"The sheets {listed} could each be {ROLE_WORDS[role]}, and I will not guess which. "
        f"Rename the one to read '{role}' (or delete the other).",
        code="sheet-names-ambiguous",
    )
    return None


def _period_like(value: Any) -> bool:
    if isinstance(value, (_dt.date, _dt.datetime)):
        return True
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        return True
    return isinstance(value, str) and _as_date(value) is not None


def what_it_holds(
    top: Any, mapping: dict[str, str] | None, role: str = "Items"
) -> tuple[str | None, str]:
    """("Items", "History" or None, what was found, or what it lacked to be ``role``'s
    sheet) from a sheet's top rows."""
    items = find_header(top, ITEM_COLUMNS, mapping=mapping)
    if items is not None and {"item", "unit_cost"} <= set(items.columns):
        return "Items", "item codes and unit costs"
    long = find_header(top, HISTORY_LONG_COLUMNS, min_matches=2, mapping=mapping)
    if long is not None and len(long.columns) == 3:
        return "History", "item codes, periods and quantities, a row per sale or period"
    wide = _find_wide_header(top)
    if wide is not None:
        idx, _, periods = wide
        row = top.rows[idx]
        n = sum(_period_like(row[j]) for j in periods if j < len(row))
        if n >= 2 and n >= len(periods) / 2:
            return "History", "item codes and a row of periods, a column per period"
    lacks = []
    loose = items or find_header(top, ITEM_COLUMNS, min_matches=1, mapping=mapping)
    found = set(loose.columns) if loose is not None else set()
    if role == "History":
        hist = long or find_header(top, HISTORY_LONG_COLUMNS, min_matches=1, mapping=mapping)
        have = set(hist.columns) if hist is not None else set()
        titles = {c.key: f"'{c.title}'" for c in HISTORY_LONG_COLUMNS}
        lacks.append(
            "no " + ", ".join(titles[k] for k in titles if k not in have) + " column"
            if have
            else "no header row with item codes, dates and quantities"
        )
    elif "item" not in found:
        lacks.append("no column of item codes")
    elif "unit_cost" not in found:
        lacks.append("item codes but no unit cost")
    return None, "; ".join(lacks) or "no header row I recognise"


def by_content(
    candidates: dict[str, Any],
    role: str,
    mapping: dict[str, str] | None,
    log: ProblemLog,
    source: str,
) -> str | None:
    """The one sheet among ``candidates`` (name -> its top rows) that holds ``role``'s data.

    Several: a fatal problem naming them. None: for Items a fatal problem naming each sheet
    and what it lacked; for History nothing (the caller says what that means)."""
    found: list[tuple[str, str]] = []
    lacked: list[str] = []
    for name, top in candidates.items():
        kind, why = what_it_holds(top, mapping, role)
        if kind == role:
            found.append((name, why))
        else:
            lacked.append(f"'{name}': {why if kind is None else 'looks like ' + ROLE_WORDS[kind]}")
    if len(found) == 1:
        name, why = found[0]
        log.info(
            f"The sheet '{name}' was read as {ROLE_WORDS[role]}: it holds {why}. Name it "
            f"'{role}' to make that explicit.",
            sheet=name,
            code="read-as-sheet",
        )
        return name
    if len(found) > 1:
        log.fatal(
            f"The sheets {', '.join(repr(n) for n, _ in found)} could each be "
            f"{ROLE_WORDS[role]}, and I will not guess which. Rename the one to read "
            f"'{role}'.",
            code=f"{role.lower().replace(' ', '-')}-sheet-ambiguous",
        )
        return None
    if role == "Items":
        log.fatal(
            f"{source} has no 'Items' sheet, and no sheet holds item codes with unit costs ("
            + ("; ".join(lacked) or "no sheets")
            + "). Rename the sheet with your items 'Items', or add the missing headers "
            "(run 'xlpolicy template' for an example).",
            code="items-sheet-missing",
        )
    elif role == "History":
        log.warning(
            f"{source} has no 'History' sheet, and no other sheet holds sales by item and "
            "period ("
            + ("; ".join(lacked) or "no other sheets")
            + "). Only items with an Annual demand in the item list can be planned. Name "
            "the sheet with your sales 'History', or give its headers (item code, date, "
            "quantity sold).",
            code="history-sheet-missing",
        )
    return None
