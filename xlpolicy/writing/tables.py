"""The per-item table as CSV and JSON, for other programs.

Both carry every key of ``contract.ALL_RESULT_KEYS`` in that order, unrounded, with item
codes as text; a missing number is an empty CSV field or a JSON null. Files are written
under a temporary name beside the target and moved into place when complete.
"""

from __future__ import annotations

import datetime as _dt
import json
import math
import re
from enum import Enum
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from .. import contract
from ..report import Report
from .atomic import atomic_output


def _code(value: Any) -> Any:
    """An item code as text: 123.0 read as a number becomes "123"; missing stays missing."""
    if value is None:
        return None
    if isinstance(value, (float, np.floating)):
        if math.isnan(value):
            return None
        if float(value).is_integer():
            return str(int(value))
    if isinstance(value, np.integer):
        return str(int(value))
    if not isinstance(value, str) and pd.isna(value):
        return None
    return str(value)


def results_for_export(report: Report) -> pd.DataFrame:
    """The results with exactly ``contract.ALL_RESULT_KEYS`` as columns, in that order.

    Missing keys become empty columns; skipped items keep their empty (NaN) numbers; the
    item column is text so codes such as "000123" keep their leading zeros.
    """
    res = report.results if report.results is not None else pd.DataFrame()
    out = res.reset_index(drop=True).reindex(columns=list(contract.ALL_RESULT_KEYS))
    out["item"] = out["item"].map(_code).astype(object)
    return out


_FORMULA_LEAD = ("=", "+", "-", "@", "\t", "\r")
_PLAIN_NUMBER = re.compile(r"^[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?$")
_CONTROL = re.compile(r"[\x00-\x08\x0b\x0c\x0e-\x1f\x7f]")


def csv_safe(value: Any) -> Any:
    """Text from the user as a CSV field that a spreadsheet program will not run.

    A field starting with = + - @, a tab or a carriage return is taken as a formula when
    the CSV file is opened in a spreadsheet program; such text gets a leading apostrophe
    (the usual defence), unless it is a plain number such as -12. Control characters other
    than tab and line breaks are removed. Anything that is not text is left as it is.
    """
    if not isinstance(value, str):
        return value
    value = _CONTROL.sub("", value)
    if value.startswith(_FORMULA_LEAD) and not _PLAIN_NUMBER.match(value):
        return "'" + value
    return value


def write_csv(path: Path, report: Report) -> None:
    """Write the per-item table as UTF-8 CSV.

    Header = the keys; empty field for a missing value; floats at full (repr) precision so
    a reader gets back exactly the computed number; text that a spreadsheet program would
    run as a formula is made inert (:func:`csv_safe`).
    """
    table = results_for_export(report)
    for col in table.columns:
        if table[col].dtype == object or pd.api.types.is_string_dtype(table[col]):
            table[col] = table[col].map(csv_safe)
    with atomic_output(Path(path)) as tmp:
        table.to_csv(tmp, index=False, encoding="utf-8", na_rep="", lineterminator="\n")


def plain(value: Any) -> Any:
    """A JSON-ready form of a value: numpy scalars to Python, NaN and infinities to None,
    dates to ISO text, containers converted throughout."""
    if value is None or isinstance(value, (bool, str)):
        return value
    if isinstance(value, Enum):
        return plain(value.value)
    if isinstance(value, (np.bool_,)):
        return bool(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        f = float(value)
        return f if math.isfinite(f) else None
    if isinstance(value, dict):
        return {str(k): plain(v) for k, v in value.items()}
    if isinstance(value, (list, tuple, set, np.ndarray, pd.Series)):
        return [plain(v) for v in (value.tolist() if hasattr(value, "tolist") else value)]
    if isinstance(value, np.datetime64):
        value = pd.Timestamp(value)
    if isinstance(value, (_dt.date, _dt.datetime, _dt.time)):
        if isinstance(value, pd.Timestamp) and pd.isna(value):
            return None
        return value.isoformat()
    try:
        if pd.isna(value):
            return None
    except (TypeError, ValueError):
        pass
    return str(value)


def portfolio_for_export(report: Report) -> dict[str, Any]:
    """The exchange curve (one record per point) and the cap's totals, JSON-ready."""
    port = getattr(report, "portfolio", None) or {}
    out: dict[str, Any] = {}
    curve = port.get("exchange_curve")
    if curve is not None:
        out["exchange_curve"] = [
            {k: plain(v) for k, v in rec.items()} for rec in curve.to_dict("records")
        ]
    cap = port.get("cap")
    if cap is not None:
        out["cap"] = plain(
            {
                "kind": cap.kind,
                "cap": cap.cap,
                "binding": cap.binding,
                "feasible": cap.feasible,
                "multiplier": cap.multiplier,
                "usage": cap.usage,
                "uncapped_usage": cap.uncapped_usage,
                "annual_total_cost": cap.cost,
                "uncapped_annual_total_cost": cap.uncapped_cost,
                "cost_of_cap": cap.cost_of_cap,
                "items_changed": int(cap.changed.sum()),
                "least_usage": cap.least,
            }
        )
    return out


def season_plan_for_export(report: Report) -> list[dict[str, Any]]:
    """The season plan, one record per item planned with its season or trend: the item and
    its months, each with its date, forecast and policy (xlpolicy.seasons)."""
    plan = getattr(report, "season_plan", None)
    if plan is None or plan.empty:
        return []
    out = []
    keys = [k for k in plan.columns if k not in ("row", "item")]
    for item, block in plan.groupby("item", sort=False):
        months = [{k: plain(v) for k, v in rec.items()} for rec in block[keys].to_dict("records")]
        out.append({"item": plain(item), "months": months})
    return out


def write_json(path: Path, report: Report) -> None:
    """Write items, problems, settings and totals as strict JSON (NaN becomes null).

    Also carries ``source_name``, ``run_date`` and ``input_summary`` so a reader knows what
    the numbers came from.
    """
    table = results_for_export(report)
    items = [{k: plain(v) for k, v in rec.items()} for rec in table.to_dict("records")]
    doc = {
        "source_name": plain(report.source_name),
        "run_date": plain(report.run_date),
        "input_summary": plain(dict(report.input_summary or {})),
        "items": items,
        "problems": [plain(p.as_dict()) for p in report.problems or []],
        "settings": plain(dict(report.settings or {})),
        "totals": plain(dict(report.totals or {})),
        "portfolio": portfolio_for_export(report),
        "season_plan": season_plan_for_export(report),
    }
    text = json.dumps(doc, ensure_ascii=False, indent=2, allow_nan=False)
    with atomic_output(Path(path)) as tmp:
        Path(tmp).write_text(text + "\n", encoding="utf-8")
