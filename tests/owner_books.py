"""Workbooks made the way a shop owner keeps them, without reading our contract.

An invented garden centre (the codes, plants, suppliers and sales are made up for the
tests): a stock list under a title row, its own sheet names and headers, lead times in
weeks, the holding cost in per cent, and the sales either as a till export of dated sale
lines or as one column per month.
"""

from __future__ import annotations

import datetime as dt
from pathlib import Path
from typing import Any

import numpy as np
from openpyxl import Workbook

#: (code, name, supplier, cost price, lead time in weeks, mean sales a day)
PLANTS: list[tuple[str, str, str, float, float, float]] = [
    ("GC-101", "Lavender 2L pot", "Hill Nursery", 3.20, 2, 3.0),
    ("GC-102", "Compost 40L", "Soil & Co", 4.10, 1, 6.0),
    ("GC-103", "Terracotta pot 30cm", "Clayworks", 7.50, 3, 1.5),
    ("GC-104", "Rose 'Evening Glow'", "Hill Nursery", 6.80, 2, 2.0),
]

STOCK_HEADERS = [
    "Product code",
    "Product",
    "Supplier",
    "Cost price",
    "Supplier lead time (weeks)",
    "Holding cost %",
    "Order cost",
    "In stock",
    "Case qty",
    "Notes",
]


def stock_sheet(wb: Workbook, title: str = "Stock list") -> None:
    ws = wb.active
    ws.title = title
    ws.append(["Meadow Lane Garden Centre - stock list"])
    ws.append(STOCK_HEADERS)
    for code, name, supplier, cost, weeks, _ in PLANTS:
        ws.append([code, name, supplier, cost, weeks, 20, 12.5, 30, 6, "shelf B"])


def till_export(wb: Workbook, days: int = 182, seed: int = 3) -> dict[str, float]:
    """Dated sale lines (several a day per item), the way a till exports them; returns the
    units sold per item."""
    ws = wb.create_sheet("Sales")
    ws.append(["Date", "Time", "Product code", "Product", "Qty sold", "Till"])
    rng = np.random.default_rng(seed)
    start = dt.datetime(2025, 1, 6)
    sold: dict[str, float] = {}
    for d in range(days):
        day = start + dt.timedelta(days=d)
        for code, name, _, _, _, rate in PLANTS:
            n = int(rng.poisson(rate))
            # a day's units split over one or two sale lines
            parts = [n] if n < 2 else [n // 2, n - n // 2]
            for k, q in enumerate(parts):
                if q:
                    ws.append([day, f"1{k}:15", code, name, q, 1 + k])
                    sold[code] = sold.get(code, 0.0) + q
    return sold


def monthly_columns(wb: Workbook, months: int = 18, seed: int = 5) -> None:
    """One row per product, one column per month headed like 'Jan 2024'."""
    ws = wb.create_sheet("Monthly sales")
    labels = [dt.date(2024 + (m // 12), m % 12 + 1, 1) for m in range(months)]
    ws.append(["Product code", "Product"] + [d.strftime("%b %Y") for d in labels])
    rng = np.random.default_rng(seed)
    for code, name, _, _, _, rate in PLANTS:
        ws.append([code, name] + [int(x) for x in rng.poisson(rate * 30.4, months)])


def garden_centre(path: Path, layout: str = "till", **more: Any) -> Path:
    wb = Workbook()
    stock_sheet(wb)
    if layout == "till":
        till_export(wb)
    else:
        monthly_columns(wb)
    wb.save(path)
    return path
