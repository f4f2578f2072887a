"""Reading and checking the user's workbook: sheets, headers, cells, settings, history."""

from __future__ import annotations

import os
import stat
from collections.abc import Callable
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass
from pathlib import Path
from typing import Any, TypeGuard

import numpy as np

from ..problems import ProblemLog
from ..progress import Progress, silent
from . import typed
from .cells import code_key, known_forms
from .column_map import combine, parse_pairs, read_map_sheet
from .currency import currency_from_sheet
from .guard import Refused, unreadable_message
from .history import History, aggregate_daily_to_weeks, read_history, read_wide_typed, wide_header
from .history_file import read_history_file
from .items import ItemTable, read_items
from .price_breaks import PriceBreaks, read_price_breaks
from .settings import finish_period, read_settings, resolve_settings
from .sheet_roles import SheetRoles, by_content, by_name
from .sources import CsvFolder, open_source
from .workbook import RawSheet, WorkbookFile, layout_notes


@dataclass
class InputData:
    """Everything read from one workbook, before any computation."""

    path: Path
    items: ItemTable
    history: History | None
    settings: dict[str, Any]
    sheet_names: list[str]
    price_breaks: PriceBreaks | None = None


def read_input(
    path: Path,
    overrides: dict[str, Any],
    log: ProblemLog,
    progress: Progress = silent,
    while_waiting: Callable[[], None] | None = None,
) -> InputData | None:
    """Read Settings, Items and History; None when the workbook cannot be used (fatal logged).

    ``path`` may be an .xlsx/.xlsm, .ods or .xls workbook or a folder of CSV files.
    ``while_waiting`` is called once if the History, read in a thread, is not ready when
    Items is done: work for the idle main thread (the API imports the planner there).
    """
    wb = open_source(Path(path), log)
    progress("Opening the workbook", 0, None)
    try:
        opened = wb.open()
    except Exception as exc:  # each reader reports what it expects; this is the backstop
        message, code = unreadable_message(Path(path).name, exc)
        log.fatal(message, value=str(path), code=code)
        return None
    if not opened:
        return None

    def read(name: str) -> Any:
        """A sheet, reporting progress where the source can (large .xlsx files)."""
        try:
            if isinstance(wb, WorkbookFile):
                sheet = wb.read(name, progress)
                layout_notes(wb, name, sheet, log)
            else:
                progress(f"Reading {name}", 0, None)
                sheet = wb.read(name)
        except Exception as exc:  # a damaged or hostile part: a message, never a traceback
            raise _SheetUnreadable(name, exc) from exc
        if log.has_fatal:  # the reader said why it could not read the sheet: stop there
            raise _AlreadyReported
        return sheet

    # A wide History is read as typed columns in a second thread while Items is read and
    # checked: fastexcel parses outside the interpreter lock, so on two cores the History
    # costs little more than the Items sheet's checks (see xlpolicy.reading.typed).
    ahead = ThreadPoolExecutor(max_workers=1, thread_name_prefix="xlpolicy-history")
    try:
        roles = find_roles(wb, Path(path), overrides, log, read)
        if roles is None:
            return None
        settings, items_name, history_name = roles
        history = None
        history_file = history_file_path(Path(path), settings)
        if history_file is not None and not _history_file_allowed(
            Path(path), history_file, settings, log
        ):
            return None
        early = (
            ahead.submit(typed_cells, wb, history_name)
            if history_file is None and history_name is not None and _typed_possible(wb)
            else None
        )
        # Blank targets stay NaN while reading, so an item's own target can be told from a
        # default: a class target (Service target A/B/C) may apply to it instead.
        for_items = {**settings, "service_target": float("nan")}
        items_sheet = read(items_name)
        items = read_items(items_sheet, for_items, log)
        if items is None:
            return None
        settings["currency"] = for_items.get("currency")  # (a currency named in a header)
        currency_from_sheet(items_sheet, settings, log, items_name)
        _default_targets(items, settings)
        if history_file is not None:
            if history_name is not None:
                log.info(
                    f"The history was read from {history_file.name}, as the 'History file' "
                    f"setting says; the sheet '{history_name}' was not used.",
                    sheet=history_name,
                    code="history-from-file",
                )
            progress(f"Reading {history_file.name}", 0, None)
            history = read_history_file(history_file, known_forms(items.df["item"]), settings, log)
            if history is None:
                return None
            history_name = history_file.name
            history_sheet = None
        else:
            history_sheet = None
            if history_name is not None:
                if early is not None and not early.done() and while_waiting is not None:
                    while_waiting()
                history = _typed_history(
                    wb, history_name, known_forms(items.df["item"]), settings, log, progress, early
                )
                if history is None:
                    history_sheet = read(history_name)
        if history_sheet is not None and not history_sheet.rows:
            log.info(
                f"The sheet '{history_name}' is empty; demand comes from the Items sheet's "
                "annual figures.",
                sheet=history_name,
                code="history-empty",
            )
            history_sheet = None
        if history_sheet is not None:
            history = read_history(history_sheet, known_forms(items.df["item"]), settings, log)
            if history is None:
                return None
        if history is not None:
            history = _items_spelling(history, items)
            history = _steadier_period(history, items, settings, log)
            if history.period is not None and (
                history.period != settings["period"] or settings["sources"]["period"] == "default"
            ):
                settings["period"] = history.period
                settings["sources"]["period"] = f"inferred from {history_name} dates"
                finish_period(settings)
        breaks_name = settings["sheet_roles"].get("Price breaks")
        breaks = (
            read_price_breaks(read(breaks_name), items, log) if breaks_name is not None else None
        )
        return InputData(Path(path), items, history, settings, list(wb.sheet_names), breaks)
    except _AlreadyReported:
        return None
    except _SheetUnreadable as exc:
        if isinstance(exc.cause, Refused):
            message, code = exc.cause.message, exc.cause.code
        else:
            message, code = unreadable_message(Path(path).name, exc.cause, exc.sheet)
        log.fatal(message, sheet=exc.sheet, value=str(path), code=code)
        return None
    finally:
        ahead.shutdown(wait=True)
        wb.close()


