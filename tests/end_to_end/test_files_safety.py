"""No combination of paths can overwrite an input, and file system failures are explained.

Each output (-o, --csv, --json) is checked against every input (the workbook, each file of
a CSV folder, the --history file, a Settings "History file") and against the others, before
any work; inputs that are not regular files are refused; every failure of the file system
names the real output and its cause. Permission cases run the child as an unprivileged
user (setpriv or runuser), so they bite when the suite runs as root too.
"""

from __future__ import annotations

import errno
import hashlib
import os
import shutil
import stat
import subprocess
import sys
import tempfile
import time
from collections.abc import Iterator
from pathlib import Path

import pytest
from builders import simple_workbook, weekly_history
from click.testing import CliRunner

import xlpolicy
from xlpolicy import errors
from xlpolicy.cli import main
from xlpolicy.problems import UnusableWorkbook
from xlpolicy.writing import atomic

ROOT = Path(xlpolicy.__file__).resolve().parent.parent


def _digest(p: Path) -> str:
    return hashlib.sha256(p.read_bytes()).hexdigest()


def _plan(*args: str) -> tuple[int, str]:
    res = CliRunner().invoke(main, ["plan", *args, "--no-simulate"])
    return res.exit_code, res.output


def _csv_folder(folder: Path) -> Path:
    folder.mkdir()
    codes = ["A1", "B2"]
    (folder / "Items.csv").write_text(
        "Item,Unit cost,Order cost,Holding rate,Lead time days\n"
        + "".join(f"{c},10,20,0.2,14\n" for c in codes)
    )
    hist = weekly_history(codes, weeks=30)
    (folder / "History.csv").write_text(
        "Item,Period,Quantity\n"
        + "".join(f"{c},w{k:02d},{q:g}\n" for c in codes for k, q in enumerate(hist[c]))
    )
    return folder


def _history_csv(path: Path, codes: list[str]) -> Path:
    hist = weekly_history(codes, weeks=30)
    path.write_text(
        "Item,Period,Quantity\n"
        + "".join(f"{c},w{k:02d},{q:g}\n" for c in codes for k, q in enumerate(hist[c]))
    )
    return path


# --- every output against every input and against the others ------------------------------


@pytest.mark.parametrize("option", ["--csv", "--json", "-o"])
def test_an_output_naming_the_workbook_is_refused_and_the_workbook_kept(tmp_path, option):
    src = simple_workbook(tmp_path / "shop.xlsx")
    before = _digest(src)
    code, out = _plan(str(src), option, str(src))
    assert code == 2, out
    assert "shop.xlsx" in out and "Wrote" not in out
    assert _digest(src) == before


def test_an_output_naming_the_history_file_is_refused(tmp_path):
    src = simple_workbook(tmp_path / "shop.xlsx")
    hist = _history_csv(tmp_path / "sales.csv", ["A1", "B2", "C3"])
    before = _digest(hist)
    for option in ("--csv", "--json"):
        code, out = _plan(str(src), "--history", str(hist), option, str(hist))
        assert code == 2 and "sales.csv" in out, out
    assert _digest(hist) == before


def test_an_output_naming_a_file_of_a_csv_folder_is_refused(tmp_path):
    folder = _csv_folder(tmp_path / "shop")
    items = folder / "Items.csv"
    before = _digest(items)
    for option in ("--csv", "--json", "-o"):
        code, out = _plan(str(folder), option, str(items))
        assert code == 2, out
    assert _digest(items) == before


def test_an_output_naming_the_settings_history_file_is_refused(tmp_path):
    _history_csv(tmp_path / "sales.csv", ["A1", "B2", "C3"])
    src = simple_workbook(tmp_path / "shop.xlsx", settings={"History file": "sales.csv"})
    before = _digest(tmp_path / "sales.csv")
    code, out = _plan(str(src), "--csv", str(tmp_path / "sales.csv"))
    assert code == 2 and "sales.csv" in out, out
    assert _digest(tmp_path / "sales.csv") == before
    assert not (tmp_path / "shop-policy.xlsx").exists()  # refused before anything was written


