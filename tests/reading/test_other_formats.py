""".ods, .xls and a folder of CSV files read through the same contract as .xlsx.

The reference for every format is the same data as an .xlsx workbook (written by
tests/builders.py): converted by LibreOffice (a real spreadsheet program) to .ods and .xls,
or written out as CSV with Python's csv module, each must give the same policies. The data
are invented test data; what is checked is that the readers agree with the .xlsx reader.
"""

from __future__ import annotations

import csv
import datetime as dt
import os
import shutil
import subprocess
import zipfile
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from builders import item_row, weekly_history, write_workbook
from click.testing import CliRunner
from openpyxl import load_workbook

import xlpolicy
from xlpolicy.api import default_output_path
from xlpolicy.cli import main
from xlpolicy.problems import ProblemLog, Severity
from xlpolicy.reading.sources import csv_value, open_source, sniff_delimiter

SOFFICE = shutil.which("soffice") or shutil.which("libreoffice")
REQUIRE_LO = bool(os.environ.get("XLPOLICY_REQUIRE_LIBREOFFICE"))

HEADERS = [
    "Item",
    "Description",
    "Supplier",
    "Unit cost",
    "Order cost",
    "Holding rate",
    "Lead time (days)",
]
CODES = ["000123", "B2", "C3", "000456"]
START = dt.date(2024, 1, 1)
WEEKS = 60


def items() -> list[list]:
    return [
        item_row("000123", cost=12.5, rate=0.25, desc="Grease, 400 g"),
        item_row("B2", lead=7, cost=1234.5),
        item_row("C3", cost=3.2, order=35.75),
        item_row("000456", cost=8.0, rate=0.3),
    ]


HISTORY = weekly_history(CODES, weeks=WEEKS, seed=11)
SETTINGS = {"Service target": 0.97, "Currency": "EUR"}


@pytest.fixture(scope="module")
def xlsx(tmp_path_factory) -> Path:
    """The reference workbook: item 000456 is the number 456 shown with a zero-padded format
    (History has the text "000456"), holding rates are formatted as percentages."""
    path = tmp_path_factory.mktemp("ref") / "shop.xlsx"
    write_workbook(path, items(), history=HISTORY, settings=SETTINGS)
    wb = load_workbook(path)
    ws = wb["Items"]
    ws["A5"] = 456
    ws["A5"].number_format = "000000"
    for r in range(2, 6):
        ws.cell(r, 6).number_format = "0%"
    wb.save(path)
    return path


def policies(path: Path) -> pd.DataFrame:
    """The per-item results, sorted by item, with the item codes the reader produced."""
    report = xlpolicy.analyse(path)
    return report.results.sort_values("item").reset_index(drop=True)


def assert_same_policies(got: pd.DataFrame, ref: pd.DataFrame) -> None:
    """Same items, statuses and models; every numeric column equal to float precision."""
    assert list(got["item"]) == list(ref["item"])
    assert list(got["status"]) == list(ref["status"])
    assert list(got["model"]) == list(ref["model"])
    numeric = [c for c in ref.columns if pd.api.types.is_float_dtype(ref[c])]
    assert "order_qty" in numeric and "reorder_point" in numeric
    for c in numeric:
        np.testing.assert_allclose(
            got[c].to_numpy(float),
            ref[c].to_numpy(float),
            rtol=1e-12,
            atol=1e-12,
            equal_nan=True,
            err_msg=c,
        )


def test_reference_workbook_reads_the_padded_code(xlsx):
    ref = policies(xlsx)
    assert list(ref["item"]) == ["000123", "000456", "B2", "C3"]
    assert (ref["status"] == "ok").all()


# --- LibreOffice conversions ----------------------------------------------------------------


