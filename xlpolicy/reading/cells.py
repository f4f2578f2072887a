"""Turning raw cell values into the numbers and codes the planner needs.

Every function here returns either a value or a reason the cell cannot be used; none of
them turns a bad cell silently into a blank. The callers turn reasons into problems that
name the sheet and cell.
"""

from __future__ import annotations

import datetime as _dt
import math
import re
import unicodedata
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


def code_key(code: str) -> str:
    """An item code in one Unicode normal form (NFC), for comparing codes only.

    "Café-7" may be typed as one character é or as e followed by a combining accent (as
    some systems and keyboards write it); both look the same and are the same code. The
    user's own text is what is shown; this form is only for matching.
    """
    if not isinstance(code, str) or code.isascii():
        return code
    return unicodedata.normalize("NFC", code)


def known_forms(codes: Any) -> set[str]:
    """Every code as written, and in its composed and decomposed forms (for lookups by
    readers that compare codes as they read them)."""
    out: set[str] = set()
    for c in codes:
        out.add(c)
        if isinstance(c, str) and not c.isascii():
            out.add(unicodedata.normalize("NFC", c))
            out.add(unicodedata.normalize("NFD", c))
    return out


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
    if isinstance(value, (_dt.datetime, _dt.date, _dt.time)):
        return shown_date(value, number_format)
    return _SPACES.sub(" ", unescape(str(value))).strip()


_DATE_TOKEN = re.compile(
    r"\[[^\]]*\]|\"[^\"]*\"|\\.|yyyy|yy|mmmmm|mmmm|mmm|mm|m|dddd|ddd|dd|d|hh|h|ss|s|"
    r"am/pm|a/p|.",
    re.IGNORECASE,
)
_MONTH_NAMES = [
    "January",
    "February",
    "March",
    "April",
    "May",
    "June",
    "July",
    "August",
    "September",
    "October",
    "November",
    "December",
]
_DAY_NAMES = ["Monday", "Tuesday", "Wednesday", "Thursday", "Friday", "Saturday", "Sunday"]


def shown_date(value: _dt.date | _dt.time, number_format: str = "") -> str:
    """A date or time cell's text as a spreadsheet shows it under ``number_format``.

    The common date codes are rendered (yyyy, yy, mmmm, mmm, mm, m, dddd, ddd, dd, d, hh,
    h, mm after an hour or before seconds as minutes, ss, AM/PM, quoted text); with no
    date format, the ISO date (2024-01-05), with the time only when there is one.
    """
    fmt = (number_format or "").split(";")[0]
    if not re.search(r"[ymdhs]", re.sub(r'"[^"]*"|\[[^\]]*\]', "", fmt), re.IGNORECASE):
        if isinstance(value, _dt.datetime):
            return value.date().isoformat() if value.time() == _dt.time() else value.isoformat()
        return value.isoformat()
    d = (
        value
        if not isinstance(value, _dt.time)
        else _dt.datetime(1899, 12, 31, value.hour, value.minute, value.second)
    )
    tokens = _DATE_TOKEN.findall(fmt)
    twelve = any(t.lower() in ("am/pm", "a/p") for t in tokens)
    out, last = [], ""
    for k, t in enumerate(tokens):
        low = t.lower()
        if t.startswith("["):
            continue  # a locale or colour code
        if t.startswith('"'):
            out.append(t[1:-1])
            continue
        if t.startswith("\\"):
            out.append(t[1:])
            continue
        nxt = next((u.lower() for u in tokens[k + 1 :] if u.strip(" :.,/-")), "")
        hour = getattr(d, "hour", 0)
        if low in ("m", "mm") and (last in ("h", "hh") or nxt.startswith("s")):
            out.append(f"{getattr(d, 'minute', 0):0{len(low)}d}")
        elif low in ("yyyy", "yy"):
            out.append(f"{d.year:04d}" if low == "yyyy" else f"{d.year % 100:02d}")
        elif low in ("m", "mm"):
            out.append(f"{d.month:0{len(low)}d}")
        elif low == "mmm":
            out.append(_MONTH_NAMES[d.month - 1][:3])
        elif low in ("mmmm", "mmmmm"):
            name = _MONTH_NAMES[d.month - 1]
            out.append(name if low == "mmmm" else name[0])
        elif low in ("d", "dd"):
            out.append(f"{d.day:0{len(low)}d}")
        elif low in ("ddd", "dddd"):
            name = _DAY_NAMES[d.weekday()]
            out.append(name[:3] if low == "ddd" else name)
        elif low in ("h", "hh"):
            h = (hour % 12 or 12) if twelve else hour
            out.append(f"{h:0{len(low)}d}")
        elif low in ("s", "ss"):
            out.append(f"{getattr(d, 'second', 0):0{len(low)}d}")
        elif low in ("am/pm", "a/p"):
            pm = hour >= 12
            out.append(("PM" if pm else "AM") if low == "am/pm" else ("P" if pm else "A"))
        else:
            out.append(t)
        if low.strip(" :.,/-"):
            last = low
    return "".join(out)


