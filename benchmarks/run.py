"""Time `xlpolicy plan` on large workbooks against the floor and the naive path.

    python benchmarks/run.py                 # 1k, 10k and 100k items, wide History
    python benchmarks/run.py --quick         # 1k only: a smoke check (CI), no timing claims
    python benchmarks/run.py --sizes 1000 10000 --layout both
    python benchmarks/run.py --layout all --features   # the tables in docs/performance.md

For each size, every measurement runs in a fresh Python process, one after another:

- floor: the fastest read of the same workbook's Items and History sheets (python-calamine
  or fastexcel, whichever is faster here) plus an xlsxwriter write (constant_memory) of a
  results table of the same size (items x 21 columns). Nothing can read and write the same
  data faster with these libraries, so it is the yardstick.
- plan: `python -m xlpolicy plan` end to end (read, check, plan, write the six sheets into
  a copy of the workbook), its wall time and peak memory (the child's max RSS, os.wait4).
- naive: openpyxl read-only read, a per-item Python loop (scipy.stats called item by item),
  and an openpyxl write-back: the whole workbook loaded, the results sheet added, all
  saved. It takes minutes at 100k items, so above ``--naive-max`` items it is measured at
  that size and scaled linearly, marked "~".
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
RESULT_COLUMNS = 21


# ---------------------------------------------------------------------------
# Children: each prints one JSON line {"seconds": ..., ...}


def _child_read(reader: str, path: str) -> dict:
    t0 = time.perf_counter()
    cells = 0
    history_file = Path(path).with_name(Path(path).stem + "-history.parquet")
    sheets = ("Items",) if history_file.exists() else ("Items", "History")
    if history_file.exists():  # layout "file": the history is read by Arrow, the floor's best
        import pyarrow.parquet as pq

        table = pq.read_table(history_file)
        cells += table.num_rows * table.num_columns
    if reader == "calamine":
        from python_calamine import CalamineWorkbook

        wb = CalamineWorkbook.from_path(path)
        for name in sheets:
            rows = wb.get_sheet_by_name(name).to_python()
            cells += sum(len(r) for r in rows)
    elif reader == "fastexcel":
        import fastexcel

        reader_ = fastexcel.read_excel(path)
        for name in sheets:
            sheet = reader_.load_sheet(name)
            cells += sheet.height * sheet.width
    else:
        raise SystemExit(f"unknown reader {reader}")
    return {"seconds": time.perf_counter() - t0, "cells": cells}


def _child_write(n_items: str, out: str) -> dict:
    import numpy as np
    import xlsxwriter

    n = int(n_items)
    rng = np.random.default_rng(1)
    table = rng.random((n, RESULT_COLUMNS - 1)).tolist()
    t0 = time.perf_counter()
    wb = xlsxwriter.Workbook(out, {"constant_memory": True})
    ws = wb.add_worksheet("Results")
    ws.write_row(0, 0, [f"column {k}" for k in range(RESULT_COLUMNS)])
    for i, row in enumerate(table):
        ws.write_string(i + 1, 0, f"{i + 1:06d}")
        ws.write_row(i + 1, 1, row)
    wb.close()
    return {"seconds": time.perf_counter() - t0}


def _child_naive(path: str, out: str) -> dict:
    """openpyxl read-only read, a per-item loop, openpyxl write-back: how one would start.

    The write-back is what a tool that keeps the user's sheets must do with openpyxl alone:
    load the whole workbook, add the results sheet, save it all again.
    """
    import math

    from openpyxl import load_workbook
    from scipy import stats

    t0 = time.perf_counter()
    wb = load_workbook(path, read_only=True, data_only=True)
    items = list(wb["Items"].iter_rows(values_only=True))
    history = list(wb["History"].iter_rows(values_only=True))
    wb.close()
    t_read = time.perf_counter() - t0
    head = [str(h).strip().lower() for h in items[0]]
    col = {h: k for k, h in enumerate(head)}
    sales = {str(r[0]): [float(x or 0) for x in r[1:]] for r in history[1:]}
    results = []
    for r in items[1:]:
        code = str(r[col["item"]])
        h = sales.get(code, [])
        n = len(h)
        mean = sum(h) / n if n else 0.0
        sd = math.sqrt(sum((x - mean) ** 2 for x in h) / (n - 1)) if n > 1 else 0.0
        d_year = mean * 52
        cost, s = float(r[col["unit cost"]]), float(r[col["order cost"]])
        hold = float(r[col["holding rate"]]) * cost
        lead = float(r[col["lead time days"]]) / 7
        q = math.sqrt(2 * d_year * s / hold) if d_year > 0 else 0.0
        mu, sig = mean * lead, sd * math.sqrt(lead)
        z = stats.norm.ppf(float(r[col["service target"]]))
        rop = math.ceil(mu + z * sig)
        loss = sig * stats.norm.pdf(z) - sig * z * stats.norm.sf(z)
        row = [
            code,
            d_year,
            mean,
            sd,
            lead,
            mu,
            sig,
            q,
            rop,
            rop - mu,
            z,
            loss,
            d_year / q if q else 0.0,
            d_year / q * s if q else 0.0,
            hold * q / 2,
            hold * (rop - mu),
            0.0,
            0.0,
            0.0,
            0.0,
            0.0,
        ]
        results.append(row[:RESULT_COLUMNS])
    t_loop = time.perf_counter() - t0 - t_read
    out_wb = load_workbook(path)
    ws = out_wb.create_sheet("Results")
    ws.append([f"column {k}" for k in range(RESULT_COLUMNS)])
    for row in results:
        ws.append(row)
    out_wb.save(out)
    total = time.perf_counter() - t0
    return {"seconds": total, "read": t_read, "loop": t_loop, "write": total - t_read - t_loop}


CHILDREN = {"read": _child_read, "write": _child_write, "naive": _child_naive}


# ---------------------------------------------------------------------------
# Parent


def _run_child(args: list[str]) -> dict:
    """Run one child (a fresh interpreter); its JSON plus its wall time."""
    t0 = time.perf_counter()
    proc = subprocess.Popen(
        [sys.executable, *args], stdout=subprocess.PIPE, stderr=subprocess.PIPE, cwd=ROOT
    )
    out, err = proc.communicate()
    wall = time.perf_counter() - t0
    if proc.returncode != 0:
        raise SystemExit(f"{' '.join(args)} failed ({proc.returncode}):\n{err.decode()[-2000:]}")
    info: dict = {"wall": wall}
    lines = [ln for ln in out.decode().splitlines() if ln.startswith("{")]
    if lines:
        info.update(json.loads(lines[-1]))
    return info


def _run_measured(args: list[str]) -> dict:
    """Wall time and peak RSS of one command, via os.wait4 on that very child."""
    t0 = time.perf_counter()
    proc = subprocess.Popen(
        [sys.executable, *args], stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, cwd=ROOT
    )
    _, status, usage = os.wait4(proc.pid, 0)
    wall = time.perf_counter() - t0
    err = proc.stderr.read().decode() if proc.stderr else ""
    code = os.waitstatus_to_exitcode(status)
    if code != 0:
        raise SystemExit(f"{' '.join(args)} failed ({code}):\n{err[-2000:]}")
    return {"seconds": wall, "rss_mb": usage.ru_maxrss / 1024}


def _child_json(name: str, *args: str) -> dict:
    return _run_child([str(Path(__file__).resolve()), "--child", name, *args])


def _workbook(folder: Path, n: int, layout: str) -> Path:
    path = folder / f"bench-{n}-{layout}.xlsx"
    if not path.exists():  # ("file" also writes bench-<n>-file-history.parquet beside it)
        subprocess.run(
            [
                sys.executable,
                str(HERE / "make_workbook.py"),
                str(n),
                "-o",
                str(path),
                "--layout",
                layout,
            ],
            check=True,
            stdout=subprocess.DEVNULL,
            cwd=ROOT,
        )
    return path


def _have(module: str) -> bool:
    try:
        __import__(module)
    except ImportError:
        return False
    return True


def measure(
    folder: Path, n: int, layout: str, naive_max: int, naive_cache: dict[str, tuple[int, float]]
) -> dict:
    """All measurements for one size and layout."""
    path = _workbook(folder, n, layout)
    row: dict = {"items": n, "layout": layout, "mb": path.stat().st_size / 1e6}
    reads = {}
    for reader in ("calamine", "fastexcel"):
        if _have({"calamine": "python_calamine", "fastexcel": "fastexcel"}[reader]):
            reads[reader] = _child_json("read", reader, str(path))["seconds"]
    best = min(reads, key=reads.get)
    row["read"], row["reader"] = reads[best], best
    row["write"] = _child_json("write", str(n), str(folder / "floor-out.xlsx"))["seconds"]
    row["floor"] = row["read"] + row["write"]
    plan = _run_measured(
        ["-m", "xlpolicy", "plan", str(path), "-q", "-o", str(folder / f"plan-{n}-{layout}.xlsx")]
    )
    row["plan"], row["rss_mb"] = plan["seconds"], plan["rss_mb"]
    if layout != "wide":  # the naive path reads the wide History only (and no Parquet)
        row["naive"], row["naive_est"] = float("nan"), False
    elif n <= naive_max:
        naive = _child_json("naive", str(path), str(folder / "naive-out.xlsx"))
        row["naive"], row["naive_est"] = naive["seconds"], False
        naive_cache[layout] = (n, naive["seconds"])
    else:
        if layout not in naive_cache:
            m = naive_max
            naive = _child_json(
                "naive", str(_workbook(folder, m, layout)), str(folder / "naive-out.xlsx")
            )
            naive_cache[layout] = (m, naive["seconds"])
        m, secs = naive_cache[layout]
        row["naive"], row["naive_est"] = secs * n / m, True
    return row


def _budget(n: int) -> float:
    """A stock budget that binds: 70 % of the items' EOQ cycle stock value (same seed data)."""
    sys.path.insert(0, str(HERE))
    from make_workbook import make_data

    d = make_data(n)
    demand = d["demand"].mean(axis=1) * 52
    q = (2 * demand * d["order_cost"] / (d["holding"] * d["cost"])) ** 0.5
    return float(0.7 * (d["cost"] * q / 2).sum())


