"""History from a CSV or Parquet file beside the workbook (issue: catalogues past a sheet).

The reference is the tool itself on the same data laid out in a History sheet: a history
file must give the very same policies. Around it, one test per rule of the file reader
(missing file, type, columns, each kind of bad cell), with the cell named as in a sheet
(line N of the file, the column's letter), and the traps of fast readers: item codes like
000123 stay text and a stray "n/a" far down the file is reported, not blanked.
"""

from __future__ import annotations

import datetime as dt
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from builders import item_row, weekly_history, write_workbook

import xlpolicy

CODES = ["000123", "000124", "B-7"]


def _rows(history: dict[str, list[float]], start: dt.date = dt.date(2024, 1, 1)) -> list:
    return [
        (code, (start + dt.timedelta(weeks=k)).isoformat(), q)
        for code, qty in history.items()
        for k, q in enumerate(qty)
    ]


def _frame(rows: list) -> pd.DataFrame:
    return pd.DataFrame(rows, columns=["Item", "Period", "Quantity"])


def _csv(path: Path, rows: list, header: str = "Item,Period,Quantity", sep: str = ",") -> Path:
    lines = [header] + [sep.join(str(x) for x in r) for r in rows]
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def _plan(tmp: Path, name: str, **kw) -> pd.DataFrame:
    result = xlpolicy.plan(tmp / name, write_workbook=False, **kw)
    return result.report.results.set_index("item")


KEYS = [
    "order_qty",
    "reorder_point",
    "safety_stock",
    "annual_demand",
    "demand_sd_per_period",
    "annual_total_cost",
    "model",
]


@pytest.mark.parametrize("kind", ["csv", "parquet", "semicolon"])
def test_file_gives_the_same_policies_as_the_sheet(tmp_path: Path, kind: str) -> None:
    hist = weekly_history(CODES, weeks=60, mean=12.0)
    items = [item_row(c) for c in CODES]
    write_workbook(tmp_path / "sheet.xlsx", items, history=hist)
    rows = _rows(hist)
    if kind == "parquet":
        _frame(rows).to_parquet(tmp_path / "sales.parquet", index=False)
        file = "sales.parquet"
    elif kind == "csv":
        _csv(tmp_path / "sales.csv", rows)
        file = "sales.csv"
    else:
        _csv(
            tmp_path / "sales.csv",
            [(a, b, str(q).replace(".", ",")) for a, b, q in rows],
            header="Item;Period;Quantity",
            sep=";",
        )
        file = "sales.csv"
    write_workbook(tmp_path / "file.xlsx", items, settings={"History file": file})
    a, b = _plan(tmp_path, "sheet.xlsx"), _plan(tmp_path, "file.xlsx")
    assert list(b.index) == CODES  # codes as text, in the file's order
    pd.testing.assert_frame_equal(a[KEYS], b[KEYS])


def test_history_option_overrides_the_sheet(tmp_path: Path) -> None:
    hist = weekly_history(CODES, weeks=60, mean=12.0)
    items = [item_row(c) for c in CODES]
    doubled = {c: [2 * q for q in v] for c, v in hist.items()}
    write_workbook(tmp_path / "w.xlsx", items, history=hist)
    _frame(_rows(doubled)).to_parquet(tmp_path / "big.parquet", index=False)
    base = _plan(tmp_path, "w.xlsx")
    other = xlpolicy.plan(
        tmp_path / "w.xlsx", write_workbook=False, history=tmp_path / "big.parquet"
    ).report
    got = other.results.set_index("item")
    np.testing.assert_allclose(got["annual_demand"], 2 * base["annual_demand"])
    assert any(p.code == "history-from-file" for p in other.problems)


def test_bad_cells_far_down_are_reported_by_line(tmp_path: Path) -> None:
    """A reader that infers types from the first rows would blank these; this one says so."""
    codes = [f"{k:06d}" for k in range(1, 31)]
    hist = weekly_history(codes, weeks=52, mean=5.0)
    rows = _rows(hist)  # 1,560 rows
    rows[1400] = (rows[1400][0], rows[1400][1], "n/a")
    rows[1450] = (rows[1450][0], rows[1450][1], -3)
    rows[1500] = ("", rows[1500][1], 4)
    rows[1510] = ("999999", rows[1510][1], 4)
    rows[1520] = (rows[1520][0], "someday", 4)
    _csv(tmp_path / "h.csv", rows)
    write_workbook(
        tmp_path / "w.xlsx", [item_row(c) for c in codes], settings={"History file": "h.csv"}
    )
    problems = xlpolicy.check(tmp_path / "w.xlsx")
    by_code = {p.code: p for p in problems}
    assert by_code["history-quantity-not-number"].cell == "C1402"  # header = line 1
    assert by_code["history-quantity-not-number"].sheet == "h.csv"
    assert by_code["history-quantity-not-number"].item == rows[1400][0]
    assert by_code["history-quantity-negative"].cell == "C1452"
    assert by_code["history-item-missing"].cell == "A1502"
    assert by_code["history-unknown-item"].cell == "A1512"
    assert by_code["history-unknown-item"].item == "999999"
    assert by_code["history-period-bad"].cell == "B1522"
    res = _plan(tmp_path, "w.xlsx")
    assert "000001" in res.index  # codes stay text


def test_many_bad_rows_are_counted_not_listed(tmp_path: Path) -> None:
    codes = ["A1"]
    rows = [
        ("A1", (dt.date(2024, 1, 1) + dt.timedelta(weeks=k)).isoformat(), "x" if k % 2 else 3)
        for k in range(100)
    ]
    _csv(tmp_path / "h.csv", rows)
    write_workbook(
        tmp_path / "w.xlsx", [item_row(c) for c in codes], settings={"History file": "h.csv"}
    )
    bad = [
        p for p in xlpolicy.check(tmp_path / "w.xlsx") if p.code == "history-quantity-not-number"
    ]
    assert len(bad) == 21 and "and 30 more rows" in bad[-1].message


