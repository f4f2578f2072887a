"""Every file in tests/data/bad/ through the command line.

For each case of tests/data/make_bad.py: the exit status it promises, its message words,
never a traceback or an "internal error", the input file byte for byte unchanged, no output
left behind when the run fails, and a bounded peak memory (the process's own peak resident
memory, VmHWM from /proc, against a run on a good workbook).

All cases run in one fresh interpreter, one after another, each a whole `xlpolicy plan`
call through the CLI's entry point with everything it prints (Python's streams and the
process's own file descriptors 1 and 2) kept for that case; the kernel's peak-memory mark is
reset before each case (writing 5 to /proc/self/clear_refs, see proc(5)). Starting one
interpreter instead of one per case saves the imports' cost 37 times over. Two cases also
run as a real `python -m xlpolicy` process, as a user starts it. Where the peak cannot be
reset (not Linux), each case runs in a process of its own as before. How long each case
takes is measured by benchmarks/bad_inputs.py, not here: a test never depends on the
machine's speed.
"""

from __future__ import annotations

import hashlib
import json
import os
import subprocess
import sys
from pathlib import Path

import make_bad
import pytest

import xlpolicy
from xlpolicy.problems import UnusableWorkbook

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

# One interpreter, every case: argv[1] is a JSON file of [name, input, output] triples,
# argv[2] where to write {name: {code, text, start_kb, peak_kb}}. start_kb is the resident
# memory when the case began (the peak mark just reset to it), peak_kb the mark after it.
_WORKER = """
import contextlib, io, json, os, sys, tempfile, traceback
from xlpolicy.cli import main


def status(key):
    with open("/proc/self/status") as st:
        return next(int(l.split()[1]) for l in st if l.startswith(key + ":"))


def reset_peak():
    try:
        with open("/proc/self/clear_refs", "w") as f:
            f.write("5")
        return status("VmHWM") <= status("VmRSS") + 1024  # the mark fell to what is held
    except (OSError, StopIteration):
        return False


def plan(args):
    try:
        main(args, prog_name="xlpolicy")
    except SystemExit as exc:
        return exc.code if isinstance(exc.code, int) else (0 if exc.code is None else 1)
    except BaseException:
        traceback.print_exc()  # what the interpreter prints for an uncaught exception
        return 1
    return 0


with open(sys.argv[1]) as f:
    jobs = json.load(f)
results = {}
for name, path, out in jobs:
    if not reset_peak():
        results = None
        break
    start = status("VmRSS")
    streams = io.StringIO()
    with tempfile.TemporaryFile() as fds:
        sys.stdout.flush()
        sys.stderr.flush()
        saved = os.dup(1), os.dup(2)
        os.dup2(fds.fileno(), 1)
        os.dup2(fds.fileno(), 2)
        try:
            with contextlib.redirect_stdout(streams), contextlib.redirect_stderr(streams):
                code = plan(["plan", path, "-o", out])
        finally:
            os.dup2(saved[0], 1)
            os.dup2(saved[1], 2)
            os.close(saved[0])
            os.close(saved[1])
        fds.seek(0)
        text = streams.getvalue() + fds.read().decode("utf-8", "replace")
    results[name] = {"code": code, "text": text, "start_kb": start, "peak_kb": status("VmHWM")}
with open(sys.argv[2], "w") as f:
    json.dump(results, f)
"""


def _digest(path: Path) -> tuple[str, int]:
    return hashlib.sha256(path.read_bytes()).hexdigest(), path.stat().st_mtime_ns


def _env(**extra: str) -> dict[str, str]:
    """This environment with the package importable and no debug or size switch set."""
    root = str(Path(xlpolicy.__file__).resolve().parent.parent)
    env = dict(
        os.environ, PYTHONPATH=os.pathsep.join([root, os.environ.get("PYTHONPATH", "")]), **extra
    )
    env.pop("XLPOLICY_DEBUG", None)
    env.pop("XLPOLICY_ALLOW_LARGE", None)
    return env


def run_cli(path: Path, out: Path) -> dict:
    """`xlpolicy plan PATH -o OUT` in a fresh interpreter: exit, output, peak MB."""
    rss_file = out.with_suffix(".rss.json")
    before = _digest(path)
    proc = subprocess.run(
        [sys.executable, "-c", _RUNNER, "plan", str(path), "-o", str(out)],
        capture_output=True,
        text=True,
        env=_env(XLPOLICY_RSS_FILE=str(rss_file)),
        cwd=str(out.parent),
    )
    rss = json.loads(rss_file.read_text())["rss_kb"] / 1024 if rss_file.exists() else None
    return {
        "code": proc.returncode,
        "text": proc.stdout + proc.stderr,
        "rss_mb": rss,
        "unchanged": _digest(path) == before,
        "wrote": out.exists(),
    }


