"""Copying a generated sheet part into the output, rewritten on the way.

A generated sheet refers to its styles and strings by the generated workbook's numbers;
in the output they must be the user's. Only the sheet's short head (views, columns) and
tail (filters, conditional formats, links) are parsed as XML; the rows between, which
can be hundreds of megabytes, are streamed as bytes: each style number is mapped, each
shared-string cell becomes an inline-string cell (so the user's shared-string table is
never touched), and each marker of a deferred cell block (writing/bulk.py) is replaced by
that block's rows, rendered with the output's style numbers.
"""

from __future__ import annotations

import re
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from typing import IO

from lxml import etree
from xlsxwriter.format import Format

from ..bulk import BLOCK_MARKER, CellBlock
from .errors import Unexpected
from .opc import CHUNK, MAIN, PARSER, RT_SST, qn, serialize
from .pipe import Pipe
from .reader import Package
from .workbook import Workbook

# Inside <sheetData> of a generated sheet: '<' only opens tags (text escapes it), so a
# pattern anchored at "<c " or "<row " and not crossing '>' only ever sees a start tag.
_STYLED_TAG = re.compile(rb'(<(?:c|row)\b[^>]*?\ss=")(\d+)"')
_SHARED_CELL = re.compile(rb'<c\b([^>]*?)\st="s"([^>]*)><v>(\d+)</v></c>')
_ANY_SHARED_CELL = re.compile(rb'<c\b[^>]*?\st="s"')


@dataclass
class SheetEdit:
    """What changes inside a generated sheet part."""

    xf_map: list[int]
    dxf_map: list[int]
    strings: list[bytes]
    keep_selected: bool


def shared_strings(gen: Package, gen_wb: Workbook) -> list[bytes]:
    """Each shared string of the generated workbook as the inner XML of an <is> element."""
    rel = gen_wb.rel_by_type(RT_SST)
    if not rel:
        return []
    part = gen_wb.part_of(rel[0])
    if part is None:
        return []
    out = []
    decl = f' xmlns="{MAIN}"'.encode()
    with gen.zf.open(part) as fh:
        for _, si in etree.iterparse(
            fh, tag=qn(MAIN, "si"), huge_tree=True, resolve_entities=False, no_network=True
        ):
            pieces = []
            for child in si:
                if not isinstance(child.tag, str):
                    continue
                if child.tag == qn(MAIN, "t"):
                    text = etree.Element(qn(MAIN, "t"), nsmap={None: MAIN})
                    text.text = child.text or ""
                    text.set("{http://www.w3.org/XML/1998/namespace}space", "preserve")
                    piece = etree.tostring(text, encoding="UTF-8")
                else:
                    piece = etree.tostring(child, encoding="UTF-8", with_tail=False)
                pieces.append(piece.replace(decl, b"", 1))
            out.append(b"".join(pieces) or b'<t xml:space="preserve"></t>')
            si.clear()
    return out


def _edit_sheet_tree(root: etree._Element, edit: SheetEdit) -> None:
    """Remap styles and dxfs outside <sheetData>; drop the tab selection."""
    for view in root.iter(qn(MAIN, "sheetView")):
        if not edit.keep_selected and "tabSelected" in view.attrib:
            del view.attrib["tabSelected"]
    for col in root.iter(qn(MAIN, "col")):
        if "style" in col.attrib:
            col.set("style", str(edit.xf_map[int(col.get("style"))]))
    for rule in root.iter(qn(MAIN, "cfRule")):
        if "dxfId" in rule.attrib:
            rule.set("dxfId", str(edit.dxf_map[int(rule.get("dxfId"))]))


def _rows_writer(
    edit: SheetEdit, dst: IO[bytes], blocks: Mapping[int, CellBlock]
) -> Callable[[bytes], None]:
    """Write whole <row> elements to ``dst`` rewritten; render deferred blocks in place.

    A deferred block (writing/bulk.py) stands in the generated sheet as a marker; it is
    rendered here with the output package's style numbers, so its rows are written once.
    """
    rewrite = _rows_rewriter(edit)

    def xf_of(fmt: Format) -> int:
        return edit.xf_map[fmt.xf_index]

    def emit(piece: bytes) -> None:
        pos = 0
        for m in BLOCK_MARKER.finditer(piece):
            dst.write(rewrite(piece[pos : m.start()]))
            block = blocks.get(int(m.group(1)))
            if block is None:
                raise Unexpected("a generated sheet refers to cells that were not given")
            with Pipe(dst) as out:
                for text in block.rows_xml(xf_of):
                    out.write(text.encode("utf-8"))
            pos = m.end()
        dst.write(rewrite(piece[pos:]))

    return emit


