"""Turning raw cell values into the numbers and codes the planner needs.

Every function here returns either a value or a reason the cell cannot be used; none of
them turns a bad cell silently into a blank. The callers turn reasons into problems that
name the sheet and cell.
"""

from __future__ import annotations

import datetime as _dt
import math
import re
from typing import Any

_SPACES = re.compile(r"[\s\u00a0\u2007\u202f]+")
_PLAIN_NUMBER = re.compile(r"^[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?$")
_THOUSANDS = re.compile(r"^[+-]?\d{1,3}(,\d{3})+(\.\d*)?$")


_XML_ESCAPE = re.compile(r"_x([0-9A-Fa-f]{4})_")


def unescape(value: str) -> str:
    """Text with Excel's _xHHHH_ escapes decoded (how a workbook stores a control character).

    openpyxl leaves them as written, so "a_x0009_b" would otherwise reach the output as
    such; "_x005F_" is Excel's escape for a literal underscore before one.
    """
    if "_x" not in value:
        return value
    return _XML_ESCAPE.sub(lambda m: chr(int(m.group(1), 16)), value)


def is_blank(value: Any) -> bool:
    """True for an empty cell or one holding only spaces."""
    if value is None:
        return True
    return isinstance(value, str) and _SPACES.sub("", value) == ""


_ZERO_PAD = re.compile(r"^0+$")


def item_code(value: Any, number_format: str = "") -> str | None:
    """An item code as text: 123, 123.0 and "123" are the same code; "000123" stays as is.

    A number shown with a zero-padding format ("000000") is read as the user sees it,
    "000123", since that is the code printed on their shelf labels.
    """
    if is_blank(value):
        return None
    if isinstance(value, bool):
        return str(value).upper()
    if isinstance(value, (int, float)):
        if isinstance(value, float) and not (math.isfinite(value) and value == int(value)):
            return repr(value)
        digits = str(int(value))
        if _ZERO_PAD.match(number_format or ""):
            digits = digits.zfill(len(number_format))
        return digits
    if isinstance(value, (_dt.datetime, _dt.date)):
        return value.isoformat()
    return _SPACES.sub(" ", unescape(str(value))).strip()


def text(value: Any) -> str | None:
    """Free text (description, supplier): stripped, or None when blank."""
    if is_blank(value):
        return None
    if isinstance(value, float) and value == int(value):
        return str(int(value))
    return unescape(str(value)).strip()


def parse_number(
    value: Any, *, rate: bool = False, percent_unit: bool = False, number_format: str = ""
) -> tuple[float | None, str | None]:
    """Read a number, returning (number, None), (None, None) for blank, or (None, reason).

    ``rate``: the column holds a fraction; "14%" as text gives 0.14, and so does 14 when the
    header carries a "%" unit and the cell is not itself formatted as a percentage.
    Text holding a plain number ("12", "1,250.5", " 3 ") is read as that number.
    """
    if is_blank(value):
        return None, None
    if isinstance(value, bool):
        return None, f"{'TRUE' if value else 'FALSE'} is a yes/no value, not a number"
    if isinstance(value, (_dt.datetime, _dt.date, _dt.time, _dt.timedelta)):
        return None, "a date or time where a number belongs"
    if isinstance(value, (int, float)):
        x = float(value)
        if not math.isfinite(x):
            return None, "not a finite number"
        if rate and percent_unit and "%" not in number_format and x > 1:
            x /= 100.0
        return x, None
    s = _SPACES.sub("", str(value))
    if s.startswith("#"):
        return None, f"the spreadsheet error {s}"
    pct = s.endswith("%")
    if pct:
        s = s[:-1]
    if _THOUSANDS.match(s):
        s = s.replace(",", "")
    if not _PLAIN_NUMBER.match(s):
        return None, "text where a number belongs"
    x = float(s)
    if pct or (rate and percent_unit and x > 1):
        x /= 100.0
    return x, None


def describe(value: Any) -> str:
    """The raw value as a user would recognise it in a message."""
    if isinstance(value, str):
        return repr(value)
    if isinstance(value, float) and value == int(value) and abs(value) < 1e15:
        return str(int(value))
    return str(value)
