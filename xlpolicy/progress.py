"""Progress reports from a long run: a callback, so the core stays free of printing.

A callback gets (stage, done, total): "Reading History", rows read so far, and the rows
expected (None when unknown). The command line draws it as a bar on a terminal; the API's
default does nothing.
"""

from __future__ import annotations

from collections.abc import Callable

Progress = Callable[[str, int, "int | None"], None]


def silent(stage: str, done: int, total: int | None) -> None:
    """The default: report nothing."""
