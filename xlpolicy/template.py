"""The empty input workbook a new user starts from.

Built from :mod:`xlpolicy.contract` so that its sheets, headers, notes and settings cannot
drift from what the reader accepts. The output is deterministic (fixed document dates, fixed
content), so the committed copy in ``templates/`` can be checked against a fresh one.

Run ``python -m xlpolicy.template [PATH]`` to (re)write the committed copy, or one at PATH.
"""

from __future__ import annotations

import sys
from datetime import datetime
from pathlib import Path
from typing import Any

import xlsxwriter

from xlpolicy import contract
from xlpolicy.contract import EXAMPLE_PREFIX, ITEM_COLUMNS, NUMBER, RATE, SETTINGS, Column

TEMPLATE_FILE_NAME = "xlpolicy-template.xlsx"

#: Every example row's description starts with this, so people (and the planner) can spot them.

#: Fixed document date, so that regenerating the template gives the same file.
_CREATED = datetime(2025, 1, 6, 9, 0, 0)

#: Rows (below the header) that carry data validation and cell formats.
_VALIDATED_ROWS = 2000

# Our own palette: a warm sand for required headers, a paler one for "unless set in Settings".
_FILL_REQUIRED = "#EADFC8"
_FILL_CONDITIONAL = "#F5EFE2"
_EXAMPLE_FONT = "#6B6B6B"

#: Header text written to the Items sheet, per column key: the contract title with a unit in
#: brackets where that helps. The reader ignores a trailing bracketed unit.
_ITEM_HEADERS: dict[str, str] = {
    "unit_cost": "Unit cost (per unit)",
    "order_cost": "Order cost (per order)",
    "holding_rate": "Holding rate (%)",
    "lead_time_days": "Lead time (days)",
    "lead_time_sd_days": "Lead time sd (days)",
    "service_target": "Service target (%)",
    "shortage_cost": "Shortage cost (per unit)",
    "pack_size": "Pack size (units)",
    "minimum_order": "Minimum order (units)",
    "annual_demand": "Annual demand (units per year)",
    "demand_sd": "Demand sd (units per period)",
    "shelf_life_days": "Shelf life (days)",
    "review_period_days": "Review period (days)",
}

#: Data validation per Items column: (xlsxwriter options, message shown on a bad entry).
_ITEM_VALIDATION: dict[str, dict[str, Any]] = {
    "unit_cost": {"validate": "decimal", "criteria": ">", "value": 0},
    "order_cost": {"validate": "decimal", "criteria": ">=", "value": 0},
    "holding_rate": {"validate": "decimal", "criteria": "between", "minimum": 0, "maximum": 5},
    "lead_time_days": {"validate": "decimal", "criteria": ">", "value": 0},
    "lead_time_sd_days": {"validate": "decimal", "criteria": ">=", "value": 0},
    "service_target": {
        "validate": "decimal",
        "criteria": "between",
        "minimum": 0.0001,
        "maximum": 0.9999,
    },
    "shortage_cost": {"validate": "decimal", "criteria": ">=", "value": 0},
    "pack_size": {"validate": "decimal", "criteria": ">", "value": 0},
    "minimum_order": {"validate": "decimal", "criteria": ">=", "value": 0},
    "on_hand": {"validate": "decimal", "criteria": ">=", "value": 0},
    "on_order": {"validate": "decimal", "criteria": ">=", "value": 0},
    "backordered": {"validate": "decimal", "criteria": ">=", "value": 0},
    "current_order_qty": {"validate": "decimal", "criteria": ">=", "value": 0},
    "current_reorder_point": {"validate": "decimal", "criteria": ">=", "value": 0},
    "annual_demand": {"validate": "decimal", "criteria": ">=", "value": 0},
    "demand_sd": {"validate": "decimal", "criteria": ">=", "value": 0},
    "shelf_life_days": {"validate": "decimal", "criteria": ">", "value": 0},
    "review_period_days": {"validate": "decimal", "criteria": ">=", "value": 0},
}

_ITEM_WIDTHS: dict[str, float] = {"item": 12, "description": 40, "category": 16, "supplier": 22}

