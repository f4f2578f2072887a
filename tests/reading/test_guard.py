"""The checks before parsing (xlpolicy.reading.guard) and the bounded reading of .xlsx sheets.

Hostile files come from tests/data/make_bad.py; the limits are lowered here where a real
file over the default limit would be too big to keep in the repository.

"Quickly" and "cheaply" are checked by the memory Python allocates (tracemalloc's peak),
never by the clock: an expanded entity or a used range taken at its word needs hundreds of
megabytes, whatever the machine's speed, while the refusal needs a few.
"""

from __future__ import annotations

import tracemalloc
import zipfile
from collections.abc import Callable
from pathlib import Path

import make_bad
import pytest
from defusedxml import DefusedXmlException
from openpyxl import load_workbook

import xlpolicy
from xlpolicy.problems import UnusableWorkbook
from xlpolicy.reading import guard

BAD = make_bad.BAD


def _peak_mb(fn: Callable[[], object]) -> tuple[object, float]:
    """``fn()``'s result and the most memory Python held for it at once, in MB."""
    tracemalloc.start()
    try:
        got = fn()
        peak = tracemalloc.get_traced_memory()[1] / 1e6
    finally:
        tracemalloc.stop()
    return got, peak


def test_openpyxl_uses_defusedxml_and_refuses_entities_quickly():
    # openpyxl picks defusedxml up when it is installed (openpyxl/xml/__init__.py); the DTD
    # behind 100 KB of comment is past our own scan, so this is the parser's lock alone
    from openpyxl import DEFUSEDXML

    assert DEFUSEDXML is True

    def read() -> None:
        wb = load_workbook(BAD / "laughs-behind-comment.xlsx", read_only=True)
        for ws in wb.worksheets:
            list(ws.iter_rows(values_only=True))

    tracemalloc.start()
    try:
        with pytest.raises(Exception) as info:
            read()
        peak_mb = tracemalloc.get_traced_memory()[1] / 1e6
    finally:
        tracemalloc.stop()
    assert peak_mb < 50, peak_mb  # refused at the entities, not after expanding them
    chain, e = [], info.value
    while e is not None:
        chain.append(e)
        e = e.__cause__ or e.__context__
    assert any(isinstance(x, DefusedXmlException) for x in chain), chain


def test_billion_laughs_is_refused_before_parsing_and_quickly():
    refused, peak_mb = _peak_mb(lambda: guard.refusal(BAD / "billion-laughs.xlsx"))
    assert isinstance(refused, guard.Refused) and refused.code == "file-unsafe-xml"
    assert "billion-laughs.xlsx" in refused.message and "sheet1.xml" in refused.message
    assert peak_mb < 5, peak_mb  # a look at the prolog, no expansion


def test_good_workbook_passes_every_check(tmp_path):
    p = make_bad.good_workbook(tmp_path / "good.xlsx")
    assert guard.refusal(p) is None
    assert guard.refusal(Path("examples/demo-shop.xlsx")) is None


def test_entry_count_limit_and_the_way_to_raise_it(tmp_path, monkeypatch):
    p = tmp_path / "many.xlsx"
    with zipfile.ZipFile(p, "w") as zf:
        zf.writestr("[Content_Types].xml", "<Types/>")
        for k in range(60):
            zf.writestr(f"xl/media/image{k}.png", b"x")
    low = guard.Limits(max_entries=50)
    with pytest.raises(guard.Refused) as info:
        guard.inspect_file(p, limits=low)
    assert info.value.code == "file-too-large" and "61 parts" in info.value.message
    assert "--allow-large" in info.value.message
    guard.inspect_file(p, limits=low.scaled(guard.LARGE_FACTOR))  # raised: passes
    # the environment variable and the context manager raise the defaults the same way
    assert guard.current_limits() == guard.DEFAULT_LIMITS
    monkeypatch.setenv(guard.ALLOW_LARGE_ENV, "1")
    assert guard.current_limits().max_entries == 10 * guard.DEFAULT_LIMITS.max_entries
    monkeypatch.delenv(guard.ALLOW_LARGE_ENV)
    with guard.allow_large():
        assert guard.current_limits().max_part == 10 * guard.DEFAULT_LIMITS.max_part
    assert guard.current_limits() == guard.DEFAULT_LIMITS


