"""Write an output file all at once: a temporary file beside it, then one rename.

A crash, an error or Ctrl-C while writing leaves the previous output (if any) exactly as
it was and no half-written file behind.
"""

from __future__ import annotations

import contextlib
import os
import secrets
from collections.abc import Iterator
from pathlib import Path

__all__ = ["OutputLocked", "atomic_output"]


class OutputLocked(Exception):
    """The output file cannot be created or replaced (open in another program, read-only)."""


def _locked(path: Path) -> OutputLocked:
    return OutputLocked(
        f"{path} is open in another program or not writable: close it and try again"
    )


def _default_mode() -> int:
    """File mode a plain open() would give a new file (0o666 less the umask)."""
    mask = os.umask(0)
    os.umask(mask)
    return 0o666 & ~mask


@contextlib.contextmanager
def atomic_output(path: Path) -> Iterator[Path]:
    """Yield a temporary path beside ``path``; on success move it onto ``path`` in one step.

    The temporary name is ``.<stem>.<random>.tmp<suffix>`` (hidden, same directory so the
    final rename is atomic, real extension last so libraries that check it are satisfied).
    On any exception, KeyboardInterrupt included, the temporary file is removed, ``path``
    is left untouched and the exception propagates. A PermissionError while creating or
    replacing the file becomes :class:`OutputLocked`.
    """
    path = Path(path)
    directory = path.parent
    tmp = directory / f".{path.stem}.{secrets.token_hex(6)}.tmp{path.suffix}"
    try:
        fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
    except PermissionError as exc:
        raise _locked(path) from exc
    os.close(fd)
    try:
        yield tmp
        with contextlib.suppress(OSError):
            mode = os.stat(path).st_mode & 0o7777 if path.exists() else _default_mode()
            os.chmod(tmp, mode)
        try:
            os.replace(tmp, path)
        except PermissionError as exc:
            raise _locked(path) from exc
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise
