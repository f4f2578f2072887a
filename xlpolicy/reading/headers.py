"""Reading a header row as people write it: the column each header means, and its unit.

A header is matched loosely (case, spaces and punctuation do not count) against the
contract's names and aliases, first as written ("Lead time days"), then without a unit at
its end ("Lead time (weeks)", "Lead time in weeks", "LT wks", "Holding cost %", "Cost price
(EUR)"). The unit is kept and honoured: days, weeks, months and working days are turned into
days for the columns measured in days, a per-cent unit makes 20 mean 20 %, a currency is
shown in the outputs. A unit that a column cannot take ("Lead time (hours)", "Unit cost
(%)") is refused with a message, never dropped.

Every header of the row is accounted for: used, refused, a second column for the same
thing, or not used; :func:`report_header` says so once per sheet.
"""

from __future__ import annotations

import difflib
import re
from collections.abc import Iterable
from dataclasses import dataclass, field
from typing import Any

from ..contract import (
    CURRENCY_SPELLINGS,
    DURATION_KEYS,
    DURATION_UNITS,
    MONEY_KEYS,
    NUMBER,
    PERCENT_ONLY_ALIASES,
    RATE,
    TEXT,
    UNIT_SPELLINGS,
    UNSUPPORTED_TIME_UNITS,
    Column,
    normalise,
)
from ..problems import ProblemLog

_UNITS = {normalise(k): v for k, v in UNIT_SPELLINGS.items()}
_CURRENCIES = {normalise(k) or k: v for k, v in CURRENCY_SPELLINGS.items()}
_TIME_WORDS = {normalise(w) for w in UNSUPPORTED_TIME_UNITS}
_BRACKET = re.compile(r"[\(\[\{]([^\(\)\[\]\{\}]*)[\)\]\}]\s*$")
_TOKENS = re.compile(r"%|[$€£¥₹]|[^\W_]+")
_PERCENT_ONLY = {normalise(a): key for key, names in PERCENT_ONLY_ALIASES.items() for a in names}


@dataclass(frozen=True)
class Unit:
    """A unit found in a header or a cell.

    ``kind``: "duration" (``name`` days, weeks, months or working days), "percent",
    "money" (``name`` the sign or code), "count", "time" (a unit of time we do not
    convert), "other" (words in brackets that are no unit we know) or "" (none).
    ``written``: the unit as it appears ("wks", "EUR").
    """

    kind: str = ""
    name: str = ""
    written: str = ""

    @property
    def days(self) -> float:
        """Days in one of this unit (1 when it is not a unit of time)."""
        return DURATION_UNITS.get(self.name, 1.0) if self.kind == "duration" else 1.0


NO_UNIT = Unit()


def unit_of(text: str, bracket: bool = True) -> Unit:
    """The unit a piece of text names: the inside of a bracket (where "% of cost" is per
    cent too), or with ``bracket`` False a trailing word or two ("in weeks", "%")."""
    raw = text.strip()
    if not raw:
        return NO_UNIT
    if "%" in raw and (bracket or normalise(raw) in ("", "in", "per")):
        return Unit("percent", "%", raw)
    per = raw.lower().startswith("per ")
    words = re.sub(r"^(in|per)\s+", "", raw.lower())
    n = normalise(words) or words.strip()
    if n in _UNITS:
        name = _UNITS[n]
        kind = "duration" if name in DURATION_UNITS else "percent" if name == "%" else "count"
        if per and kind == "duration":  # "per week": a rate over time, not a length of time
            return Unit("other", "", raw)
        return Unit(kind, name, raw)
    if per and n in _TIME_WORDS:
        return Unit("other", "", raw)
    if n in _CURRENCIES or raw in CURRENCY_SPELLINGS:
        return Unit("money", _CURRENCIES.get(n) or CURRENCY_SPELLINGS[raw], raw)
    if n in _TIME_WORDS:
        return Unit("time", n, raw)
    return Unit("other", "", raw)