def test_two_outputs_with_the_same_name_are_refused(tmp_path):
    src = simple_workbook(tmp_path / "shop.xlsx")
    out = tmp_path / "out.xlsx"
    code, text = _plan(str(src), "-o", str(out), "--csv", str(out))
    assert code == 2 and "same file" in text, text
    assert not out.exists()
    code, text = _plan(
        str(src), "--csv", str(tmp_path / "t.csv"), "--json", str(tmp_path / "T.CSV")
    )
    assert code == 2 and "same file" in text, text  # case ignored: safe on every file system


def test_links_and_dotdot_do_not_hide_the_input(tmp_path):
    src = simple_workbook(tmp_path / "shop.xlsx")
    before = _digest(src)
    (tmp_path / "sub").mkdir()
    soft = tmp_path / "sub" / "alias.csv"
    soft.symlink_to(src)
    hard = tmp_path / "hard.csv"
    os.link(src, hard)
    for target in (soft, hard, tmp_path / "sub" / ".." / "shop.xlsx"):
        code, out = _plan(str(src), "--csv", str(target))
        assert code == 2, (target, out)
    assert _digest(src) == before


def test_a_missing_output_folder_is_found_before_any_work(tmp_path):
    src = simple_workbook(tmp_path / "shop.xlsx")
    code, out = _plan(str(src), "--csv", str(tmp_path / "no-such-folder" / "t.csv"))
    assert code == 2 and "no-such-folder" in out and "does not exist" in out, out
    assert not (tmp_path / "shop-policy.xlsx").exists()


def test_an_output_that_is_a_folder_is_refused(tmp_path):
    src = simple_workbook(tmp_path / "shop.xlsx")
    (tmp_path / "t.json").mkdir()
    code, out = _plan(str(src), "--json", str(tmp_path / "t.json"))
    assert code == 2 and "is a folder" in out, out
    assert not (tmp_path / "shop-policy.xlsx").exists()


def test_an_existing_read_only_output_is_refused_and_kept(tmp_path):
    src = simple_workbook(tmp_path / "shop.xlsx")
    out = tmp_path / "kept.csv"
    out.write_text("the accountant's copy\n")
    out.chmod(0o444)
    code, text = _plan(str(src), "--csv", str(out))
    assert code == 1 and "read-only" in text and "kept.csv" in text, text
    assert "internal error" not in text
    assert out.read_text() == "the accountant's copy\n"
    assert not (tmp_path / "shop-policy.xlsx").exists()


def test_the_api_checks_outputs_too(tmp_path):
    src = simple_workbook(tmp_path / "shop.xlsx")
    with pytest.raises(xlpolicy.api.UsageError):
        xlpolicy.plan(src, json=src)


# --- inputs that are not files --------------------------------------------------------------


def test_a_named_pipe_as_the_workbook_is_refused_not_waited_on(tmp_path):
    fifo = tmp_path / "shop.xlsx"
    os.mkfifo(fifo)
    proc = subprocess.run(
        [sys.executable, "-m", "xlpolicy", "check", str(fifo)],
        capture_output=True,
        text=True,
        timeout=120,  # a hang is the failure this guards against
        cwd=ROOT,
    )
    assert proc.returncode == 1 and "named pipe" in proc.stderr, proc.stderr


def test_a_named_pipe_as_the_settings_history_file_is_refused(tmp_path):
    os.mkfifo(tmp_path / "sales.csv")
    src = simple_workbook(tmp_path / "shop.xlsx", settings={"History file": "sales.csv"})
    problems = xlpolicy.check(src)
    assert [p.code for p in problems if p.code == "file-not-regular"], problems


# --- privacy: what a workbook may pull in -----------------------------------------------


def test_a_settings_history_file_outside_the_workbook_folder_is_refused(tmp_path):
    (tmp_path / "elsewhere").mkdir()
    _history_csv(tmp_path / "elsewhere" / "secret.csv", ["A1", "B2", "C3"])
    (tmp_path / "sent").mkdir()
    for name in ("../elsewhere/secret.csv", str(tmp_path / "elsewhere" / "secret.csv")):
        src = simple_workbook(tmp_path / "sent" / "shop.xlsx", settings={"History file": name})
        with pytest.raises(UnusableWorkbook) as info:
            xlpolicy.analyse(src)
        (p,) = info.value.problems
        assert p.code == "history-file-outside" and p.sheet == "Settings", p
    # the same file named on the command line is the user's own choice
    report = xlpolicy.analyse(src, history=tmp_path / "elsewhere" / "secret.csv")
    assert report.input_summary["items_planned"] == 3


