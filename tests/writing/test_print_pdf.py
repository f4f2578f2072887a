"""What the Policy and Summary sheets look like on paper, read from LibreOffice's PDF.

The generated sheets of the demo workbook are printed to PDF by LibreOffice Calc
(headless) and read back a page at a time with pdftotext (poppler). Each printed page
carries its sheet's name in the page header, so pages are counted per sheet. Checks:
Policy prints one page wide (every page holds the first column's header and the last
first-read column's) in a handful of pages, not dozens; on the Summary, each chart's
title is on the same page as the parts of the chart drawn below it (its category labels
and legend), so no page break cuts through a chart. Skipped without LibreOffice or
poppler.
"""

from __future__ import annotations

import shutil
import subprocess
from pathlib import Path

import pytest
from test_libreoffice import _RECALC_ALWAYS, SOFFICE

import xlpolicy
from xlpolicy.writing.sheets import write_generated_workbook

REPO = Path(__file__).resolve().parents[2]
PDFTOTEXT = shutil.which("pdftotext")
pytestmark = pytest.mark.skipif(
    SOFFICE is None or PDFTOTEXT is None,
    reason="needs LibreOffice Calc and pdftotext (apt-get install poppler-utils)",
)


def _pdf(src: Path, work: Path) -> Path:
    profile = work / "lo-profile"
    (profile / "user").mkdir(parents=True, exist_ok=True)
    (profile / "user" / "registrymodifications.xcu").write_text(_RECALC_ALWAYS)
    subprocess.run(
        [
            str(SOFFICE),
            f"-env:UserInstallation={profile.as_uri()}",
            "--headless",
            "--norestore",
            "--convert-to",
            "pdf",
            "--outdir",
            str(work),
            str(src),
        ],
        capture_output=True,
        text=True,
        timeout=300,
    )
    out = work / (src.stem + ".pdf")
    assert out.exists()
    return out


def _pages(pdf: Path) -> list[str]:
    text = subprocess.run(
        [str(PDFTOTEXT), "-layout", str(pdf), "-"], capture_output=True, text=True, check=True
    ).stdout
    return text.split("\f")[:-1] if text.endswith("\f") else text.split("\f")


def _sheet_of(page: str) -> str:
    """The sheet named in the page header: its first line, between source and run date."""
    first = next((ln for ln in page.splitlines() if ln.strip()), "")
    parts = [p for p in first.split("  ") if p.strip()]
    return parts[1].strip() if len(parts) >= 3 else ""


@pytest.fixture(scope="module")
def printed(tmp_path_factory):
    work = tmp_path_factory.mktemp("print")
    demo = work / "demo-shop.xlsx"
    shutil.copyfile(REPO / "examples" / "demo-shop.xlsx", demo)
    report = xlpolicy.analyse(demo, simulate=False)
    out = work / "generated.xlsx"
    write_generated_workbook(out, report, link_to_input=False)
    pages = _pages(_pdf(out, work))
    by_sheet: dict[str, list[str]] = {}
    for page in pages:
        by_sheet.setdefault(_sheet_of(page), []).append(page)
    return report, by_sheet


def test_policy_prints_one_page_wide_in_few_pages(printed):
    report, by_sheet = printed
    pages = by_sheet["Policy"]
    n = len(report.results)
    # about 45 item rows fit a landscape page at the scale of one page wide; before the
    # audit columns were folded away, 126 items took 75 pages
    assert 2 <= len(pages) <= n // 30 + 1, len(pages)
    for page in pages:  # one page wide: the first and the last columns on every page
        assert "Item" in page and "total cost" in page


def test_no_chart_on_the_summary_is_cut_by_a_page_break(printed):
    report, by_sheet = printed
    pages = by_sheet["Summary"]
    assert 2 <= len(pages) <= 6, len(pages)
    title = "Annual cost by category"
    on = [k for k, p in enumerate(pages) if title in p]
    assert len(on) == 1
    page = pages[on[0]]
    assert "Average inventory investment by ABC class" in page  # the chart beside it
    # the chart's lower parts on the same page: its legend and every category drawn
    assert "Annual ordering cost" in page and "Annual holding cost" in page
    res = report.results
    planned = res[res["status"] != "skipped"]
    cats = planned.groupby("category")["annual_total_cost"].sum().sort_values(ascending=False)
    for name in list(cats.index)[:12]:
        first_word = str(name).split()[0]
        assert first_word in page, name
    # and nothing of the tables shares that page (the charts have a page of their own)
    assert "By category" not in page and "Totals for the planned items" not in page
