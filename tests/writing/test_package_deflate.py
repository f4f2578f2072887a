"""Deflating the big generated sheets in threads (writing/package/deflate.py, ParallelDeflate).

The pieces, each primed with the 32 KB before it and ended by a sync flush, must make one
ordinary deflate stream (RFC 1951): checked by inflating with zlib (the reference
implementation) and by reading a zip entry written this way with Python's zipfile, whose
CRC-32 check (APPNOTE 4.4.7) would fail on any lost or misplaced byte.
"""

from __future__ import annotations

import concurrent.futures
import zipfile
import zlib
from pathlib import Path

import numpy as np
import pytest

from xlpolicy.writing.package import deflate
from xlpolicy.writing.package.deflate import ParallelDeflate, deflate_in_threads


def _xmlish(n_rows: int, seed: int = 3) -> bytes:
    rng = np.random.default_rng(seed)
    return "".join(
        f'<row r="{r}"><c r="A{r}"><v>{v!r}</v></c></row>'
        for r, v in enumerate(rng.random(n_rows).tolist(), 1)
    ).encode()


@pytest.mark.parametrize(
    "sizes", [[], [0], [1], [10, 0, 5], [40_000, 1, 70_000, 3_000], [300_000] * 5]
)
def test_pieces_make_one_deflate_stream(monkeypatch, sizes):
    monkeypatch.setattr(deflate, "DEFLATE_PIECE", 50_000)  # many pieces, some < a window
    monkeypatch.setattr(deflate, "DEFLATE_AHEAD", 2)
    data = _xmlish(40_000)
    chunks, pos = [], 0
    for n in sizes:
        chunks.append(data[pos : pos + n])
        pos += n
    with concurrent.futures.ThreadPoolExecutor(2) as pool:
        d = ParallelDeflate(pool, 1)
        out = b"".join(d.compress(c) for c in chunks) + d.flush()
    inflate = zlib.decompressobj(-15)
    assert inflate.decompress(out) + inflate.flush() == b"".join(chunks)
    assert inflate.eof  # the final block is there, and nothing after it
    assert inflate.unused_data == b""


def test_priming_keeps_the_compression(monkeypatch):
    """Pieces primed with the window before them compress about as well as one stream."""
    monkeypatch.setattr(deflate, "DEFLATE_PIECE", 1 << 16)
    data = _xmlish(60_000)
    with concurrent.futures.ThreadPoolExecutor(2) as pool:
        d = ParallelDeflate(pool, 1)
        out = d.compress(data) + d.flush()
    whole = zlib.compressobj(1, zlib.DEFLATED, -15)
    one = whole.compress(data) + whole.flush()
    assert len(out) < len(one) * 1.02


def test_zip_entry_written_with_threads_reads_back(tmp_path: Path, monkeypatch):
    monkeypatch.setattr(deflate, "DEFLATE_PIECE", 1 << 16)
    data = _xmlish(50_000)
    path = tmp_path / "t.zip"
    info = zipfile.ZipInfo("xl/worksheets/sheet1.xml", date_time=(1980, 1, 1, 0, 0, 0))
    info.compress_type = zipfile.ZIP_DEFLATED
    with (
        zipfile.ZipFile(path, "w") as zf,
        concurrent.futures.ThreadPoolExecutor(2) as pool,
        zf.open(info, "w") as dst,
    ):
        deflate_in_threads(dst, pool)
        assert isinstance(dst._compressor, ParallelDeflate)
        for k in range(0, len(data), 100_000):
            dst.write(data[k : k + 100_000])
    with zipfile.ZipFile(path) as zf:
        assert zf.testzip() is None
        assert zf.read("xl/worksheets/sheet1.xml") == data
