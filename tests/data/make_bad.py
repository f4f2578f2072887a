"""Build tests/data/bad/: one small file per kind of bad input, each with its expected outcome.

Run ``python tests/data/make_bad.py`` to write the files again (they are committed, so the
tests do not depend on this script running; tests/end_to_end/test_bad_corpus.py checks that it still
produces the same set of names). Every case in :data:`CASES` says what ``xlpolicy plan``
must do with its file: the exit status, words the message must contain, and for files that
are read, the problem codes that must be among the warnings. The workbook contents are
invented test data.

The files are built from a small good workbook by changing the one thing the case is about,
byte by byte where the bad thing is in the package (a DTD, a lying size, a cut-off end).
Zip timestamps are fixed so the bytes come out the same each time.
"""

from __future__ import annotations

import datetime as dt
import io
import re
import struct
import sys
import zipfile
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
from openpyxl import Workbook

HERE = Path(__file__).resolve().parent
BAD = HERE / "bad"
_STAMP = (2024, 1, 1, 0, 0, 0)


@dataclass(frozen=True)
class Case:
    """One corpus file and what xlpolicy must do with it."""

    name: str
    build: Callable[[Path], None]
    exit_code: int  # of `xlpolicy plan FILE -o OUT`
    words: tuple[str, ...]  # must appear in the output (case-insensitive)
    codes: tuple[str, ...] = ()  # problem codes that must be reported (checked via the API)
    what: str = ""
    planned: int | None = None  # items that must be planned, where the file is usable
    tags: tuple[str, ...] = field(default=())
    committed: bool = True  # False: too big to keep in git; built by the test in a temporary folder


# --- the good workbook everything starts from --------------------------------------------

ITEMS_HEADERS = [
    "Item",
    "Description",
    "Supplier",
    "Unit cost",
    "Order cost",
    "Holding rate",
    "Lead time (days)",
]
CODES = ("BOLT-10", "CHAIN-7", "LAMP-2")


def good_workbook(path: Path, **kw) -> Path:
    """Three invented items with 30 weeks of seeded demand, written by openpyxl."""
    _rezip(_good_bytes(**kw), path)
    return path


def _good_bytes(
    *,
    items: list[list] | None = None,
    weeks: int = 30,
    history_rows: list[list] | None = None,
    extra: Callable[[Workbook], None] | None = None,
) -> bytes:
    """The good workbook's bytes (see :func:`good_workbook`)."""
    wb = Workbook()
    wb.properties.created = wb.properties.modified = dt.datetime(2024, 1, 1)
    ws = wb.active
    ws.title = "Items"
    ws.append(ITEMS_HEADERS)
    for row in (
        items
        if items is not None
        else [
            [c, f"part {c}", "Velo Parts", 4.5 + k, 18.0, 0.22, 10 + 2 * k]
            for k, c in enumerate(CODES)
        ]
    ):
        ws.append(row)
    hs = wb.create_sheet("History")
    hs.append(["Item", "Period", "Quantity"])
    rng = np.random.default_rng(11)
    if history_rows is None:
        history_rows = [
            [c, dt.datetime(2024, 1, 1) + dt.timedelta(weeks=w), int(q)]
            for c in CODES
            for w, q in enumerate(rng.poisson(25, weeks))
        ]
    for row in history_rows:
        hs.append(row)
    if extra is not None:
        extra(wb)
    buf = io.BytesIO()
    wb.save(buf)
    return buf.getvalue()


def _rezip(
    data: bytes,
    path: Path | io.BytesIO,
    change: Callable[[str, bytes], bytes] | None = None,
    level: int = 6,
) -> None:
    """Write the package ``data`` to ``path`` with fixed timestamps, changing parts on the way."""
    with zipfile.ZipFile(io.BytesIO(data)) as zi, zipfile.ZipFile(path, "w") as zo:
        for info in zi.infolist():
            part = zi.read(info.filename)
            if info.filename == "docProps/core.xml":  # openpyxl stamps the time of saving
                part = re.sub(
                    rb"(<dcterms:(?:created|modified)[^>]*>)[^<]*",
                    rb"\g<1>2024-01-01T00:00:00Z",
                    part,
                )
            if change is not None:
                part = change(info.filename, part)
            zo.writestr(
                zipfile.ZipInfo(info.filename, _STAMP),
                part,
                compress_type=zipfile.ZIP_DEFLATED,
                compresslevel=level,
            )


def _changed(
    path: Path, part_name: str, fn: Callable[[bytes], bytes], level: int = 6, **kw
) -> None:
    def change(name: str, part: bytes) -> bytes:
        return fn(part) if name == part_name else part

    _rezip(_good_bytes(**kw), path, change, level)


