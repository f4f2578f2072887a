"""The generated output sheets, written with xlsxwriter to a standalone workbook.

Another module splices these sheets into a copy of the user's workbook; writing them to a
file of their own keeps this module simple and lets the sheets be checked on their own.
Each sheet has a module of its own (summary_sheet, reorder_sheet, policy_sheet,
compare_sheet, warnings_sheet, method_sheet); shared formats and safe cell writing are in
sheetkit.

Reading order, for the three people who act on the file:
1. Summary: the owner's and the accountant's page: headlines, totals, charts, breakdowns
   by ABC class, category and supplier, the costliest items. What a person should see on
   opening the file.
2. Reorder now: the purchaser's action list, one click from the Summary, set up to print.
3. Policy: the detail behind every total, one row per item, with live formulas an
   accountant can audit.
4. Today vs plan: today's policy against the recommended one, item by item, built on the
   Policy sheet's figures.
5. Warnings: the reference list the other sheets point to, each line linked to its cell.
6. How it works: the method, the settings used and where they came from, the cautions; the
   manual, read once and looked up after.
7. Year ahead (only when an item is planned with its season or trend): its reorder point,
   order quantity and safety stock month by month (season_sheet).
8. Stock trace (only with a back-test): the simulated stock of a few items, charted.

Sheets are written in dependency order (Policy first, Summary last) so that later sheets'
formulas can point at cells already placed.
"""

from __future__ import annotations

import re
import tempfile
from collections.abc import Mapping
from pathlib import Path

import xlsxwriter

from ..errors import OutputTooLarge
from ..report import Report
from .atomic import atomic_output
from .bulk import BlockSheet, CellBlock
from .compare_sheet import write_compare
from .method_sheet import write_method
from .policy_sheet import write_policy
from .reorder_sheet import write_reorder
from .season_sheet import write_seasons
from .sheetkit import SEVERITY_WORDS, Context, clean_text, money_format
from .summary_sheet import write_summary
from .trace_sheet import write_trace
from .warnings_sheet import write_warnings

__all__ = [
    "DEFAULT_SHEET_NAMES",
    "SEVERITY_WORDS",
    "SHEET_ORDER",
    "OPTIONAL_SHEET_ORDER",
    "WORKBOOK_OPTIONS",
    "clean_text",
    "money_format",
    "resolve_sheet_names",
    "write_generated_workbook",
]

DEFAULT_SHEET_NAMES = {
    "summary": "Summary",
    "reorder": "Reorder now",
    "policy": "Policy",
    "compare": "Today vs plan",
    "warnings": "Warnings",
    "method": "How it works",
    "trace": "Stock trace",
    "seasons": "Year ahead",
}

#: Reading order of the generated sheets (see the module docstring for why).
SHEET_ORDER: tuple[str, ...] = ("summary", "reorder", "policy", "compare", "warnings", "method")
#: Sheets written after those only when the report has something for them (the back-test's
#: stock trace).
OPTIONAL_SHEET_ORDER: tuple[str, ...] = ("seasons", "trace")

WORKBOOK_OPTIONS = {
    "strings_to_formulas": False,
    "strings_to_urls": False,
    "strings_to_numbers": False,
    "nan_inf_to_errors": False,
}

_BAD_SHEET_CHARS = re.compile(r"[\[\]:*?/\\]")


def resolve_sheet_names(sheet_names: Mapping[str, str] | None) -> dict[str, str]:
    """The final sheet names: defaults overridden by ``sheet_names``, made valid for Excel.

    Characters Excel forbids are removed, names are cut to 31 characters and made unique
    (case-insensitively) by a numeric suffix, so a bad request never stops the run.
    """
    wanted = dict(DEFAULT_SHEET_NAMES)
    if sheet_names:
        unknown = set(sheet_names) - set(DEFAULT_SHEET_NAMES)
        if unknown:
            raise ValueError(f"unknown sheet keys: {sorted(unknown)}")
        wanted.update(sheet_names)
    out: dict[str, str] = {}
    taken: set[str] = set()
    for key in SHEET_ORDER + OPTIONAL_SHEET_ORDER:
        name = _BAD_SHEET_CHARS.sub("", clean_text(wanted[key]) or "").replace("\n", " ")
        name = name.strip().strip("'").strip()[:31] or DEFAULT_SHEET_NAMES[key]
        base, n = name, 2
        while name.lower() in taken:
            suffix = f" ({n})"
            name = base[: 31 - len(suffix)] + suffix
            n += 1
        taken.add(name.lower())
        out[key] = name
    return out


#: Rows in one sheet (Excel's and LibreOffice's limit since 2007 / 7.x).
MAX_SHEET_ROWS = 1_048_576


