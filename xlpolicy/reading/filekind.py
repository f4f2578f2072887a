"""What a file really is, from its first bytes, whatever its name says.

One module for every reader and check that asks: the input guard (to explain why a file
named .xlsx is not a workbook) and the readers of the other formats (to tell a renamed
file from a damaged one). The signatures are the formats' own: a zip local file header
starts "PK\\x03\\x04" (PKWARE APPNOTE 4.3.7), a compound file (an old .xls, or an
encrypted OOXML workbook) starts D0 CF 11 E0 A1 B1 1A E1 ([MS-CFB] 2.2), and a BIFF2-BIFF4
worksheet starts with a BOF record 0x0009, 0x0209, 0x0409 or 0x0809 (Microsoft's Excel
binary file format documentation; record numbers and section numbers from memory).
"""

from __future__ import annotations

from pathlib import Path

_OLE2_MAGIC = b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1"
_BIFF_STARTS = (b"\x09\x00", b"\x09\x02", b"\x09\x04", b"\x09\x08")


def read_head(path: Path, n: int = 4096) -> bytes:
    """The first ``n`` bytes of the file at ``path`` (fewer if it is shorter)."""
    with open(path, "rb") as f:
        return f.read(n)


def sniff(head: bytes) -> str:
    """What the first bytes of a file say it is: zip, ole2, biff, html, xml, text or unknown."""
    if head.startswith(b"PK\x03\x04"):
        return "zip"
    if head.startswith(_OLE2_MAGIC):
        return "ole2"
    if head[:2] in _BIFF_STARTS:
        return "biff"
    if head.startswith((b"\xff\xfe", b"\xfe\xff")):
        return "text"  # UTF-16, as Excel's "Unicode Text" saves
    start = head.lstrip(b"\xef\xbb\xbf \t\r\n").lower()
    if start.startswith((b"<!doctype html", b"<html", b"<table", b"<meta", b"<head")) or (
        b"<html" in start[:1024] or b"<table" in start[:1024]
    ):
        return "html"
    if start.startswith(b"<?xml") or start.startswith(b"<"):
        return "xml"
    if head and b"\x00" not in head:
        try:
            head.decode("utf-8")
            return "text"
        except UnicodeDecodeError:
            # a cut multi-byte character at the end is still text
            try:
                head[:-4].decode("utf-8")
                return "text"
            except UnicodeDecodeError:
                printable = sum(32 <= b < 127 or b in (9, 10, 13) or b >= 160 for b in head)
                return "text" if printable >= 0.95 * len(head) else "unknown"
    return "unknown"
