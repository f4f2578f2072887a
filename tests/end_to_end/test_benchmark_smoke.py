"""The benchmark runs end to end on a small catalogue (a smoke check: no timing is asserted).

The smoke run uses 200 items rather than --quick's 1,000: every stage and table of the
benchmark still runs (each layout, the floor, the naive path, each feature), at about half
the CPU; the sizes that matter for the timings are run by hand (benchmarks/run.py).
"""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest
from repo_paths import REPO

ROOT = REPO
N = 200  # items in the smoke run


@pytest.mark.slow  # about twenty fresh interpreters
def test_quick_benchmark_completes_and_prints_its_table(tmp_path: Path) -> None:
    pytest.importorskip("python_calamine")
    pytest.importorskip("pyarrow")
    proc = subprocess.run(
        [
            sys.executable,
            str(ROOT / "benchmarks" / "run.py"),
            "--sizes",
            str(N),
            "--layout",
            "all",
            "--features",
            "--dir",
            str(tmp_path),
        ],
        capture_output=True,
        text=True,
        cwd=ROOT,
    )
    assert proc.returncode == 0, proc.stderr
    lines = proc.stdout.splitlines()
    header = next(ln for ln in lines if ln.startswith("| items"))
    assert "plan / floor" in header and "plan peak RSS MB" in header
    rows = [ln for ln in lines if ln.startswith(f"| {N:,} | wide")]
    assert len(rows) == 1
    cells = [c.strip() for c in rows[0].strip("|").split("|")]
    assert len(cells) == 11
    # Every measured time and ratio is a positive number (the run really happened).
    assert float(cells[6].removesuffix(" s")) > 0  # plan
    assert float(cells[7]) > 0  # plan / floor
    assert float(cells[10]) > 0  # peak RSS
    # The generated workbook was planned: the output exists beside the inputs.
    assert (tmp_path / f"plan-{N}-wide.xlsx").stat().st_size > 0
    # The other layouts, the history file among them, were planned too.
    for layout in ("long", "file"):
        assert [ln for ln in lines if ln.startswith(f"| {N:,} | {layout}")]
        assert (tmp_path / f"plan-{N}-{layout}.xlsx").stat().st_size > 0
    assert (tmp_path / f"bench-{N}-file-history.parquet").exists()
    # ...and each optional feature has its own timed row.
    feature_rows = [ln for ln in lines if ln.startswith(f"| {N:,} | plan")]
    assert len(feature_rows) == 4
    for ln in feature_rows:
        assert float(ln.split("|")[3].strip().removesuffix(" s")) > 0


def test_generated_codes_stay_text(tmp_path: Path) -> None:
    """The generator's zero-padded codes come back as text through xlpolicy's reader."""
    sys.path.insert(0, str(ROOT / "benchmarks"))
    try:
        import make_workbook
    finally:
        sys.path.pop(0)
    import xlpolicy

    path = make_workbook.write_workbook(tmp_path / "b.xlsx", 50)
    report = xlpolicy.analyse(path)
    items = report.results["item"].tolist()
    assert items[:3] == ["000001", "000002", "000003"]
    assert report.input_summary["items_planned"] == 50
