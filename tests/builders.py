"""Small real workbooks for the tests, written with openpyxl as a person's file would be.

The numbers in these builders are invented test data, not reference values; the checks
that matter compare xlpolicy's output with independent computations (scipy.stats, numpy)
done inside each test.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import Any

import numpy as np
from openpyxl import Workbook

BASE_HEADERS = [
    "Item",
    "Description",
    "Supplier",
    "Unit cost",
    "Order cost",
    "Holding rate",
    "Lead time (days)",
]


def item_row(
    code: str,
    cost: float = 10.0,
    order: float = 20.0,
    rate: float = 0.2,
    lead: float = 14.0,
    desc: str = "thing",
    supplier: str = "Acme",
) -> list[Any]:
    """One Items row in BASE_HEADERS order."""
    return [code, desc, supplier, cost, order, rate, lead]


def weekly_history(
    codes: Sequence[str], weeks: int = 60, seed: int = 7, mean: float = 20.0
) -> dict[str, list[float]]:
    """Poisson weekly demand per item (seeded), for items that just need some history."""
    rng = np.random.default_rng(seed)
    return {c: [float(x) for x in rng.poisson(mean, weeks)] for c in codes}


def write_workbook(
    path: Path,
    items: Sequence[Sequence[Any]],
    *,
    headers: Sequence[str] = BASE_HEADERS,
    history: Mapping[str, Sequence[Any]] | None = None,
    layout: str = "long",
    start: dt.date = dt.date(2024, 1, 1),
    step_days: int = 7,
    labels: Sequence[Any] | None = None,
    settings: Mapping[str, Any] | None = None,
    title_rows: Sequence[str] = (),
    history_title_rows: Sequence[str] = (),
    skip_zero_rows: bool = False,
    extra_history_rows: Sequence[Sequence[Any]] = (),
) -> Path:
    """Write Items (+ History, + Settings) and return the path.

    ``history`` maps item code -> quantities per period; periods are dates from ``start``
    every ``step_days`` unless ``labels`` are given.
    """
    wb = Workbook()
    ws = wb.active
    ws.title = "Items"
    for t in title_rows:
        ws.append([t])
    ws.append(list(headers))
    for row in items:
        ws.append(list(row))
    if history is not None:
        hs = wb.create_sheet("History")
        for t in history_title_rows:
            hs.append([t])
        n = max((len(v) for v in history.values()), default=0)
        periods = (
            list(labels)
            if labels is not None
            else [
                dt.datetime.combine(start + dt.timedelta(days=step_days * k), dt.time())
                for k in range(n)
            ]
        )
        if layout == "long":
            hs.append(["Item", "Period", "Quantity"])
            for code, qty in history.items():
                for p, q in zip(periods, qty, strict=False):
                    if skip_zero_rows and q == 0:
                        continue
                    hs.append([code, p, q])
            for row in extra_history_rows:
                hs.append(list(row))
        else:
            hs.append(["Item", *periods])
            for code, qty in history.items():
                hs.append([code, *qty])
            for row in extra_history_rows:
                hs.append(list(row))
    if settings is not None:
        ss = wb.create_sheet("Settings")
        ss.append(["Setting", "Value"])
        for k, v in settings.items():
            ss.append([k, v])
    wb.save(path)
    return path


def simple_workbook(path: Path, codes: Sequence[str] = ("A1", "B2", "C3"), **kw: Any) -> Path:
    """Three well-formed items with a year of weekly history."""
    return write_workbook(
        path, [item_row(c) for c in codes], history=weekly_history(codes, weeks=60), **kw
    )