def convert(src: Path, fmt: str, work: Path) -> Path:
    """``src`` converted by LibreOffice headless into ``fmt`` ("ods" or "xls")."""
    if SOFFICE is None:
        if REQUIRE_LO:
            pytest.fail("XLPOLICY_REQUIRE_LIBREOFFICE is set but LibreOffice is not installed")
        pytest.skip(
            "LibreOffice (soffice) is not installed, so no .ods/.xls can be made "
            "(apt-get install libreoffice-calc-nogui)"
        )
    profile = work / "lo-profile"
    out = work / f"lo-{fmt}"
    proc = subprocess.run(
        [
            SOFFICE,
            f"-env:UserInstallation={profile.as_uri()}",
            "--headless",
            "--norestore",
            "--convert-to",
            fmt,
            "--outdir",
            str(out),
            str(src),
        ],
        capture_output=True,
        text=True,
        timeout=300,
    )
    result = out / f"{src.stem}.{fmt}"
    assert result.exists(), proc.stdout + proc.stderr
    return result


@pytest.fixture(scope="module")
def converted(xlsx, tmp_path_factory) -> dict[str, Path]:
    work = tmp_path_factory.mktemp("lo")
    return {fmt: convert(xlsx, fmt, work) for fmt in ("ods", "xls")}


@pytest.mark.slow  # LibreOffice converts the reference workbook
@pytest.mark.parametrize("fmt", ["ods", "xls"])
def test_libreoffice_copies_give_the_same_policies(xlsx, converted, fmt):
    assert_same_policies(policies(converted[fmt]), policies(xlsx))


@pytest.mark.slow
@pytest.mark.parametrize("fmt", ["ods", "xls"])
def test_readers_give_the_xlsx_readers_types_and_formats(xlsx, converted, fmt):
    def sheet(path: Path, name: str):
        log = ProblemLog()
        src = open_source(path, log)
        assert src.open(), log.problems
        try:
            assert src.find_sheet(name) == name
            return src.read(name)
        finally:
            src.close()

    ref, got = sheet(xlsx, "Items"), sheet(converted[fmt], "Items")
    assert got.rows == ref.rows
    assert got.row_numbers == ref.row_numbers
    assert [type(v) for r in got.rows for v in r] == [type(v) for r in ref.rows for v in r]
    # percent-formatted cells are recognisable, the zero-padded code keeps its padding
    assert all("%" in r[5] for r in got.formats[1:])
    assert got.formats[4][0] == "000000"
    hist = sheet(converted[fmt], "History")
    assert hist.rows[1][1] == dt.datetime(2024, 1, 1)
    assert isinstance(hist.rows[1][2], int)


@pytest.mark.slow
def test_ods_input_is_written_to_its_own_xlsx_with_a_warning(converted, tmp_path):
    src = tmp_path / "shop.ods"
    shutil.copyfile(converted["ods"], src)
    before = src.read_bytes()
    res = CliRunner().invoke(main, ["plan", str(src)])
    assert res.exit_code == 0, res.output
    out = tmp_path / "shop-ods-policy.xlsx"
    assert out.exists() and f"Wrote {out}" in res.output
    assert "Your input is an OpenDocument spreadsheet (.ods)" in res.output
    assert src.read_bytes() == before
    wb = load_workbook(out)
    assert "Items" not in wb.sheetnames  # standalone: only the generated sheets
    warnings = [str(c.value) for row in wb["Warnings"].iter_rows() for c in row if c.value]
    assert any("workbook of their own" in w for w in warnings)
    result = xlpolicy.plan(src, tmp_path / "again.xlsx")
    assert result.standalone and result.output == tmp_path / "again.xlsx"
    assert result.problems[0].code == "output-standalone"


def test_output_names_for_other_inputs(tmp_path):
    # inputs that share a stem never share an output
    assert default_output_path(tmp_path / "shop.ods") == tmp_path / "shop-ods-policy.xlsx"
    assert default_output_path(tmp_path / "shop.xls") == tmp_path / "shop-xls-policy.xlsx"
    assert default_output_path(tmp_path / "shop.xlsx") == tmp_path / "shop-policy.xlsx"
    assert default_output_path(tmp_path / "m.xlsm") == tmp_path / "m-policy.xlsm"
    folder = tmp_path / "shop"
    folder.mkdir()
    assert default_output_path(folder) == tmp_path / "shop-csv-policy.xlsx"
    names = {default_output_path(tmp_path / n) for n in ("shop.ods", "shop.xls", "shop.xlsx")}
    assert len(names | {default_output_path(folder)}) == 4


