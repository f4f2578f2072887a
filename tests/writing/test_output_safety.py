"""What xlpolicy writes is safe to open, complete or absent, and never the input.

Text from the user lands as text (never a formula, in the workbook or the CSV), control
characters are removed, results that would not fit a sheet are refused before writing, and
a run that fails or is stopped while writing leaves the previous output exactly as it was
and no temporary file behind.
"""

from __future__ import annotations

import dataclasses
import hashlib
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from builders import BASE_HEADERS, weekly_history, write_workbook
from click.testing import CliRunner
from openpyxl import load_workbook

import xlpolicy
from xlpolicy import api
from xlpolicy.cli import main
from xlpolicy.problems import Problem, Severity, UnusableWorkbook
from xlpolicy.writing import sheets as sheets_mod
from xlpolicy.writing import warnings_sheet
from xlpolicy.writing.sheets import DEFAULT_SHEET_NAMES, OutputTooLarge, check_fits
from xlpolicy.writing.tables import csv_safe

# Text that a spreadsheet program would run if written as a formula (the usual "CSV/formula
# injection" shapes, common practice in security testing), and control characters.
HOSTILE = {
    "EQ": '=HYPERLINK("http://example.invalid","click")',
    "PLUS": "+cmd|' /C calc'!A0",
    "MINUS": "-2+3",
    "AT": "@SUM(1,2)",
    "TAB": "\t=1+1",
    "CTRL": "bolt\x01set\x07 with\x1bescapes",
}


def hostile_workbook(path: Path) -> Path:
    """Written with xlsxwriter, which stores control characters as Excel does (_x0001_)."""
    import xlsxwriter

    history = weekly_history(list(HOSTILE), weeks=60)
    wb = xlsxwriter.Workbook(str(path), {"strings_to_formulas": False})
    ws = wb.add_worksheet("Items")
    ws.write_row(0, 0, BASE_HEADERS)
    for r, (code, text) in enumerate(HOSTILE.items(), start=1):
        for c, v in enumerate([code, text, text, 10.0, 20.0, 0.2, 14.0]):
            ws.write_string(r, c, v) if isinstance(v, str) else ws.write_number(r, c, v)
    hs = wb.add_worksheet("History")
    hs.write_row(0, 0, ["Item", "Period", "Quantity"])
    r = 1
    for code, qty in history.items():
        for k, q in enumerate(qty):
            hs.write_row(r, 0, [code, k + 1, q])
            r += 1
    wb.close()
    return path


def digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def leftovers(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.iterdir() if ".tmp" in p.name)


def test_user_text_lands_as_text_in_every_sheet_and_the_csv(tmp_path):
    src = hostile_workbook(tmp_path / "h.xlsx")
    result = xlpolicy.plan(src, csv=tmp_path / "h.csv")
    wb = load_workbook(result.output)  # loads: the XML is valid despite the control chars
    seen = 0
    for name in result.sheets:
        for row in wb[name].iter_rows():
            for cell in row:
                v = cell.value
                if not isinstance(v, str):
                    continue
                assert not any(ord(ch) < 32 and ch not in "\t\n" for ch in v), (name, v)
                for text in HOSTILE.values():
                    if v == text.strip():  # free text is read stripped of outer spaces
                        seen += 1
                        assert cell.data_type == "s", (name, cell.coordinate)
                        if v[0] in "=+-@":
                            assert cell.quotePrefix, (name, cell.coordinate)
    assert seen >= 5  # descriptions and suppliers on the Policy and Reorder sheets
    assert "boltset withescapes" in {
        c.value for row in wb[DEFAULT_SHEET_NAMES["policy"]].iter_rows() for c in row
    }
    table = pd.read_csv(tmp_path / "h.csv", dtype=str, keep_default_na=False)
    desc = dict(zip(table["item"], table["description"], strict=True))
    assert desc["EQ"] == "'" + HOSTILE["EQ"] and desc["AT"] == "'" + HOSTILE["AT"]
    assert desc["PLUS"].startswith("'+") and desc["TAB"] == "'=1+1"
    assert desc["CTRL"] == "boltset withescapes"


@pytest.mark.parametrize(
    "raw, safe",
    [
        ("=1+1", "'=1+1"),
        ("-12", "-12"),
        ("-1.5e3", "-1.5e3"),
        ("-A1", "'-A1"),
        ("@x", "'@x"),
        ("plain", "plain"),
        ("a\x00b", "ab"),
        (12.5, 12.5),
        (None, None),
    ],
)
def test_csv_safe(raw, safe):
    assert csv_safe(raw) == safe


def _repeated(df: pd.DataFrame, n: int) -> pd.DataFrame:
    return df.iloc[np.zeros(n, dtype=int)].reset_index(drop=True)


def _real_report(tmp_path: Path):
    src = write_workbook(
        tmp_path / "w.xlsx",
        [["A", "d", "s", 10.0, 20.0, 0.2, 14.0]],
        history=weekly_history(["A"], weeks=60),
    )
    return src, xlpolicy.analyse(src)