def run_all_in_one(jobs: dict[str, tuple[Path, Path]], folder: Path) -> dict[str, dict] | None:
    """Every job through the CLI in one fresh interpreter (see _WORKER), in order; None where
    the peak-memory mark cannot be reset. The first job runs once more before the others, to
    load what a plan loads on first use; then the memory each job adds to the interpreter is
    reported on top of what it held when the first job began, as if each had a process of
    its own."""
    before = {name: _digest(p) for name, (p, _) in jobs.items()}
    spec, got = folder / "jobs.json", folder / "results.json"
    first, (first_in, first_out) = next(iter(jobs.items()))
    warm_up = [["(warm-up)", str(first_in), str(first_out.with_name("warm-up.xlsx"))]]
    spec.write_text(json.dumps(warm_up + [[n, str(p), str(o)] for n, (p, o) in jobs.items()]))
    proc = subprocess.run(
        [sys.executable, "-c", _WORKER, str(spec), str(got)],
        capture_output=True,
        text=True,
        env=_env(),
        cwd=str(folder),
    )
    assert proc.returncode == 0 and not proc.stdout and not proc.stderr, proc.stderr
    results = json.loads(got.read_text())
    if results is None:
        return None
    del results["(warm-up)"]
    base_kb = results[first]["start_kb"]
    return {
        name: {
            "code": r["code"],
            "text": r["text"],
            "rss_mb": (base_kb + r["peak_kb"] - r["start_kb"]) / 1024,
            "unchanged": _digest(jobs[name][0]) == before[name],
            "wrote": jobs[name][1].exists(),
        }
        for name, r in results.items()
    }


@pytest.fixture(scope="module")
def runs(tmp_path_factory) -> dict[str, dict]:
    """All cases run once, after a good workbook as the memory baseline."""
    tmp = tmp_path_factory.mktemp("bad-runs")
    built = tmp / "built"
    make_bad.build_all(built, committed=False)
    paths = {"(good)": make_bad.good_workbook(tmp / "good.xlsx")}
    paths.update({c.name: (BAD if c.committed else built) / c.name for c in make_bad.CASES})
    jobs = {name: (p, tmp / f"out-{k}.xlsx") for k, (name, p) in enumerate(paths.items())}
    got = run_all_in_one(jobs, tmp)
    if got is None:  # no resettable peak here: a process per case
        got = {name: run_cli(p, out) for name, (p, out) in jobs.items()}
    return got


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


def _check_run(r: dict, case: make_bad.Case, base_rss_mb: float) -> None:
    """What a run of ``case`` through the CLI must show (see the module's docstring)."""
    text = r["text"]
    assert r["code"] == case.exit_code, text
    for w in case.words:
        assert w.lower() in text.lower(), (w, text)
    assert "Traceback" not in text and "internal error" not in text, text
    assert "Warning:" not in text, text  # no library warnings with their source lines
    assert r["unchanged"], "the input file was changed"
    assert r["wrote"] == (case.exit_code == 0)
    base = base_rss_mb
    assert r["rss_mb"] is not None and r["rss_mb"] < base + MEMORY_MARGIN_MB, (r["rss_mb"], base)


@pytest.mark.slow  # the first one waits for every case's run
@pytest.mark.parametrize("case", make_bad.CASES, ids=lambda c: c.name)
def test_bad_file_through_the_cli(runs, case):
    _check_run(runs[case.name], case, runs["(good)"]["rss_mb"])


_OWN_PROCESS = ["billion-laughs.xlsx", "huge-merge.xlsx"]  # one refused, one planned


@pytest.fixture(scope="module")
def good_alone(tmp_path_factory) -> dict:
    """The good workbook in a fresh interpreter of its own: the memory baseline there."""
    tmp = tmp_path_factory.mktemp("good-alone")
    good = run_cli(make_bad.good_workbook(tmp / "good.xlsx"), tmp / "good-out.xlsx")
    assert good["code"] == 0 and good["wrote"], good["text"]
    return good


@pytest.mark.slow
@pytest.mark.parametrize(
    "case", [c for c in make_bad.CASES if c.name in _OWN_PROCESS], ids=lambda c: c.name
)
def test_bad_file_in_a_process_of_its_own(runs, good_alone, case, tmp_path):
    # as a user starts it: a fresh interpreter for this one file, its own peak memory
    r = run_cli(BAD / case.name, tmp_path / "out.xlsx")
    _check_run(r, case, good_alone["rss_mb"])
    assert (r["code"], r["wrote"]) == (runs[case.name]["code"], runs[case.name]["wrote"])


@pytest.mark.parametrize(
    "case", [c for c in make_bad.CASES if c.codes or c.planned], ids=lambda c: c.name
)
def test_bad_file_through_the_api(case, tmp_path):
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
