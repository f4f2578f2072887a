"""A tiny evaluator for the handful of spreadsheet functions the generated sheets use.

Test helper only. It re-computes a formula read back with openpyxl from the cells it
names (their cached values, read with data_only=True), so a test can check that a formula
gives the number the tool computed. Semantics follow OpenFormula (ISO/IEC 26300-2:2015,
"OpenDocument Formula") as Excel and LibreOffice agree on them, from memory:
- an empty cell is 0 in arithmetic and equal to "" in a comparison;
- SUM, SUMIF, COUNTIF skip text and empty cells;
- a SUMIF/COUNTIF criterion "<>" matches non-empty cells, ">0" compares numbers, and
  plain text matches text equal to it ignoring case;
- inside SUMPRODUCT a range is an array: EXACT, comparisons, unary minus and * work
  element by element (TRUE is 1 under minus), EXACT compares the text of its arguments
  exactly (an empty cell is ""), and SUMPRODUCT multiplies its arrays element by element
  and adds the products, counting anything not a number (text, TRUE, empty) as 0.
"""

from __future__ import annotations

import math
import re
from collections.abc import Callable
from typing import Any

_TOKEN = re.compile(
    r"""
    (?P<ws>\s+)
  | (?P<str>"(?:[^"]|"")*")
  | (?P<ref>(?:(?:'(?:[^']|'')+'|[A-Za-z_][\w. ]*)!)?\$?[A-Z]{1,3}\$?\d+(?::\$?[A-Z]{1,3}\$?\d+)?)
  | (?P<num>\d+(?:\.\d+)?(?:[eE][-+]?\d+)?)
  | (?P<func>[A-Z][A-Z0-9.]*)\(
  | (?P<op><>|<=|>=|[-+*/^&=<>(),])
""",
    re.VERBOSE,
)

FUNCTION_NAME = re.compile(r"([A-Z][A-Z0-9.]*)\(")

Getter = Callable[[str, str], Any]  # (sheet, "B7") -> cached value


def functions_in(formula: str) -> set[str]:
    """The function names a formula calls (text inside string literals ignored)."""
    without_strings = re.sub(r'"(?:[^"]|"")*"', '""', formula)
    return set(FUNCTION_NAME.findall(without_strings))


def tokens(formula: str) -> list[tuple[str, str]]:
    text = formula[1:] if formula.startswith("=") else formula
    out, pos = [], 0
    while pos < len(text):
        m = _TOKEN.match(text, pos)
        if not m:
            raise ValueError(f"cannot read {text[pos:]!r} in {formula!r}")
        pos = m.end()
        kind = m.lastgroup
        if kind != "ws":
            out.append((kind, m.group(kind)))
    return out


def _cells(ref: str) -> list[str]:
    a, _, b = ref.partition(":")
    ca, ra = re.fullmatch(r"\$?([A-Z]+)\$?(\d+)", a).groups()
    if not b:
        return [f"{ca}{ra}"]
    cb, rb = re.fullmatch(r"\$?([A-Z]+)\$?(\d+)", b).groups()
    from openpyxl.utils import column_index_from_string as ci
    from openpyxl.utils import get_column_letter as gl

    return [f"{gl(c)}{r}" for r in range(int(ra), int(rb) + 1) for c in range(ci(ca), ci(cb) + 1)]


def _num(v: Any) -> float:
    if v is None or v == "":
        return 0.0
    if isinstance(v, bool):
        return float(v)
    if isinstance(v, (int, float)):
        return float(v)
    raise TypeError(f"text {v!r} in arithmetic")