def test_results_too_big_for_a_sheet_are_refused_before_writing(tmp_path):
    src, report = _real_report(tmp_path)
    check_fits(report)  # a small report fits
    big = _repeated(report.results, sheets_mod.MAX_SHEET_ROWS)  # more than a sheet holds
    huge = dataclasses.replace(report, results=big)
    with pytest.raises(OutputTooLarge) as info:
        check_fits(huge)
    assert "1,048,576 a sheet can hold" in str(info.value) and "--csv" in str(info.value)
    out = tmp_path / "out.xlsx"
    with pytest.raises(OutputTooLarge):
        api.write_policy_workbook(src, out, huge)
    assert not out.exists() and leftovers(tmp_path) == []


def test_warnings_past_the_row_limit_are_cut_with_a_note(tmp_path, monkeypatch):
    # the real limit needs a million problems; the sheet's own cut-off is lowered instead
    monkeypatch.setattr(warnings_sheet, "MAX_PROBLEM_ROWS", 4)
    src, report = _real_report(tmp_path)
    extra = [
        Problem(Severity.WARNING, "Items", f"B{k}", "A", None, f"note {k}", "x") for k in range(10)
    ]
    report = dataclasses.replace(report, problems=report.problems + extra)
    out = tmp_path / "out.xlsx"
    api.write_policy_workbook(src, out, report)
    ws = load_workbook(out)["Warnings"]
    assert ws.max_row == 1 + 4
    assert "more problems, not listed" in ws.cell(5, 6).value


class Unwritable:
    """A value that cannot be turned into text: writing it fails part way through."""

    def __str__(self) -> str:
        raise RuntimeError("this value cannot be written")


@pytest.mark.parametrize("standalone", [False, True])
def test_a_failure_while_writing_keeps_the_old_output(tmp_path, standalone):
    src = hostile_workbook(tmp_path / "h.xlsx")
    if standalone:  # an .ods-like path: the standalone writer (no merge into a copy)
        src = tmp_path / "csv-folder"
        src.mkdir()
        (src / "Items.csv").write_text(
            "Item,Unit cost,Order cost,Holding rate,Lead time days\nA,10,20,0.2,14\n"
        )
        (src / "History.csv").write_text(
            "Item,Period,Quantity\n"
            + "".join(f"A,{k + 1},{q:g}\n" for k, q in enumerate(weekly_history(["A"])["A"]))
        )
    first = xlpolicy.plan(src)
    old = digest(first.output)
    input_before = digest(src) if src.is_file() else None
    report = xlpolicy.analyse(src)
    report.problems.append(
        Problem(
            Severity.WARNING,
            "Items",
            "A2",
            "A",
            Unwritable(),
            "a problem whose value cannot be written",
            "x",
        )
    )
    with pytest.raises(RuntimeError, match="cannot be written"):
        api.write_policy_workbook(src, first.output, report)
    assert digest(first.output) == old
    assert leftovers(first.output.parent) == []
    if input_before is not None:
        assert digest(src) == input_before


_SIGTERM_SCRIPT = r"""
import os, signal, sys
from pathlib import Path
from xlpolicy import api, cli
from xlpolicy.problems import Problem, Severity

class Stop:
    def __str__(self):
        os.kill(os.getpid(), signal.SIGTERM)  # stopped by the system half way through writing
        return "never reached"

src, out = Path(sys.argv[1]), Path(sys.argv[2])
report = api.analyse(src)
report.problems.append(Problem(Severity.WARNING, "Items", "A2", "A", Stop(), "m", "x"))
cli._run(lambda: api.write_policy_workbook(src, out, report))
"""


def test_a_terminated_run_leaves_the_old_output_and_no_temporary_file(tmp_path):
    src = hostile_workbook(tmp_path / "h.xlsx")
    out = xlpolicy.plan(src).output
    old, input_before = digest(out), digest(src)
    root = str(Path(xlpolicy.__file__).resolve().parent.parent)
    env = dict(os.environ, PYTHONPATH=os.pathsep.join([root, os.environ.get("PYTHONPATH", "")]))
    proc = subprocess.run(
        [sys.executable, "-c", _SIGTERM_SCRIPT, str(src), str(out)],
        capture_output=True,
        text=True,
        env=env,
    )
    assert proc.returncode == 130, proc.stderr
    assert "Stopped before the end" in proc.stderr and "Traceback" not in proc.stderr
    assert digest(out) == old and digest(src) == input_before
    assert leftovers(tmp_path) == []


def test_output_names_that_would_lose_or_fake_macros_are_refused(tmp_path):
    src = hostile_workbook(tmp_path / "h.xlsx")
    res = CliRunner().invoke(main, ["plan", str(src), "-o", str(tmp_path / "h.xlsm")])
    assert res.exit_code == 2 and "holds no macros" in res.output
    res = CliRunner().invoke(main, ["plan", str(src), "-o", str(tmp_path / "." / "h.xlsx")])
    assert res.exit_code == 2 and "never writes over" in res.output


def test_too_large_output_is_a_message_through_the_cli(tmp_path):
    # the API turns the refusal into a fatal problem, which the CLI prints (exit 1)
    src, report = _real_report(tmp_path)
    big = _repeated(report.results, sheets_mod.MAX_SHEET_ROWS)
    with pytest.raises(OutputTooLarge):
        check_fits(dataclasses.replace(report, results=big))
    assert issubclass(OutputTooLarge, ValueError)
    assert UnusableWorkbook  # raised by api.plan with code output-too-large