def split_unit(header: object) -> tuple[str, Unit]:
    """(the header without its unit, the unit): "Lead time (weeks)" -> ("Lead time", weeks).

    A unit is taken from a bracket at the end, or from the last word or two where they
    name a unit ("Lead time in weeks", "Holding cost %", "Cost price EUR"). A header that is
    nothing but a unit word stays as it is.
    """
    raw = " ".join(str(header).split())
    m = _BRACKET.search(raw)
    if m is not None and raw[: m.start()].strip():
        return raw[: m.start()].strip(), unit_of(m.group(1))
    tokens = list(_TOKENS.finditer(raw))
    if len(tokens) > 1 and tokens[-1].group(0) == "%":  # "Holding cost %", "Margin in %"
        base = re.sub(r"\b(in|per)\s*$", "", raw[: tokens[-1].start()].strip(), flags=re.I)
        return base.strip(" -_/:,"), Unit("percent", "%", "%")
    for size in (2, 1):
        if len(tokens) <= size:
            continue
        tail = raw[tokens[-size].start() :]
        unit = unit_of(tail, bracket=False)
        if unit.kind in ("", "other"):
            continue
        cut = tokens[-size].start()
        if len(tokens) > size + 1 and tokens[-size - 1].group(0).lower() in ("in", "per"):
            cut = tokens[-size - 1].start()
        base = raw[:cut].strip(" -_/:,")
        if base:
            return base, unit
    return raw, NO_UNIT


@dataclass
class Header:
    """Where a sheet's header row is and which column holds which key."""

    row_index: int  # index into RawSheet.rows
    columns: dict[str, int]  # key -> 0-based column index
    units: dict[str, str]  # key -> unit name ("%", "days", "weeks", "EUR", ...) or ""
    unknown: dict[int, str]  # column index -> header text not recognised
    duplicates: dict[str, list[int]]
    titles: dict[str, str] = field(default_factory=dict)  # key -> header as the user wrote it
    #: key -> the unit found in its header (for notes and conversions)
    found_units: dict[str, Unit] = field(default_factory=dict)
    #: column index -> (key, why its unit cannot be used); such a column is not used
    refused: dict[int, tuple[str, str]] = field(default_factory=dict)
    #: column index -> the key a mapping (sheet or command line) gave it
    mapped: dict[int, str] = field(default_factory=dict)
    #: column index -> why a header almost matched ("'Holding cost' needs a % unit")
    hints: dict[int, str] = field(default_factory=dict)
    #: column index -> every header text of the row, as written
    texts: dict[int, str] = field(default_factory=dict)
    #: cells that carried a unit of their own: (key, A1 cell, value, unit name)
    cell_units: list[tuple[str, str, Any, str]] = field(default_factory=list)

    def days(self, key: str) -> float:
        """Days in one unit of ``key``'s header (1 for days or no unit)."""
        unit = self.found_units.get(key)
        return unit.days if unit is not None else 1.0


def _unit_problem(col: Column, unit: Unit) -> str | None:
    """Why ``unit`` cannot be used for ``col``, or None when it can."""
    if col.kind == TEXT or unit.kind in ("", "count"):
        return None
    if col.key in DURATION_KEYS:
        if unit.kind in ("duration", "other"):
            return None
        return (
            f"'{unit.written}' is not a unit of time I convert; write the values in days, "
            "weeks, months or working days and name the unit in the header, e.g. "
            f"'{col.title.replace(' days', '')} (weeks)'"
        )
    if unit.kind in ("duration", "time"):
        return f"'{unit.written}' is a unit of time, and this column is not measured in time"
    if col.kind == RATE:
        if unit.kind == "money":
            return f"'{unit.written}' is money, and this column is a rate (a fraction or per cent)"
        return None
    if col.key in MONEY_KEYS:
        if unit.kind == "percent":
            return "'%' is a rate, and this column is money"
        return None
    if col.kind == NUMBER and unit.kind in ("percent", "money"):
        return f"'{unit.written}' is not a quantity, and this column counts units"
    return None


def _lookup(columns: tuple[Column, ...]) -> dict[str, str]:
    out: dict[str, str] = {}
    for col in columns:
        for name in col.names():
            out.setdefault(name, col.key)
    return out


def match(text: object, columns: tuple[Column, ...]) -> tuple[str | None, Unit]:
    """The key of the column a header means (None if none) and the header's unit."""
    return _match(text, _lookup(columns), {c.key for c in columns})


#: Last words that may be a unit: a header ending otherwise has none (a quick test that
#: spares most headers the full split).
_LAST_WORDS = frozenset(
    w
    for spelling in (*UNIT_SPELLINGS, *CURRENCY_SPELLINGS, *UNSUPPORTED_TIME_UNITS)
    for w in (spelling.lower().split() or [spelling])[-1:]
)


