"""Render pictures of the generated sheets for the README and docs/outputs.md.

    python examples/make_pictures.py            # rewrites examples/pictures/*.png

Plans examples/demo-shop.xlsx (run date fixed to the demo's stock-count day, so the
pictures do not change from day to day), writes the generated sheets to a workbook of
their own, prints it to PDF with LibreOffice (headless) and turns chosen pages into PNG
with pdftoppm. Needs LibreOffice Calc and poppler-utils (Debian: libreoffice-calc-nogui,
poppler-utils). This is how the sheets look to a person; the tests check their content.
"""

from __future__ import annotations

import datetime as dt
import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))

from xlpolicy.api import analyse  # noqa: E402
from xlpolicy.writing.sheets import write_generated_workbook  # noqa: E402

RUN_DATE = dt.date(2024, 12, 30)  # the demo shop's stock count
#: picture name -> text that starts the page to show (the sheet's title)
PAGES = {
    "summary.png": "Stock policy for",
    "reorder.png": "Reorder now, run",
    "season-plan.png": "Year ahead: the policy month by month",
}
DPI = 70


def _page_texts(pdf: Path) -> list[str]:
    text = subprocess.run(
        ["pdftotext", "-layout", str(pdf), "-"], capture_output=True, text=True, check=True
    ).stdout
    return text.split("\f")


def render(out_dir: Path) -> list[Path]:
    """Write the pictures into out_dir and return their paths."""
    soffice = shutil.which("soffice") or shutil.which("libreoffice")
    if soffice is None or shutil.which("pdftoppm") is None:
        raise SystemExit(
            "needs LibreOffice (soffice) and pdftoppm: "
            "apt-get install libreoffice-calc-nogui poppler-utils"
        )
    out_dir.mkdir(parents=True, exist_ok=True)
    written = []
    with tempfile.TemporaryDirectory(prefix="xlpolicy-pictures-") as tmp:
        work = Path(tmp)
        report = analyse(HERE / "demo-shop.xlsx", run_date=RUN_DATE)
        sheets = work / "demo-shop-policy.xlsx"
        write_generated_workbook(sheets, report, link_to_input=False)
        subprocess.run(
            [
                soffice,
                f"-env:UserInstallation={(work / 'profile').as_uri()}",
                "--headless",
                "--norestore",
                "--convert-to",
                "pdf",
                "--outdir",
                str(work),
                str(sheets),
            ],
            check=True,
            capture_output=True,
            timeout=300,
        )
        pdf = work / "demo-shop-policy.pdf"
        texts = _page_texts(pdf)
        for name, marker in PAGES.items():
            page = next((k + 1 for k, t in enumerate(texts) if marker in t), None)
            if page is None:
                raise SystemExit(f"no page shows {marker!r}")
            stem = work / name.removesuffix(".png")
            subprocess.run(
                [
                    "pdftoppm",
                    "-r",
                    str(DPI),
                    "-png",
                    "-singlefile",
                    "-f",
                    str(page),
                    "-l",
                    str(page),
                    str(pdf),
                    str(stem),
                ],
                check=True,
            )
            target = out_dir / name
            shutil.copyfile(stem.with_suffix(".png"), target)
            written.append(target)
    return written


if __name__ == "__main__":
    for p in render(Path(sys.argv[1]) if len(sys.argv) > 1 else HERE / "pictures"):
        print(f"wrote {p}")