#: Whether a wide History may be read as typed columns (xlpolicy.reading.typed) where
#: fastexcel is installed; the general path gives the same result (tests compare them).
TYPED_HISTORY = True


def _typed_possible(wb: Any) -> TypeGuard[WorkbookFile]:
    return (
        TYPED_HISTORY
        and isinstance(wb, WorkbookFile)
        and wb._fast is not None
        and typed.available()
    )


def _typed_history(
    wb: Any,
    name: str,
    known: set[str],
    settings: dict[str, Any],
    log: ProblemLog,
    progress: Progress,
    early: Any = None,
) -> History | None:
    """A wide History read the typed way, or None to read it the general way.

    ``early``: the future of :func:`typed_cells` started while Items was read, if any.
    """
    if early is None and not _typed_possible(wb):
        return None
    progress(f"Reading {name}", 0, None)
    found = early.result() if early is not None else typed_cells(wb, name)
    if found is None:
        return None
    head, hidx, cells = found
    # Into a log of its own first: the typed reader may still step aside (NotTyped), and
    # the general path then reports everything itself.
    own = ProblemLog()
    layout_notes(
        wb,
        name,
        RawSheet(name, row_numbers=[*head.row_numbers[: hidx + 1], *cells.row_numbers.tolist()]),
        own,
    )
    try:
        history = read_wide_typed(head, cells, known, settings, own)
    except typed.NotTyped:
        return None
    log.extend(own)
    progress(f"Reading {name}", len(cells.row_numbers), len(cells.row_numbers))
    return history


def typed_cells(wb: WorkbookFile, name: str) -> tuple[RawSheet, int, typed.WideCells] | None:
    """(the top rows, the header's index among them, the cells below) of a wide History
    sheet read as typed columns; None where that cannot be exact. Nothing is logged."""
    try:
        head = wb.peek(name)
        where = wide_header(head) if head is not None else None
        if head is None or where is None:
            return None
        texts = sum(isinstance(v, str) for row in head.rows[: where[0] + 1] for v in row)
        cells = typed.read_wide_cells(wb, name, head.row_numbers[where[0]], where[1], texts)
    except Exception:  # never worse than the general path, which reports a damaged sheet
        return None
    return None if cells is None else (head, where[0], cells)


def history_file_path(workbook: Path, settings: dict[str, Any]) -> Path | None:
    """The history file to read, if the settings name one (relative to the workbook)."""
    name = settings.get("history_file")
    if not name:
        return None
    p = Path(str(name)).expanduser()
    if not p.is_absolute():
        base = workbook if workbook.is_dir() else workbook.parent
        p = base / p
    return p


def _history_file_allowed(
    workbook: Path, file: Path, settings: dict[str, Any], log: ProblemLog
) -> bool:
    """Whether the history file may be read; if not, a fatal problem says why.

    A file given on the command line (or to the API) may be anywhere: the user named it.
    A file named by the workbook's own Settings sheet must lie in the workbook's folder or
    below (links resolved): a workbook someone sent must not pull another local file into
    an output the user may send back. A named pipe or device is never read.
    """
    source = str(settings.get("sources", {}).get("history_file", ""))
    sheet, _, cell = source.rpartition(" ")
    where = {"sheet": sheet, "cell": cell} if source.startswith("Settings") else {}
    if source != "command line":
        base = (workbook if workbook.is_dir() else workbook.parent).resolve()
        if not file.resolve().is_relative_to(base):
            log.fatal(
                f"The Settings row 'History file' names {settings.get('history_file')!s}, "
                f"which is outside the folder of {workbook.name}. A workbook may only name a "
                "history file in its own folder (or below), so that a workbook from someone "
                "else cannot read other files of yours. Copy the file into that folder and "
                "name it there, or give it on the command line with --history.",
                value=str(settings.get("history_file")),
                code="history-file-outside",
                **where,
            )
            return False
    try:
        mode = os.stat(file).st_mode
    except OSError:
        return True  # missing: the history reader says so in its own words
    if not stat.S_ISREG(mode):
        log.fatal(
            f"The history file {file.name} is not a file saved on disk (a named pipe, a "
            "device or a folder), so it was not read. Save the history to a CSV or Parquet "
            "file and name that.",
            value=str(file),
            code="file-not-regular",
            **where,
        )
        return False
    return True


