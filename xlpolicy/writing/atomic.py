"""Write an output file all at once: a temporary file beside it, then one rename.

A crash, an error or Ctrl-C while writing leaves the previous output (if any) exactly as
it was and no half-written file behind.
"""

from __future__ import annotations

import contextlib
import os
import re
import secrets
import stat
import time
from collections.abc import Iterator
from pathlib import Path

from ..errors import OutputLocked, output_failure

__all__ = ["STALE_AFTER_SECONDS", "OutputLocked", "atomic_output", "clear_stale"]


def _locked(path: Path) -> OutputLocked:
    return OutputLocked(
        f"Could not write {path}: it is open in another program or not writable. Close it "
        "(or make it writable) and try again.",
        path,
    )


#: A temporary file of ours untouched for this long belongs to a run that was killed (a
#: running one writes to it, then renames it at once), so the next run removes it.
STALE_AFTER_SECONDS = 3600.0


def temporary_name(path: Path, token: str) -> str:
    """The hidden name the output ``path`` is written under: ``.<stem>.<hex>.tmp<suffix>``."""
    return f".{path.stem}.{token}.tmp{path.suffix}"


def clear_stale(path: Path, now: float | None = None) -> list[Path]:
    """Remove temporaries of ``path`` left by killed runs (see :data:`STALE_AFTER_SECONDS`).

    Only names this module makes for this very output are touched (``.<stem>.<12 hex
    digits>.tmp<suffix>``, a regular file); returns what was removed.
    """
    path = Path(path)
    pattern = re.compile(
        re.escape(f".{path.stem}.") + r"[0-9a-f]{12}" + re.escape(f".tmp{path.suffix}")
    )
    now = time.time() if now is None else now
    removed: list[Path] = []
    try:
        entries = list(os.scandir(path.parent))
    except OSError:
        return removed
    for entry in entries:
        if not pattern.fullmatch(entry.name):
            continue
        with contextlib.suppress(OSError):
            st = entry.stat(follow_symlinks=False)
            if stat.S_ISREG(st.st_mode) and now - st.st_mtime > STALE_AFTER_SECONDS:
                os.unlink(entry.path)
                removed.append(Path(entry.path))
    return removed


def _file_system_cause(exc: Exception, tmp: Path) -> OSError | None:
    """The file system's failure behind ``exc`` while writing ``tmp``, if that is what it is.

    A writer library may wrap it (xlsxwriter raises its own error holding the OSError); an
    OSError about another file (an input being read) is not the output's failure.
    """
    if isinstance(exc, OSError):
        return exc if _ours(exc, tmp) else None
    inner = exc.args[0] if exc.args else None
    return inner if isinstance(inner, OSError) else None


def _ours(exc: OSError, tmp: Path) -> bool:
    """Whether ``exc`` came from writing the output (not from reading an input)."""
    name = getattr(exc, "filename", None)
    if name is None:
        return True
    name = os.fspath(name)
    return name == os.fspath(tmp) or Path(name).parent == tmp.parent and tmp.name in name


def _default_mode() -> int:
    """File mode a plain open() would give a new file (0o666 less the umask)."""
    mask = os.umask(0)
    os.umask(mask)
    return 0o666 & ~mask


@contextlib.contextmanager
def atomic_output(path: Path) -> Iterator[Path]:
    """Yield a temporary path beside ``path``; on success move it onto ``path`` in one step.

    The temporary name is ``.<stem>.<random>.tmp<suffix>`` (hidden, same directory so the
    final rename is atomic, real extension last so libraries that check it are satisfied);
    temporaries of the same output left by a killed run are removed first. On any
    exception, KeyboardInterrupt included, the temporary file is removed, ``path`` is left
    untouched and the exception propagates. A failure of the file system while creating,
    writing or replacing the file becomes an :class:`~xlpolicy.errors.OutputError` that
    names ``path`` (never the temporary name) and says what to do.
    """
    path = Path(path)
    clear_stale(path)
    tmp = path.parent / temporary_name(path, secrets.token_hex(6))
    try:
        fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
    except OSError as exc:
        raise output_failure(path, exc) from exc
    os.close(fd)
    try:
        try:
            yield tmp
        except Exception as exc:
            cause = _file_system_cause(exc, tmp)
            if cause is not None:
                raise output_failure(path, cause) from exc
            raise
        with contextlib.suppress(OSError):
            mode = os.stat(path).st_mode & 0o7777 if path.exists() else _default_mode()
            os.chmod(tmp, mode)
        try:
            os.replace(tmp, path)
        except PermissionError as exc:
            raise _locked(path) from exc
        except OSError as exc:
            raise output_failure(path, exc) from exc
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise
