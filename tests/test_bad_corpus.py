"""Every file in tests/data/bad/ through the command line, in a process of its own.

For each case of tests/data/make_bad.py: the exit status it promises, its message words,
never a traceback or an "internal error", the input file byte for byte unchanged, no output
left behind when the run fails, and a bounded peak memory (the process's own peak resident
memory, VmHWM from /proc where there is one, else resource.getrusage, against a run on a
good workbook). No run time is asserted: it depends on the machine; a hang is cut off by
the subprocess's timeout.
"""

from __future__ import annotations

import hashlib
import json
import os
import subprocess
import sys
import time
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).resolve().parent / "data"))
import make_bad  # noqa: E402

import xlpolicy  # noqa: E402
from xlpolicy.problems import UnusableWorkbook  # noqa: E402

BAD = make_bad.BAD
MEMORY_MARGIN_MB = 100.0  # above a run on a good workbook (imports alone take ~150 MB)

_RUNNER = """
import json, os, resource, sys
from xlpolicy.cli import main
code = 0
try:
    main(sys.argv[1:], prog_name="xlpolicy")
except SystemExit as exc:
    code = exc.code if isinstance(exc.code, int) else (0 if exc.code is None else 1)
# VmHWM: this program's own peak resident memory. ru_maxrss would do on most systems, but
# Linux carries the parent's peak across fork and exec into it (getrusage(2)).
peak = None
try:
    with open("/proc/self/status") as st:
        peak = next(int(l.split()[1]) for l in st if l.startswith("VmHWM:"))
except (OSError, StopIteration):
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
with open(os.environ["XLPOLICY_RSS_FILE"], "w") as f:
    json.dump({"rss_kb": peak}, f)
sys.exit(code)
"""


def _digest(path: Path) -> tuple[str, int]:
    return hashlib.sha256(path.read_bytes()).hexdigest(), path.stat().st_mtime_ns


def run_cli(path: Path, out: Path) -> dict:
    """`xlpolicy plan PATH -o OUT` in a fresh interpreter: exit, output, seconds, peak MB."""
    rss_file = out.with_suffix(".rss.json")
    root = str(Path(xlpolicy.__file__).resolve().parent.parent)
    env = dict(
        os.environ,
        XLPOLICY_RSS_FILE=str(rss_file),
        PYTHONPATH=os.pathsep.join([root, os.environ.get("PYTHONPATH", "")]),
    )
    env.pop("XLPOLICY_DEBUG", None)
    env.pop("XLPOLICY_ALLOW_LARGE", None)
    before = _digest(path)
    t0 = time.monotonic()
    proc = subprocess.run(
        [sys.executable, "-c", _RUNNER, "plan", str(path), "-o", str(out)],
        capture_output=True,
        text=True,
        env=env,
        timeout=120,
        cwd=str(out.parent),
    )
    seconds = time.monotonic() - t0
    rss = json.loads(rss_file.read_text())["rss_kb"] / 1024 if rss_file.exists() else None
    return {
        "code": proc.returncode,
        "text": proc.stdout + proc.stderr,
        "seconds": seconds,
        "rss_mb": rss,
        "unchanged": _digest(path) == before,
        "wrote": out.exists(),
    }


@pytest.fixture(scope="module")
def runs(tmp_path_factory) -> dict[str, dict]:
    """All cases run once, two at a time; plus a good workbook as the memory baseline."""
    tmp = tmp_path_factory.mktemp("bad-runs")
    built = tmp / "built"
    make_bad.build_all(built, committed=False)
    paths = {c.name: (BAD if c.committed else built) / c.name for c in make_bad.CASES}
    paths["(good)"] = make_bad.good_workbook(tmp / "good.xlsx")
    jobs = {name: (p, tmp / f"out-{k}.xlsx") for k, (name, p) in enumerate(paths.items())}
    with ThreadPoolExecutor(max_workers=2) as pool:
        futures = {name: pool.submit(run_cli, p, out) for name, (p, out) in jobs.items()}
        return {name: f.result() for name, f in futures.items()}


def test_the_committed_corpus_is_what_the_script_builds(tmp_path):
    make_bad.build_all(tmp_path)
    built = sorted(p.name for p in tmp_path.iterdir())
    committed = sorted(p.name for p in BAD.iterdir())
    assert built == committed == sorted(c.name for c in make_bad.CASES if c.committed)
    for name in built:  # the bytes too: the script is the corpus's source
        assert (tmp_path / name).read_bytes() == (BAD / name).read_bytes(), name


def test_the_corpus_covers_each_kind_of_bad_input():
    assert len(make_bad.CASES) >= 25
    assert sum("hostile" in c.tags for c in make_bad.CASES) >= 10
    assert all(c.what for c in make_bad.CASES)


@pytest.mark.parametrize("case", make_bad.CASES, ids=lambda c: c.name)
def test_bad_file_through_the_cli(runs, case):
    r = runs[case.name]
    text = r["text"]
    assert r["code"] == case.exit_code, text
    for w in case.words:
        assert w.lower() in text.lower(), (w, text)
    assert "Traceback" not in text and "internal error" not in text, text
    assert "Warning:" not in text, text  # no library warnings with their source lines
    assert r["unchanged"], "the input file was changed"
    assert r["wrote"] == (case.exit_code == 0)
    base = runs["(good)"]["rss_mb"]
    assert r["rss_mb"] is not None and r["rss_mb"] < base + MEMORY_MARGIN_MB, (r["rss_mb"], base)


@pytest.mark.parametrize(
    "case", [c for c in make_bad.CASES if c.codes or c.planned], ids=lambda c: c.name
)
def test_bad_file_through_the_api(runs, case, tmp_path):
    path = BAD / case.name
    if not case.committed:
        make_bad.build_all(tmp_path, committed=False)
        path = tmp_path / case.name
    codes = {p.code for p in xlpolicy.check(path)}
    assert set(case.codes) <= codes, codes
    if case.exit_code == 0:
        report = xlpolicy.analyse(path)
        assert report.input_summary["items_planned"] == case.planned
    else:
        with pytest.raises(UnusableWorkbook) as info:
            xlpolicy.analyse(path)
        assert all(p.message for p in info.value.problems)


def test_allow_large_lets_a_trusted_large_part_through(tmp_path):
    # the ratio case holds a real workbook behind 57 MB of whitespace: refused by default,
    # read with the limits raised (the CLI option and the API argument are the same switch)
    path = BAD / "bomb-ratio.xlsx"
    with pytest.raises(UnusableWorkbook):
        xlpolicy.analyse(path)
    report = xlpolicy.analyse(path, allow_large=True)
    assert report.input_summary["items_planned"] == 3
    from click.testing import CliRunner

    from xlpolicy.cli import main

    out = tmp_path / "out.xlsx"
    res = CliRunner().invoke(main, ["plan", str(path), "-o", str(out), "--allow-large"])
    assert res.exit_code == 0 and out.exists(), res.output
    res = CliRunner().invoke(main, ["check", str(path)])
    assert res.exit_code == 1 and "--allow-large" in res.output