def test_a_settings_history_file_below_the_workbook_folder_is_read(tmp_path):
    (tmp_path / "data").mkdir()
    _history_csv(tmp_path / "data" / "sales.csv", ["A1", "B2", "C3"])
    src = simple_workbook(tmp_path / "shop.xlsx", settings={"History file": "data/sales.csv"})
    assert xlpolicy.analyse(src).input_summary["items_planned"] == 3


# --- one exception tree ------------------------------------------------------------------


def test_every_user_caused_error_has_the_one_base():
    from xlpolicy.api import UsageError
    from xlpolicy.problems import UnusableWorkbook
    from xlpolicy.reading.guard import Refused
    from xlpolicy.writing.atomic import OutputLocked
    from xlpolicy.writing.package import CannotMerge
    from xlpolicy.writing.sheets import OutputTooLarge

    for cls in (UsageError, UnusableWorkbook, Refused, OutputLocked, CannotMerge, OutputTooLarge):
        assert issubclass(cls, errors.XlpolicyError), cls
    assert issubclass(OutputLocked, errors.OutputError)
    assert issubclass(UnusableWorkbook, errors.InputError)


@pytest.mark.parametrize(
    "number, words",
    [
        (errno.ENOSPC, "disk is full"),
        (errno.EACCES, "no permission"),
        (errno.EISDIR, "is a folder"),
        (errno.ENOENT, "folder does not exist"),
        (errno.EFBIG, "file-size limit"),
        (errno.EROFS, "read-only"),
    ],
)
def test_each_file_system_cause_gets_its_own_advice(number, words):
    exc = OSError(number, os.strerror(number), "/x/.out.0123456789ab.tmp.csv")
    err = errors.output_failure(Path("/x/out.csv"), exc)
    assert words in str(err) and "/x/out.csv" in str(err)
    assert ".tmp" not in str(err)


def test_a_full_disk_names_the_output_not_the_temporary_file(tmp_path, monkeypatch):
    src = simple_workbook(tmp_path / "shop.xlsx")
    real = os.replace

    def full(a, b):  # the disk fills up as the finished CSV is put in place
        if str(b).endswith(".csv"):
            raise OSError(errno.ENOSPC, "No space left on device")
        return real(a, b)

    monkeypatch.setattr(atomic.os, "replace", full)
    code, out = _plan(str(src), "--csv", str(tmp_path / "t.csv"))
    assert code == 1, out
    assert f"Could not write {tmp_path / 't.csv'}: the disk is full" in out, out
    assert ".tmp" not in out and "close it" not in out and "internal error" not in out
    assert not [p.name for p in tmp_path.iterdir() if ".tmp" in p.name]


# --- as an unprivileged user, and under a file-size limit -------------------------------


def _unprivileged() -> list[str]:
    if os.geteuid() != 0:
        return []
    if shutil.which("setpriv"):
        return ["setpriv", "--reuid=65534", "--regid=65534", "--clear-groups"]
    if shutil.which("runuser"):
        return ["runuser", "-u", "nobody", "--"]
    pytest.skip("running as root and no tool to drop privileges (setpriv, runuser)")


@pytest.fixture
def shared_dir() -> Iterator[Path]:
    """A folder an unprivileged user can read (pytest's own tmp_path is root's only)."""
    d = Path(tempfile.mkdtemp(prefix="xlpolicy-perm-"))
    d.chmod(0o755)
    try:
        yield d
    finally:
        shutil.rmtree(d, ignore_errors=True)


def _child(args: list[str], cwd: Path, **kw) -> subprocess.CompletedProcess:
    env = dict(os.environ, PYTHONPATH=str(ROOT), TMPDIR=str(cwd / "tmp"))
    env.pop("XLPOLICY_DEBUG", None)
    return subprocess.run(
        [*args, sys.executable, "-m", "xlpolicy", "plan", "--no-simulate", *kw.pop("argv")],
        capture_output=True,
        text=True,
        timeout=300,
        cwd=cwd,
        env=env,
        **kw,
    )


