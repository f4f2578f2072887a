"""Which mark a column of typed numbers uses for decimals, settled by the whole column.

A number typed as text with a single separator followed by exactly three digits ("1.200",
"1,200") reads two ways: one and a fifth, or twelve hundred, depending on whether the
writer uses the decimal point or the decimal comma. Read cell by cell it would be guessed;
here the column decides. Its other text cells are the evidence:

- a decimal comma: "4,50", "12,5", "1.234,50", "1234,567" (more than three digits before
  the comma cannot be a thousands group);
- a decimal point: "4.50", "1,234.50", "1234.567";
- the dots of "1.234.567" are thousands separators, so it speaks for the comma, and the
  commas of "1,234,567" for the point.

With the evidence on one side, an ambiguous cell is read that way and a note names it.
With none, it is read as a spreadsheet in English would (1,200 = 1200; 1.200 = 1.2) and a
warning says it could be the other. With evidence on both sides, the cell is reported and
not used. Cells the file holds as real numbers are not text and never ambiguous.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from typing import Any

__all__ = ["COMMA", "MIXED", "POINT", "Convention", "column_convention", "settle"]

COMMA = "comma"
POINT = "point"
MIXED = "mixed"

_MARKS = re.compile(r"[^0-9.,]")
_AMBIGUOUS = re.compile(r"^\d{1,3}[.,]\d{3}$")


@dataclass(frozen=True)
class Convention:
    """A column's decimal mark (COMMA, POINT, MIXED or None) and a cell that shows it."""

    mark: str | None
    example: str = ""  # the A1 reference of a cell that settles it ("" when none does)
    example_text: str = ""


def _core(text: str) -> str:
    """The digits and separators of a typed number (currency, sign, spaces, % removed)."""
    return _MARKS.sub("", text.replace("'", "").replace("’", ""))


def evidence(text: str) -> str | None:
    """COMMA, POINT or None (no separator, or only an ambiguous one) for one typed number."""
    s = _core(text)
    if not s or not any(ch.isdigit() for ch in s):
        return None
    comma, dot = s.rfind(","), s.rfind(".")
    if comma >= 0 and dot >= 0:
        return COMMA if comma > dot else POINT
    mark = "," if comma >= 0 else "." if dot >= 0 else ""
    if not mark:
        return None
    if s.count(mark) > 1:  # only a thousands separator repeats
        return POINT if mark == "," else COMMA
    if _AMBIGUOUS.match(s):
        return None
    return COMMA if mark == "," else POINT


def is_ambiguous(text: str) -> bool:
    """Whether a typed number reads two ways (one separator, then exactly three digits)."""
    return bool(_AMBIGUOUS.match(_core(text))) and not re.search(r"[eE]", text)


def column_convention(cells: list[tuple[str, Any]]) -> Convention:
    """The convention of a column from its (A1 reference, value) cells; text cells count."""
    seen: dict[str, tuple[str, str]] = {}
    for ref, value in cells:
        if not isinstance(value, str):
            continue
        mark = evidence(value)
        if mark is not None and mark not in seen:
            seen[mark] = (ref, value.strip())
    if len(seen) == 2:
        return Convention(MIXED, *seen[COMMA])
    if len(seen) == 1:
        mark, (ref, text) = next(iter(seen.items()))
        return Convention(mark, ref, text)
    return Convention(None)


def settle(value: Any, convention: Convention) -> tuple[Any, str | None, str]:
    """(the value to parse, a note or None, "info"/"warning"/"error") for one cell.

    Only an ambiguous text cell changes: under COMMA its separator is read the comma's way
    (the point as thousands, the comma as decimals); POINT and no evidence read it the
    English way, the latter with a warning; MIXED gives an error and no value.
    """
    if not isinstance(value, str) or not is_ambiguous(value):
        return value, None, "info"
    s = _core(value)
    mark = "," if "," in s else "."
    as_point = float(s.replace(",", "")) if mark == "," else float(s)
    as_comma = float(s.replace(".", "")) if mark == "." else float(s.replace(",", "."))
    text = value.strip()
    if convention.mark == COMMA:
        rewritten = value.replace(".", "") if mark == "." else value.replace(",", ".")
        return (
            rewritten,
            f"'{text}' was read as {_show(as_comma)}, not {_show(as_point)}, since this column "
            f"writes decimals with a comma ({convention.example} '{convention.example_text}'). "
            "Check it.",
            "warning",
        )
    if convention.mark == POINT:
        return (
            value,
            f"'{text}' was read as {_show(as_point)}, not {_show(as_comma)}, since this column "
            f"writes decimals with a point ({convention.example} '{convention.example_text}').",
            "info",
        )
    if convention.mark == MIXED:
        return (
            None,
            f"'{text}' could be {_show(as_point)} or {_show(as_comma)}, and this column writes "
            "decimals both with a point and with a comma (e.g. "
            f"{convention.example} '{convention.example_text}'), so it was not guessed. Type "
            f"it as a plain number such as {_show(as_point)}",
            "error",
        )
    return (
        value,
        f"'{text}' was read as {_show(as_point)}; if you meant {_show(as_comma)}, write it as "
        f"{_show(as_comma)} (nothing else in the column shows which decimal mark it uses).",
        "warning",
    )


def _show(x: float) -> str:
    return f"{x:.10g}"