#: What the optional features cost: each is a plan run with these options, timed against
#: the plainest full plan (no exchange curve, no back-test), each feature forced on alone.
FEATURES = {
    "plan, no exchange curve, no back-test": ["--no-curve", "--no-simulate"],
    "plan with the exchange curve": ["--curve", "--no-simulate"],
    "plan --simulate (100 runs)": ["--no-curve", "--simulate"],
    "plan with a binding --budget": ["--no-curve", "--no-simulate", "--budget", "{budget}"],
}


def features(folder: Path, n: int, layout: str) -> list[dict]:
    """The cost of each optional feature at n items (see FEATURES)."""
    path = _workbook(folder, n, layout)
    budget = f"{_budget(n):.0f}"
    out = []
    for name, opts in FEATURES.items():
        args = [o.replace("{budget}", budget) for o in opts]
        got = _run_measured(
            [
                "-m",
                "xlpolicy",
                "plan",
                str(path),
                "-q",
                "-o",
                str(folder / f"feature-{n}.xlsx"),
                *args,
            ]
        )
        out.append({"items": n, "feature": name, **got})
    return out


def feature_table(rows: list[dict]) -> str:
    lines = [
        "| items | run | time | extra over the plainest plan | peak RSS MB |",
        "|" + " --- |" * 5,
    ]
    base = {r["items"]: r["seconds"] for r in rows if r["feature"] == next(iter(FEATURES))}
    for r in rows:
        extra = r["seconds"] - base[r["items"]]
        lines.append(
            f"| {r['items']:,} | {r['feature']} | {r['seconds']:.2f} s | "
            f"{extra:+.2f} s | {r['rss_mb']:.0f} |"
        )
    return "\n".join(lines)