def _matches(value: Any, crit: Any) -> bool:
    if isinstance(crit, str):
        m = re.match(r"(<>|<=|>=|<|>|=)?(.*)$", crit, re.S)
        op, rest = m.group(1) or "", m.group(2)
        if op == "<>" and rest == "":
            return value not in (None, "")
        try:
            target: Any = float(rest)
        except ValueError:
            target = rest
        if op in ("", "=") and isinstance(target, str):
            return isinstance(value, str) and value.lower() == target.lower()
        if isinstance(target, float):
            if not isinstance(value, (int, float)) or isinstance(value, bool):
                return op == "<>"
            return {
                "": value == target,
                "=": value == target,
                "<>": value != target,
                "<": value < target,
                ">": value > target,
                "<=": value <= target,
                ">=": value >= target,
            }[op]
        return (op == "<>") != (isinstance(value, str) and value.lower() == target.lower())
    if crit is None:
        return value in (None, "")
    return isinstance(value, (int, float)) and value == crit


class Evaluator:
    """Evaluate one formula on ``sheet`` with cell values from ``get``."""

    def __init__(self, get: Getter, sheet: str):
        self.get = get
        self.sheet = sheet

    def __call__(self, formula: str) -> Any:
        self.toks = tokens(formula)
        self.i = 0
        value = self.compare()
        if self.i != len(self.toks):
            raise ValueError(f"left over in {formula!r}: {self.toks[self.i :]}")
        return value

    def peek(self) -> tuple[str, str] | None:
        return self.toks[self.i] if self.i < len(self.toks) else None

    def take(self, text: str | None = None) -> tuple[str, str]:
        tok = self.toks[self.i]
        if text is not None and tok[1] != text:
            raise ValueError(f"expected {text}, got {tok}")
        self.i += 1
        return tok

    def compare(self) -> Any:
        a = self.concat()
        while (t := self.peek()) and t[1] in ("=", "<>", "<", ">", "<=", ">="):
            op = self.take()[1]
            b = self.concat()
            a = self._each(lambda x, y, op=op: self._cmp(op, x, y), a, b)
        return a

    @staticmethod
    def _each(fn: Callable[..., Any], *args: Any) -> Any:
        """fn over scalars, or element by element where an argument is a range."""
        arrays = [a[1] for a in args if isinstance(a, tuple)]
        if not arrays:
            return fn(*args)
        n = len(arrays[0])
        cols = [a[1] if isinstance(a, tuple) else [a] * n for a in args]
        return ("range", [fn(*vals) for vals in zip(*cols, strict=True)])

    @staticmethod
    def _cmp(op: str, a: Any, b: Any) -> bool:
        if a is None:
            a = "" if isinstance(b, str) else 0.0
        if b is None:
            b = "" if isinstance(a, str) else 0.0
        if isinstance(a, str) != isinstance(b, str):  # a number sorts before any text
            a, b = (0, 1) if not isinstance(a, str) else (1, 0)
            if op in ("=", "<>"):
                return op == "<>"
        return {"=": a == b, "<>": a != b, "<": a < b, ">": a > b, "<=": a <= b, ">=": a >= b}[op]

    def concat(self) -> Any:
        a = self.add()
        while (t := self.peek()) and t[1] == "&":
            self.take()
            a = str(self._scalar(a) or "") + str(self._scalar(self.add()) or "")
        return a

    def add(self) -> Any:
        a = self.mul()
        while (t := self.peek()) and t[1] in ("+", "-"):
            op = self.take()[1]
            b = _num(self._scalar(self.mul()))
            a = _num(self._scalar(a)) + b if op == "+" else _num(self._scalar(a)) - b
        return a

    def mul(self) -> Any:
        a = self.power()
        while (t := self.peek()) and t[1] in ("*", "/"):
            op = self.take()[1]
            b = self.power()
            a = self._each(
                lambda x, y, op=op: _num(x) * _num(y) if op == "*" else _num(x) / _num(y), a, b
            )
        return a

    def power(self) -> Any:
        a = self.unary()
        while (t := self.peek()) and t[1] == "^":
            self.take()
            a = _num(self._scalar(a)) ** _num(self._scalar(self.unary()))
        return a

    def unary(self) -> Any:
        t = self.peek()
        if t and t[1] in ("-", "+"):
            self.take()
            return self._each(lambda x: -_num(x) if t[1] == "-" else _num(x), self.unary())
        return self.primary()

    def primary(self) -> Any:
        kind, text = self.take()
        if kind == "num":
            return float(text)
        if kind == "str":
            return text[1:-1].replace('""', '"')
        if kind == "ref":
            return self._ref(text)
        if text == "(":
            v = self.compare()
            self.take(")")
            return v
        if kind == "func":
            args = []
            if self.peek() and self.peek()[1] == ")":
                self.take(")")
            else:
                while True:
                    args.append(self.compare())
                    if self.take()[1] == ")":
                        break
            return self._call(text, args)
        raise ValueError(f"unexpected {text!r}")

    def _ref(self, text: str) -> Any:
        sheet = self.sheet
        if "!" in text:
            sheet_part, text = text.rsplit("!", 1)
            sheet = (
                sheet_part[1:-1].replace("''", "'") if sheet_part.startswith("'") else sheet_part
            )
        cells = _cells(text)
        if ":" in text:
            return ("range", [self.get(sheet, c) for c in cells])
        return self.get(sheet, cells[0])

    @staticmethod
    def _scalar(v: Any) -> Any:
        if isinstance(v, tuple):
            raise TypeError("a range where one value belongs")
        return v

    @staticmethod
    def _values(args: list[Any]) -> list[Any]:
        out: list[Any] = []
        for a in args:
            out.extend(a[1] if isinstance(a, tuple) else [a])
        return out

    def _call(self, name: str, args: list[Any]) -> Any:
        if name == "IF":
            cond = self._scalar(args[0])
            return args[1] if cond else (args[2] if len(args) > 2 else False)
        if name in ("SUM", "MAX", "MIN"):
            nums = [
                float(v)
                for v in self._values(args)
                if isinstance(v, (int, float)) and not isinstance(v, bool)
            ]
            if name == "SUM":
                return math.fsum(nums)
            return (max if name == "MAX" else min)(nums) if nums else 0.0
        if name == "SQRT":
            return math.sqrt(_num(self._scalar(args[0])))
        if name == "ABS":
            return abs(_num(self._scalar(args[0])))
        if name == "ROUND":
            return round(_num(args[0]), int(_num(args[1])))
        if name == "SUMIF":
            rng, crit = args[0][1], self._scalar(args[1])
            sums = args[2][1] if len(args) > 2 else rng
            return math.fsum(
                float(s)
                for v, s in zip(rng, sums, strict=True)
                if _matches(v, crit) and isinstance(s, (int, float))
            )
        if name == "EXACT":

            def text(v: Any) -> str:
                if v is None:
                    return ""
                if isinstance(v, float) and v.is_integer():
                    return str(int(v))
                return str(v)

            return self._each(lambda x, y: text(x) == text(y), args[0], args[1])
        if name == "SUMPRODUCT":
            arrays = [a[1] if isinstance(a, tuple) else [a] for a in args]

            def number(v: Any) -> float:
                ok = isinstance(v, (int, float)) and not isinstance(v, bool)
                return float(v) if ok else 0.0

            return math.fsum(
                math.prod(number(v) for v in vals) for vals in zip(*arrays, strict=True)
            )
        if name == "COUNTIF":
            return float(sum(1 for v in args[0][1] if _matches(v, self._scalar(args[1]))))
        if name == "COUNTIFS":
            pairs = [(args[k][1], self._scalar(args[k + 1])) for k in range(0, len(args), 2)]
            n = len(pairs[0][0])
            return float(sum(1 for j in range(n) if all(_matches(r[j], c) for r, c in pairs)))
        raise ValueError(f"function {name} not known to the test evaluator")


def workbook_getter(wb_values: Any) -> Getter:
    """Cell values from an openpyxl workbook loaded with data_only=True."""

    def get(sheet: str, cell: str) -> Any:
        return wb_values[sheet][cell].value

    return get
