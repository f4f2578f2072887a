"""Make a large, contract-shaped input workbook for the benchmarks (seeded, invented data).

    python benchmarks/make_workbook.py 100000 -o /tmp/bench-100k.xlsx            # wide History
    python benchmarks/make_workbook.py 10000 --layout long -o /tmp/bench-10k.xlsx
    python benchmarks/make_workbook.py 100000 --layout file -o /tmp/bench-100k-file.xlsx

Layout "file" leaves the History sheet out and writes the long history beside the workbook
(``<name>-history.parquet``, or ``.csv`` with ``--history-format csv``), named by the
Settings row "History file": the way past the sheet's 1,048,576 rows.

Items carries the contract's columns (codes as zero-padded text, so a reader that turns
"000123" into 123 shows up at once); History holds 104 weekly columns (wide) or one row per
item and week (long). Every sale figure is invented: Poisson or sparse negative binomial
draws around a per-item rate. Written with xlsxwriter's constant_memory mode (rows in order),
so even 100,000 items take seconds and little memory.
"""

from __future__ import annotations

import argparse
import datetime as _dt
from pathlib import Path

import numpy as np
import xlsxwriter

WEEKS = 104
FIRST_WEEK = _dt.date(2024, 1, 1)  # a Monday
ITEM_HEADERS = (
    "Item",
    "Description",
    "Category",
    "Supplier",
    "Unit cost",
    "Order cost",
    "Holding rate",
    "Lead time days",
    "Lead time sd days",
    "Service target",
    "Pack size",
    "Minimum order",
    "On hand",
    "On order",
    "Backordered",
    "Current order qty",
    "Current reorder point",
)
CATEGORIES = ("Fasteners", "Hand tools", "Paint", "Garden", "Electrical", "Plumbing")
SUPPLIERS = (
    "North Mill Ltd",
    "Harbour Supply",
    "Kestrel Trading",
    "Oakfield Parts",
    "Bluebrook Wholesale",
)


def make_data(n_items: int, weeks: int = WEEKS, seed: int = 2024) -> dict[str, np.ndarray]:
    """Per-item inputs and an items x weeks demand matrix, all from one seeded generator."""
    rng = np.random.default_rng(seed)
    rate = rng.lognormal(mean=1.0, sigma=1.2, size=n_items)  # units per week
    sparse = rng.random(n_items) < 0.25  # a quarter sell now and then (intermittent)
    demand = rng.poisson(rate[:, None], size=(n_items, weeks)).astype(np.int64)
    lumpy = rng.negative_binomial(2, 0.3, size=(n_items, weeks)) * (
        rng.random((n_items, weeks)) < 0.2
    )
    demand[sparse] = lumpy[sparse]
    cost = np.round(rng.lognormal(2.0, 1.0, n_items), 2) + 0.05
    lead = rng.choice([3, 5, 7, 10, 14, 21, 28], size=n_items)
    on_hand = rng.integers(0, 200, n_items)
    return {
        "rate": rate,
        "demand": demand,
        "cost": cost,
        "order_cost": np.round(rng.uniform(5, 60, n_items), 2),
        "holding": rng.choice([0.18, 0.2, 0.25, 0.3], size=n_items),
        "lead": lead,
        "lead_sd": np.round(lead * rng.uniform(0, 0.3, n_items), 1),
        "target": rng.choice([0.9, 0.95, 0.98], size=n_items),
        "pack": rng.choice([1, 1, 6, 12, 24], size=n_items),
        "moq": rng.choice([0, 0, 10, 50], size=n_items),
        "on_hand": on_hand,
        "on_order": rng.integers(0, 50, n_items) * (on_hand < 50),
        "backordered": rng.integers(0, 5, n_items) * (rng.random(n_items) < 0.05),
        "cur_q": rng.integers(10, 400, n_items),
        "cur_r": rng.integers(0, 150, n_items),
    }


def item_codes(n_items: int) -> list[str]:
    """Zero-padded text codes, e.g. 000123: they must come back as text, not 123."""
    return [f"{k:06d}" for k in range(1, n_items + 1)]


def write_history_file(
    path: Path, codes: list[str], demand: np.ndarray, dates: list[_dt.date]
) -> Path:
    """The long history (a row per item and week with a sale) as CSV or Parquet."""
    import pandas as pd

    i, t = np.nonzero(demand)
    frame = pd.DataFrame(
        {
            "Item": np.asarray(codes, dtype=object)[i],
            "Period": np.asarray([d.isoformat() for d in dates], dtype=object)[t],
            "Quantity": demand[i, t],
        }
    )
    if path.suffix == ".csv":
        frame.to_csv(path, index=False)
    else:
        frame.to_parquet(path, index=False)
    return path


