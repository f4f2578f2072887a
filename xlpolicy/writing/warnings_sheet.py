"""The Warnings sheet: every problem found, most severe first, each pointing at its cell.

When the user's sheets are carried over into the output, the Cell column is a link that
jumps to the cell in their input sheet; in a standalone output it is plain text.
"""

from __future__ import annotations

import math
import re

from xlsxwriter.worksheet import Worksheet

from ..problems import Problem, Severity
from .sheetkit import (
    SEVERITY_FILL,
    SEVERITY_WORDS,
    Context,
    clean_text,
    quote_sheet,
    severity,
)

TITLES = ("Severity", "Sheet", "Cell", "Item", "Value found", "Message")
_A1 = re.compile(r"^\$?([A-Z]{1,3})\$?([1-9][0-9]{0,6})$")
MAX_PROBLEM_ROWS = 1_048_575  # a sheet's rows less the header
_MAX_LINKS = 65000  # Excel keeps at most 65,530 links per sheet


_MESSAGE_CHARS = 80  # width of the message column, in characters


def link_target(sheet: str, cell: str) -> str | None:
    """The internal link for a problem's cell, e.g. "internal:'Items'!D5", or None."""
    name = clean_text(sheet) or ""
    m = _A1.match((clean_text(cell) or "").strip().upper())
    if not name or not m or len(name) > 31:
        return None
    col, row = m.groups()
    if (len(col) == 3 and col > "XFD") or int(row) > 1048576:
        return None
    return f"internal:{quote_sheet(name)}!{col}{row}"


def write_warnings(ctx: Context, ws: Worksheet) -> None:
    """One row per problem, most severe first (stable within a severity)."""
    problems: list[Problem] = sorted(ctx.report.problems or [], key=lambda p: severity(p).rank)
    cut = len(problems) - MAX_PROBLEM_ROWS
    if cut > 0:  # a sheet holds 1,048,576 rows: keep the most severe, say how many are left
        problems = problems[: MAX_PROBLEM_ROWS - 1] + [
            Problem(
                Severity.INFO,
                "",
                "",
                "",
                None,
                f"... and {cut + 1:,} more problems, not listed: a sheet cannot hold them all. "
                "Run 'xlpolicy check' or 'xlpolicy plan --json FILE' to see every one.",
                "warnings-cut",
            )
        ]
    if not problems:
        ws.write_string(0, 0, "No problems found.", ctx.styles.get(bold=True))
        ws.set_column(0, 0, 24)
        ctx.print_setup(ws, ctx.names["warnings"], -1, 0, 0, landscape=False)
        return
    head = ctx.header_props()
    for c, title in enumerate(TITLES):
        ctx.w.text(ws, 0, c, title, **head)
    generated = {n.lower() for n in ctx.names.values()}
    widths = [len(t) + 2 for t in TITLES]
    links = 0
    for r, p in enumerate(problems, start=1):
        sev = severity(p)
        tint = {
            "bg_color": SEVERITY_FILL[sev],
            "valign": "top",
            "bottom": 1,
            "bottom_color": "#FFFFFF",
        }
        for c, v in enumerate((SEVERITY_WORDS[sev], p.sheet, p.cell, p.item)):
            n = ctx.w.text(ws, r, c, v, **tint)
            widths[c] = max(widths[c], n + 2)
        target = link_target(p.sheet, p.cell) if ctx.link_to_input else None
        if (
            target is not None
            and links < _MAX_LINKS
            and (clean_text(p.sheet) or "").lower() not in generated
        ):
            shown = clean_text(p.cell) or ""
            ws.write_url(
                r,
                2,
                target,
                ctx.styles.get(**tint, font_color="#1F4E8C", underline=1),
                string=shown,
                tip=f"Go to {clean_text(p.sheet)}!{shown}",
            )
            links += 1
        ctx.w.any(ws, r, 4, p.value, **tint)
        widths[4] = max(widths[4], len(clean_text(p.value) or "") + 2)
        ctx.w.text(ws, r, 5, p.message, text_wrap=True, **tint)
        # Row height for the wrapped message: not every program fits it on opening.
        # A column of N character widths holds about 1.2 N characters of proportional
        # text (seen in LibreOffice's print of the demo); a line is 15 points.
        lines = max(1, math.ceil(len(p.message) / (_MESSAGE_CHARS * 1.2)))
        if lines > 1:
            ws.set_row(r, 15 * lines + 1)
    for c in range(5):
        ws.set_column(c, c, min(max(widths[c], 8), 30))
    ws.set_column(5, 5, _MESSAGE_CHARS)
    ws.freeze_panes(1, 0)
    ws.autofilter(0, 0, len(problems), len(TITLES) - 1)
    ws.ignore_errors({"number_stored_as_text": f"C2:E{len(problems) + 1}"})
    ctx.print_setup(ws, ctx.names["warnings"], 0, len(problems), len(TITLES) - 1)
