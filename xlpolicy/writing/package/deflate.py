"""Deflating one big zip entry in several threads, as one ordinary deflate stream.

:class:`ParallelDeflate` takes the place of the compressor inside a zip entry being
written (see :mod:`.zip_private` for how it gets there); deflate is RFC 1951.
"""

from __future__ import annotations

import collections
import concurrent.futures
import os
import zlib
from typing import IO

from ... import fastzlib
from . import zip_private

#: Deflate level for the parts we write. Level 1 compresses sheet XML some four times
#: faster than the default 6 for files about 8 % larger (measured on a 100,000-item Policy
#: sheet); the big sheets are written in seconds rather than tens of seconds.
GENERATED_LEVEL = 1


#: Deflate threads for the big generated sheets (zlib releases the interpreter lock).
DEFLATE_THREADS = max(1, min(4, os.cpu_count() or 1))
#: Input per deflate job, and how many jobs may wait for their turn to be written.
DEFLATE_PIECE = 1 << 22
DEFLATE_AHEAD = 8
_DEFLATE_WINDOW = 1 << 15  # deflate's window: the dictionary a piece is primed with (< a piece)


class ParallelDeflate:
    """Stands in for the zlib compressor of a zip entry being written; deflates in threads.

    One deflate thread could not keep up with the rendering of a 100,000-item Policy sheet
    (some 500 MB of XML at level 1), so the main thread waited for it. Here the input is
    cut into pieces deflated side by side, each primed with the 32 KB before it (so back
    references still reach across) and ended by a sync flush (so it ends on a byte);
    concatenated, they are one ordinary deflate stream, closed by an empty final block.
    This is how parallel gzip tools do it. ``compress`` hands back what is done, in order.
    """

    def __init__(self, pool: concurrent.futures.Executor, level: int) -> None:
        self._pool = pool
        self._level = level
        self._pending: collections.deque[concurrent.futures.Future[bytes]] = collections.deque()
        self._window = b""

    def _deflate(self, data: memoryview | bytes, primer: bytes) -> bytes:
        c = fastzlib.compressobj(self._level, primer)  # ISA-L where installed
        return c.compress(data) + c.flush(fastzlib.Z_SYNC_FLUSH)

    def compress(self, data: bytes | memoryview) -> bytes:
        view = memoryview(data).cast("B")
        for start in range(0, len(view), DEFLATE_PIECE):
            # the 32 KB of input before the piece (a piece is longer than that)
            primer = bytes(view[start - _DEFLATE_WINDOW : start]) if start else self._window
            self._pending.append(
                self._pool.submit(self._deflate, view[start : start + DEFLATE_PIECE], primer)
            )
        self._window = (
            bytes(view[-_DEFLATE_WINDOW:])
            if len(view) >= _DEFLATE_WINDOW
            else (self._window + bytes(view))[-_DEFLATE_WINDOW:]
        )
        done = []
        while self._pending and (len(self._pending) > DEFLATE_AHEAD or self._pending[0].done()):
            done.append(self._pending.popleft().result())
        return b"".join(done)

    def flush(self) -> bytes:
        done = [f.result() for f in self._pending]
        self._pending.clear()
        return b"".join(done) + zlib.compressobj(self._level, zlib.DEFLATED, -15).flush()


def deflate_in_threads(dst: IO[bytes], pool: concurrent.futures.Executor | None) -> None:
    """Give zip entry ``dst`` (being written, nothing yet) a :class:`ParallelDeflate`.

    Done only where zipfile's internals allow it (:func:`.zip_private.swap_compressor`);
    otherwise the entry is deflated by zipfile itself, in one thread.
    """
    if pool is not None:
        zip_private.swap_compressor(dst, ParallelDeflate(pool, GENERATED_LEVEL))