SHEET1 = "xl/worksheets/sheet1.xml"  # Items
SHEET2 = "xl/worksheets/sheet2.xml"  # History


def _with_doctype(xml: bytes, doctype: bytes, pad: bytes = b"") -> bytes:
    """Put ``doctype`` (and ``pad`` before it) after the XML declaration."""
    decl, rest = xml.split(b"?>", 1) if xml.startswith(b"<?xml") else (b"", xml)
    head = decl + b"?>" if decl else b""
    return head + pad + doctype + rest


LAUGHS = (
    b'<!DOCTYPE worksheet [<!ENTITY a "hahahahahaha">'
    + b"".join(
        f'<!ENTITY {chr(98 + k)} "'.encode() + (f"&{chr(97 + k)};" * 10).encode() + b'">'
        for k in range(9)
    )
    + b"]>"
)


def billion_laughs(path: Path) -> None:
    """The classic entity expansion in the Items sheet: 10^9 copies of a short text."""

    def fn(xml: bytes) -> bytes:
        xml = _with_doctype(xml, LAUGHS)
        return xml.replace(b"<v>", b"<v>&j;", 1) if b"<v>" in xml else xml

    _changed(path, SHEET1, fn)


def laughs_behind_long_comment(path: Path) -> None:
    """The same DTD behind 100 KB of comment: a preamble that long is itself refused."""
    _changed(
        path,
        SHEET2,
        lambda xml: _with_doctype(
            xml,
            LAUGHS.replace(b"worksheet", b"worksheet", 1),
            pad=b"<!--" + b" padding " * 12_000 + b"-->",
        ),
    )


def external_entity(path: Path) -> None:
    """An external entity in the workbook part that would read a local file."""
    _changed(
        path,
        "xl/workbook.xml",
        lambda xml: _with_doctype(
            xml, b'<!DOCTYPE workbook [<!ENTITY x SYSTEM "file:///etc/passwd">]>'
        ),
    )