#: The three example items. EX003 carries annual demand and demand sd instead of history.
EXAMPLE_ITEMS: tuple[dict[str, Any], ...] = (
    {
        "item": "EX001",
        "description": f"{EXAMPLE_PREFIX} Copier paper A4, box of 5 reams",
        "category": "Office",
        "supplier": "Example supplier A",
        "unit_cost": 21.5,
        "order_cost": 12.0,
        "holding_rate": 0.22,
        "lead_time_days": 5,
        "lead_time_sd_days": 1,
        "service_target": 0.95,
        "pack_size": 1,
        "on_hand": 18,
        "on_order": 0,
        "current_order_qty": 20,
        "current_reorder_point": 8,
    },
    {
        "item": "EX002",
        "description": f"{EXAMPLE_PREFIX} Hand soap refill 1 L",
        "category": "Cleaning",
        "supplier": "Example supplier A",
        "unit_cost": 4.8,
        "order_cost": 12.0,
        "holding_rate": 0.22,
        "lead_time_days": 7,
        "service_target": 0.9,
        "pack_size": 6,
        "minimum_order": 12,
        "on_hand": 9,
        "on_order": 12,
    },
    {
        "item": "EX003",
        "description": f"{EXAMPLE_PREFIX} Printer toner, black",
        "category": "Office",
        "supplier": "Example supplier B",
        "unit_cost": 68.0,
        "order_cost": 15.0,
        "holding_rate": 0.25,
        "lead_time_days": 10,
        "lead_time_sd_days": 2,
        "service_target": 0.98,
        "on_hand": 3,
        "on_order": 0,
        "annual_demand": 30,
        "demand_sd": 0.9,
    },
)

#: Weekly example history (Mondays) for the example items that have one.
_EXAMPLE_HISTORY_START = datetime(2024, 10, 7)  # a Monday
_EXAMPLE_HISTORY: dict[str, tuple[int, ...]] = {
    "EX001": (4, 6, 3, 5, 7, 4, 5, 2, 6, 5, 4, 6),
    "EX002": (11, 8, 13, 9, 10, 12, 7, 10, 14, 9, 11, 10),
}

_READ_ME: tuple[str, ...] = (
    "xlpolicy input workbook",
    "xlpolicy works out, for each stock item, how many to order at a time (order quantity) "
    "and the stock level at which to order again (reorder point), with the safety stock and "
    "the yearly costs.",
    "Items: one row per item. Headers with a sand background must be filled; pale sand ones "
    "may be left blank where Settings gives a default. Point at a header to read what it means.",
    "History: one row per item and period (Item, Period, Quantity), the period being a date "
    "such as the Monday of each week. A period with no row counts as zero sales.",
    "An item without history can give Annual demand and Demand sd on Items instead.",
    "Settings: the period length, the service measure and defaults for items that leave a "
    "cell blank.",
    "Price breaks (optional): one row per break (Item, Minimum quantity, Unit price); an "
    "order of at least that many units pays that price on every unit. Delete the example "
    "row with its item.",
    f"The grey italic rows (codes EX001 to EX003, descriptions starting '{EXAMPLE_PREFIX}') "
    "are examples: delete them or type your own items over them.",
    "Percentages may be typed as 0.25 or 25%. Item codes are kept as text: 000123 stays 000123.",
    "Headers and sheet names match loosely: case, spaces and a unit in brackets do not matter.",
    "To plan, save this file and run:  xlpolicy plan <file>.xlsx",
    "The results go to a new workbook beside yours (<file>-policy.xlsx); your file is not changed.",
    "Caution: where stock is medicine, food or anything safety-critical, the numbers support "
    "and do not replace the judgement of licensed staff and local rules.",
)


def item_header(column: Column) -> str:
    """The header text the template writes for an Items column."""
    return _ITEM_HEADERS.get(column.key, column.title)


def _required_note(column: Column) -> str:
    if column.required == "yes":
        return "Required."
    if column.required == "unless set in Settings":
        return "Required, unless Settings gives a default."
    return "Optional."


def _add_validation(ws: Any, col: int, options: dict[str, Any], what: str) -> None:
    opts = dict(options)
    opts.update(
        {
            "error_type": "stop",
            "error_title": "Check this number",
            "error_message": what[:255],
            "ignore_blank": True,
        }
    )
    ws.data_validation(1, col, _VALIDATED_ROWS, col, opts)


def _write_read_me(wb: Any, fmt: dict[str, Any]) -> None:
    ws = wb.add_worksheet("Read me")
    ws.set_column(0, 0, 110, fmt["wrap"])
    ws.write_string(0, 0, _READ_ME[0], fmt["title"])
    for row, line in enumerate(_READ_ME[1:], start=1):
        ws.write_string(row, 0, line, fmt["wrap"])


