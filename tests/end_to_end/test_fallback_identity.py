"""The fast path and the pure fallback write the same policy, part for part.

fastexcel, pyarrow and python-isal are ordinary dependencies, but a platform without a wheel
for one of them falls back to the general reader, Python's own float formatting and zlib.
Each run below is a fresh interpreter: the fallback one is started with the three packages
made unimportable (a ``None`` entry in ``sys.modules`` makes ``import`` raise ImportError,
as the language reference describes for the module cache), so every optional import in
the package takes its fallback branch. The written workbooks must hold the same parts with
the same bytes once inflated, and the CSV and JSON must be equal byte for byte.
"""

from __future__ import annotations

import re
import subprocess
import sys
import zipfile
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[2]
EXAMPLES = REPO / "examples"
FAST = ("fastexcel", "pyarrow", "isal")

RUN = """
import sys
for name in {blocked!r}:
    sys.modules[name] = None
from xlpolicy.cli import main
sys.argv = ["xlpolicy"] + {args!r}
main()
"""

CHECK = """
import sys
for name in {blocked!r}:
    sys.modules[name] = None
import xlpolicy.fastzlib, xlpolicy.reading.typed
assert not xlpolicy.fastzlib.FAST and not xlpolicy.reading.typed.available()
import xlpolicy.api  # the whole package imports without the fast packages
"""


def _plan(workbook: Path, out: Path, blocked: tuple[str, ...]) -> dict[str, bytes]:
    out.mkdir()
    args = [
        "plan",
        str(workbook),
        "-q",
        "-o",
        str(out / "policy.xlsx"),
        "--csv",
        str(out / "policy.csv"),
        "--json",
        str(out / "policy.json"),
    ]
    code = RUN.format(blocked=list(blocked), args=args)
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    assert proc.returncode == 0, proc.stdout + proc.stderr
    parts = {"policy.csv": (out / "policy.csv").read_bytes()}
    parts["policy.json"] = (out / "policy.json").read_bytes()
    with zipfile.ZipFile(out / "policy.xlsx") as z:
        for name in z.namelist():
            # the document's timestamps are the run's clock, not its content
            parts[name] = re.sub(rb"(<dcterms:\w+[^>]*>)[^<]*", rb"\1", z.read(name))
    return parts


def test_fallback_modules_really_are_off():
    # the switch used below does turn every fast path off (else the comparison proves nothing)
    proc = subprocess.run(
        [sys.executable, "-c", CHECK.format(blocked=list(FAST))], capture_output=True, text=True
    )
    assert proc.returncode == 0, proc.stderr


def test_fallback_writes_the_same_output_as_the_fast_path(tmp_path: Path):
    # the wide demo takes every fast path: the typed History read, Arrow's float text and
    # ISA-L's deflate
    name = "demo-wide.xlsx"
    pytest.importorskip("fastexcel")
    pytest.importorskip("pyarrow")
    fast = _plan(EXAMPLES / name, tmp_path / "fast", ())
    slow = _plan(EXAMPLES / name, tmp_path / "slow", FAST)
    assert sorted(fast) == sorted(slow)
    assert [part for part in fast if fast[part] != slow[part]] == []