def bomb_ratio(path: Path) -> None:
    """A sheet part of 60 MB that compresses 1000 to 1 (whitespace between rows)."""

    def fn(xml: bytes) -> bytes:
        return xml.replace(b"</row>", b"</row>" + b" " * (60_000_000 // 40), 40)

    _changed(path, SHEET2, fn, level=9)


def bomb_declared_size(path: Path) -> None:
    """A zip whose directory says the Items sheet unpacks to 3.5 GB."""
    data = bytearray(_fixed_good())
    pos = 0
    while True:
        pos = data.find(b"PK\x01\x02", pos)
        if pos < 0:
            break
        n = struct.unpack_from("<H", data, pos + 28)[0]
        if bytes(data[pos + 46 : pos + 46 + n]) == SHEET1.encode():
            struct.pack_into("<I", data, pos + 24, 3_500_000_000)
        pos += 4
    path.write_bytes(bytes(data))


def huge_merge(path: Path) -> None:
    """A merged range over the whole Items sheet below the data (16 billion cells)."""

    def fn(xml: bytes) -> bytes:
        return xml.replace(
            b"</sheetData>",
            b'</sheetData><mergeCells count="1"><mergeCell ref="A10:XFD1048576"/></mergeCells>',
        )

    _changed(path, SHEET1, fn)


def used_range_too_small(path: Path) -> None:
    """Both sheets claim their used range is the single cell A1."""

    def change(name: str, xml: bytes) -> bytes:
        if name.startswith("xl/worksheets/"):
            return re.sub(rb'<dimension ref="[^"]*"\s*/>', b'<dimension ref="A1"/>', xml)
        return xml

    _rezip(_good_bytes(), path, change)


def used_range_whole_sheet(path: Path) -> None:
    """History claims A1:XFD1048576 and has one formatted cell in the very last one."""

    def fn(xml: bytes) -> bytes:
        xml = re.sub(rb'<dimension ref="[^"]*"\s*/>', b'<dimension ref="A1:XFD1048576"/>', xml)
        return xml.replace(
            b"</sheetData>", b'<row r="1048576"><c r="XFD1048576" s="0"/></row></sheetData>'
        )

    _changed(path, SHEET2, fn)


def formatted_empty_rows(path: Path) -> None:
    """History followed by formatted empty rows down to row 1,048,576, as a 'format the whole
    column' leaves them."""

    def fn(xml: bytes) -> bytes:
        last = int(re.findall(rb'<row r="(\d+)"', xml)[-1])
        rows = b"".join(
            b'<row r="%d" s="1" customFormat="1"/>' % r for r in range(last + 1, 1_048_577)
        )
        xml = re.sub(rb'<dimension ref="[^"]*"\s*/>', b'<dimension ref="A1:C1048576"/>', xml)
        return xml.replace(b"</sheetData>", rows + b"</sheetData>")

    _changed(path, SHEET2, fn, level=9)


def empty(path: Path) -> None:
    path.write_bytes(b"")


def _fixed_good() -> bytes:
    """The good workbook re-zipped with fixed timestamps."""
    buf = io.BytesIO()
    _rezip(_good_bytes(), buf)
    return buf.getvalue()


def truncated(path: Path) -> None:
    data = _fixed_good()
    path.write_bytes(data[: len(data) // 2])


def crc_damaged(path: Path) -> None:
    """One byte of the History sheet's compressed data changed (a bad disk, a bad copy)."""
    data = bytearray(_fixed_good())
    with zipfile.ZipFile(io.BytesIO(bytes(data))) as zf:
        info = zf.getinfo(SHEET2)
    start = info.header_offset + 30 + len(info.filename.encode()) + len(info.extra)
    data[start + info.compress_size // 2] ^= 0x55
    path.write_bytes(bytes(data))


def broken_xml(path: Path) -> None:
    """The History sheet's XML cut off in the middle of a row (a writer that crashed)."""
    _changed(path, SHEET2, lambda xml: xml[: len(xml) // 2])


def csv_renamed(path: Path) -> None:
    path.write_text("Item,Unit cost,Lead time (days)\nBOLT-10,4.5,10\n", encoding="utf-8")


def html_renamed(path: Path) -> None:
    path.write_text(
        "<html><body><table><tr><td>Item</td><td>Unit cost</td></tr>"
        "<tr><td>BOLT-10</td><td>4.5</td></tr></table></body></html>"
    )


def xml2003_renamed(path: Path) -> None:
    path.write_text(
        '<?xml version="1.0"?>\n<?mso-application progid="Excel.Sheet"?>\n'
        '<Workbook xmlns="urn:schemas-microsoft-com:office:spreadsheet">'
        '<Worksheet ss:Name="Items"/></Workbook>'
    )


def random_bytes(path: Path) -> None:
    rng = np.random.default_rng(5)
    data = bytes(rng.integers(0, 256, 3000, dtype=np.uint8))
    path.write_bytes(b"\x00\x01" + data)


def _compound_file(streams: dict[str, bytes]) -> bytes:
    """A minimal valid compound file (CFB v3, 512-byte sectors) holding ``streams``.

    Each stream is padded to at least 4096 bytes so it lives in ordinary sectors (no mini
    stream). Layout: sector 0 the FAT, sector 1 the directory, then the streams in order.
    """
    end, free, fatsect, nostream = 0xFFFFFFFE, 0xFFFFFFFF, 0xFFFFFFFD, 0xFFFFFFFF
    names = list(streams)
    assert len(names) <= 3
    bodies = [streams[n].ljust(4096, b"\0") for n in names]
    bodies = [b.ljust(-(-len(b) // 512) * 512, b"\0") for b in bodies]
    fat = [fatsect, end]
    starts = []
    for b in bodies:
        first = len(fat)
        k = len(b) // 512
        starts.append(first)
        fat.extend(first + i + 1 for i in range(k - 1))
        fat.append(end)
    assert len(fat) <= 128
    fat.extend([free] * (128 - len(fat)))

    def entry(
        name: str, kind: int, left: int, right: int, child: int, start: int, size: int
    ) -> bytes:
        raw = name.encode("utf-16-le") + b"\0\0" if name else b""
        return (
            raw.ljust(64, b"\0")
            + struct.pack("<HBB", len(raw), kind, 1 if name else 0)
            + struct.pack("<III", left, right, child)
            + b"\0" * 16
            + b"\0" * 4
            + b"\0" * 16
            + struct.pack("<IQ", start, size)
        )

    # siblings form a chain to the right (a valid, if unbalanced, tree)
    order = sorted(range(len(names)), key=lambda i: (len(names[i]), names[i].upper()))
    right = {order[k]: order[k + 1] + 1 for k in range(len(order) - 1)}
    dir_entries = [entry("Root Entry", 5, nostream, nostream, order[0] + 1, end, 0)]
    for i, n in enumerate(names):
        dir_entries.append(
            entry(
                n,
                2,
                nostream,
                right.get(i, nostream),
                nostream,
                starts[i],
                max(len(streams[n]), 4096),
            )
        )  # >= 4096: no mini stream
    while len(dir_entries) < 4:
        dir_entries.append(entry("", 0, nostream, nostream, nostream, 0, 0))
    header = (
        b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1"
        + b"\0" * 16
        + struct.pack("<HHHHH", 0x3E, 3, 0xFFFE, 9, 6)
        + b"\0" * 6
        + struct.pack("<IIIIIIIII", 0, 1, 1, 0, 4096, end, 0, end, 0)
        + struct.pack("<I", 0)
        + struct.pack("<I", free) * 108
    )
    assert len(header) == 512
    return header + struct.pack("<128I", *fat) + b"".join(dir_entries) + b"".join(bodies)


def password_protected(path: Path) -> None:
    """What Excel saves for a workbook with a password to open: an encrypted compound file."""
    rng = np.random.default_rng(3)
    info = struct.pack("<HHI", 4, 4, 0x40) + b'<?xml version="1.0"?><encryption/>'
    path.write_bytes(
        _compound_file(
            {
                "EncryptionInfo": info,
                "EncryptedPackage": struct.pack("<Q", 4000)
                + bytes(rng.integers(0, 256, 4000, dtype=np.uint8)),
            }
        )
    )


def xls_renamed(path: Path) -> None:
    """An old-style .xls (a compound file with a Workbook stream) saved with an .xlsx name."""
    bof = struct.pack("<HHHHHHII", 0x0809, 16, 0x0600, 0x0005, 0, 0, 0, 0)
    path.write_bytes(_compound_file({"Workbook": bof + struct.pack("<HH", 0x000A, 0)}))


def excel_lock_file(path: Path) -> None:
    """Excel's owner file: the user's name, padded, 165 bytes."""
    name = b"Sam Planner"
    path.write_bytes(bytes([len(name)]) + name.ljust(53, b" ") + b"\0" * 111)


def libreoffice_lock_file(path: Path) -> None:
    path.write_text("Sam Planner,sam,desk-7,01.01.2024 09:00,file:///home/sam/.config;\n")


def word_renamed(path: Path) -> None:
    with zipfile.ZipFile(path, "w") as zf:
        zf.writestr(zipfile.ZipInfo("[Content_Types].xml", _STAMP), "<Types/>")
        zf.writestr(zipfile.ZipInfo("word/document.xml", _STAMP), "<document/>")


def ods_renamed(path: Path) -> None:
    with zipfile.ZipFile(path, "w") as zf:
        zf.writestr(
            zipfile.ZipInfo("mimetype", _STAMP), "application/vnd.oasis.opendocument.spreadsheet"
        )
        zf.writestr(zipfile.ZipInfo("content.xml", _STAMP), "<office:document-content/>")


def zip_of_files(path: Path) -> None:
    with zipfile.ZipFile(path, "w") as zf:
        zf.writestr(zipfile.ZipInfo("notes.txt", _STAMP), "order more bolts")
        zf.writestr(zipfile.ZipInfo("photo.jpg", _STAMP), b"\xff\xd8\xff")


def xlsb(path: Path) -> None:
    """An Excel binary workbook: a format xlpolicy has no reader for."""
    with zipfile.ZipFile(path, "w") as zf:
        zf.writestr(zipfile.ZipInfo("[Content_Types].xml", _STAMP), "<Types/>")
        zf.writestr(zipfile.ZipInfo("xl/workbook.bin", _STAMP), b"\x83\x01\x00")


def _ods(path: Path, content: bytes, level: int = 6) -> None:
    with zipfile.ZipFile(path, "w") as zf:
        zf.writestr(
            zipfile.ZipInfo("mimetype", _STAMP), "application/vnd.oasis.opendocument.spreadsheet"
        )
        zf.writestr(
            zipfile.ZipInfo("content.xml", _STAMP),
            content,
            compress_type=zipfile.ZIP_DEFLATED,
            compresslevel=level,
        )


_ODS_HEAD = b'<?xml version="1.0" encoding="UTF-8"?>'
_ODS_OPEN = (
    b"<office:document-content "
    b'xmlns:office="urn:oasis:names:tc:opendocument:xmlns:office:1.0" '
    b'xmlns:table="urn:oasis:names:tc:opendocument:xmlns:table:1.0" '
    b'xmlns:text="urn:oasis:names:tc:opendocument:xmlns:text:1.0">'
    b"<office:body><office:spreadsheet>"
)
_ODS_CLOSE = b"</office:spreadsheet></office:body></office:document-content>"


def ods_laughs(path: Path) -> None:
    body = (
        b'<table:table table:name="Items"><table:table-row><table:table-cell '
        b'office:value-type="string"><text:p>&j;</text:p></table:table-cell>'
        b"</table:table-row></table:table>"
    )
    _ods(
        path,
        _ODS_HEAD
        + LAUGHS.replace(b"worksheet", b"office:document-content")
        + _ODS_OPEN
        + body
        + _ODS_CLOSE,
    )


def ods_repeated_cells(path: Path) -> None:
    """One filled row repeated a million times across 1,024 columns: a billion cells."""
    body = (
        b'<table:table table:name="Items"><table:table-row '
        b'table:number-rows-repeated="1048575"><table:table-cell '
        b'table:number-columns-repeated="1024" office:value-type="float" office:value="1">'
        b"<text:p>1</text:p></table:table-cell></table:table-row></table:table>"
    )
    _ods(path, _ODS_HEAD + _ODS_OPEN + body + _ODS_CLOSE)


def ods_bomb(path: Path) -> None:
    """content.xml of 50 MB of spaces: refused from the zip's directory alone."""
    pad = b" " * 50_000_000
    _ods(path, _ODS_HEAD + _ODS_OPEN + pad + _ODS_CLOSE, level=9)


# --- (3) cells as people type them, (4) text that must land as text ------------------------


def typed_numbers(path: Path) -> None:
    """Costs typed with currency signs, separators and decimal commas; rates as '25 %'."""
    good_workbook(
        path,
        items=[
            ["BOLT-10", "bolts", "Velo Parts", "$4.50", "$18.00", "22%", "10"],
            ["CHAIN-7", "chains", "Velo Parts", "5,50\u00a0€", "18,00 €", "22 %", "12"],
            ["LAMP-2", "lamps", "Velo Parts", "EUR 1.006,50", "(18.00)", "0,22", "14,0"],
        ],
    )


def text_dates(path: Path) -> None:
    """History periods typed as text, day first (31/01/2024)."""
    rng = np.random.default_rng(11)
    rows = [
        [c, (dt.date(2024, 1, 1) + dt.timedelta(weeks=w)).strftime("%d/%m/%Y"), int(q)]
        for c in CODES
        for w, q in enumerate(rng.poisson(25, 30))
    ]
    good_workbook(path, history_rows=rows)


def serial_dates(path: Path) -> None:
    """History periods as bare day numbers (a date column that lost its format)."""
    rng = np.random.default_rng(11)
    rows = [[c, 45292 + 7 * w, int(q)] for c in CODES for w, q in enumerate(rng.poisson(25, 30))]
    good_workbook(path, history_rows=rows)


def epoch_1904(path: Path) -> None:
    """A workbook in the 1904 date system (old Mac Excel)."""
    from openpyxl.utils.datetime import CALENDAR_MAC_1904

    def extra(wb: Workbook) -> None:
        wb.epoch = CALENDAR_MAC_1904

    good_workbook(path, extra=extra)


def hidden_parts(path: Path) -> None:
    """Two Items rows hidden and the History sheet hidden."""

    def extra(wb: Workbook) -> None:
        wb["Items"].row_dimensions[3].hidden = True
        wb["Items"].row_dimensions[4].hidden = True
        wb["History"].sheet_state = "hidden"

    good_workbook(path, extra=extra)


def merged_in_data(path: Path) -> None:
    """The supplier typed once and merged over all three items."""

    def extra(wb: Workbook) -> None:
        wb["Items"].merge_cells("C2:C4")

    good_workbook(path, extra=extra)


def formulas_no_cache(path: Path) -> None:
    """A cost as a formula saved by a program that never calculated it."""

    def extra(wb: Workbook) -> None:
        wb["Items"]["D3"] = "=2*2.75"

    good_workbook(path, extra=extra)


def formula_text(path: Path) -> None:
    """Descriptions and suppliers that a spreadsheet would run if written as formulas."""
    good_workbook(
        path,
        items=[
            [
                "BOLT-10",
                '=HYPERLINK("http://example.invalid","x")',
                "+cmd|' /C calc'!A0",
                4.5,
                18.0,
                0.22,
                10,
            ],
            ["CHAIN-7", "@SUM(1,2)", "-2+3", 5.5, 18.0, 0.22, 12],
            ["LAMP-2", "lamp_x0007__x001B_set", "Velo Parts", 6.5, 18.0, 0.22, 14],
        ],
    )


# --- (5) numbers that must not change in silence, codes as the user sees them ---------------


def decimal_comma_column(path: Path) -> None:
    """Costs typed as text with the decimal comma, and one '1.200' among them (twelve hundred
    in that column, not one and a fifth)."""
    good_workbook(
        path,
        items=[
            ["BOLT-10", "bolts", "Velo Parts", "4,50", 18.0, 0.22, 10],
            ["CHAIN-7", "chains", "Velo Parts", "12,75", 18.0, 0.22, 12],
            ["LAMP-2", "lamps", "Velo Parts", "1.200", 18.0, 0.22, 14],
        ],
    )


def decimal_marks_mixed(path: Path) -> None:
    """A column with both decimal marks: its '1.200' cannot be settled and is reported."""
    good_workbook(
        path,
        items=[
            ["BOLT-10", "bolts", "Velo Parts", "4.50", 18.0, 0.22, 10],
            ["CHAIN-7", "chains", "Velo Parts", "12,75", 18.0, 0.22, 12],
            ["LAMP-2", "lamps", "Velo Parts", "1.200", 18.0, 0.22, 14],
        ],
    )


def huge_unit_cost(path: Path) -> None:
    """A unit cost of 1e308: its yearly purchase cost overflows to infinity."""
    good_workbook(
        path,
        items=[
            ["BOLT-10", "bolts", "Velo Parts", 1e308, 18.0, 0.22, 10],
            ["CHAIN-7", "chains", "Velo Parts", 5.5, 18.0, 0.22, 12],
            ["LAMP-2", "lamps", "Velo Parts", 6.5, 18.0, 0.22, 14],
        ],
    )


def implausible_inputs(path: Path) -> None:
    """A lead time of 10,000 days and a unit cost of 1e-9 (an order of thousands of years)."""
    good_workbook(
        path,
        items=[
            ["BOLT-10", "bolts", "Velo Parts", 1e-9, 18.0, 0.22, 10],
            ["CHAIN-7", "chains", "Velo Parts", 5.5, 18.0, 0.22, 10_000],
            ["LAMP-2", "lamps", "Velo Parts", 6.5, 18.0, 0.22, 14],
        ],
    )


def macro_in_xlsx(path: Path) -> None:
    """A macro-enabled package under an .xlsx name (as a rename or a careless export leaves)."""

    def change(name: str, part: bytes) -> bytes:
        if name == "[Content_Types].xml":
            return part.replace(
                b"application/vnd.openxmlformats-officedocument.spreadsheetml.sheet.main+xml",
                b"application/vnd.ms-excel.sheet.macroEnabled.main+xml",
            )
        return part

    _rezip(_good_bytes(), path, change)


def _ods_cell(value: object) -> bytes:
    if isinstance(value, bool):  # as LibreOffice saves TRUE and FALSE: a number and a formula
        word = b"TRUE" if value else b"FALSE"
        return (
            b'<table:table-cell table:formula="of:=' + word + b'()" office:value-type="float" '
            b'office:value="' + (b"1" if value else b"0") + b'"><text:p>' + word + b"</text:p>"
            b"</table:table-cell>"
        )
    if isinstance(value, (int, float)):
        return (
            b'<table:table-cell office:value-type="float" office:value="%s"><text:p>%s</text:p>'
            b"</table:table-cell>" % (repr(value).encode(), repr(value).encode())
        )
    return (
        b'<table:table-cell office:value-type="string"><text:p>%s</text:p></table:table-cell>'
        % str(value).encode()
    )


def _ods_table(name: str, rows: list[list]) -> bytes:
    body = b"".join(
        b"<table:table-row>" + b"".join(_ods_cell(v) for v in row) + b"</table:table-row>"
        for row in rows
    )
    return b'<table:table table:name="' + name.encode() + b'">' + body + b"</table:table>"


def ods_yes_no(path: Path) -> None:
    """TRUE in Unit cost and FALSE in On hand, saved the way LibreOffice saves them."""
    items = [
        [*ITEMS_HEADERS, "On hand"],
        ["BOLT-10", "bolts", "Velo Parts", True, 18.0, 0.22, 10, 40],
        ["CHAIN-7", "chains", "Velo Parts", 5.5, 18.0, 0.22, 12, False],
        ["LAMP-2", "lamps", "Velo Parts", 6.5, 18.0, 0.22, 14, 12],
    ]
    rng = np.random.default_rng(11)
    history = [["Item", "Period", "Quantity"]] + [
        [c, f"W{w + 1:02d}", int(q)] for c in CODES for w, q in enumerate(rng.poisson(25, 30))
    ]
    _ods(
        path,
        _ODS_HEAD
        + _ODS_OPEN
        + _ods_table("Items", items)
        + _ods_table("History", history)
        + _ODS_CLOSE,
    )


_BOMB = ("zip bomb", "--allow-large")
_DTD = ("document type declaration",)
CASES: list[Case] = [
    # (1) hostile files
    Case(
        "billion-laughs.xlsx",
        billion_laughs,
        1,
        _DTD,
        ("file-unsafe-xml",),
        "entity expansion (billion laughs) in a sheet",
        tags=("hostile",),
    ),
    Case(
        "laughs-behind-comment.xlsx",
        laughs_behind_long_comment,
        1,
        ("laughs-behind-comment.xlsx", *_DTD),
        ("file-unsafe-xml",),
        "entity expansion hidden past the first check",
        tags=("hostile",),
    ),
    Case(
        "external-entity.xlsx",
        external_entity,
        1,
        _DTD,
        ("file-unsafe-xml",),
        "an external entity reading a local file",
        tags=("hostile",),
    ),
    Case(
        "bomb-ratio.xlsx",
        bomb_ratio,
        1,
        (*_BOMB, "compressed"),
        ("file-too-large",),
        "a part compressed 1000 to 1",
        tags=("hostile",),
    ),
    Case(
        "bomb-declared-size.xlsx",
        bomb_declared_size,
        1,
        (*_BOMB, "3.3 GB"),
        ("file-too-large",),
        "a part that says it unpacks to 3.5 GB",
        tags=("hostile",),
    ),
    Case(
        "bomb.ods", ods_bomb, 1, _BOMB, ("file-too-large",), "an .ods zip bomb", tags=("hostile",)
    ),
    Case(
        "billion-laughs.ods",
        ods_laughs,
        1,
        _DTD,
        ("file-unsafe-xml",),
        "entity expansion in an .ods",
        tags=("hostile",),
    ),
    Case(
        "repeated-cells.ods",
        ods_repeated_cells,
        1,
        ("more cells than", "Items"),
        ("file-too-large",),
        "an .ods row repeated into a billion cells",
        tags=("hostile",),
    ),
    Case(
        "huge-merge.xlsx",
        huge_merge,
        0,
        ("Wrote",),
        (),
        "a merged range of 16 billion cells",
        planned=3,
        tags=("hostile",),
    ),
    Case(
        "used-range-too-small.xlsx",
        used_range_too_small,
        0,
        ("Wrote",),
        (),
        "sheets that claim to end at A1",
        planned=3,
        tags=("hostile",),
    ),
    Case(
        "used-range-whole-sheet.xlsx",
        used_range_whole_sheet,
        0,
        ("Wrote",),
        (),
        "a sheet that claims all 17 billion cells",
        planned=3,
        tags=("hostile",),
    ),
    Case(
        "formatted-empty-rows.xlsx",
        formatted_empty_rows,
        0,
        ("Wrote",),
        (),
        "a million formatted empty rows",
        planned=3,
        tags=("hostile",),
        committed=False,
    ),
    # (2) files that are not what they claim
    Case(
        "empty.xlsx", empty, 1, ("empty.xlsx", "empty (0 bytes)"), ("file-empty",), "an empty file"
    ),
    Case(
        "truncated.xlsx",
        truncated,
        1,
        ("truncated.xlsx", "cut off"),
        ("file-truncated",),
        "a download cut off half way",
    ),
    Case(
        "crc-damaged.xlsx",
        crc_damaged,
        1,
        ("crc-damaged.xlsx", "damaged"),
        ("file-unreadable",),
        "one byte of a sheet changed",
    ),
    Case(
        "broken-xml.xlsx",
        broken_xml,
        1,
        ("History", "damaged"),
        ("file-unreadable",),
        "a sheet's XML cut off mid-row",
    ),
    Case(
        "csv-renamed.xlsx",
        csv_renamed,
        1,
        ("csv-renamed.xlsx", "text (CSV)"),
        ("file-not-zip",),
        "a CSV file renamed .xlsx",
    ),
    Case(
        "web-page-renamed.xlsx",
        html_renamed,
        1,
        ("web page (HTML)",),
        ("file-not-zip",),
        "a web page renamed .xlsx",
    ),
    Case(
        "xml-2003-renamed.xlsx",
        xml2003_renamed,
        1,
        ("XML Spreadsheet 2003",),
        ("file-not-zip",),
        "an XML spreadsheet renamed .xlsx",
    ),
    Case(
        "password-protected.xlsx",
        password_protected,
        1,
        ("password",),
        ("file-not-zip",),
        "a workbook encrypted with a password",
    ),
    Case(
        "xls-renamed.xlsx",
        xls_renamed,
        1,
        ("old-style Excel file (.xls)",),
        ("file-not-zip",),
        "an .xls renamed .xlsx",
    ),
    Case(
        "~$shop.xlsx",
        excel_lock_file,
        1,
        ("lock file", "shop.xlsx"),
        ("file-lock",),
        "Excel's lock file",
    ),
    Case(
        ".~lock.shop.xlsx#",
        libreoffice_lock_file,
        1,
        ("lock file", "shop.xlsx"),
        ("file-lock",),
        "LibreOffice's lock file",
    ),
    Case(
        "word-renamed.xlsx",
        word_renamed,
        1,
        ("Word document",),
        ("file-not-workbook",),
        "a Word document renamed .xlsx",
    ),
    Case(
        "ods-renamed.xlsx",
        ods_renamed,
        1,
        ("OpenDocument", ".ods"),
        ("file-not-workbook",),
        "an .ods renamed .xlsx",
    ),
    Case(
        "zip-of-files.xlsx",
        zip_of_files,
        1,
        ("zip archive",),
        ("file-not-workbook",),
        "a zip of other files renamed .xlsx",
    ),
    Case(
        "binary-workbook.xlsb",
        xlsb,
        1,
        ("binary-workbook.xlsb", "Excel Workbook (.xlsx)"),
        ("file-type",),
        "an Excel binary workbook (no reader)",
    ),
    Case(
        "random-bytes.xlsx",
        random_bytes,
        1,
        ("random-bytes.xlsx", "not a readable"),
        ("file-not-zip",),
        "noise with an .xlsx name",
    ),
    # (3) cells as people type them
    Case(
        "typed-numbers.xlsx",
        typed_numbers,
        0,
        ("Wrote", "Items!E4", "(18.00)"),
        ("order_cost-out-of-range",),
        "costs with currency signs, separators, decimal commas; one bracketed negative",
        planned=2,
    ),
    Case(
        "dates-as-text.xlsx",
        text_dates,
        0,
        ("Wrote", "read as dates"),
        ("history-typed-dates-info",),
        "periods typed as 31/01/2024",
        planned=3,
    ),
    Case(
        "dates-as-numbers.xlsx",
        serial_dates,
        0,
        ("Wrote", "45292 = 2024-01-01"),
        ("history-typed-dates-info",),
        "periods as bare day numbers",
        planned=3,
    ),
    Case("epoch-1904.xlsx", epoch_1904, 0, ("Wrote",), (), "the 1904 date system", planned=3),
    Case(
        "hidden-rows-and-sheet.xlsx",
        hidden_parts,
        0,
        ("Wrote", "hidden row"),
        ("rows-hidden", "sheet-hidden"),
        "hidden rows and a hidden History sheet",
        planned=3,
    ),
    Case(
        "merged-in-data.xlsx",
        merged_in_data,
        0,
        ("Wrote", "C2:C4", "merged"),
        ("cells-merged",),
        "a supplier merged over three rows",
        planned=3,
    ),
    Case(
        "formula-no-saved-result.xlsx",
        formulas_no_cache,
        0,
        ("Wrote", "Items!D3"),
        ("cell-uncalculated",),
        "a formula never calculated",
        planned=2,
    ),
    # (4) text that must land as text
    Case(
        "formula-text.xlsx",
        formula_text,
        0,
        ("Wrote",),
        (),
        "user text starting with = + - @ and control characters",
        planned=3,
    ),
    # (5) numbers that must not change in silence
    Case(
        "decimal-comma-column.xlsx",
        decimal_comma_column,
        0,
        ("Wrote", "Items!D4", "1200"),
        ("number-decimal-mark",),
        "'1.200' in a column typed with the decimal comma",
        planned=3,
    ),
    Case(
        "decimal-marks-mixed.xlsx",
        decimal_marks_mixed,
        0,
        ("Wrote", "Items!D4", "could be 1.2 or 1200"),
        ("unit_cost-decimal-mark-unclear",),
        "'1.200' in a column typed with both decimal marks",
        planned=2,
    ),
    Case(
        "huge-unit-cost.xlsx",
        huge_unit_cost,
        0,
        ("Wrote", "Items!D2", "too large"),
        ("item-amount-overflow",),
        "a unit cost of 1e308 that would overflow every total",
        planned=2,
    ),
    Case(
        "implausible-inputs.xlsx",
        implausible_inputs,
        0,
        ("Wrote", "Items!G3", "years"),
        ("order-covers-years", "lead-time-implausible"),
        "a lead time of 10,000 days and a unit cost of 1e-9",
        planned=3,
    ),
    Case(
        "yes-no-cells.ods",
        ods_yes_no,
        0,
        ("Wrote", "yes/no value"),
        ("unit_cost-not-number", "on_hand-not-number"),
        "TRUE and FALSE in number columns of an .ods",
        planned=2,
    ),
    Case(
        "macro-in-xlsx.xlsx",
        macro_in_xlsx,
        2,
        ("holds macros", ".xlsm"),
        (),
        "a macro-enabled package named .xlsx (an .xlsx output would not open)",
    ),
]


def build_all(folder: Path = BAD, committed: bool = True) -> list[Path]:
    """Write the cases' files into ``folder`` (the committed ones, or the others); their paths."""
    folder.mkdir(parents=True, exist_ok=True)
    out = []
    for case in CASES:
        if case.committed != committed:
            continue
        path = folder / case.name
        case.build(path)
        out.append(path)
    return out


def main(argv: list[str]) -> int:
    folder = Path(argv[1]) if len(argv) > 1 else BAD
    paths = build_all(folder)
    total = sum(p.stat().st_size for p in paths)
    print(f"wrote {len(paths)} files, {total / 1024:.0f} KB, to {folder}")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv))
