"""The printable reorder list: the policy workbook's reorder sheet as a PDF, by LibreOffice.

Only where LibreOffice is installed (``soffice`` on the PATH). The reorder sheet is copied,
as the values the workbook holds, into a workbook of its own (so the PDF is that sheet
alone, with the print setup the writer gave it), then LibreOffice converts it headless with
a profile folder of its own inside the job's folder, so it never touches the owner's
LibreOffice settings and two conversions never share one.
"""

from __future__ import annotations

import shutil
import subprocess
import warnings
from pathlib import Path

from ..writing.sheets import DEFAULT_SHEET_NAMES

#: How long LibreOffice may take for one list before the page gives up on it.
TIMEOUT_SECONDS = 120


def find_office() -> str | None:
    """LibreOffice's command, or None where it is not installed."""
    return shutil.which("soffice") or shutil.which("libreoffice")


def reorder_pdf(office: str, workbook: Path, work: Path) -> Path | str:
    """The reorder sheet of ``workbook`` as a PDF in ``work``; or a message saying why not."""
    import openpyxl

    folder = work / "print"
    folder.mkdir(exist_ok=True)
    single = folder / "reorder.xlsx"
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            wb = openpyxl.load_workbook(workbook, data_only=True)
        wanted = DEFAULT_SHEET_NAMES["reorder"]
        names = [n for n in wb.sheetnames if n == wanted or n.startswith(wanted + " (")]
        if not names:
            return "the policy workbook has no reorder sheet"
        keep = names[-1]  # a user's own sheet of that name keeps it; ours was numbered
        for name in list(wb.sheetnames):
            if name != keep:
                del wb[name]
        wb.save(single)
    except (OSError, ValueError, KeyError) as exc:
        return f"the policy workbook could not be read for printing ({exc})"
    profile = folder / "profile"
    try:
        proc = subprocess.run(
            [
                office,
                f"-env:UserInstallation={profile.resolve().as_uri()}",
                "--headless",
                "--norestore",
                "--convert-to",
                "pdf",
                "--outdir",
                str(folder),
                str(single),
            ],
            capture_output=True,
            timeout=TIMEOUT_SECONDS,
            check=False,
        )
    except (OSError, subprocess.TimeoutExpired) as exc:
        return f"LibreOffice did not finish ({exc})"
    made = folder / "reorder.pdf"
    if proc.returncode != 0 or not made.exists():
        return "LibreOffice could not convert the reorder list"
    return made
