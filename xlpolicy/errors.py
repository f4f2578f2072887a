"""One tree of exceptions for everything a user or their machine can cause.

The command line catches :class:`XlpolicyError` once and turns it into a message and an
exit status; anything else that escapes is a bug of ours. Three branches:

- :class:`UsageError`: a mistake on the command line or in the API's arguments (exit 2);
- :class:`InputError`: the input cannot be used (exit 1); :class:`UnusableWorkbook` carries
  the problems that say why, by file, sheet and cell;
- :class:`OutputError`: an output cannot be written (exit 1): open in another program,
  read-only, a full disk, a missing folder, a size limit. Its message names the output as
  the user gave it, never the hidden temporary name, and says what to do for that cause.

The classes are importable from where they used to live as well (``xlpolicy.api``,
``xlpolicy.problems``, ``xlpolicy.writing.atomic``, ``xlpolicy.writing.sheets``,
``xlpolicy.reading.guard``).
"""

from __future__ import annotations

import errno
from pathlib import Path
from typing import TYPE_CHECKING

if TYPE_CHECKING:  # problems.py imports this module; the name is needed for hints only
    from .problems import Problem

__all__ = [
    "InputError",
    "OutputError",
    "OutputLocked",
    "OutputTooLarge",
    "Refused",
    "UnusableWorkbook",
    "UsageError",
    "XlpolicyError",
    "output_failure",
]


class XlpolicyError(Exception):
    """Something the user or their machine caused: a message, never a traceback."""


class UsageError(XlpolicyError, ValueError):
    """A bad argument (not a bad workbook): the CLI exits with status 2."""


class InputError(XlpolicyError):
    """The input cannot be used as it is."""


class UnusableWorkbook(InputError):
    """Raised when the input cannot be used at all; carries the fatal problems.

    The CLI turns it into a message and exit status 1, never a traceback.
    """

    def __init__(self, problems: list[Problem]):
        self.problems = problems
        super().__init__("; ".join(p.message for p in problems))


class Refused(InputError):
    """A file that is not read, with the message for the user and a problem code."""

    def __init__(self, message: str, code: str):
        super().__init__(message)
        self.message = message
        self.code = code


class OutputError(XlpolicyError):
    """An output file cannot be written; the message names it and says what to do."""

    def __init__(self, message: str, path: Path | None = None, cause: OSError | None = None):
        super().__init__(message)
        self.path = path
        self.cause = cause

    def naming(self, path: Path) -> OutputError:
        """The same failure told about ``path``: for an intermediate file of ours, the
        output the user asked for (they never heard of the intermediate one)."""
        if self.cause is None or self.path == path:
            return self
        return output_failure(path, self.cause)


class OutputLocked(OutputError):
    """The output file cannot be created or replaced (open in another program, read-only)."""


class OutputTooLarge(OutputError, ValueError):
    """The results would not fit in a sheet; nothing is written."""


#: errno -> (what happened, what to do), for failures while writing an output.
_CAUSES: dict[int, tuple[str, str]] = {
    errno.ENOSPC: (
        "the disk is full",
        "Free some space on that disk (or in the temporary folder), or write the output "
        "to another disk with -o, and run again.",
    ),
    errno.EDQUOT: (
        "your disk quota is used up",
        "Delete some of your files there, or write the output elsewhere with -o.",
    ),
    errno.EFBIG: (
        "the file is larger than this system lets a program write (a file-size limit)",
        "Raise the limit (ulimit -f) or ask whoever runs the machine, or write fewer items "
        "at once.",
    ),
    errno.EACCES: (
        "you have no permission to write there",
        "Choose a folder you can write to with -o, or ask for write permission.",
    ),
    errno.EPERM: (
        "the system does not allow writing it",
        "Choose another name or folder with -o.",
    ),
    errno.EROFS: (
        "that disk is read-only",
        "Write the output to another disk with -o.",
    ),
    errno.EISDIR: (
        "that name is a folder",
        "Give a file name, e.g. -o results.xlsx, or rename the folder.",
    ),
    errno.ENOENT: (
        "its folder does not exist (or was removed while writing)",
        "Create the folder, or choose an existing one with -o.",
    ),
    errno.ENOTDIR: (
        "part of its path is a file, not a folder",
        "Check the path and choose an existing folder.",
    ),
    errno.ENAMETOOLONG: (
        "the name is too long for this system",
        "Choose a shorter name or folder.",
    ),
    errno.EBUSY: (
        "it is in use",
        "If it is open in another program, close it and run again.",
    ),
}


def output_failure(path: Path | str, exc: OSError) -> OutputError:
    """The :class:`OutputError` for ``exc``, raised while writing the output ``path``.

    The message names ``path`` (the output as the user gave it), the cause in plain words
    and what to do; the temporary file's name never appears.
    """
    what, fix = _CAUSES.get(
        exc.errno if exc.errno is not None else -1,
        (
            exc.strerror or type(exc).__name__,
            "If the file is open in another program, close it; then run again.",
        ),
    )
    cls = OutputLocked if exc.errno in (errno.EACCES, errno.EPERM, errno.EBUSY) else OutputError
    return cls(f"Could not write {path}: {what}. {fix}", Path(path), exc)