@pytest.mark.parametrize(
    "setup, code",
    [
        ("missing", "history-file-missing"),
        ("type", "history-file-type"),
        ("columns", "history-file-columns"),
        ("garbage", "history-file-unreadable"),
    ],
)
def test_unusable_history_file_stops_with_a_message(tmp_path: Path, setup: str, code: str) -> None:
    name = {"type": "h.json", "garbage": "h.parquet"}.get(setup, "h.csv")
    if setup == "type":
        (tmp_path / name).write_text("{}")
    elif setup == "columns":
        _csv(tmp_path / name, [("A1", 3)], header="Item,Amount")
    elif setup == "garbage":
        (tmp_path / name).write_bytes(b"PAR1 this is not a parquet file")
    write_workbook(tmp_path / "w.xlsx", [item_row("A1")], settings={"History file": name})
    problems = xlpolicy.check(tmp_path / "w.xlsx")
    fatal = [p for p in problems if p.severity.value == "fatal"]
    assert fatal and fatal[0].code == code
    assert name in fatal[0].message or name in fatal[0].sheet


def test_cli_history_option_and_exit_codes(tmp_path: Path) -> None:
    hist = weekly_history(["A1", "B2"], weeks=40)
    write_workbook(tmp_path / "w.xlsx", [item_row(c) for c in hist])
    _csv(tmp_path / "h.csv", _rows(hist))
    out = tmp_path / "out.xlsx"
    run = subprocess.run(
        [
            sys.executable,
            "-m",
            "xlpolicy",
            "plan",
            str(tmp_path / "w.xlsx"),
            "--history",
            str(tmp_path / "h.csv"),
            "-o",
            str(out),
            "-q",
        ],
        capture_output=True,
        text=True,
    )
    assert run.returncode == 0, run.stderr
    assert out.exists()
    run = subprocess.run(
        [
            sys.executable,
            "-m",
            "xlpolicy",
            "plan",
            str(tmp_path / "w.xlsx"),
            "--history",
            str(tmp_path / "nope.csv"),
        ],
        capture_output=True,
        text=True,
    )
    assert run.returncode == 2 and "Traceback" not in run.stderr


def test_parquet_numeric_item_codes_read_as_a_cell_would(tmp_path: Path) -> None:
    """An integer column of codes gives "123", as a number cell 123 does in Items."""
    hist = weekly_history(["123", "124"], weeks=40)
    frame = _frame(_rows(hist))
    frame["Item"] = frame["Item"].astype(int)
    frame["Period"] = pd.to_datetime(frame["Period"])  # a real date column
    frame.to_parquet(tmp_path / "h.parquet", index=False)
    write_workbook(
        tmp_path / "w.xlsx", [item_row(123), item_row(124)], settings={"History file": "h.parquet"}
    )
    write_workbook(tmp_path / "s.xlsx", [item_row(123), item_row(124)], history=hist)
    a, b = _plan(tmp_path, "s.xlsx"), _plan(tmp_path, "w.xlsx")
    pd.testing.assert_frame_equal(a[KEYS], b[KEYS])


def test_without_pyarrow_csv_goes_through_pandas_and_parquet_says_what_to_install(
    tmp_path: Path,
) -> None:
    """pyarrow is optional (the 'large' extra): hide it from a fresh interpreter and check.

    CSV: pandas' own parser gives the same policies as the History sheet; Parquet: a fatal
    problem naming the package to install, no traceback. (In a fresh process, since pandas
    itself picks its string storage by whether pyarrow can be imported.)
    """
    hist = weekly_history(CODES, weeks=60, mean=12.0)
    items = [item_row(c) for c in CODES]
    write_workbook(tmp_path / "sheet.xlsx", items, history=hist)
    _csv(tmp_path / "sales.csv", _rows(hist))
    _frame(_rows(hist)).to_parquet(tmp_path / "sales.parquet", index=False)
    write_workbook(tmp_path / "csv.xlsx", items, settings={"History file": "sales.csv"})
    write_workbook(tmp_path / "pq.xlsx", items, settings={"History file": "sales.parquet"})
    expect = _plan(tmp_path, "sheet.xlsx")
    script = (
        "import sys\n"
        "for name in ('pyarrow', 'pyarrow.csv', 'pyarrow.parquet'):\n"
        "    sys.modules[name] = None\n"
        "import json, xlpolicy\n"
        f"r = xlpolicy.plan({str(tmp_path / 'csv.xlsx')!r}, write_workbook=False)\n"
        f"r.report.results.to_json({str(tmp_path / 'csv.json')!r}, orient='records')\n"
        f"p = xlpolicy.check({str(tmp_path / 'pq.xlsx')!r})\n"
        "print(json.dumps([[x.severity.value, x.code, x.message] for x in p]))\n"
    )
    run = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True)
    assert run.returncode == 0, run.stderr
    got = pd.read_json(tmp_path / "csv.json", orient="records", dtype={"item": str})
    got = got.set_index("item")
    pd.testing.assert_frame_equal(
        expect[KEYS], got[KEYS], check_dtype=False, check_index_type=False
    )
    import json

    fatal = [p for p in json.loads(run.stdout.strip().splitlines()[-1]) if p[0] == "fatal"]
    assert fatal and fatal[0][1] == "history-file-pyarrow"
    assert "xlpolicy[large]" in fatal[0][2]
