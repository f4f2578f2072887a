"""The currency an input workbook shows its money in, read from its own number formats.

A spreadsheet shows "$12.50" or "12,50 €" by a number format on the cell, not in the
value. When Settings names no currency, the Items sheet's number formats are read for one
(the money columns: unit cost, order cost, shortage cost), so the output shows money the
way the input does; the user is told which cell it came from. Formats that name different
currencies are not guessed between: the output then shows plain numbers, with a note.

Excel number format codes (ECMA-376 Part 1, 18.8.31 numFmts; from memory): a currency
appears as a locale tag "[$€-407]" or "[$EUR]", as quoted text '"$"#,##0.00', or as a
bare symbol "$#,##0.00" / "£#,##0" (some symbols need no quotes).
"""

from __future__ import annotations

import re
from typing import Any

from openpyxl.utils import get_column_letter

from ..problems import ProblemLog

__all__ = ["currency_of", "currency_from_sheet"]

#: Symbols a format may show bare or quoted (common practice for these currencies).
_SYMBOLS = "$€£¥₹₩₽₺₪₫฿₱₦₴₡"
_LOCALE_TAG = re.compile(r"\[\$([^\]-]*)(?:-[0-9A-Fa-f]+)?\]")
_QUOTED = re.compile(r'"([^"]*)"')
_CODE = re.compile(r"^[A-Z]{3}$")


def currency_of(fmt: str) -> str:
    """The currency a number format shows ("$", "€", "EUR", ...), or "" for none.

    Only the first section (positive numbers) is read; a locale tag wins over quoted text,
    quoted text over a bare symbol. Quoted text counts only when it is a currency symbol or
    a three-letter code once spaces are trimmed.
    """
    first = (fmt or "").split(";", 1)[0]
    m = _LOCALE_TAG.search(first)
    if m and m.group(1).strip():
        return m.group(1).strip()
    for q in _QUOTED.findall(first):
        q = q.strip()
        if q and (all(ch in _SYMBOLS for ch in q) or _CODE.match(q)):
            return q
    bare = _QUOTED.sub("", _LOCALE_TAG.sub("", first))
    bare = re.sub(r"\[[^\]]*\]", "", bare)  # colours and conditions
    bare = re.sub(r"\\.", "", bare)  # an escaped character is literal, but rare for money
    for ch in bare:
        if ch in _SYMBOLS:
            return ch
    return ""


def currency_from_sheet(
    sheet: Any, settings: dict[str, Any], log: ProblemLog, sheet_name: str
) -> None:
    """Set settings["currency"] from the number formats of the sheet's number cells, where
    Settings gives none and the formats agree; log where it came from, or why not."""
    if str(settings.get("currency") or "").strip():
        return
    found: dict[str, str] = {}  # currency -> first cell showing it
    for k, (row, fmts) in enumerate(zip(sheet.rows, sheet.formats, strict=False)):
        for j, (value, fmt) in enumerate(zip(row, fmts, strict=False)):
            if not isinstance(value, (int, float)) or isinstance(value, bool):
                continue
            cur = currency_of(fmt) if fmt and fmt != "General" else ""
            if cur and cur not in found:
                found[cur] = f"{get_column_letter(j + 1)}{sheet.row_numbers[k]}"
    if not found:
        return
    if len(found) > 1:
        listed = ", ".join(f"{c} ({cell})" for c, cell in found.items())
        log.info(
            f"The money cells of '{sheet_name}' are formatted in more than one currency "
            f"({listed}), so the output shows plain amounts. Name one in Settings "
            "(Currency) to show it.",
            sheet=sheet_name,
            cell=next(iter(found.values())),
            code="currency-mixed",
        )
        return
    cur, cell = next(iter(found.items()))
    settings["currency"] = cur
    settings.setdefault("sources", {})["currency"] = f"number format of {sheet_name}!{cell}"
    log.info(
        f"Money is shown in {cur}, as the number format of {sheet_name}!{cell} shows it. "
        "Name another currency in Settings (Currency) to change it.",
        sheet=sheet_name,
        cell=cell,
        value=cur,
        code="currency-from-format",
    )