def _may_have_unit(text: str) -> bool:
    if not text or text[-1] in ")]}%$€£¥₹":
        return True
    last = text.rsplit(None, 1)[-1].lower().strip(".:,;-_")
    return last in _LAST_WORDS


def _match(text: object, lookup: dict[str, str], keys: set[str]) -> tuple[str | None, Unit]:
    raw = str(text)
    full = normalise(raw)
    if not _may_have_unit(raw.strip()):
        return lookup.get(full), NO_UNIT
    base, unit = split_unit(text)
    if full in lookup:
        return lookup[full], unit
    b = normalise(base)
    if b in lookup:
        return lookup[b], unit
    if unit.kind == "percent" and _PERCENT_ONLY.get(b) in keys:
        return _PERCENT_ONLY[b], unit
    return None, unit


def find_header(
    sheet: Any,
    columns: tuple[Column, ...],
    *,
    scan_rows: int = 30,
    min_matches: int = 2,
    mapping: dict[str, str] | None = None,
) -> Header | None:
    """Find the first row whose cells name at least ``min_matches`` known columns.

    Rows above it (a title, a note) are skipped. ``mapping``: the owner's own headers,
    normalised, -> our column keys; it wins over the vocabulary. Returns None if no row
    qualifies.
    """
    lookup = _lookup(columns)
    by_key = {c.key: c for c in columns}
    keys = set(by_key)
    own = {h: k for h, k in (mapping or {}).items() if k in keys}
    for idx, row in enumerate(sheet.rows[:scan_rows]):
        head = Header(idx, {}, {}, {}, {})
        for j, value in enumerate(row):
            if value is None or (isinstance(value, str) and not value.strip()):
                continue
            text = " ".join(str(value).split())
            head.texts[j] = text
            if not isinstance(value, str):  # a date or number heads a period, not a column
                head.unknown[j] = text
                continue
            key, unit = _match(text, lookup, keys)
            if normalise(text) in own:
                key = own[normalise(text)]
                head.mapped[j] = key
            if key is None:
                head.unknown[j] = text
                b = normalise(split_unit(text)[0]) if _may_have_unit(text) else normalise(text)
                if b in _PERCENT_ONLY and _PERCENT_ONLY[b] in keys:
                    head.hints[j] = (
                        f"'{text}' may be money or a rate; write '{text} (%)' if it is the "
                        "yearly holding cost as a per cent of the unit cost"
                    )
                continue
            why = _unit_problem(by_key[key], unit)
            if why is not None:
                head.refused[j] = (key, why)
                continue
            if key in head.columns:
                head.duplicates.setdefault(key, [head.columns[key]]).append(j)
                continue
            head.columns[key] = j
            head.units[key] = unit.name if unit.kind != "other" else ""
            head.found_units[key] = unit
            head.titles[key] = text
        if len(head.columns) + len(head.refused) >= min_matches:
            return head
    return None


def closest(wanted: Column, found: Iterable[str]) -> str | None:
    """The header on the sheet most like one of ``wanted``'s names, if any is close."""
    best, score = None, 0.0
    names = sorted(wanted.names())
    for text in found:
        n = normalise(split_unit(text)[0]) or normalise(text)
        for name in names:
            r = difflib.SequenceMatcher(None, n, name).ratio()
            if r > score:
                best, score = text, r
    return best if score >= 0.6 else None


def missing_message(
    sheet_name: str, missing: list[Column], header_texts: list[str], row: int
) -> str:
    """The message for required columns that are not on a sheet: what is there, what is
    nearest, and how to point us at the right one."""
    names = ", ".join(f"'{c.title}'" for c in missing)
    found = ", ".join(f"'{t}'" for t in header_texts[:30]) or "none"
    if len(header_texts) > 30:
        found += f" ... and {len(header_texts) - 30} more"
    hints = []
    for col in missing:
        near = closest(col, header_texts)
        if near is not None:
            hints.append(f"did you mean '{near}' for '{col.title}'?")
    hint = (" " + " ".join(h[0].upper() + h[1:] for h in hints)) if hints else ""
    first = missing[0].title
    return (
        f"The sheet '{sheet_name}' has no column {names} (headers found in row {row}: "
        f"{found}).{hint} Rename the header, or tell me which of your columns it is: a row "
        f"in a 'Column names' sheet ({first} | your header) or "
        f"--column '{first}=your header' on the command line."
    )


