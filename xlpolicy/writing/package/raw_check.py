"""Checking the user's parts that were copied as compressed bytes, in a thread of its own.

A part copied without inflating it (see :mod:`.zip_private`) must still be inflated once
to check its CRC-32 and size (PKWARE APPNOTE 4.4.7), so that a damaged part is found
rather than passed on. :class:`Checker` does that beside the rest of the writing.
"""

from __future__ import annotations

import queue
import threading
import zipfile
from pathlib import Path
from typing import IO

from ... import fastzlib
from .errors import DAMAGED, Unexpected
from .opc import CHUNK


def check_raw(fp: IO[bytes], info: zipfile.ZipInfo, start: int) -> None:
    """Inflate a part's data at ``start`` of ``fp``; Unexpected unless its CRC and size hold."""
    deflated = info.compress_type == zipfile.ZIP_DEFLATED
    inflate = fastzlib.decompressobj() if deflated else None  # ISA-L where installed
    crc, size, left = 0, 0, info.compress_size
    try:
        fp.seek(start)
        while left > 0:
            chunk = fp.read(min(CHUNK, left))
            if not chunk:
                raise EOFError("the part ends early")
            plain = inflate.decompress(chunk) if inflate is not None else chunk
            crc, size, left = fastzlib.crc32(plain, crc), size + len(plain), left - len(chunk)
        if inflate is not None:
            rest = inflate.flush()
            crc, size = fastzlib.crc32(rest, crc), size + len(rest)
    except DAMAGED as exc:
        raise Unexpected(f"its part {info.filename} cannot be read ({exc})") from exc
    if inflate is not None and not inflate.eof:
        raise Unexpected(f"its part {info.filename} cannot be read (truncated data)")
    if crc != info.CRC or size != info.file_size:
        raise Unexpected(f"its part {info.filename} cannot be read (bad CRC or size)")


class Checker:
    """Checks the user's raw-copied parts (check_raw) in a thread of its own.

    Inflating the user's big sheets only to check their CRCs took half a second of the
    splice on a 100,000-item workbook; zlib releases the interpreter lock, so on two cores
    the check runs beside the rendering of the generated sheets. It reads the user's file
    through a handle of its own. :meth:`finish` waits for it and raises the first damaged
    part's Unexpected, before the output is complete (atomic_output then drops it).
    """

    def __init__(self, path: str | Path) -> None:
        self._path = path
        self._queue: queue.Queue[tuple[zipfile.ZipInfo, int] | None] = queue.Queue()
        self._error: BaseException | None = None
        self._cancelled = False
        self._thread = threading.Thread(target=self._run, name="xlpolicy-check", daemon=True)

    def _run(self) -> None:
        try:
            with open(self._path, "rb") as fh:
                while True:
                    task = self._queue.get()
                    if task is None:
                        return
                    if not self._cancelled:
                        check_raw(fh, *task)
        except BaseException as exc:  # handed to the caller, not lost in the thread
            self._error = exc
            while self._queue.get() is not None:  # let the caller's puts and stop go on
                pass

    def check(self, info: zipfile.ZipInfo, start: int) -> None:
        """Queue the check of a part whose data starts at ``start``."""
        if self._error is not None:
            raise self._error
        self._queue.put((info, start))

    def finish(self) -> None:
        """Wait for every queued check; raise the first failure."""
        self._stop()
        if self._error is not None:
            raise self._error

    def _stop(self) -> None:
        if self._thread.is_alive():
            self._queue.put(None)
            self._thread.join()

    def __enter__(self) -> Checker:
        self._thread.start()
        return self

    def __exit__(self, *exc: object) -> None:
        if exc[0] is not None:  # the caller failed: skip what is queued
            self._cancelled = True
        self._stop()
