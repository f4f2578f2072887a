"""Which files a run reads and writes, checked against each other before any work.

A run reads the workbook (or every CSV file of a folder), perhaps a history file, and
writes up to three outputs (the workbook, a CSV, a JSON). Before anything is read or
written:

- every input must be a regular file: a named pipe, a device or a socket would hang the
  run or read forever, so it is refused;
- no output may be an input, and no two outputs may be the same file. Two names are the
  same file when they lead to it through links (symbolic or hard), through ``..``, or by
  differing only in case on a file system that ignores case (macOS and Windows by
  default); outputs that do not exist yet are compared by their resolved folder and their
  name, ignoring case;
- every output's folder must exist and be a folder; an output that exists must be a file
  that may be replaced (not a folder, not read-only).

The history file that a workbook's Settings names is only known once Settings is read; it
is checked against the outputs as soon as it is (still before anything is written).
"""

from __future__ import annotations

import os
import stat
from collections.abc import Iterable, Mapping
from pathlib import Path

from .errors import OutputLocked, UnusableWorkbook, UsageError
from .problems import Problem, Severity

__all__ = ["check_inputs", "check_outputs", "input_files"]

#: File name endings read from a CSV-folder input (as xlpolicy.reading.sources reads them).
_CSV_SUFFIXES = (".csv", ".tsv")


def input_files(source: Path, history: Path | None = None) -> list[Path]:
    """The files a run reads: the workbook or each CSV file of the folder, and ``history``."""
    out: list[Path] = []
    if source.is_dir():
        try:
            entries = sorted(source.iterdir())
        except OSError:
            entries = []  # the reader reports an unreadable folder itself
        out += [f for f in entries if f.suffix.lower() in _CSV_SUFFIXES]
    elif os.path.lexists(source):
        out.append(source)
    if history is not None:
        out.append(history)
    return out


def check_inputs(files: Iterable[Path]) -> None:
    """Refuse an input that is not a regular file (a named pipe, a device, a socket).

    Raises :class:`UnusableWorkbook` with one fatal problem per such file. Missing files
    are left to the readers, which say so in their own words.
    """
    problems = []
    for f in files:
        try:
            mode = os.stat(f).st_mode
        except OSError:
            continue
        if stat.S_ISREG(mode) or stat.S_ISDIR(mode):
            continue
        kind = (
            "a named pipe"
            if stat.S_ISFIFO(mode)
            else "a device"
            if stat.S_ISCHR(mode) or stat.S_ISBLK(mode)
            else "a socket"
            if stat.S_ISSOCK(mode)
            else "not a regular file"
        )
        problems.append(
            Problem(
                Severity.FATAL,
                "",
                "",
                "",
                str(f),
                f"{f} is {kind}, not a file saved on disk, so it was not read (reading it "
                "could wait forever). Save the data to a file and give that file's name.",
                "file-not-regular",
            )
        )
    if problems:
        raise UnusableWorkbook(problems)


def check_outputs(inputs: Iterable[Path], outputs: Mapping[str, Path]) -> None:
    """Refuse outputs that would overwrite an input or each other, or cannot be written.

    ``outputs`` maps how each output was given ("-o", "--csv", ...) to its path. Raises
    :class:`UsageError` for a name that cannot be right and :class:`OutputLocked` for an
    existing output that may not be replaced.
    """
    ins = list(inputs)
    seen: list[tuple[str, Path]] = []
    for option, out in outputs.items():
        _check_folder(option, out)
        for src in ins:
            if _same_file(out, src):
                raise UsageError(
                    f"{option} {out} is {_what(src)}, which xlpolicy only reads: writing there "
                    "would destroy it. Choose another name."
                )
        for other_option, other in seen:
            if _same_file(out, other):
                raise UsageError(
                    f"{option} {out} and {other_option} {other} are the same file, so one "
                    "output would replace the other. Give each its own name."
                )
        seen.append((option, out))


def _what(src: Path) -> str:
    return f"your input {src}"


def _check_folder(option: str, out: Path) -> None:
    """The output's folder exists and the output, if there, may be replaced."""
    folder = out.parent
    if not folder.exists():
        raise UsageError(
            f"the folder {folder} for {option} {out} does not exist. Create it first, or "
            "choose an existing folder."
        )
    if not folder.is_dir():
        raise UsageError(f"{option} {out}: {folder} is a file, not a folder")
    if out.is_dir():
        raise UsageError(
            f"{option} {out} is a folder. Give a file name inside it, e.g. {out / out.name}."
        )
    if not os.access(folder, os.W_OK | os.X_OK):
        raise OutputLocked(
            f"Could not write {out}: you have no permission to write in the folder {folder}. "
            f"Choose a folder you can write to with {option}, or ask for write permission.",
            out,
        )
    if os.path.lexists(out):
        try:
            mode = os.stat(out).st_mode
        except OSError:
            return  # a dangling link: writing replaces the link itself
        if not stat.S_ISREG(mode):
            raise UsageError(
                f"{option} {out} is not a file saved on disk (a device, a named pipe or the "
                "like); xlpolicy writes its outputs as files. Give a file name."
            )
        if not mode & (stat.S_IWUSR | stat.S_IWGRP | stat.S_IWOTH) or not os.access(out, os.W_OK):
            raise OutputLocked(
                f"{out} exists and is read-only, so xlpolicy did not replace it (someone "
                "may have protected it on purpose). Make it writable, delete it, or choose "
                f"another name with {option}.",
                out,
            )


def _same_file(a: Path, b: Path) -> bool:
    """Whether two names lead to the same file (links, ``..``, case where it is ignored)."""
    try:
        if os.path.exists(a) and os.path.exists(b):
            return os.path.samefile(a, b)
    except OSError:
        pass
    ra, rb = a.resolve(), b.resolve()
    if ra == rb:
        return True
    try:
        same_folder = os.path.samefile(ra.parent, rb.parent)
    except OSError:
        same_folder = ra.parent == rb.parent
    return same_folder and ra.name.casefold() == rb.name.casefold()


def planned_outputs(
    workbook: Path | None, csv: str | Path | None = None, json: str | Path | None = None
) -> dict[str, Path]:
    """The outputs a planning run may write, by the option that names them.

    An .xlsm output whose sheets cannot be carried over is written as an .xlsx of the same
    name (xlpolicy.api.write_policy_workbook), so that name is counted too.
    """
    out: dict[str, Path] = {}
    if workbook is not None:
        out["-o"] = Path(workbook)
        if Path(workbook).suffix.lower() == ".xlsm":
            out["-o (as .xlsx, if your sheets cannot be carried over)"] = Path(
                workbook
            ).with_suffix(".xlsx")
    if csv is not None:
        out["--csv"] = Path(csv)
    if json is not None:
        out["--json"] = Path(json)
    return out