_PLAIN_CODE = re.compile(r"[^\s\u00a0\u2007\u202f]+(?: [^\s\u00a0\u2007\u202f]+)*")


def item_codes(values: list[Any], formats: list[str]) -> list[str | None]:
    """:func:`item_code` of each value, with a quick pass for plain text codes.

    A code that is text without spaces at its ends, runs of spaces or escapes is its own
    code: at 100,000 items this one match saves the general function's several passes.
    """
    plain = _PLAIN_CODE.fullmatch
    return [
        v if type(v) is str and "_x" not in v and plain(v) else item_code(v, f)
        for v, f in zip(values, formats, strict=True)
    ]


def texts(values: list[Any]) -> list[str | None]:
    """:func:`text` of each value, with a quick pass for text that needs no change."""
    return [
        v
        if type(v) is str and v and not v[0].isspace() and not v[-1].isspace() and "_x" not in v
        else text(v)
        for v in values
    ]


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
    if isinstance(value, bool) or (
        isinstance(value, str) and value.strip().upper() in ("TRUE", "FALSE")
    ):
        return None, "a yes/no value, not a number"
    if isinstance(value, (_dt.datetime, _dt.date, _dt.time, _dt.timedelta)):
        return None, "a date or time where a number belongs"
    if isinstance(value, (int, float)):
        x = float(value)
        if not math.isfinite(x):
            return None, "not a finite number"
        if rate and percent_unit and "%" not in number_format and x > 1:
            x /= 100.0
        return x, None
    s = _SPACES.sub("", unescape(str(value)))
    if s.startswith("#"):
        return None, f"the spreadsheet error {s}"
    pct = s.endswith("%")
    if pct:
        s = s[:-1]
    typed = number_from_text(s)
    if typed is None:
        return None, "text where a number belongs"
    x = typed
    if not math.isfinite(x):
        return None, "not a finite number"
    if pct or (rate and percent_unit and x > 1):
        x /= 100.0
    return x, None


_CURRENCY_SIGNS = "$€£¥₹₽¢₩₺₪฿₫"
_CURRENCY = re.compile(
    r"^(?:[A-Z]{3}|[A-Z]{1,2}\$|[" + _CURRENCY_SIGNS + r"])|"
    r"(?:[A-Z]{3}|[" + _CURRENCY_SIGNS + r"]|kr|zł|,-|\.-)$"
)
_COMMA_GROUPS = re.compile(r"^\d{1,3}(,\d{3})+$")
_DOT_GROUPS = re.compile(r"^\d{1,3}(\.\d{3})+$")
_QUOTE_GROUPS = re.compile(r"^\d{1,3}(['’]\d{3})+$")