def _items_spelling(history: History, items: ItemTable) -> History:
    """History's codes written as in Items where they differ only in Unicode form
    (composed or decomposed accents), so each item finds its history and the output shows
    the code as the user typed it in Items."""
    spelled = {code_key(c): c for c in items.df["item"] if isinstance(c, str) and not c.isascii()}
    if not spelled:
        return history
    history.items = [spelled.get(code_key(c), c) for c in history.items]
    history.first_cell = {spelled.get(code_key(c), c): v for c, v in history.first_cell.items()}
    return history


def _default_targets(items: ItemTable, settings: dict[str, Any]) -> None:
    """Mark which items gave their own service target, and fill the others' from Settings."""
    target = items.df["service_target"].to_numpy(float)
    items.own_target = np.isfinite(target)
    items.df["service_target"] = np.where(
        items.own_target, target, float(settings["service_target"])
    )


def find_roles(
    wb: Any,
    path: Path,
    overrides: dict[str, Any],
    log: ProblemLog,
    read: Callable[[str], Any],
) -> tuple[dict[str, Any], str, str | None] | None:
    """(the settings, the Items sheet's name, the History sheet's name or None): sheets found
    by name, else by what they hold (xlpolicy.reading.sheet_roles), the Settings read, and
    the owner's column names (a Column names sheet, ``overrides["columns"]``) put in
    ``settings["column_map"]``. None when a fatal problem was logged."""
    overrides = dict(overrides)
    given = overrides.pop("columns", None) or {}
    stem = isinstance(wb, CsvFolder)
    names = list(wb.sheet_names)
    roles = SheetRoles()
    for role in ("Items", "History", "Settings", "Price breaks", "Column names"):
        name = by_name(names, role, log, stem=stem)
        if name is not None:
            roles.names[role] = name
            roles.how[role] = "by its name"
    if log.has_fatal:
        return None
    settings_name = roles.get("Settings")
    settings_sheet = read(settings_name) if settings_name else None
    settings = resolve_settings(
        read_settings(settings_sheet, log), overrides, log, settings_name or "Settings"
    )
    map_name = roles.get("Column names")
    from_sheet = read_map_sheet(read(map_name), log) if map_name else {}
    settings["column_map"] = combine(from_sheet, parse_pairs(given, log, sheet="command line"))
    settings["sheet_roles"] = roles.names
    settings["sheet_found"] = roles.how
    need_items = roles.get("Items") is None
    need_history = roles.get("History") is None and history_file_path(path, settings) is None
    if need_items or need_history:
        taken = set(roles.names.values())
        tops = {}
        for n in names:
            if n in taken:
                continue
            top = wb.peek(n) if isinstance(wb, WorkbookFile) else wb.read(n)
            if top is not None:
                tops[n] = top
        mapping = settings["column_map"]
        if need_items:
            found = by_content(tops, "Items", mapping, log, path.name)
            if found is None:
                return None
            roles.names["Items"], roles.how["Items"] = found, "by what it holds"
            tops.pop(found, None)
        if need_history:
            found = by_content(tops, "History", mapping, log, path.name)
            if log.has_fatal:
                return None
            if found is not None:
                roles.names["History"], roles.how["History"] = found, "by what it holds"
    return settings, roles.names["Items"], roles.get("History")


class _AlreadyReported(Exception):
    """A reader logged a fatal problem for a sheet; reading stops without another message."""


class _SheetUnreadable(Exception):
    """Reading one sheet's cells from the file failed: the file is damaged or hostile."""

    def __init__(self, sheet: str, cause: BaseException):
        super().__init__(sheet)
        self.sheet = sheet
        self.cause = cause


def _steadier_period(
    history: History, items: ItemTable, settings: dict[str, Any], log: ProblemLog
) -> History:
    """Daily history becomes weekly when most lead times are a week or more.

    Only when the user has not set the period themselves and at least 8 whole weeks exist.
    """
    explicit = not str(settings["sources"].get("period", "default")).startswith("default")
    if history.period != "day" or explicit or history.matrix.shape[1] < 56:
        return history
    lead = items.df["lead_time_days"].to_numpy(float)
    lead = lead[np.isfinite(lead)]
    if not lead.size or float(np.median(lead)) < 7:
        return history
    weekly = aggregate_daily_to_weeks(history)
    dropped = history.matrix.shape[1] - 7 * weekly.matrix.shape[1]
    log.info(
        f"Daily History was added up into {weekly.matrix.shape[1]} weeks, since most lead "
        "times are a week or more: weekly totals give a steadier estimate of the spread"
        + (
            f" ({dropped} day(s) at the end, short of a full week, were left out)"
            if dropped
            else ""
        )
        + ". Set 'Period' to day in Settings to keep days.",
        sheet=history.sheet,
        code="history-aggregated",
    )
    return weekly