# --- CSV folders --------------------------------------------------------------------------


def write_csv_folder(
    folder: Path,
    *,
    delimiter: str = ",",
    number=str,
    date=None,
    encoding: str = "utf-8",
    items_rows: list[list] | None = None,
) -> Path:
    """The reference data as Items.csv, History.csv, Settings.csv, written with csv."""
    folder.mkdir(parents=True, exist_ok=True)
    date = date or (lambda d: d.isoformat())

    def cell(v):
        return number(v) if isinstance(v, (int, float)) else v

    def write(name, rows):
        with open(folder / name, "w", newline="", encoding=encoding) as f:
            w = csv.writer(f, delimiter=delimiter)
            for r in rows:
                w.writerow([cell(v) for v in r])

    rows = items_rows if items_rows is not None else items()
    write("Items.csv", [HEADERS, *rows])
    hist = [["Item", "Period", "Quantity"]]
    for code, qty in HISTORY.items():
        for k, q in enumerate(qty):
            hist.append([code, date(START + dt.timedelta(weeks=k)), int(q)])
    write("History.csv", hist)
    write("Settings.csv", [["Setting", "Value"], *SETTINGS.items()])
    return folder


def test_csv_folder_gives_the_same_policies(xlsx, tmp_path):
    folder = write_csv_folder(tmp_path / "shop")
    assert_same_policies(policies(folder), policies(xlsx))


def test_semicolon_decimal_comma_folder_gives_the_same_policies(xlsx, tmp_path):
    # European exports: ";" between columns, "," as the decimal mark, "." grouping thousands
    # (1.234,5), dates as day.month.year (common practice in such locales).
    def eu(x):
        if isinstance(x, int) or float(x).is_integer():
            return str(int(x))
        whole, frac = f"{x:.10g}".split(".")
        whole = f"{int(whole):,}".replace(",", ".")
        return f"{whole},{frac}"

    folder = write_csv_folder(
        tmp_path / "eu", delimiter=";", number=eu, date=lambda d: d.strftime("%d.%m.%Y")
    )
    text = (folder / "Items.csv").read_text()
    assert "1.234,5" in text and "12,5" in text and "0,25" in text  # the test writes what it says
    assert_same_policies(policies(folder), policies(xlsx))
    codes = {p.code for p in xlpolicy.check(folder)}
    assert "csv-decimal-comma" in codes


def test_csv_codes_stay_text_and_bad_cells_point_at_file_row_column(tmp_path):
    rows = items()
    rows[1] = item_row("B2", lead=7, cost="n/a", desc="two\nlines")  # quoted line break
    folder = write_csv_folder(tmp_path / "bad", items_rows=rows)
    log = ProblemLog()
    src = open_source(folder, log)
    assert src.open()
    sheet = src.read(src.find_sheet("Items"))
    assert sheet.name == "Items.csv"
    assert sheet.rows[1][0] == "000123" and sheet.rows[4][0] == "000456"
    assert sheet.rows[1][3] == 12.5 and sheet.rows[2][3] == "n/a"
    # row numbers are line numbers: B2's record starts on line 3 and spans two lines
    assert sheet.row_numbers == [1, 2, 3, 5, 6]
    problems = xlpolicy.check(folder)
    bad = [p for p in problems if p.code == "unit_cost-not-number"]
    assert len(bad) == 1
    assert (bad[0].sheet, bad[0].cell, bad[0].item, bad[0].value) == (
        "Items.csv",
        "D3",
        "B2",
        "n/a",
    )
    res = CliRunner().invoke(main, ["check", str(folder)])
    assert "Items.csv!D3 [B2]" in res.output and "'n/a'" in res.output
    ok = policies(folder)
    assert set(ok["item"]) == {"000123", "000456", "B2", "C3"}
    assert ok.set_index("item").loc["B2", "status"] == "skipped"


