"""README tables generated from the contract, so the documentation cannot drift from the code.

    python -m xlpolicy.docs README.md     # rewrites the generated blocks in place

A block sits between ``<!-- generated:NAME -->`` and ``<!-- end:NAME -->`` lines; a test
checks the committed README equals what this module writes.
"""

from __future__ import annotations

import re
import sys
from collections.abc import Callable
from pathlib import Path

from .contract import ITEM_COLUMNS, PERIODS_PER_YEAR, PRICE_BREAK_COLUMNS, SETTINGS, Column


def _cell(text: str) -> str:
    return text.replace("|", "\\|")


def _aliases(col: Column, n: int = 3) -> str:
    return ", ".join(col.aliases[:n])


def items_table() -> str:
    """Markdown table of the Items columns: header as the template writes it, rule, aliases."""
    rows = [
        "| column | required | what goes in it | also recognised as |",
        "| --- | --- | --- | --- |",
    ]
    for col in ITEM_COLUMNS:
        rows.append(
            f"| {col.title} | {col.required} | {_cell(col.meaning)} | {_cell(_aliases(col))} |"
        )
    return "\n".join(rows)


def settings_table() -> str:
    """Markdown table of the Settings rows with their defaults."""
    rows = ["| setting | default | meaning |", "| --- | --- | --- |"]
    for s in SETTINGS:
        if s.key == "periods_per_year":
            default = " / ".join(f"{int(v)}" for v in PERIODS_PER_YEAR.values())
        else:
            default = "(none)" if s.default is None else str(s.default)
        rows.append(f"| {s.title} | {default} | {_cell(s.meaning)} |")
    return "\n".join(rows)


def price_breaks_table() -> str:
    """Markdown table of the optional Price breaks sheet's columns."""
    rows = ["| column | what goes in it | also recognised as |", "| --- | --- | --- |"]
    for col in PRICE_BREAK_COLUMNS:
        rows.append(f"| {col.title} | {_cell(col.meaning)} | {_cell(_aliases(col))} |")
    return "\n".join(rows)


BLOCKS = {
    "items-columns": items_table,
    "settings": settings_table,
    "price-break-columns": price_breaks_table,
}


def _filler(make: Callable[[], str]) -> Callable[[re.Match[str]], str]:
    """What replaces one block: its opening line, ``make()``'s content, its closing line."""
    return lambda m: m.group(1) + make() + "\n" + m.group(2)


def render(text: str) -> str:
    """``text`` with every generated block replaced by its current content."""
    for name, make in BLOCKS.items():
        pattern = re.compile(rf"(<!-- generated:{name} -->\n).*?(<!-- end:{name} -->)", re.DOTALL)
        text, n = pattern.subn(_filler(make), text)
        if n != 1:
            raise ValueError(f"block {name!r} found {n} times")
    return text


def main(argv: list[str] | None = None) -> int:
    """Rewrite the generated blocks of the given Markdown file (default README.md)."""
    args = sys.argv[1:] if argv is None else argv
    path = Path(args[0]) if args else Path("README.md")
    path.write_text(render(path.read_text(encoding="utf-8")), encoding="utf-8")
    print(f"updated {path}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
