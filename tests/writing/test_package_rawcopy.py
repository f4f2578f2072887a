"""The user's parts reach the output as their very bytes, compressed data included.

The zip layout checked here is PKWARE's APPNOTE (local file header: signature 0x04034b50,
name and extra lengths at offsets 26 and 28, then the compressed data; CRC-32 of the
uncompressed data in the header and the central directory).
"""

from __future__ import annotations

import struct
import zipfile
from pathlib import Path

import openpyxl
import pytest
import xlsxwriter

from xlpolicy.writing.package import CannotMerge, merge_generated_sheets


def _raw(path: Path, name: str) -> bytes:
    """A part's compressed bytes, read from its local header (APPNOTE 4.3.7)."""
    with zipfile.ZipFile(path) as zf, open(path, "rb") as fh:
        info = zf.getinfo(name)
        fh.seek(info.header_offset)
        head = fh.read(30)
        n, m = struct.unpack("<HH", head[26:30])
        fh.seek(info.header_offset + 30 + n + m)
        return fh.read(info.compress_size)


def _user(path: Path, rows: int = 2000) -> Path:
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.title = "History"
    for r in range(rows):
        ws.append([f"{r:06d}", r * 0.5, "text that compresses well " * 3])
    wb.save(path)
    return path


def _generated(path: Path) -> Path:
    wb = xlsxwriter.Workbook(str(path))
    wb.add_worksheet("Policy").write_string(0, 0, "Item")
    wb.close()
    return path


def test_user_parts_copied_as_compressed_bytes(tmp_path: Path) -> None:
    user = _user(tmp_path / "user.xlsx")
    out = tmp_path / "out.xlsx"
    merge_generated_sheets(user, _generated(tmp_path / "gen.xlsx"), out)
    with zipfile.ZipFile(user) as zu, zipfile.ZipFile(out) as zo:
        assert zo.testzip() is None  # every part of the output reads back with its CRC
        for info in zu.infolist():
            if info.filename in (
                "[Content_Types].xml",
                "xl/workbook.xml",
                "xl/_rels/workbook.xml.rels",
                "xl/styles.xml",
            ):
                continue
            got = zo.getinfo(info.filename)
            assert (got.CRC, got.file_size, got.compress_type) == (
                info.CRC,
                info.file_size,
                info.compress_type,
            )
            assert _raw(out, info.filename) == _raw(user, info.filename)
    assert openpyxl.load_workbook(out)["History"]["A2000"].value == "001999"


def test_damaged_user_part_is_still_found(tmp_path: Path) -> None:
    """Copying raw bytes still inflates them to check the CRC: damage is not passed on."""
    user = _user(tmp_path / "user.xlsx")
    name = "xl/worksheets/sheet1.xml"
    with zipfile.ZipFile(user) as zf:
        info = zf.getinfo(name)
        start = info.header_offset
    data = bytearray(user.read_bytes())
    n, m = struct.unpack("<HH", data[start + 26 : start + 30])
    body = start + 30 + n + m
    middle = body + info.compress_size // 2
    data[middle : middle + 8] = bytes(8)  # eight zero bytes inside the deflate stream
    bad = tmp_path / "bad.xlsx"
    bad.write_bytes(bytes(data))
    out = tmp_path / "out.xlsx"
    with pytest.raises(CannotMerge, match="sheet1.xml"):
        merge_generated_sheets(bad, _generated(tmp_path / "gen.xlsx"), out)
    assert not out.exists()