def number_from_text(s: str) -> float | None:
    """A number typed as text, as people type them; None when it is not one.

    ``s`` has no spaces (non-breaking and thin ones included) and no trailing "%". Read:
    a currency sign or code before or after ("$12.50", "12,50€", "EUR 12", "12.50 USD"),
    a sign before or after the currency, accounting brackets for a negative ("(12.50)"),
    thousands separators (1,250.50; 1.250,50; 1'250.50; 1 250,50), and the decimal comma
    (12,5). Where both marks appear, the last one is the decimal mark. "1,250" alone reads
    as one thousand two hundred and fifty, as a spreadsheet in English would.
    """
    if _PLAIN_NUMBER.match(s):
        return float(s)
    neg = False
    bracketed = s.startswith("(") and s.endswith(")")
    if bracketed:
        neg, s = True, s[1:-1]
    signed = False
    for _ in range(3):  # a sign and a currency, in either order, at either end
        if s[:1] in ("+", "-"):
            if signed:
                return None
            signed, neg = True, neg ^ (s[0] == "-")
            s = s[1:]
            continue
        stripped = _CURRENCY.sub("", s, count=1)
        if stripped == s or not stripped:
            break
        s = stripped
    if bracketed and signed:
        return None
    if s.endswith("-") and s[:-1].replace(",", "").replace(".", "").isdigit():
        neg, s = not neg, s[:-1]  # 12.50- as some ledgers print a debit
    plain = _separators(s)
    if plain is None or not _PLAIN_NUMBER.match(plain) or plain[:1] in "+-":
        return None
    x = float(plain)
    return -x if neg else x


def _separators(s: str) -> str | None:
    """``s`` with thousands separators removed and a decimal comma made a point."""
    if not s or not s[0].isdigit() and s[0] != ".":
        return None
    comma, dot = s.rfind(","), s.rfind(".")
    if comma >= 0 and dot >= 0:
        mark = "," if comma > dot else "."
        whole, frac = s.rsplit(mark, 1)
        groups = _DOT_GROUPS if mark == "," else _COMMA_GROUPS
        if not frac.isdigit() or not (
            groups.match(whole) or _QUOTE_GROUPS.match(whole) or whole.isdigit()
        ):
            return None
        return (
            whole.replace(",", "").replace(".", "").replace("'", "").replace("’", "") + "." + frac
        )
    if comma >= 0:
        if _COMMA_GROUPS.match(s):
            return s.replace(",", "")
        whole, frac = s.rsplit(",", 1)
        if (
            whole.isdigit() or _DOT_GROUPS.match(whole) or _QUOTE_GROUPS.match(whole)
        ) and frac.isdigit():
            return whole.replace("'", "").replace("’", "") + "." + frac
        return None
    if _DOT_GROUPS.match(s) and s.count(".") > 1:
        return s.replace(".", "")
    whole, _, frac = s.partition(".")
    if _QUOTE_GROUPS.match(whole):
        return whole.replace("'", "").replace("’", "") + ("." + frac if frac else "")
    return s


def describe(value: Any) -> str:
    """The raw value as a user would recognise it in a message."""
    if isinstance(value, bool):
        return "TRUE" if value else "FALSE"
    if isinstance(value, str):
        return repr(value)
    if (
        isinstance(value, float)
        and math.isfinite(value)
        and value == int(value)
        and abs(value) < 1e15
    ):
        return str(int(value))
    return str(value)


# --- dates typed as text, or stored as plain numbers ---------------------------------------

_MONTHS = {
    m: k + 1
    for k, m in enumerate(
        ("jan", "feb", "mar", "apr", "may", "jun", "jul", "aug", "sep", "oct", "nov", "dec")
    )
}
_NUMERIC_DATE = re.compile(r"^(\d{1,2})([/.-])(\d{1,2})\2(\d{4})$")
_DAY_MONTH_YEAR = re.compile(r"^(\d{1,2})[\s./-]*([A-Za-z]{3,9})\.?[\s./,-]*(\d{4})$")
_MONTH_DAY_YEAR = re.compile(r"^([A-Za-z]{3,9})\.?\s*(\d{1,2})(?:st|nd|rd|th)?,?\s+(\d{4})$")
_MONTH_YEAR = re.compile(r"^([A-Za-z]{3,9})\.?[\s./-]*(\d{4})$")
SERIAL_RANGE = (20_000, 80_000)  # Excel day numbers of 1954-10-03 .. 2119-01-10
_EXCEL_DAY0 = _dt.datetime(1899, 12, 30)  # day 0 of the 1900 date system (after 1900-03-01)


def _month(word: str) -> int | None:
    w = word.lower()
    k = _MONTHS.get(w[:3])
    full = (
        "january",
        "february",
        "march",
        "april",
        "may",
        "june",
        "july",
        "august",
        "september",
        "october",
        "november",
        "december",
    )
    if k is None or not (w == w[:3] or w == "sept" or full[k - 1].startswith(w)):
        return None
    return k