def rows_needed(report: Report) -> dict[str, int]:
    """An upper bound on the rows each list-like generated sheet takes, by role.

    Policy: a header and one row per item; Reorder now: a title block, one row per item to
    order, a subtotal and a blank line per supplier, the total and the lines to sign; Today
    vs plan: a title block, one row per item compared and the totals. The Warnings sheet is
    cut rather than refused (see warnings_sheet), so it is not counted here.
    """
    n = len(report.results) if report.results is not None else 0
    reorder = report.reorder if report.reorder is not None else None
    n_reorder = len(reorder) if reorder is not None else 0
    suppliers = (
        reorder["supplier"].nunique(dropna=False)
        if reorder is not None and "supplier" in getattr(reorder, "columns", ())
        else n_reorder
    )
    return {"policy": 1 + n, "reorder": 5 + n_reorder + 3 * suppliers + 10, "compare": 5 + n + 5}


def check_fits(report: Report) -> None:
    """Raise :class:`OutputTooLarge` when a generated sheet would pass the row limit.

    xlsxwriter silently drops rows past the limit, so this is checked before writing.
    """
    needed = rows_needed(report)
    over = {k: v for k, v in needed.items() if v > MAX_SHEET_ROWS}
    if over:
        role, rows = max(over.items(), key=lambda kv: kv[1])
        n = len(report.results) if report.results is not None else 0
        raise OutputTooLarge(
            f"The results for {n:,} items would take {rows:,} rows in the "
            f"'{DEFAULT_SHEET_NAMES[role]}' sheet, more than the {MAX_SHEET_ROWS:,} a sheet "
            "can hold, so no workbook was written. Split the items into several workbooks "
            "(by supplier or category, say) and plan each, or write the table with --csv or "
            "--json alone."
        )


def write_generated_workbook(
    path: Path,
    report: Report,
    sheet_names: Mapping[str, str] | None = None,
    *,
    link_to_input: bool = True,
    deferred: dict[int, CellBlock] | None = None,
) -> list[str]:
    """Write the generated sheets to a new .xlsx at ``path``; return their names in order.

    The order is :data:`SHEET_ORDER` (why: module docstring). ``sheet_names`` overrides any
    of the default names by role (the keys of :data:`DEFAULT_SHEET_NAMES`); formulas refer
    to the final names. ``link_to_input``: the Warnings sheet links each problem to its cell
    in the user's sheets; pass False when the output will not carry those sheets. The file is
    written beside ``path`` under a temporary name and moved into place when complete
    (``atomic_output``), so a failure never leaves half a workbook.

    ``deferred``: when given (a dict, filled here), the big tables' cell blocks are not
    written into the file but stand as markers, and are put into ``deferred`` by number for
    :func:`~xlpolicy.writing.package.merge_generated_sheets` to render (bulk.py). The file
    is then only fit for that merge.
    """
    names = resolve_sheet_names(sheet_names)
    path = Path(path)
    check_fits(report)
    # xlsxwriter keeps each sheet's XML in temporary files until it closes the workbook;
    # they go into a folder of ours, removed however the writing ends (a full disk, a
    # file-size limit, Ctrl-C), rather than into the system's temporary folder.
    with atomic_output(path) as tmp, tempfile.TemporaryDirectory(prefix="xlpolicy-") as parts:
        wb = xlsxwriter.Workbook(str(tmp), {**WORKBOOK_OPTIONS, "tmpdir": parts})
        try:
            ctx = Context(wb, report, names, link_to_input=link_to_input)
            sheets = {
                key: wb.add_worksheet(names[key], worksheet_class=BlockSheet) for key in SHEET_ORDER
            }
            wb.set_properties(
                {
                    "title": f"Stock policy for {clean_text(report.source_name)}",
                    "comments": "Generated by xlpolicy",
                }
            )
            if _has_season_plan(report):  # items planned with a season or trend
                sheets["seasons"] = wb.add_worksheet(names["seasons"], worksheet_class=BlockSheet)
            if report.trace:  # the back-test's sheet, last
                sheets["trace"] = wb.add_worksheet(names["trace"], worksheet_class=BlockSheet)
            write_policy(ctx, sheets["policy"])
            write_reorder(ctx, sheets["reorder"])
            write_compare(ctx, sheets["compare"])
            write_warnings(ctx, sheets["warnings"])
            write_method(ctx, sheets["method"])
            if "trace" in sheets:
                write_trace(ctx, sheets["trace"])
            if "seasons" in sheets:
                write_seasons(ctx, sheets["seasons"])
            write_summary(ctx, sheets["summary"])
            sheets["summary"].activate()
            if deferred is not None:
                for sheet in sheets.values():
                    for block in sheet.blocks:
                        block.deferred_id = len(deferred)
                        deferred[block.deferred_id] = block
        finally:
            wb.close()
    return (
        [names[key] for key in SHEET_ORDER]
        + ([names["seasons"]] if _has_season_plan(report) else [])
        + ([names["trace"]] if report.trace else [])
    )


def _has_season_plan(report: Report) -> bool:
    plan = getattr(report, "season_plan", None)
    return plan is not None and not plan.empty
