"""Raw deflate, inflate and CRC-32: Intel's ISA-L (python-isal) where installed, else zlib.

At 100,000 items xlpolicy deflates some 500 MB of generated sheet XML and inflates the
user's big sheets twice (a scan beside the parse, a CRC check of the copied parts). ISA-L
does the same work three times faster for deflate, twice for inflate and seven times for
CRC-32 (measured here on a Policy sheet and a History sheet), with streams zlib reads as
its own: it is plain deflate (RFC 1951). python-isal is optional (the ``large`` extra);
without it every function here is zlib's.
"""

from __future__ import annotations

import zlib
from types import ModuleType
from typing import Any

_fast: ModuleType | None
try:
    from isal import isal_zlib

    _fast = isal_zlib
except ImportError:  # not installed: zlib does it all
    _fast = None

#: Whether ISA-L is in use.
FAST = _fast is not None
#: What a damaged deflate stream raises, under either library.
ERRORS: tuple[type[Exception], ...] = (zlib.error,) if _fast is None else (zlib.error, _fast.error)
Z_SYNC_FLUSH = zlib.Z_SYNC_FLUSH


def compressobj(level: int, zdict: bytes = b"") -> Any:
    """A raw-deflate compressor (no zlib header), primed with ``zdict`` if given.

    ISA-L's levels run 0-3 and its level 1 both outpaces and outcompresses zlib's level 1
    on sheet XML; zlib's levels above 1 are passed on as they are.
    """
    lib = _fast if _fast is not None and level <= 3 else zlib
    if zdict:
        return lib.compressobj(level, lib.DEFLATED, -15, zdict=zdict)
    return lib.compressobj(level, lib.DEFLATED, -15)


def decompressobj() -> Any:
    """A raw-inflate decompressor."""
    return (_fast or zlib).decompressobj(-15)


def crc32(data: bytes | memoryview, value: int = 0) -> int:
    """CRC-32 as zip files use it."""
    return (_fast or zlib).crc32(data, value)
