"""Problems found in a workbook or a policy, kept as data.

Every check in xlpolicy reports through :class:`Problem` rather than raising, so that one
run can tell the user about every bad cell at once, the console and the warnings sheet can
show the same list, and tests can assert on sheet, cell and wording.
"""

from __future__ import annotations

import re
from collections.abc import Iterator
from dataclasses import dataclass, field
from enum import Enum
from typing import Any

from .errors import UnusableWorkbook

__all__ = ["Problem", "ProblemLog", "Severity", "UnusableWorkbook"]


class Severity(str, Enum):
    """How bad a problem is, from the user's point of view.

    ``fatal``: the workbook cannot be used at all (exit status 1).
    ``error``: the row or item is skipped; the run goes on.
    ``warning``: the item is planned, but a number may not be trustworthy.
    ``info``: worth knowing; nothing is wrong.
    """

    FATAL = "fatal"
    ERROR = "error"
    WARNING = "warning"
    INFO = "info"

    @property
    def word(self) -> str:
        """The one word for this severity wherever it is shown (console and sheets)."""
        return "note" if self is Severity.INFO else self.value

    @property
    def rank(self) -> int:
        """Sort key: most severe first."""
        return {"fatal": 0, "error": 1, "warning": 2, "info": 3}[self.value]


@dataclass(frozen=True)
class Problem:
    """One thing wrong (or worth saying) about the input or a result.

    ``cell`` is an A1 reference as the user sees it in their spreadsheet program ("C7"),
    or "" when the problem belongs to a whole sheet or item. ``value`` is the raw value
    found, as the user typed it, so they can recognise it.
    """

    severity: Severity
    sheet: str
    cell: str
    item: str
    value: Any
    message: str
    code: str = ""

    def __post_init__(self) -> None:
        object.__setattr__(self, "message", tidy(self.message))

    def where(self) -> str:
        """Human-readable location, e.g. "Items!C7" or "History"."""
        if self.sheet and self.cell:
            return f"{self.sheet}!{self.cell}"
        return self.sheet or ""

    def as_dict(self) -> dict[str, Any]:
        """Plain dict, for JSON output and tests."""
        return {
            "severity": self.severity.value,
            "sheet": self.sheet,
            "cell": self.cell,
            "item": self.item,
            "value": _plain(self.value),
            "message": self.message,
            "code": self.code,
        }


_DOUBLE_STOP = re.compile(r"(?<!\.)\.(?:\s*\.)(?!\.)")


def tidy(message: str) -> str:
    """A message without doubled full stops (". ." or ".."), which appear where a part
    that ends a sentence is put before another's full stop; an ellipsis is kept."""
    return _DOUBLE_STOP.sub(".", message) if "." in message else message


def _plain(value: Any) -> Any:
    """A JSON-friendly form of a raw cell value."""
    if value is None or isinstance(value, (str, int, float, bool)):
        return value
    return str(value)


@dataclass
class ProblemLog:
    """An ordered collection of problems with small helpers for the common cases."""

    problems: list[Problem] = field(default_factory=list)

    def add(
        self,
        severity: Severity,
        message: str,
        *,
        sheet: str = "",
        cell: str = "",
        item: str = "",
        value: Any = None,
        code: str = "",
    ) -> Problem:
        """Record a problem and return it."""
        p = Problem(severity, sheet, cell, item, value, message, code)
        self.problems.append(p)
        return p

    def fatal(self, message: str, **kw: Any) -> Problem:
        return self.add(Severity.FATAL, message, **kw)

    def error(self, message: str, **kw: Any) -> Problem:
        return self.add(Severity.ERROR, message, **kw)

    def warning(self, message: str, **kw: Any) -> Problem:
        return self.add(Severity.WARNING, message, **kw)

    def info(self, message: str, **kw: Any) -> Problem:
        return self.add(Severity.INFO, message, **kw)

    def extend(self, other: ProblemLog | list[Problem]) -> None:
        self.problems.extend(other.problems if isinstance(other, ProblemLog) else other)

    @property
    def has_fatal(self) -> bool:
        return any(p.severity is Severity.FATAL for p in self.problems)

    def count(self, severity: Severity) -> int:
        return sum(1 for p in self.problems if p.severity is severity)

    def sorted(self) -> list[Problem]:
        """Most severe first, then in the order found (stable)."""
        return sorted(self.problems, key=lambda p: p.severity.rank)

    def __iter__(self) -> Iterator[Problem]:
        return iter(self.problems)

    def __len__(self) -> int:
        return len(self.problems)
