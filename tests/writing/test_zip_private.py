"""The one module that uses zipfile's internals (writing/package/zip_private.py).

If a Python release changes those internals, the first test fails and names what changed;
the writer meanwhile keeps working on public zipfile API alone, and the last test checks
that this fallback writes the very same parts (same names, order, compression method and
uncompressed bytes) as the fast path. The zip layout is PKWARE's APPNOTE; a part's bytes
are checked on reading by its CRC-32 (APPNOTE 4.4.7), which zipfile verifies.
"""

from __future__ import annotations

import sys
import zipfile
from pathlib import Path
from typing import Any

import pytest
from builders import simple_workbook

import xlpolicy
from xlpolicy.writing.package import deflate, zip_private


def test_zipfile_internals_are_as_expected() -> None:
    problems = zip_private.internals_problems()
    assert not problems, (
        f"Python {sys.version.split()[0]} changed zipfile internals that "
        f"xlpolicy/writing/package/zip_private.py uses: {'; '.join(problems)}. The writer "
        "falls back to public zipfile API (slower); update zip_private.py for this version."
    )
    assert zip_private.active()


@pytest.mark.parametrize("attribute", ["_writecheck", "FileHeader"])
def test_a_missing_internal_is_named_and_turns_the_fallback_on(monkeypatch, attribute) -> None:
    owner = zipfile.ZipFile if attribute == "_writecheck" else zipfile.ZipInfo
    monkeypatch.delattr(owner, attribute)
    monkeypatch.setattr(zip_private, "_problems", None)  # check again, not the cached result
    problems = zip_private.internals_problems()
    assert any(attribute in p for p in problems), problems
    assert not zip_private.active()


def test_a_compressor_zipfile_no_longer_calls_is_found(monkeypatch) -> None:
    """If zipfile kept its compressor elsewhere, swapping ``_compressor`` would do nothing."""
    zipfile_module: Any = zipfile  # its private entry writer, which zip_private relies on
    writer_class = zipfile_module._ZipWriteFile
    real_init = writer_class.__init__

    def init(self, *args, **kwargs):
        real_init(self, *args, **kwargs)
        self._deflater = self._compressor  # _compressor is still there, but write skips it

    def write(self, data):  # a writer that reads its own attribute, not _compressor
        self._file_size += len(data)
        self._crc = zipfile.crc32(data, self._crc)
        out = self._deflater.compress(data)
        self._compress_size += len(out)
        self._fileobj.write(out)
        return len(data)

    monkeypatch.setattr(writer_class, "__init__", init)
    monkeypatch.setattr(writer_class, "write", write)
    problems = zip_private.internals_problems()
    assert any("_compressor" in p for p in problems), problems


def _parts(path: Path) -> list[tuple[str, int, bytes]]:
    """Each part's name, compression method and uncompressed bytes, in the package's order
    (docProps/core.xml aside: it holds the time of writing)."""
    with zipfile.ZipFile(path) as zf:
        assert zf.testzip() is None
        return [
            (i.filename, i.compress_type, zf.read(i))
            for i in zf.infolist()
            if i.filename != "docProps/core.xml"
        ]


def test_the_public_api_fallback_writes_the_same_parts(tmp_path: Path, monkeypatch) -> None:
    user = simple_workbook(tmp_path / "shop.xlsx", codes=[f"{k:04d}" for k in range(40)])
    calls = {"raw": 0, "swap": 0}
    real_copy, real_swap = zip_private.copy_raw, zip_private.swap_compressor

    def copy_raw(*args):
        calls["raw"] += 1
        return real_copy(*args)

    def swap(*args):
        done = real_swap(*args)
        calls["swap"] += done
        return done

    monkeypatch.setattr(zip_private, "copy_raw", copy_raw)
    monkeypatch.setattr(zip_private, "swap_compressor", swap)
    monkeypatch.setattr(deflate, "DEFLATE_PIECE", 1 << 16)  # several pieces even here

    fast = tmp_path / "fast.xlsx"
    xlpolicy.plan(user, fast)
    assert calls["raw"] > 0 and calls["swap"] > 0  # the internals were used

    monkeypatch.setattr(zip_private, "force_public", True)
    calls.update(raw=0, swap=0)
    public = tmp_path / "public.xlsx"
    xlpolicy.plan(user, public)
    assert calls == {"raw": 0, "swap": 0}  # and here they were not

    fast_parts, public_parts = _parts(fast), _parts(public)
    assert [p[:2] for p in fast_parts] == [p[:2] for p in public_parts]
    for (name, _, a), (_, _, b) in zip(fast_parts, public_parts, strict=True):
        assert a == b, name
