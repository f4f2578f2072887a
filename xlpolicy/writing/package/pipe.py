"""A writer that hands its bytes to a second thread, in order.

Used for the rows of a big generated sheet, so that compressing them overlaps rendering
the next ones.
"""

from __future__ import annotations

import queue
import threading
from typing import IO


class Pipe:
    """Writes to ``dst`` from a second thread, so deflating overlaps rendering.

    Rendering rows is Python work that holds the interpreter lock; zlib's deflate and CRC
    release it, so on two cores the big sheet's compression runs beside the rendering of
    its next rows instead of after it. Order is kept (one queue, one writer); an error in
    the writer (a full disk) is raised in the caller at the next write or at the end.
    """

    def __init__(self, dst: IO[bytes], depth: int = 4) -> None:
        self._dst = dst
        self._queue: queue.Queue[bytes | None] = queue.Queue(maxsize=depth)
        self._error: BaseException | None = None
        self._thread = threading.Thread(target=self._run, name="xlpolicy-deflate", daemon=True)

    def _run(self) -> None:
        while True:
            data = self._queue.get()
            if data is None:
                return
            if self._error is None:
                try:
                    self._dst.write(data)
                except BaseException as exc:  # handed to the caller, not lost in the thread
                    self._error = exc

    def write(self, data: bytes) -> None:
        if self._error is not None:
            raise self._error
        self._queue.put(data)

    def __enter__(self) -> Pipe:
        self._thread.start()
        return self

    def __exit__(self, *exc: object) -> None:
        self._queue.put(None)
        self._thread.join()
        if self._error is not None and exc[0] is None:
            raise self._error