def _write_items(wb: Any, fmt: dict[str, Any]) -> None:
    ws = wb.add_worksheet("Items")
    ws.set_comments_author("xlpolicy")
    ws.freeze_panes(1, 1)
    for col, column in enumerate(ITEM_COLUMNS):
        header = item_header(column)
        style = {"yes": "req", "unless set in Settings": "cond"}.get(column.required, "opt")
        ws.write_string(0, col, header, fmt[style])
        ws.write_comment(
            0, col, f"{column.meaning}\n{_required_note(column)}", {"x_scale": 1.6, "y_scale": 1.2}
        )
        width = _ITEM_WIDTHS.get(column.key, max(12.0, len(header) + 2.0))
        if column.key == "item":
            ws.set_column(col, col, width, fmt["text"])
        elif column.kind == RATE:
            ws.set_column(col, col, width, fmt["pct"])
        else:
            ws.set_column(col, col, width)
        if column.key in _ITEM_VALIDATION:
            _add_validation(ws, col, _ITEM_VALIDATION[column.key], column.meaning)

    for r, example in enumerate(EXAMPLE_ITEMS, start=1):
        for col, column in enumerate(ITEM_COLUMNS):
            value = example.get(column.key)
            if value is None:
                ws.write_blank(r, col, None, fmt["ex_text"])
            elif column.kind == RATE:
                ws.write_number(r, col, value, fmt["ex_pct"])
            elif column.kind == NUMBER:
                ws.write_number(r, col, value, fmt["ex_num"])
            else:
                ws.write_string(r, col, str(value), fmt["ex_text"])


def _write_history(wb: Any, fmt: dict[str, Any]) -> None:
    ws = wb.add_worksheet("History")
    ws.set_comments_author("xlpolicy")
    ws.freeze_panes(1, 0)
    for col, column in enumerate(contract.HISTORY_LONG_COLUMNS):
        ws.write_string(0, col, column.title, fmt["req"])
        ws.write_comment(0, col, f"{column.meaning}\nRequired.", {"x_scale": 1.4})
    ws.set_column(0, 0, 12, fmt["text"])
    ws.set_column(1, 1, 14, fmt["date"])
    ws.set_column(2, 2, 12)
    ws.data_validation(
        1,
        2,
        _VALIDATED_ROWS,
        2,
        {
            "validate": "decimal",
            "criteria": ">=",
            "value": 0,
            "ignore_blank": True,
            "error_type": "stop",
            "error_title": "Check this number",
            "error_message": "Units sold in the period: a number, 0 or more.",
        },
    )
    row = 1
    for code, quantities in _EXAMPLE_HISTORY.items():
        for week, qty in enumerate(quantities):
            day = datetime.fromordinal(_EXAMPLE_HISTORY_START.toordinal() + 7 * week)
            ws.write_string(row, 0, code, fmt["ex_text"])
            ws.write_datetime(row, 1, day, fmt["ex_date"])
            ws.write_number(row, 2, qty, fmt["ex_num"])
            row += 1


#: Example price breaks (all-units): (item, minimum quantity, unit price).
EXAMPLE_PRICE_BREAKS: tuple[tuple[str, float, float], ...] = (
    ("EX002", 48, 4.5),
    ("EX002", 120, 4.3),
)


def _write_price_breaks(wb: Any, fmt: dict[str, Any]) -> None:
    ws = wb.add_worksheet("Price breaks")
    ws.set_comments_author("xlpolicy")
    ws.freeze_panes(1, 0)
    for col, column in enumerate(contract.PRICE_BREAK_COLUMNS):
        ws.write_string(0, col, column.title, fmt["req"])
        ws.write_comment(0, col, f"{column.meaning}\nRequired.", {"x_scale": 1.6})
    ws.set_column(0, 0, 12, fmt["text"])
    ws.set_column(1, 2, 18)
    for col in (1, 2):
        ws.data_validation(
            1,
            col,
            _VALIDATED_ROWS,
            col,
            {
                "validate": "decimal",
                "criteria": ">",
                "value": 0,
                "ignore_blank": True,
                "error_type": "stop",
                "error_title": "Check this number",
                "error_message": contract.PRICE_BREAK_COLUMNS[col].meaning[:255],
            },
        )
    for row, (code, qty, price) in enumerate(EXAMPLE_PRICE_BREAKS, start=1):
        ws.write_string(row, 0, code, fmt["ex_text"])
        ws.write_number(row, 1, qty, fmt["ex_num"])
        ws.write_number(row, 2, price, fmt["ex_num"])


def _write_settings(wb: Any, fmt: dict[str, Any]) -> None:
    ws = wb.add_worksheet("Settings")
    ws.freeze_panes(1, 0)
    for col, title in enumerate(("Setting", "Value", "What it means")):
        ws.write_string(0, col, title, fmt["req"] if col < 2 else fmt["opt"])
    ws.set_column(0, 0, 20)
    ws.set_column(1, 1, 16)
    ws.set_column(2, 2, 90, fmt["wrap"])
    lists = {"period": list(contract.PERIODS), "service_measure": list(contract.SERVICE_MEASURES)}
    numbers: dict[str, dict[str, Any]] = {
        "periods_per_year": {"validate": "decimal", "criteria": ">", "value": 0},
        "service_target": _ITEM_VALIDATION["service_target"],
        "holding_rate": _ITEM_VALIDATION["holding_rate"],
        "order_cost": _ITEM_VALIDATION["order_cost"],
        "review_period_days": _ITEM_VALIDATION["review_period_days"],
        "abc_share_a": _ITEM_VALIDATION["service_target"],
        "abc_share_b": _ITEM_VALIDATION["service_target"],
        **{
            key: _ITEM_VALIDATION["service_target"]
            for key in contract.CLASS_TARGET_SETTINGS.values()
        },
    }
    for row, setting in enumerate(SETTINGS, start=1):
        ws.write_string(row, 0, setting.title)
        value = setting.default
        is_rate = setting.key in contract.RATE_SETTINGS
        if value is None:
            ws.write_blank(row, 1, None, fmt["pct"] if is_rate else None)
        elif isinstance(value, (int, float)):
            ws.write_number(row, 1, float(value), fmt["pct"] if is_rate else None)
        else:
            ws.write_string(row, 1, str(value))
        ws.write_string(row, 2, setting.meaning, fmt["wrap"])
        if setting.key in lists:
            ws.data_validation(
                row,
                1,
                row,
                1,
                {
                    "validate": "list",
                    "source": lists[setting.key],
                    "error_type": "stop",
                    "error_title": "Choose from the list",
                    "error_message": "One of: " + ", ".join(lists[setting.key]),
                },
            )
        elif setting.key in numbers:
            opts = dict(numbers[setting.key])
            opts.update(
                {
                    "error_type": "stop",
                    "error_title": "Check this number",
                    "error_message": setting.meaning[:255],
                    "ignore_blank": True,
                }
            )
            ws.data_validation(row, 1, row, 1, opts)


def write_template(path: Path) -> None:
    """Write an empty input workbook with the contract's sheets and headers."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    wb = xlsxwriter.Workbook(
        str(path),
        {
            "strings_to_formulas": False,
            "strings_to_urls": False,
            "strings_to_numbers": False,
        },
    )
    wb.set_properties(
        {
            "title": "xlpolicy input workbook",
            "subject": "Items, sales history and settings for xlpolicy",
            "author": "xlpolicy",
            "created": _CREATED,
        }
    )
    base = {"font_size": 10, "valign": "top"}
    fmt = {
        "title": wb.add_format({**base, "bold": True, "font_size": 13}),
        "wrap": wb.add_format({**base, "text_wrap": True}),
        "req": wb.add_format(
            {**base, "bold": True, "bg_color": _FILL_REQUIRED, "bottom": 1, "text_wrap": True}
        ),
        "cond": wb.add_format(
            {**base, "bold": True, "bg_color": _FILL_CONDITIONAL, "bottom": 1, "text_wrap": True}
        ),
        "opt": wb.add_format({**base, "bottom": 1, "text_wrap": True}),
        "text": wb.add_format({**base, "num_format": "@"}),
        "pct": wb.add_format({**base, "num_format": "0.0%"}),
        "date": wb.add_format({**base, "num_format": "yyyy-mm-dd"}),
        "ex_text": wb.add_format(
            {**base, "italic": True, "font_color": _EXAMPLE_FONT, "num_format": "@"}
        ),
        "ex_num": wb.add_format({**base, "italic": True, "font_color": _EXAMPLE_FONT}),
        "ex_pct": wb.add_format(
            {**base, "italic": True, "font_color": _EXAMPLE_FONT, "num_format": "0.0%"}
        ),
        "ex_date": wb.add_format(
            {**base, "italic": True, "font_color": _EXAMPLE_FONT, "num_format": "yyyy-mm-dd"}
        ),
    }
    _write_read_me(wb, fmt)
    _write_items(wb, fmt)
    _write_history(wb, fmt)
    _write_settings(wb, fmt)
    _write_price_breaks(wb, fmt)
    wb.close()


def default_template_path() -> Path:
    """Where the committed template lives: templates/ at the repository root."""
    return Path(__file__).resolve().parents[1] / "templates" / TEMPLATE_FILE_NAME


def main(argv: list[str] | None = None) -> int:
    """Write the template to the path given (a file or a folder), or to templates/."""
    args = sys.argv[1:] if argv is None else argv
    if len(args) > 1:
        print("usage: python -m xlpolicy.template [PATH]", file=sys.stderr)
        return 2
    target = Path(args[0]) if args else default_template_path()
    if target.is_dir():
        target = target / TEMPLATE_FILE_NAME
    write_template(target)
    print(f"wrote {target}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