def write_workbook(
    path: Path,
    n_items: int,
    *,
    layout: str = "wide",
    weeks: int = WEEKS,
    seed: int = 2024,
    history_format: str = "parquet",
) -> Path:
    """Write the workbook (and for layout "file" its history file); return its path."""
    d = make_data(n_items, weeks, seed)
    codes = item_codes(n_items)
    wb = xlsxwriter.Workbook(
        str(path),
        {
            "constant_memory": True,
            "strings_to_numbers": False,
            "strings_to_formulas": False,
            "strings_to_urls": False,
        },
    )
    bold = wb.add_format({"bold": True})
    date_fmt = wb.add_format({"num_format": "yyyy-mm-dd", "bold": True})
    cell_date = wb.add_format({"num_format": "yyyy-mm-dd"})

    ws = wb.add_worksheet("Items")
    ws.write_row(0, 0, ITEM_HEADERS, bold)
    numeric = [
        d[k].tolist()
        for k in (
            "cost",
            "order_cost",
            "holding",
            "lead",
            "lead_sd",
            "target",
            "pack",
            "moq",
            "on_hand",
            "on_order",
            "backordered",
            "cur_q",
            "cur_r",
        )
    ]
    for i, code in enumerate(codes):
        r = i + 1
        ws.write_string(r, 0, code)
        ws.write_string(r, 1, f"Invented part {code}")
        ws.write_string(r, 2, CATEGORIES[i % len(CATEGORIES)])
        ws.write_string(r, 3, SUPPLIERS[(i * 7) % len(SUPPLIERS)])
        for j, col in enumerate(numeric):
            ws.write_number(r, 4 + j, col[i])

    dates = [FIRST_WEEK + _dt.timedelta(weeks=t) for t in range(weeks)]
    history_file = None
    if layout == "file":
        history_file = Path(path).with_name(f"{Path(path).stem}-history.{history_format}")
        write_history_file(history_file, codes, d["demand"], dates)
    else:
        ws = wb.add_worksheet("History")
    if layout == "file":
        pass
    elif layout == "wide":
        ws.write_string(0, 0, "Item", bold)
        for t, day in enumerate(dates):
            ws.write_datetime(0, 1 + t, _dt.datetime.combine(day, _dt.time()), date_fmt)
        demand = d["demand"].tolist()
        for i, code in enumerate(codes):
            ws.write_string(i + 1, 0, code)
            ws.write_row(i + 1, 1, demand[i])
    elif layout == "long":
        rows = int(np.count_nonzero(d["demand"]))
        if rows >= 1_048_576:
            wb.close()
            Path(path).unlink(missing_ok=True)
            raise SystemExit(
                f"a long History of {n_items:,} items would need {rows:,} rows, "
                "more than a sheet holds (1,048,576); use the wide layout"
            )
        ws.write_row(0, 0, ("Item", "Period", "Quantity"), bold)
        stamps = [_dt.datetime.combine(day, _dt.time()) for day in dates]
        r = 1
        demand = d["demand"]
        for i, code in enumerate(codes):
            row = demand[i].tolist()
            for t in np.flatnonzero(demand[i]).tolist():  # a week with no row is zero
                ws.write_string(r, 0, code)
                ws.write_datetime(r, 1, stamps[t], cell_date)
                ws.write_number(r, 2, row[t])
                r += 1
    else:
        raise ValueError(f"layout must be wide, long or file, not {layout!r}")

    ws = wb.add_worksheet("Settings")
    ws.write_row(0, 0, ("Setting", "Value"), bold)
    ws.write_row(1, 0, ("Service measure", "cycle service"))
    ws.write_row(2, 0, ("Currency", "EUR"))
    if history_file is not None:
        ws.write_row(3, 0, ("History file", history_file.name))
    wb.close()
    return Path(path)


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("items", type=int, help="number of items, e.g. 1000, 10000, 100000")
    ap.add_argument("-o", "--output", type=Path, default=None)
    ap.add_argument("--layout", choices=("wide", "long", "file"), default="wide")
    ap.add_argument("--history-format", choices=("parquet", "csv"), default="parquet")
    ap.add_argument("--weeks", type=int, default=WEEKS)
    ap.add_argument("--seed", type=int, default=2024)
    a = ap.parse_args(argv)
    out = a.output or Path(f"bench-{a.items}-{a.layout}.xlsx")
    write_workbook(
        out, a.items, layout=a.layout, weeks=a.weeks, seed=a.seed, history_format=a.history_format
    )
    print(out)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