def typed_periods(raw: list[Any]) -> tuple[list[Any], str | None, str]:
    """History periods with dates typed as text or stored as day numbers made dates.

    Returns the values (a date for each one read as such, the rest unchanged), a note for
    the user when something was read this way (or could not be: day/month order that
    nothing in the column settles) and the note's severity ("info" or "warning"). ISO dates
    (2024-01-31) and real date cells are left as they are. Numbers become dates only when
    every period is a whole number in :data:`SERIAL_RANGE`, which period numbers (1, 2,
    3 ...) never are.
    """
    values = [v for v in raw if not is_blank(v)]
    if not values:
        return raw, None, "info"
    nums = [v for v in values if isinstance(v, (int, float)) and not isinstance(v, bool)]
    if len(nums) == len(values) and all(
        float(v).is_integer() and SERIAL_RANGE[0] <= v <= SERIAL_RANGE[1] for v in nums
    ):
        out = [_EXCEL_DAY0 + _dt.timedelta(days=int(v)) if not is_blank(v) else v for v in raw]
        first = min(nums)
        return (
            out,
            (
                f"The periods are plain numbers such as {int(first)}, which is how a "
                "spreadsheet stores a date whose cell lost its date format, so they were "
                f"read as dates ({int(first)} = "
                f"{(_EXCEL_DAY0 + _dt.timedelta(days=int(first))).date().isoformat()}). "
                "Format the column as dates to see them as such."
            ),
            "info",
        )
    texts = [str(v).strip() for v in values if isinstance(v, str)]
    if not texts:
        return raw, None, "info"
    order = _day_month_order(texts)
    out, example, ambiguous = [], None, None
    for v in raw:
        d = _text_date(v.strip(), order) if isinstance(v, str) else None
        if d is None and isinstance(v, str) and order is None and _NUMERIC_DATE.match(v.strip()):
            ambiguous = ambiguous or v.strip()
        if d is not None and example is None:
            example = (v.strip(), d)
        out.append(d if d is not None else v)
    if ambiguous is not None:
        return (
            raw,
            (
                f"Periods are written like '{ambiguous}', which could be day/month or "
                "month/day, and no date in the column settles it (no day above 12), so "
                "they were read as labels, not dates. Write them as 2024-04-03 "
                "(year-month-day) or make the cells real dates."
            ),
            "warning",
        )
    if example is None:
        return raw, None, "info"
    shown, d = example
    return (
        out,
        (
            f"Periods typed as text, such as '{shown}', were read as dates "
            f"('{shown}' = {d.date().isoformat()})."
        ),
        "info",
    )


def _day_month_order(texts: list[str]) -> str | None:
    """ "dmy" or "mdy" for numeric dates like 03/04/2024, when the column settles it."""
    day_first = month_first = False
    for t in texts:
        m = _NUMERIC_DATE.match(t)
        if m:
            a, b = int(m.group(1)), int(m.group(3))
            day_first |= a > 12
            month_first |= b > 12
            if m.group(2) == ".":  # 31.01.2024: the dotted form is day first everywhere
                day_first = True
    if day_first and not month_first:
        return "dmy"
    if month_first and not day_first:
        return "mdy"
    return None


def _text_date(t: str, order: str | None) -> _dt.datetime | None:
    """One text date, or None."""
    try:
        m = _NUMERIC_DATE.match(t)
        if m:
            if order is None:
                return None
            a, b, y = int(m.group(1)), int(m.group(3)), int(m.group(4))
            return _dt.datetime(y, b, a) if order == "dmy" else _dt.datetime(y, a, b)
        m = _DAY_MONTH_YEAR.match(t)
        if m and (month := _month(m.group(2))):
            return _dt.datetime(int(m.group(3)), month, int(m.group(1)))
        m = _MONTH_DAY_YEAR.match(t)
        if m and (month := _month(m.group(1))):
            return _dt.datetime(int(m.group(3)), month, int(m.group(2)))
        m = _MONTH_YEAR.match(t)
        if m and (month := _month(m.group(1))):
            return _dt.datetime(int(m.group(2)), month, 1)
    except ValueError:  # 31 February and the like: not a date
        return None
    return None
