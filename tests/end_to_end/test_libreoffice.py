"""A real spreadsheet program recalculates the output and agrees with the cached values.

xlpolicy writes live formulas with the values it computed stored as their cached results.
Here LibreOffice Calc (headless, told to recalculate every formula on load) opens the
policy workbook of the demo and saves it again; every formula cell it computed must equal
the value xlpolicy cached, to a tight tolerance. .ci/run installs LibreOffice from the OS
packages; where it is absent locally these tests are skipped with that reason.
"""

from __future__ import annotations

import math
import os
import shutil
import subprocess
from pathlib import Path

import pytest
import xlsxwriter
from openpyxl import load_workbook
from repo_paths import REPO

import xlpolicy

SOFFICE = shutil.which("soffice") or shutil.which("libreoffice")

if SOFFICE is None and os.environ.get("XLPOLICY_REQUIRE_LIBREOFFICE"):
    raise RuntimeError("XLPOLICY_REQUIRE_LIBREOFFICE is set but LibreOffice is not installed")
pytestmark = [
    pytest.mark.slow,  # LibreOffice starts for each test
    pytest.mark.skipif(
        SOFFICE is None,
        reason="LibreOffice Calc is not installed (.ci/run installs it: "
        "apt-get install libreoffice-calc-nogui)",
    ),
]

# LibreOffice's own setting: recalculate OOXML and ODF files on load always (0), so the
# values it saves are its own, not the cached ones it read.
_RECALC_ALWAYS = """<?xml version="1.0" encoding="UTF-8"?>
<oor:items xmlns:oor="http://openoffice.org/2001/registry"
 xmlns:xs="http://www.w3.org/2001/XMLSchema" xmlns:xsi="http://www.w3.org/2001/XMLSchema-instance">
<item oor:path="/org.openoffice.Office.Calc/Formula/Load">
<prop oor:name="OOXMLRecalcMode" oor:op="fuse"><value>0</value></prop></item>
<item oor:path="/org.openoffice.Office.Calc/Formula/Load">
<prop oor:name="ODFRecalcMode" oor:op="fuse"><value>0</value></prop></item>
</oor:items>
"""


def recalculated(src: Path, work: Path) -> Path:
    """src opened, recalculated and saved as .xlsx by LibreOffice; returns the new file."""
    profile = work / "lo-profile"
    (profile / "user").mkdir(parents=True, exist_ok=True)
    (profile / "user" / "registrymodifications.xcu").write_text(_RECALC_ALWAYS)
    out = work / "lo-out"
    proc = subprocess.run(
        [
            SOFFICE,
            f"-env:UserInstallation={profile.as_uri()}",
            "--headless",
            "--norestore",
            "--convert-to",
            "xlsx:Calc MS Excel 2007 XML",
            "--outdir",
            str(out),
            str(src),
        ],
        capture_output=True,
        text=True,
        timeout=300,
    )
    result = out / (src.stem + ".xlsx")
    assert result.exists(), proc.stdout + proc.stderr
    return result


def formula_cells(path: Path) -> dict[tuple[str, str], object]:
    """(sheet, cell) -> cached value, for every formula cell of the workbook."""
    formulas = load_workbook(path)
    values = load_workbook(path, data_only=True)
    out = {}
    for ws in formulas.worksheets:
        for row in ws.iter_rows():
            for c in row:
                if c.data_type == "f" or (isinstance(c.value, str) and c.value.startswith("=")):
                    out[(ws.title, c.coordinate)] = values[ws.title][c.coordinate].value
    return out


def same(a: object, b: object) -> bool:
    if isinstance(a, (int, float)) and isinstance(b, (int, float)):
        return math.isclose(float(a), float(b), rel_tol=1e-9, abs_tol=1e-9)
    return (a in (None, "") and b in (None, "")) or a == b


def test_harness_really_recalculates(tmp_path):
    # A workbook whose cached values are deliberately wrong: LibreOffice must replace them,
    # or the main test below would prove nothing.
    src = tmp_path / "wrong.xlsx"
    wb = xlsxwriter.Workbook(str(src))
    ws = wb.add_worksheet("S")
    ws.write("B1", 3)
    ws.write_formula("A1", "=B1*2", None, 99)
    wb.close()
    ws = load_workbook(recalculated(src, tmp_path), data_only=True)["S"]
    assert ws["A1"].value == 6


def test_every_formula_of_the_demo_output_recalculates_to_its_cached_value(tmp_path):
    demo = tmp_path / "demo.xlsx"
    shutil.copyfile(REPO / "examples" / "demo-shop.xlsx", demo)
    out = xlpolicy.plan(demo).output
    ours = formula_cells(out)
    assert len(ours) > 100  # the policy and summary sheets are live formulas
    theirs = load_workbook(recalculated(out, tmp_path), data_only=True)
    bad = [
        (sheet, cell, cached, theirs[sheet][cell].value)
        for (sheet, cell), cached in ours.items()
        if not same(cached, theirs[sheet][cell].value)
    ]
    assert not bad, bad[:20]