def test_zip_encrypted_entries_are_refused(tmp_path):
    data = bytearray((BAD / "huge-merge.xlsx").read_bytes())
    pos = data.find(b"PK\x01\x02")  # set the 'encrypted' flag in the central directory
    data[pos + 8] |= 0x1
    p = tmp_path / "locked.xlsx"
    p.write_bytes(bytes(data))
    refused = guard.refusal(p)
    assert refused is not None and refused.code == "file-encrypted"


def test_compound_file_builder_makes_a_real_compound_file():
    # xlrd's own compound-file reader finds the streams the corpus claims are there
    import io

    from xlrd.compdoc import CompDoc

    quiet = io.StringIO()
    doc = CompDoc((BAD / "password-protected.xlsx").read_bytes(), logfile=quiet)
    assert doc.get_named_stream("EncryptedPackage") is not None
    doc = CompDoc((BAD / "xls-renamed.xlsx").read_bytes(), logfile=quiet)
    assert doc.get_named_stream("Workbook") is not None


def _rows_then_gap_then_data(path: Path, gap: int) -> Path:
    """History with formatted empty rows between two halves of its data."""

    def fn(xml: bytes) -> bytes:
        import re

        rows = re.findall(rb"<row .*?</row>", xml, flags=re.DOTALL)
        half = len(rows) // 2
        first_last = int(re.search(rb'<row r="(\d+)"', rows[half - 1]).group(1))
        empties = b"".join(
            b'<row r="%d" s="1" customFormat="1"/>' % r
            for r in range(first_last + 1, first_last + 1 + gap)
        )
        moved = [
            re.sub(
                rb'(r="[A-Z]*)(\d+)"',
                lambda m: m.group(1) + str(int(m.group(2)) + gap).encode() + b'"',
                r,
            )
            for r in rows[half:]
        ]
        return xml.replace(b"".join(rows[half:]), empties + b"".join(moved))

    make_bad._changed(path, make_bad.SHEET2, fn)
    return path


def test_data_below_many_formatted_empty_rows_is_still_read(tmp_path):
    plain = make_bad.good_workbook(tmp_path / "plain.xlsx")
    gapped = _rows_then_gap_then_data(tmp_path / "gap.xlsx", 20_000)
    a, b = xlpolicy.analyse(plain), xlpolicy.analyse(gapped)
    assert b.input_summary["items_planned"] == 3
    # the same history: the same demand for every item
    cols = ["item", "order_qty", "reorder_point"]
    assert a.results[cols].equals(b.results[cols])


@pytest.mark.parametrize(
    "name", ["used-range-too-small.xlsx", "used-range-whole-sheet.xlsx", "huge-merge.xlsx"]
)
def test_lying_sizes_and_huge_merges_read_like_the_plain_workbook(tmp_path, name):
    plain_path = make_bad.good_workbook(tmp_path / "plain.xlsx")
    plain, plain_mb = _peak_mb(lambda: xlpolicy.analyse(plain_path))
    odd, odd_mb = _peak_mb(lambda: xlpolicy.analyse(BAD / name))
    # the claimed size or merge is not expanded: about the plain workbook's memory
    assert odd_mb < plain_mb + 20, (odd_mb, plain_mb)
    cols = ["item", "order_qty", "reorder_point", "safety_stock"]
    assert plain.results[cols].equals(odd.results[cols])


def test_ods_limits_apply_and_can_be_raised(tmp_path):
    with pytest.raises(UnusableWorkbook) as info:
        xlpolicy.analyse(BAD / "bomb.ods")
    assert info.value.problems[0].code == "file-too-large"
    # raised tenfold the 50 MB of whitespace is let through, and the empty spreadsheet
    # inside is then reported for what it is
    with pytest.raises(UnusableWorkbook) as info:
        xlpolicy.analyse(BAD / "bomb.ods", allow_large=True)
    assert info.value.problems[0].code == "items-sheet-missing"