def table(rows: list[dict]) -> str:
    head = (
        "| items | layout | file MB | read (fastest) | write | floor | plan | plan / floor "
        "| naive | naive / plan | plan peak RSS MB |"
    )
    lines = [head, "|" + " --- |" * 11]
    for r in rows:
        naive = (
            f"{'~' if r['naive_est'] else ''}{r['naive']:.1f} s"
            if r["naive"] == r["naive"]
            else "n/a"
        )
        lines.append(
            f"| {r['items']:,} | {r['layout']} | {r['mb']:.1f} | {r['read']:.2f} s "
            f"({r['reader']}) | {r['write']:.2f} s | {r['floor']:.2f} s | {r['plan']:.2f} s | "
            f"{r['plan'] / r['floor']:.2f} | {naive} | "
            f"{r['naive'] / r['plan'] if r['naive'] == r['naive'] else 'n/a':.4} | "
            f"{r['rss_mb']:.0f} |"
        )
    return "\n".join(lines)


def main(argv: list[str] | None = None) -> int:
    argv = sys.argv[1:] if argv is None else argv
    if argv[:1] == ["--child"]:
        print(json.dumps(CHILDREN[argv[1]](*argv[2:])))
        return 0
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="1,000 items only (a smoke check)")
    ap.add_argument("--sizes", type=int, nargs="+", default=[1000, 10000, 100000])
    ap.add_argument(
        "--layout",
        choices=("wide", "long", "file", "both", "all"),
        default="wide",
        help="both: wide and long; all: wide, long and file "
        "(the history in a Parquet file beside the workbook)",
    )
    ap.add_argument(
        "--features",
        action="store_true",
        help="also time the optional features (exchange curve, back-test, a "
        "binding budget) at each size, wide layout",
    )
    ap.add_argument(
        "--naive-max",
        type=int,
        default=10000,
        help="largest size at which the naive path is run; larger ones are scaled",
    )
    ap.add_argument(
        "--dir",
        type=Path,
        default=None,
        help="where to keep the generated workbooks (default: a temporary folder)",
    )
    a = ap.parse_args(argv)
    sizes = [1000] if a.quick else sorted(a.sizes)
    layouts = {"both": ("wide", "long"), "all": ("wide", "long", "file")}.get(a.layout, (a.layout,))
    tmp = None
    if a.dir is None:
        tmp = tempfile.TemporaryDirectory(prefix="xlpolicy-bench-")
        folder = Path(tmp.name)
    else:
        folder = a.dir
        folder.mkdir(parents=True, exist_ok=True)
    rows: list[dict] = []
    cache: dict[str, tuple[int, float]] = {}
    try:
        for layout in layouts:
            for n in sizes:
                if layout == "long" and n > 10_000:  # past a sheet's rows: see "file"
                    continue
                rows.append(measure(folder, n, layout, a.naive_max, cache))
                print(f"measured {n:,} items ({layout})", file=sys.stderr, flush=True)
        feats = []
        if a.features:
            for n in sizes:
                feats += features(folder, n, "wide")
                print(f"measured the features at {n:,} items", file=sys.stderr, flush=True)
    finally:
        if tmp is not None:
            tmp.cleanup()
    print(
        f"python {sys.version.split()[0]}, {os.cpu_count()} cores; floor = fastest read of "
        "Items + History + xlsxwriter write of an items x 21 table; ~ = naive path scaled "
        f"linearly from {a.naive_max:,} items"
    )
    print(table(rows))
    if feats:
        print()
        print(feature_table(feats))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