def report_header(
    header: Header,
    columns: tuple[Column, ...],
    sheet_name: str,
    row_number: int,
    log: ProblemLog,
    *,
    cell: Any,
    required: Iterable[str] = (),
) -> None:
    """Say once what the header row told us: units read and converted, units refused,
    columns mapped by the owner, two columns for one thing, and the columns not used."""
    by_key = {c.key: c for c in columns}
    required = set(required)
    for j, key in header.mapped.items():
        if header.columns.get(key) == j:
            log.info(
                f"'{header.titles[key]}' was read as {by_key[key].title}, as your column "
                "names say.",
                sheet=sheet_name,
                cell=cell(j, row_number),
                code="read-as-mapped",
            )
    for key, j in header.columns.items():
        col = by_key[key]
        unit = header.found_units.get(key, NO_UNIT)
        title = header.titles.get(key, col.title)
        if key in DURATION_KEYS:
            if unit.kind == "duration" and unit.name != "days":
                per = DURATION_UNITS[unit.name]
                log.info(
                    f"{col.title.replace(' days', '')} read in {unit.name} from '{title}' "
                    f"and turned into days (1 {unit.name[:-1]} = {per:g} days"
                    + (", 5 working days to a week" if unit.name == "working days" else "")
                    + ").",
                    sheet=sheet_name,
                    cell=cell(j, row_number),
                    code="read-as-unit",
                )
            elif unit.kind != "duration" and key in ("lead_time_days", "shelf_life_days"):
                log.info(
                    f"{col.title.replace(' days', '')} read in days from '{title}' (the header "
                    "names no unit). If they are weeks or months, say so in the header, "
                    "e.g. 'Lead time (weeks)'.",
                    sheet=sheet_name,
                    cell=cell(j, row_number),
                    code="read-as-unit",
                )
        elif unit.kind == "percent" and col.kind == RATE:
            log.info(
                f"{col.title} read in per cent from '{title}': 20 means 20 %.",
                sheet=sheet_name,
                cell=cell(j, row_number),
                code="read-as-unit",
            )
        elif unit.kind == "money":
            log.info(
                f"{col.title} read in {unit.name} from '{title}'.",
                sheet=sheet_name,
                cell=cell(j, row_number),
                code="read-as-unit",
            )
        elif unit.kind == "other" and col.kind != TEXT:
            log.info(
                f"{col.title} read from '{title}' as the numbers stand: '{unit.written}' is "
                "not a unit I convert.",
                sheet=sheet_name,
                cell=cell(j, row_number),
                code="read-as-unit",
            )
    for j, (key, why) in header.refused.items():
        col = by_key[key]
        severe = key in required and key not in header.columns
        (log.fatal if severe else log.error)(
            f"The column '{_text(header, j)}' would be "
            f"{col.title}, but {why}. "
            + ("It cannot be planned without it." if severe else "The column was not used."),
            sheet=sheet_name,
            cell=cell(j, row_number),
            code="header-unit-refused",
        )
    for key, idxs in header.duplicates.items():
        log.warning(
            f"{len(idxs)} columns mean {by_key[key].title}: "
            + ", ".join(f"'{_text(header, j)}' ({cell(j, row_number)})" for j in idxs)
            + "; the first was used. Rename or delete the other, or name the one to use "
            "in a 'Column names' sheet.",
            sheet=sheet_name,
            cell=cell(idxs[1], row_number),
            code="header-duplicate",
        )
    for j, hint in header.hints.items():
        log.warning(
            f"Not read: {hint}.", sheet=sheet_name, cell=cell(j, row_number), code="header-hint"
        )
    unused = [t for j, t in header.unknown.items() if j not in header.hints]
    if unused:
        log.info(
            "Columns not used: "
            + ", ".join(f"'{t}'" for t in unused[:20])
            + (f" ... and {len(unused) - 20} more" if len(unused) > 20 else "")
            + ". If one of them is something I should read, rename its header or name it in "
            "a 'Column names' sheet.",
            sheet=sheet_name,
            code="read-as-unused",
        )


def _text(header: Header, j: int) -> str:
    return header.texts.get(j, "")