def test_csv_loose_names_and_windows_encoding(tmp_path):
    folder = write_csv_folder(
        tmp_path / "win",
        encoding="cp1252",
        items_rows=[item_row(c, desc="Café crème") for c in CODES],
    )
    (folder / "Items.csv").rename(folder / "ITEMS.csv")
    (folder / "History.csv").rename(folder / "Sales_History.csv")
    report = xlpolicy.analyse(folder)
    assert set(report.results["description"]) == {"Café crème"}
    assert "csv-encoding" in {p.code for p in report.problems}
    assert report.input_summary["items_planned"] == 4


@pytest.mark.parametrize(
    "text, delim",
    [
        ("Item,Unit cost\nA,1\n", ","),
        ("Item;Unit cost\nA;1,5\nB;2\n", ";"),
        ("Item\tUnit cost\nA\t1\n", "\t"),
        ('Item,Description\nA,"x; y"\nB,"p; q"\n', ","),
    ],
)
def test_delimiter_is_sniffed(text, delim):
    assert sniff_delimiter(text) == delim


@pytest.mark.parametrize(
    "raw, comma, value",
    [
        ("000123", False, "000123"),
        ("123", False, 123),
        ("2.5", False, 2.5),
        ("2.50", False, "2.50"),
        ("1e5", False, "1e5"),
        ("n/a", False, "n/a"),
        ("", False, None),
        ("1,5", True, 1.5),
        ("1.234,5", True, 1234.5),
        ("1.234", True, 1234),
        ("14,5%", True, "14.5%"),
        ("1,5", False, "1,5"),
        ("2024-03-01", False, dt.datetime(2024, 3, 1)),
        ("01.03.2024", True, dt.datetime(2024, 3, 1)),
        ("01.03.2024", False, "01.03.2024"),
    ],
)
def test_csv_values_are_converted_only_when_unambiguous(raw, comma, value):
    got = csv_value(raw, comma_decimals=comma)
    assert got == value and type(got) is type(value)


# --- inputs that cannot be used -----------------------------------------------------------


def fatal_cases(tmp_path: Path) -> list[tuple[Path, str]]:
    cases = []
    p = tmp_path / "broken.ods"
    p.write_bytes(b"PK\x03\x04" + os.urandom(300))
    cases.append((p, "not a readable .ods"))
    p = tmp_path / "noise.ods"
    p.write_bytes(os.urandom(500).replace(b"\x00", b"\x01") + b"\x00")
    cases.append((p, "not a readable .ods"))
    p = tmp_path / "broken.xls"
    p.write_bytes(b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1" + b"\x00" * 600)
    cases.append((p, "not a readable .xls"))
    p = tmp_path / "report.xls"
    p.write_text("<html><body><table><tr><td>Item</td></tr></table></body></html>")
    cases.append((p, "web page (HTML)"))
    p = tmp_path / "export.xls"
    p.write_text("Item,Unit cost\nA,3\n")
    cases.append((p, "text (CSV) file"))
    p = tmp_path / "empty-folder"
    p.mkdir()
    cases.append((p, "has no Items CSV file"))
    p = tmp_path / "history-only"
    p.mkdir()
    (p / "History.csv").write_text("Item,Period,Quantity\nA,1,3\n")
    cases.append((p, "has no Items CSV file"))
    p = tmp_path / "wrong.ods"
    with zipfile.ZipFile(p, "w") as zf:
        zf.writestr("mimetype", "application/vnd.oasis.opendocument.text")
        zf.writestr("content.xml", "<x/>")
    cases.append((p, "not a spreadsheet"))
    p = tmp_path / "Items.csv"
    p.write_text("Item,Unit cost\nA,3\n")
    cases.append((p, "is a single CSV file"))
    return cases


@pytest.mark.parametrize("index", range(9))
def test_unusable_inputs_exit_1_with_a_plain_message(tmp_path, index):
    path, message = fatal_cases(tmp_path)[index]
    res = CliRunner().invoke(main, ["plan", str(path)])
    assert res.exit_code == 1, res.output
    assert message in res.output
    assert "Traceback" not in res.output and "internal error" not in res.output
    assert isinstance(res.exception, SystemExit)
    assert not default_output_path(path).exists()
    problems = xlpolicy.check(path)
    assert problems and problems[0].severity is Severity.FATAL