def _rows_rewriter(edit: SheetEdit) -> Callable[[bytes], bytes]:
    """Rewrite a block of whole <row> elements: style indexes, shared strings to inline."""
    xf_bytes = {str(i).encode(): str(v).encode() + b'"' for i, v in enumerate(edit.xf_map)}
    strings = edit.strings

    def style(m: re.Match) -> bytes:
        return m.group(1) + xf_bytes[m.group(2)]

    def shared(m: re.Match) -> bytes:
        return (
            b"<c"
            + m.group(1)
            + b' t="inlineStr"'
            + m.group(2)
            + b"><is>"
            + strings[int(m.group(3))]
            + b"</is></c>"
        )

    def rewrite(block: bytes) -> bytes:
        block, n = _SHARED_CELL.subn(shared, block)
        if block.count(b't="s"') and _ANY_SHARED_CELL.search(block):
            raise Unexpected("a shared-string cell of a generated sheet is not as expected")
        return _STYLED_TAG.sub(style, block)

    return rewrite


def _split_serialized(root: etree._Element) -> tuple[bytes, bytes]:
    """Serialize a sheet whose <sheetData/> is empty and cut it there: (head, tail)."""
    data = b'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\r\n' + etree.tostring(
        root, encoding="UTF-8"
    )
    if data.count(b"<sheetData/>") != 1:
        raise Unexpected("cannot locate the cell data of a generated sheet")
    head, tail = data.split(b"<sheetData/>")
    return head, tail


def _root_name(head: bytes) -> bytes:
    m = re.search(
        rb"<([A-Za-z_][\w.:-]*)[\s>]", re.sub(rb"<\?.*?\?>|<!--.*?-->", b"", head, flags=re.S)
    )
    if m is None:
        raise Unexpected("a generated sheet has no root element")
    return m.group(1)


def copy_sheet(
    src: IO[bytes], dst: IO[bytes], edit: SheetEdit, blocks: Mapping[int, CellBlock]
) -> None:
    """Stream a generated worksheet from ``src`` to ``dst``, rewriting it on the way."""
    buf = b""
    while True:
        start = buf.find(b"<sheetData")
        end = buf.find(b">", start) if start >= 0 else -1
        if end >= 0:
            break
        chunk = src.read(CHUNK)
        if not chunk:  # a chartsheet or an unusual sheet: small, parse it whole
            root = etree.fromstring(buf, PARSER)
            _edit_sheet_tree(root, edit)
            dst.write(serialize(etree.ElementTree(root)))
            return
        buf += chunk
    head = buf[:start]
    empty = buf[end - 1 : end] == b"/"
    buf = buf[end + 1 :]
    root_name = _root_name(head)
    head_root = etree.fromstring(head + b"<sheetData/></" + root_name + b">", PARSER)
    _edit_sheet_tree(head_root, edit)
    new_head, _ = _split_serialized(head_root)
    dst.write(new_head)
    emit = _rows_writer(edit, dst, blocks)
    if empty:
        dst.write(b"<sheetData/>")
    else:
        dst.write(b"<sheetData>")
        while True:
            stop = buf.find(b"</sheetData>")
            if stop >= 0:
                emit(buf[:stop])
                buf = buf[stop + len(b"</sheetData>") :]
                break
            # Whole rows, and a block marker after them (a marker is never cut in two: it
            # follows a </row> or the start tag, and what follows the last </row> waits).
            last = buf.rfind(b"</row>")
            if last >= 0:
                emit(buf[: last + 6])
                buf = buf[last + 6 :]
            chunk = src.read(CHUNK)
            if not chunk:
                raise Unexpected("a generated sheet ends inside its cell data")
            buf += chunk
        dst.write(b"</sheetData>")
    buf += src.read()
    full_root = etree.fromstring(head + b"<sheetData/>" + buf, PARSER)
    _edit_sheet_tree(full_root, edit)
    _, new_tail = _split_serialized(full_root)
    dst.write(new_tail)