def test_a_read_only_folder_is_a_message_not_a_crash(shared_dir):
    src = simple_workbook(shared_dir / "shop.xlsx")
    src.chmod(0o644)
    locked = shared_dir / "locked"
    locked.mkdir(mode=0o555)
    locked.chmod(0o555)
    (shared_dir / "tmp").mkdir(mode=0o777)
    (shared_dir / "tmp").chmod(0o777)
    proc = _child(_unprivileged(), shared_dir, argv=[str(src), "-o", str(locked / "out.xlsx")])
    text = proc.stdout + proc.stderr
    assert proc.returncode == 1, text
    assert "internal error" not in text and "Traceback" not in text, text
    assert str(locked / "out.xlsx") in text and "no permission" in text, text
    assert list(locked.iterdir()) == []


def test_a_file_size_limit_is_a_message_and_leaves_nothing_behind(shared_dir):
    import resource

    src = simple_workbook(shared_dir / "shop.xlsx")
    (shared_dir / "tmp").mkdir()
    out = shared_dir / "out"
    out.mkdir()

    def limit() -> None:  # 20 KB: the workbook is larger, the input already exists
        resource.setrlimit(resource.RLIMIT_FSIZE, (20_000, 20_000))

    proc = _child([], shared_dir, argv=[str(src), "-o", str(out / "p.xlsx")], preexec_fn=limit)
    text = proc.stdout + proc.stderr
    assert proc.returncode == 1, text
    assert "internal error" not in text and "Traceback" not in text, text
    assert str(out / "p.xlsx") in text and "file-size limit" in text, text
    assert list(out.iterdir()) == []  # no partial output, no temporary file
    assert list((shared_dir / "tmp").iterdir()) == []  # nor xlsxwriter's temporaries


# --- leftovers ---------------------------------------------------------------------------


def test_stale_temporaries_of_a_killed_run_are_cleared_and_fresh_ones_kept(tmp_path):
    src = simple_workbook(tmp_path / "shop.xlsx")
    out = tmp_path / "p.csv"
    stale = tmp_path / ".p.0123456789ab.tmp.csv"
    fresh = tmp_path / ".p.ba9876543210.tmp.csv"  # a run writing right now
    other = tmp_path / ".q.0123456789ab.tmp.csv"  # another output's: not ours to touch
    for f in (stale, fresh, other):
        f.write_text("partial")
    old = time.time() - 2 * atomic.STALE_AFTER_SECONDS
    os.utime(stale, (old, old))
    os.utime(other, (old, old))
    code, text = _plan(str(src), "--csv", str(out))
    assert code == 0, text
    assert not stale.exists() and fresh.exists() and other.exists()


def test_xlsxwriter_temporaries_go_to_a_folder_of_ours(tmp_path, monkeypatch):
    seen: list[str] = []
    import xlsxwriter

    real = xlsxwriter.Workbook.__init__

    def spy(self, filename, options=None):
        seen.append((options or {}).get("tmpdir", ""))
        real(self, filename, options)

    monkeypatch.setattr(xlsxwriter.Workbook, "__init__", spy)
    src = simple_workbook(tmp_path / "shop.xlsx")
    xlpolicy.plan(src, simulate=False)
    assert seen and all(Path(d).name.startswith("xlpolicy-") for d in seen)
    assert not any(Path(d).exists() for d in seen)  # removed once written


def test_an_output_that_is_a_pipe_or_device_is_refused(tmp_path):
    src = simple_workbook(tmp_path / "shop.xlsx")
    fifo = tmp_path / "t.csv"
    os.mkfifo(fifo)
    code, out = _plan(str(src), "--csv", str(fifo))  # writing would wait for a reader
    assert code == 2 and "not a file saved on disk" in out, out
    code, out = _plan(str(src), "--json", os.devnull)
    assert code == 2 and "not a file saved on disk" in out, out
    assert stat.S_ISFIFO(os.stat(fifo).st_mode) and os.path.exists(os.devnull)


def test_template_and_demo_do_not_replace_a_read_only_file(tmp_path):
    kept = tmp_path / "t.xlsx"
    kept.write_text("mine")
    kept.chmod(0o444)
    res = CliRunner().invoke(main, ["template", str(kept), "--force"])
    assert res.exit_code == 1 and "read-only" in res.output, res.output
    (tmp_path / "demo").mkdir()
    shop = tmp_path / "demo" / "demo-shop.xlsx"
    shop.write_text("mine")
    shop.chmod(0o444)
    res = CliRunner().invoke(main, ["demo", str(tmp_path / "demo")])
    assert res.exit_code == 1 and "read-only" in res.output, res.output
    assert kept.read_text() == shop.read_text() == "mine"
