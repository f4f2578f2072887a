"""Units written in cells ("2 weeks", "10 days") and the currency named in headers.

The header's own unit is read in :mod:`xlpolicy.reading.headers`; here a cell that carries
a unit of its own is turned into days, and a currency in a money header is checked against
the others and against the Currency setting, so amounts in two currencies are never added
up as one.
"""

from __future__ import annotations

import re
from typing import Any

from ..contract import DURATION_UNITS, ITEM_COLUMN_BY_KEY, MONEY_KEYS
from ..problems import ProblemLog
from .cells import number_from_text
from .headers import Header, unit_of

_NUMBER_AND_UNIT = re.compile(r"^\s*([0-9][0-9.,]*)\s*([^\W\d_][^\d]*?)\.?\s*$")

#: Signs and codes that are the same currency (compared when both are given).
_SAME = {"€": "EUR", "£": "GBP", "$": "USD", "¥": "JPY", "₹": "INR"}


def cell_duration(value: Any) -> tuple[float | None, str, str | None] | None:
    """A cell such as "2 weeks" or "10 working days": (days, the unit, None); (None, the
    unit, why) for a unit of time we do not convert ("3 hours"); None when the cell is not
    a number followed by a unit word."""
    if not isinstance(value, str):
        return None
    m = _NUMBER_AND_UNIT.match(value)
    if m is None:
        return None
    x = number_from_text(m.group(1))
    unit = unit_of(m.group(2))
    if x is None or unit.kind not in ("duration", "time"):
        return None
    if unit.kind == "time":
        return (
            None,
            unit.written,
            (
                f"'{unit.written}' is not a unit of time I convert (days, weeks, months or "
                "working days)"
            ),
        )
    return x * DURATION_UNITS[unit.name], unit.name, None


def units_from_headers(
    header: Header, settings: dict[str, Any], sheet: str, log: ProblemLog
) -> None:
    """Check the currencies the money headers name; the first one found is shown in the
    outputs where the Currency setting is blank."""
    found = {
        key: unit
        for key, unit in header.found_units.items()
        if key in MONEY_KEYS and unit.kind == "money"
    }
    if not found:
        return
    names = {_SAME.get(u.name, u.name) for u in found.values()}
    if len(names) > 1:
        log.fatal(
            "The money columns name different currencies ("
            + ", ".join(
                f"{ITEM_COLUMN_BY_KEY[k].title}: '{header.titles.get(k, k)}'" for k in found
            )
            + "). I do not convert between currencies: give all amounts in one currency.",
            sheet=sheet,
            code="header-currency-mixed",
        )
        return
    key, unit = next(iter(found.items()))
    given = settings.get("currency")
    if not given:
        settings["currency"] = unit.name
        settings.setdefault("sources", {})["currency"] = (
            f"the header '{header.titles.get(key, key)}'"
        )
    elif _SAME.get(str(given).strip(), str(given).strip().upper()) not in names:
        log.warning(
            f"Settings gives the currency {given!r}, but the header "
            f"'{header.titles.get(key, key)}' says {unit.name}. The amounts were used as "
            "they stand (no conversion) and shown with the Settings currency; correct "
            "whichever is wrong.",
            sheet=sheet,
            code="header-currency-mismatch",
        )
