"""Add generated sheets to a copy of the user's workbook at the zip-package level.

Loading a whole workbook with a library and saving it again drops what the library does
not model (shapes, form controls, macros, pivot caches, comment formatting...) and costs
minutes and gigabytes on big files. Here the generated sheets are first written to a
standalone .xlsx (xlsxwriter), then their parts are grafted onto a copy of the user's
.xlsx/.xlsm package. Every user part is copied byte for byte except the few that must
change to register the new sheets: ``[Content_Types].xml``, the workbook part, its
relationships and the styles part. Generated sheets are marked with a hidden, sheet-scoped
defined name :data:`GENERATED_MARK` so a later run replaces them instead of stacking copies.

Strings of the generated sheets become inline strings (``t="inlineStr"``), so the user's
shared-string table is never touched. Big generated sheets are streamed row block by row
block; only their short head (views, columns) and tail (filters, formats, links) are parsed.
"""

from __future__ import annotations

import collections
import concurrent.futures
import contextlib
import copy
import os
import posixpath
import queue
import re
import shutil
import struct
import threading
import zipfile
import zlib
from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import IO
from urllib.parse import unquote

from lxml import etree
from xlsxwriter.format import Format

from .. import fastzlib
from .atomic import OutputLocked, atomic_output
from .bulk import BLOCK_MARKER, CellBlock

__all__ = [
    "GENERATED_MARK",
    "CannotMerge",
    "MergeResult",
    "merge_generated_sheets",
    "user_sheet_names",
]

GENERATED_MARK = "_xlpolicy_generated"
_MARK_VALUE = '"xlpolicy"'

# --- namespaces and relationship types -------------------------------------------------
_MAIN = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"
_STRICT_MAIN = "http://purl.oclc.org/ooxml/spreadsheetml/main"
_PKG_REL = "http://schemas.openxmlformats.org/package/2006/relationships"
_CT = "http://schemas.openxmlformats.org/package/2006/content-types"
_DOC_REL = "http://schemas.openxmlformats.org/officeDocument/2006/relationships"
_STRICT_DOC_REL = "http://purl.oclc.org/ooxml/officeDocument/relationships"
_RT_OFFICE = _DOC_REL + "/officeDocument"
_RT_STRICT_OFFICE = _STRICT_DOC_REL + "/officeDocument"
_RT_STYLES = _DOC_REL + "/styles"
_RT_SST = _DOC_REL + "/sharedStrings"
_RT_CALC_CHAIN = _DOC_REL + "/calcChain"
_RT_WORKSHEET = _DOC_REL + "/worksheet"
_RT_CHARTSHEET = _DOC_REL + "/chartsheet"
_CT_TABLE = "application/vnd.openxmlformats-officedocument.spreadsheetml.table+xml"
_CT_STYLES = "application/vnd.openxmlformats-officedocument.spreadsheetml.styles+xml"

_CFB_SIGNATURE = b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1"
_FIRST_CUSTOM_NUMFMT = 164
_MAX_CELL_XFS = 65490  # Excel's limit on cell formats per workbook
_CHUNK = 1 << 20

# Built-in number formats whose codes are fixed (ECMA-376 Part 1, 18.8.30). Used only
# when the user's styles redefine one of these ids with another code.
_BUILTIN_NUMFMTS = {
    0: "General",
    1: "0",
    2: "0.00",
    3: "#,##0",
    4: "#,##0.00",
    9: "0%",
    10: "0.00%",
    11: "0.00E+00",
    12: "# ?/?",
    13: "# ??/??",
    14: "mm-dd-yy",
    15: "d-mmm-yy",
    16: "d-mmm",
    17: "mmm-yy",
    18: "h:mm AM/PM",
    19: "h:mm:ss AM/PM",
    20: "h:mm",
    21: "h:mm:ss",
    22: "m/d/yy h:mm",
    37: "#,##0 ;(#,##0)",
    38: "#,##0 ;[Red](#,##0)",
    39: "#,##0.00;(#,##0.00)",
    40: "#,##0.00;[Red](#,##0.00)",
    45: "mm:ss",
    46: "[h]:mm:ss",
    47: "mmss.0",
    48: "##0.0E+0",
    49: "@",
}

# Child order of <styleSheet> and <workbook> (ECMA-376 Part 1, CT_Stylesheet, CT_Workbook).
_STYLE_ORDER = [
    "numFmts",
    "fonts",
    "fills",
    "borders",
    "cellStyleXfs",
    "cellXfs",
    "cellStyles",
    "dxfs",
    "tableStyles",
    "colors",
    "extLst",
]
_WORKBOOK_ORDER = [
    "fileVersion",
    "fileSharing",
    "workbookPr",
    "workbookProtection",
    "bookViews",
    "sheets",
    "functionGroups",
    "externalReferences",
    "definedNames",
    "calcPr",
    "oleSize",
    "customWorkbookViews",
    "pivotCaches",
    "smartTagPr",
    "smartTagTypes",
    "webPublishing",
    "fileRecoveryPr",
    "webPublishObjects",
    "extLst",
]
_TABLE_DXF_ATTRS = (
    "headerRowDxfId",
    "dataDxfId",
    "totalsRowDxfId",
    "headerRowBorderDxfId",
    "tableBorderDxfId",
    "totalsRowBorderDxfId",
)

_PARSER = etree.XMLParser(resolve_entities=False, no_network=True, huge_tree=True)


class CannotMerge(Exception):
    """The user's workbook cannot take the generated sheets intact; ``str()`` says why.

    The caller then writes the generated sheets to a workbook of their own.
    """


class _Unexpected(Exception):
    """Internal: something in a package is not as expected (turned into CannotMerge)."""


@dataclass
class MergeResult:
    """What :func:`merge_generated_sheets` did."""

    sheet_names: list[str]  # generated sheets, as added
    replaced: list[str]  # generated sheets of an earlier run that were removed
    kept_parts: int  # user parts copied byte for byte


def _q(ns: str, name: str) -> str:
    return f"{{{ns}}}{name}"


def _local(el: etree._Element) -> str:
    return etree.QName(el).localname if isinstance(el.tag, str) else ""


def _rels_name(part: str) -> str:
    """Name of the relationships part of ``part`` ('' is the package itself)."""
    directory, base = posixpath.split(part)
    return posixpath.join(directory, "_rels", base + ".rels")


def _resolve(source: str, target: str) -> str:
    """Absolute part name (no leading '/') of a relationship target seen from ``source``."""
    target = unquote(target.split("#", 1)[0])
    if target.startswith("/"):
        return posixpath.normpath(target[1:])
    return posixpath.normpath(posixpath.join(posixpath.dirname(source), target))


def _relative(source: str, target: str) -> str:
    """Relationship target naming part ``target`` as seen from part ``source``."""
    return posixpath.relpath(target, posixpath.dirname(source) or ".")


def _serialize(tree: etree._ElementTree) -> bytes:
    """XML bytes with a double-quoted declaration, prefixes and namespaces as parsed."""
    standalone = tree.docinfo.standalone
    decl = '<?xml version="1.0" encoding="UTF-8"'
    if standalone:  # absent and "no" mean the same (XML 1.0, 2.9)
        decl += ' standalone="yes"'
    decl += "?>\r\n"
    return decl.encode() + etree.tostring(tree.getroot(), encoding="UTF-8")


def _key(el: etree._Element) -> tuple:
    """Structural identity of a style record (attribute order and whitespace ignored)."""
    children = tuple(_key(c) for c in el if isinstance(c.tag, str))
    text = (el.text or "").strip()
    return (el.tag, tuple(sorted(el.attrib.items())), text, children)


def _insert_ordered(parent: etree._Element, ns: str, name: str, order: list[str]) -> etree._Element:
    """Return child ``name`` of ``parent``, creating it at its schema position if absent."""
    found = parent.find(_q(ns, name))
    if found is not None:
        return found
    new = parent.makeelement(_q(ns, name), {})
    rank = order.index(name)
    for child in parent:
        if not isinstance(child.tag, str) or etree.QName(child).namespace != ns:
            continue  # comments, mc:AlternateContent and other extensions
        local = etree.QName(child).localname
        if local in order and order.index(local) > rank:
            child.addprevious(new)
            return new
    parent.append(new)
    return new


def _set_count(container: etree._Element) -> None:
    if "count" in container.attrib or len(container):
        container.set("count", str(sum(1 for c in container if isinstance(c.tag, str))))


# --- reading a package -----------------------------------------------------------------
class _Package:
    """Read access to an OPC zip package with case-insensitive part lookup."""

    def __init__(self, zf: zipfile.ZipFile, label: str):
        self.zf = zf
        self.label = label
        self.infos = zf.infolist()
        self.by_lower: dict[str, str] = {}
        for info in self.infos:
            low = info.filename.lower()
            if low in self.by_lower:
                raise CannotMerge(f"{label} holds the part {info.filename} twice")
            self.by_lower[low] = info.filename
        self._rels_cache: dict[str, list[dict[str, str]]] = {}

    def name(self, part: str) -> str | None:
        return self.by_lower.get(part.lower())

    def has(self, part: str) -> bool:
        return part.lower() in self.by_lower

    def read(self, part: str) -> bytes:
        real = self.name(part)
        if real is None:
            raise _Unexpected(f"part {part} is missing")
        return self.zf.read(real)

    def parse(self, part: str) -> etree._ElementTree:
        return etree.ElementTree(etree.fromstring(self.read(part), _PARSER))

    def rels(self, part: str) -> list[dict[str, str]]:
        """Relationships of ``part`` as dicts (Id, Type, Target, TargetMode)."""
        if part not in self._rels_cache:
            rels_part = _rels_name(part)
            out: list[dict[str, str]] = []
            if self.has(rels_part):
                root = self.parse(rels_part).getroot()
                for rel in root.iter(_q(_PKG_REL, "Relationship")):
                    out.append(dict(rel.attrib))
            self._rels_cache[part] = out
        return self._rels_cache[part]

    def internal_targets(self, part: str) -> list[str]:
        """Existing parts that ``part`` points at (external targets and dangling ones left out)."""
        out = []
        for rel in self.rels(part):
            if rel.get("TargetMode") == "External" or "Target" not in rel:
                continue
            target = self.name(_resolve(part, rel["Target"]))
            if target is not None:
                out.append(target)
        return out


def _open_package(path: Path, label: str) -> zipfile.ZipFile:
    try:
        with open(path, "rb") as fh:
            head = fh.read(8)
    except OSError as exc:
        raise CannotMerge(f"{label} cannot be read: {exc}") from exc
    if head.startswith(_CFB_SIGNATURE[:4]):
        raise CannotMerge(
            f"{label} is password-protected (encrypted) or in the old binary .xls format; "
            "it cannot take new sheets without being opened in a spreadsheet program"
        )
    try:
        return zipfile.ZipFile(path)
    except (zipfile.BadZipFile, OSError, ValueError) as exc:
        raise CannotMerge(f"{label} is not an .xlsx/.xlsm package (not a zip file)") from exc


def _office_document(pkg: _Package) -> str:
    """Part name of the workbook, from the package's officeDocument relationship."""
    for rel in pkg.rels(""):
        if rel.get("Type") == _RT_STRICT_OFFICE:
            raise CannotMerge(f"{pkg.label} is saved as Strict Open XML, which is not supported")
        if rel.get("Type") == _RT_OFFICE and rel.get("TargetMode") != "External":
            part = pkg.name(_resolve("", rel.get("Target", "")))
            if part is None:
                break
            return part
    raise CannotMerge(f"{pkg.label} has no workbook part")


@dataclass
class _Sheet:
    el: etree._Element
    name: str
    sheet_id: int
    rid: str
    part: str | None  # None when the relationship is missing/dangling
    rel_type: str


@dataclass
class _Workbook:
    pkg: _Package
    part: str
    tree: etree._ElementTree
    rels_part: str
    rels_tree: etree._ElementTree
    ct_tree: etree._ElementTree
    sheets: list[_Sheet] = field(default_factory=list)

    @property
    def root(self) -> etree._Element:
        return self.tree.getroot()

    def rel_by_type(self, rel_type: str) -> list[etree._Element]:
        return [r for r in self.rels_tree.getroot() if r.get("Type") == rel_type]

    def part_of(self, rel: etree._Element) -> str | None:
        if rel.get("TargetMode") == "External":
            return None
        return self.pkg.name(_resolve(self.part, rel.get("Target", "")))

    def defined_names(self) -> list[etree._Element]:
        dn = self.root.find(_q(_MAIN, "definedNames"))
        return [] if dn is None else list(dn.iter(_q(_MAIN, "definedName")))

    def generated_indexes(self) -> set[int]:
        out = set()
        for dn in self.defined_names():
            if dn.get("name", "").lower() == GENERATED_MARK.lower():
                try:
                    out.add(int(dn.get("localSheetId", "-1")))
                except ValueError:
                    continue
        return {i for i in out if 0 <= i < len(self.sheets)}


def _load_workbook(pkg: _Package) -> _Workbook:
    if not pkg.has("[Content_Types].xml"):
        raise CannotMerge(f"{pkg.label} has no [Content_Types].xml part")
    part = _office_document(pkg)
    try:
        tree = pkg.parse(part)
    except etree.XMLSyntaxError as exc:
        raise CannotMerge(f"the workbook part of {pkg.label} cannot be read ({exc})") from exc
    root = tree.getroot()
    ns = etree.QName(root).namespace
    if ns == _STRICT_MAIN:
        raise CannotMerge(f"{pkg.label} is saved as Strict Open XML, which is not supported")
    if ns != _MAIN or etree.QName(root).localname != "workbook":
        raise CannotMerge(f"the workbook part of {pkg.label} is not a SpreadsheetML workbook")
    rels_part = _rels_name(part)
    if pkg.has(rels_part):
        rels_tree = pkg.parse(rels_part)
    else:
        rels_tree = etree.ElementTree(
            etree.Element(_q(_PKG_REL, "Relationships"), nsmap={None: _PKG_REL})
        )
    wb = _Workbook(
        pkg,
        part,
        tree,
        pkg.name(rels_part) or rels_part,
        rels_tree,
        pkg.parse("[Content_Types].xml"),
    )
    rel_by_id = {r.get("Id"): r for r in rels_tree.getroot()}
    sheets_el = root.find(_q(_MAIN, "sheets"))
    if sheets_el is None:
        raise CannotMerge(f"the workbook part of {pkg.label} lists no sheets")
    for el in sheets_el.findall(_q(_MAIN, "sheet")):
        rid = el.get(_q(_DOC_REL, "id"), "")
        rel = rel_by_id.get(rid)
        wb.sheets.append(
            _Sheet(
                el=el,
                name=el.get("name", ""),
                sheet_id=int(el.get("sheetId", "0")),
                rid=rid,
                part=None if rel is None else wb.part_of(rel),
                rel_type="" if rel is None else rel.get("Type", ""),
            )
        )
    return wb


# --- content types -----------------------------------------------------------------------
class _ContentTypes:
    def __init__(self, tree: etree._ElementTree):
        self.tree = tree
        self.root = tree.getroot()

    def defaults(self) -> dict[str, str]:
        return {
            d.get("Extension", "").lower(): d.get("ContentType", "")
            for d in self.root.findall(_q(_CT, "Default"))
        }

    def overrides(self) -> dict[str, etree._Element]:
        return {
            o.get("PartName", "").lstrip("/").lower(): o
            for o in self.root.findall(_q(_CT, "Override"))
        }

    def type_of(self, part: str) -> str | None:
        over = self.overrides().get(part.lower())
        if over is not None:
            return over.get("ContentType")
        ext = posixpath.splitext(part)[1].lstrip(".").lower()
        return self.defaults().get(ext)

    def remove(self, part: str) -> None:
        over = self.overrides().get(part.lower())
        if over is not None:
            self.root.remove(over)

    def add(self, part: str, content_type: str, by_override: bool) -> None:
        ext = posixpath.splitext(part)[1].lstrip(".").lower()
        defaults = self.defaults()
        if not by_override and defaults.get(ext) == content_type:
            return
        if not by_override and ext and ext not in defaults:
            new = self.root.makeelement(
                _q(_CT, "Default"), {"Extension": ext, "ContentType": content_type}
            )
            last = self.root.findall(_q(_CT, "Default"))
            if last:
                last[-1].addnext(new)
            else:
                self.root.insert(0, new)
            return
        self.remove(part)
        self.root.append(
            self.root.makeelement(
                _q(_CT, "Override"), {"PartName": "/" + part, "ContentType": content_type}
            )
        )


# --- styles ------------------------------------------------------------------------------
class _StyleMerger:
    """Append the generated workbook's style records to the user's and map indexes."""

    def __init__(self, user: etree._Element, gen: etree._Element):
        self.user = user
        self.gen = gen
        self._containers: dict[str, etree._Element] = {}
        self._keys: dict[str, dict[tuple, int]] = {}
        self._maps: dict[str, dict[int, int]] = {}
        self.gen_numfmts = {
            int(n.get("numFmtId", "0")): n.get("formatCode", "")
            for n in gen.iter(_q(_MAIN, "numFmt"))
            if n.getparent() is not None and _local(n.getparent()) == "numFmts"
        }
        numfmts = user.find(_q(_MAIN, "numFmts"))
        self.user_numfmts: dict[int, str] = {}
        if numfmts is not None:
            for n in numfmts.findall(_q(_MAIN, "numFmt")):
                self.user_numfmts[int(n.get("numFmtId", "0"))] = n.get("formatCode", "")
        self.code_to_id: dict[str, int] = {}
        for num_id, code in self.user_numfmts.items():
            self.code_to_id.setdefault(code, num_id)

    def _container(self, name: str) -> etree._Element:
        if name not in self._containers:
            self._containers[name] = _insert_ordered(self.user, _MAIN, name, _STYLE_ORDER)
        return self._containers[name]

    def _has(self, name: str) -> bool:
        """Whether the user's styles hold at least one record of kind ``name``."""
        el = self.user.find(_q(_MAIN, name))
        return el is not None and any(isinstance(c.tag, str) for c in el)

    def _records(self, name: str) -> list[etree._Element]:
        return [c for c in self._container(name) if isinstance(c.tag, str)]

    def _gen_records(self, name: str) -> list[etree._Element]:
        el = self.gen.find(_q(_MAIN, name))
        return [] if el is None else [c for c in el if isinstance(c.tag, str)]

    def _find_or_append(self, container: str, record: etree._Element) -> int:
        keys = self._keys.get(container)
        if keys is None:
            keys = {}
            for i, rec in enumerate(self._records(container)):
                keys.setdefault(_key(rec), i)
            self._keys[container] = keys
        key = _key(record)
        if key in keys:
            return keys[key]
        parent = self._container(container)
        index = len(self._records(container))
        parent.append(record)
        keys[key] = index
        return index

    def numfmt(self, gen_id: int) -> int:
        """User numFmtId showing the generated format ``gen_id``."""
        if gen_id < _FIRST_CUSTOM_NUMFMT and gen_id not in self.gen_numfmts:
            if gen_id not in self.user_numfmts or gen_id not in _BUILTIN_NUMFMTS:
                return gen_id
            if self.user_numfmts[gen_id] == _BUILTIN_NUMFMTS[gen_id]:
                return gen_id
            return self.code(_BUILTIN_NUMFMTS[gen_id])  # the user redefined a built-in id
        code = self.gen_numfmts.get(gen_id)
        if code is None:
            return gen_id
        return self.code(code)

    def code(self, code: str) -> int:
        """numFmtId of format ``code`` in the user's styles, adding it if needed."""
        if code in self.code_to_id:
            return self.code_to_id[code]
        new_id = max([_FIRST_CUSTOM_NUMFMT - 1, *self.user_numfmts]) + 1
        container = self._container("numFmts")
        container.append(
            container.makeelement(
                _q(_MAIN, "numFmt"), {"numFmtId": str(new_id), "formatCode": code}
            )
        )
        self.user_numfmts[new_id] = code
        self.code_to_id[code] = new_id
        return new_id

    def _mapped(self, kind: str, index: int) -> int:
        cache = self._maps.setdefault(kind, {})
        if (
            kind == "fills"
            and index in (0, 1)
            and self._has("fills")
            and len(self._records("fills")) >= 2
        ):
            return index  # fills 0 and 1 are reserved (none, gray125) in every workbook
        if index not in cache:
            records = self._gen_records(kind)
            if not 0 <= index < len(records):
                raise _Unexpected(f"generated style refers to missing {kind} record {index}")
            cache[index] = self._find_or_append(kind, copy.deepcopy(records[index]))
        return cache[index]

    def _remap_xf(self, xf: etree._Element, style_xf: bool) -> etree._Element:
        xf = copy.deepcopy(xf)
        for attr, kind in (("fontId", "fonts"), ("fillId", "fills"), ("borderId", "borders")):
            if attr in xf.attrib:
                xf.set(attr, str(self._mapped(kind, int(xf.get(attr)))))
        if "numFmtId" in xf.attrib:
            xf.set("numFmtId", str(self.numfmt(int(xf.get("numFmtId")))))
        if not style_xf and "xfId" in xf.attrib:
            xf.set("xfId", str(self.style_xf(int(xf.get("xfId")))))
        return xf

    def style_xf(self, index: int) -> int:
        """User cellStyleXfs index for generated cellStyleXfs ``index``."""
        cache = self._maps.setdefault("cellStyleXfs", {})
        if index in cache:
            return cache[index]
        gen_styles = self._gen_records("cellStyles")
        style = next((s for s in gen_styles if s.get("xfId") == str(index)), None)
        user_styles = self._records("cellStyles") if self._has("cellStyles") else []
        match = None
        if style is not None:
            for us in user_styles:
                if (
                    style.get("builtinId") is not None
                    and us.get("builtinId") == style.get("builtinId")
                    and us.get("iLevel") == style.get("iLevel")
                ):
                    match = us
                    break
                if style.get("builtinId") is None and us.get("name") == style.get("name"):
                    match = us
                    break
        elif index == 0 and self._has("cellStyleXfs"):
            cache[index] = 0
            return 0
        if match is not None and match.get("xfId", "").isdigit():
            cache[index] = int(match.get("xfId"))
            return cache[index]
        records = self._gen_records("cellStyleXfs")
        if not 0 <= index < len(records):
            raise _Unexpected(f"generated style refers to missing cell style {index}")
        new_index = self._find_or_append("cellStyleXfs", self._remap_xf(records[index], True))
        if style is not None:
            cs = copy.deepcopy(style)
            cs.set("xfId", str(new_index))
            self._container("cellStyles").append(cs)
        cache[index] = new_index
        return new_index

    def cell_xfs(self) -> list[int]:
        """For each generated cellXfs index, the user cellXfs index to use."""
        gen = self._gen_records("cellXfs")
        out = []
        user_count = len(self._records("cellXfs")) if self._has("cellXfs") else 0
        for i, xf in enumerate(gen):
            if i == 0 and user_count:
                out.append(0)  # the default format: take the user's, like unstyled cells
                continue
            out.append(self._find_or_append("cellXfs", self._remap_xf(xf, False)))
        if len(self._records("cellXfs")) > _MAX_CELL_XFS:
            raise CannotMerge("the workbook would exceed Excel's limit on cell formats")
        return out

    def dxfs(self) -> list[int]:
        """For each generated dxf index, the user dxf index to use."""
        out = []
        for dxf in self._gen_records("dxfs"):
            dxf = copy.deepcopy(dxf)
            for nf in dxf.findall(_q(_MAIN, "numFmt")):
                if nf.get("formatCode") is not None:
                    nf.set("numFmtId", str(self.code(nf.get("formatCode"))))
            out.append(self._find_or_append("dxfs", dxf))
        return out

    def finish(self) -> None:
        for name in list(self._containers):
            _set_count(self._containers[name])


# --- generated sheet rewriting -----------------------------------------------------------
# Inside <sheetData> of a generated sheet: '<' only opens tags (text escapes it), so a
# pattern anchored at "<c " or "<row " and not crossing '>' only ever sees a start tag.
_STYLED_TAG = re.compile(rb'(<(?:c|row)\b[^>]*?\ss=")(\d+)"')
_SHARED_CELL = re.compile(rb'<c\b([^>]*?)\st="s"([^>]*)><v>(\d+)</v></c>')
_ANY_SHARED_CELL = re.compile(rb'<c\b[^>]*?\st="s"')


@dataclass
class _SheetEdit:
    """What changes inside a generated sheet part."""

    xf_map: list[int]
    dxf_map: list[int]
    strings: list[bytes]
    keep_selected: bool


def _shared_strings(gen: _Package, gen_wb: _Workbook) -> list[bytes]:
    """Each shared string of the generated workbook as the inner XML of an <is> element."""
    rel = gen_wb.rel_by_type(_RT_SST)
    if not rel:
        return []
    part = gen_wb.part_of(rel[0])
    if part is None:
        return []
    out = []
    decl = f' xmlns="{_MAIN}"'.encode()
    with gen.zf.open(part) as fh:
        for _, si in etree.iterparse(
            fh, tag=_q(_MAIN, "si"), huge_tree=True, resolve_entities=False, no_network=True
        ):
            pieces = []
            for child in si:
                if not isinstance(child.tag, str):
                    continue
                if child.tag == _q(_MAIN, "t"):
                    text = etree.Element(_q(_MAIN, "t"), nsmap={None: _MAIN})
                    text.text = child.text or ""
                    text.set("{http://www.w3.org/XML/1998/namespace}space", "preserve")
                    piece = etree.tostring(text, encoding="UTF-8")
                else:
                    piece = etree.tostring(child, encoding="UTF-8", with_tail=False)
                pieces.append(piece.replace(decl, b"", 1))
            out.append(b"".join(pieces) or b'<t xml:space="preserve"></t>')
            si.clear()
    return out


def _edit_sheet_tree(root: etree._Element, edit: _SheetEdit) -> None:
    """Remap styles and dxfs outside <sheetData>; drop the tab selection."""
    for view in root.iter(_q(_MAIN, "sheetView")):
        if not edit.keep_selected and "tabSelected" in view.attrib:
            del view.attrib["tabSelected"]
    for col in root.iter(_q(_MAIN, "col")):
        if "style" in col.attrib:
            col.set("style", str(edit.xf_map[int(col.get("style"))]))
    for rule in root.iter(_q(_MAIN, "cfRule")):
        if "dxfId" in rule.attrib:
            rule.set("dxfId", str(edit.dxf_map[int(rule.get("dxfId"))]))


def _rows_writer(
    edit: _SheetEdit, dst: IO[bytes], blocks: Mapping[int, CellBlock]
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
                raise _Unexpected("a generated sheet refers to cells that were not given")
            with _Pipe(dst) as out:
                for text in block.rows_xml(xf_of):
                    out.write(text.encode("utf-8"))
            pos = m.end()
        dst.write(rewrite(piece[pos:]))

    return emit


class _Pipe:
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

    def __enter__(self) -> _Pipe:
        self._thread.start()
        return self

    def __exit__(self, *exc: object) -> None:
        self._queue.put(None)
        self._thread.join()
        if self._error is not None and exc[0] is None:
            raise self._error


def _rows_rewriter(edit: _SheetEdit) -> Callable[[bytes], bytes]:
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
            raise _Unexpected("a shared-string cell of a generated sheet is not as expected")
        return _STYLED_TAG.sub(style, block)

    return rewrite


def _split_serialized(root: etree._Element) -> tuple[bytes, bytes]:
    """Serialize a sheet whose <sheetData/> is empty and cut it there: (head, tail)."""
    data = b'<?xml version="1.0" encoding="UTF-8" standalone="yes"?>\r\n' + etree.tostring(
        root, encoding="UTF-8"
    )
    if data.count(b"<sheetData/>") != 1:
        raise _Unexpected("cannot locate the cell data of a generated sheet")
    head, tail = data.split(b"<sheetData/>")
    return head, tail


def _root_name(head: bytes) -> bytes:
    m = re.search(
        rb"<([A-Za-z_][\w.:-]*)[\s>]", re.sub(rb"<\?.*?\?>|<!--.*?-->", b"", head, flags=re.S)
    )
    if m is None:
        raise _Unexpected("a generated sheet has no root element")
    return m.group(1)


def _copy_sheet(
    src: IO[bytes], dst: IO[bytes], edit: _SheetEdit, blocks: Mapping[int, CellBlock]
) -> None:
    """Stream a generated worksheet from ``src`` to ``dst``, rewriting it on the way."""
    buf = b""
    while True:
        start = buf.find(b"<sheetData")
        end = buf.find(b">", start) if start >= 0 else -1
        if end >= 0:
            break
        chunk = src.read(_CHUNK)
        if not chunk:  # a chartsheet or an unusual sheet: small, parse it whole
            root = etree.fromstring(buf, _PARSER)
            _edit_sheet_tree(root, edit)
            dst.write(_serialize(etree.ElementTree(root)))
            return
        buf += chunk
    head = buf[:start]
    empty = buf[end - 1 : end] == b"/"
    buf = buf[end + 1 :]
    root_name = _root_name(head)
    head_root = etree.fromstring(head + b"<sheetData/></" + root_name + b">", _PARSER)
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
            chunk = src.read(_CHUNK)
            if not chunk:
                raise _Unexpected("a generated sheet ends inside its cell data")
            buf += chunk
        dst.write(b"</sheetData>")
    buf += src.read()
    full_root = etree.fromstring(head + b"<sheetData/>" + buf, _PARSER)
    _edit_sheet_tree(full_root, edit)
    _, new_tail = _split_serialized(full_root)
    dst.write(new_tail)


# --- the merge ---------------------------------------------------------------------------
@dataclass
class _NewPart:
    name: str  # in the output package
    source: str  # in the generated package
    kind: str  # "sheet", "rels", "table", "vml", "copy"
    data: bytes | None = None  # rewritten content (None: stream from source)
    edit: _SheetEdit | None = None


_NUMBERED = re.compile(r"^(.*?)(\d*)(\.[^.]*)?$")


class _Names:
    """Free part names in the output package (OPC names compare case-insensitively)."""

    def __init__(self, taken: Iterable[str]):
        self.taken = {t.lower() for t in taken}

    def claim(self, wanted: str, exact_first: bool = False) -> str:
        """A free name like ``wanted`` (same folder, same extension, a number in the stem)."""
        if exact_first and wanted.lower() not in self.taken:
            self.taken.add(wanted.lower())
            return wanted
        directory, base = posixpath.split(wanted)
        m = _NUMBERED.match(base)
        stem, ext = (m.group(1), m.group(3) or "") if m else (base, "")
        k = 1
        while True:
            name = posixpath.join(directory, f"{stem}{k}{ext}")
            if name.lower() not in self.taken and _rels_name(name).lower() not in self.taken:
                self.taken.add(name.lower())
                return name
            k += 1


def _reachable(
    pkg: _Package, starts: Iterable[str], rels_override: dict[str, list[str]]
) -> set[str]:
    seen: set[str] = set()
    todo = list(starts)
    while todo:
        part = todo.pop()
        if part in seen:
            continue
        seen.add(part)
        targets = rels_override.get(part)
        todo.extend(pkg.internal_targets(part) if targets is None else targets)
    return seen


def _shift_index(value: int, removed: list[int]) -> int:
    return value - sum(1 for r in removed if r < value)


def _remove_generated(wb: _Workbook, ct: _ContentTypes) -> tuple[list[str], set[str]]:
    """Remove sheets of an earlier run from ``wb``; return (their names, parts to drop)."""
    indexes = sorted(wb.generated_indexes())
    if not indexes:
        return [], set()
    pkg = wb.pkg
    removed = [wb.sheets[i] for i in indexes]
    names = [s.name for s in removed]
    rel_root = wb.rels_tree.getroot()
    removed_rids = {s.rid for s in removed}
    for rel in list(rel_root):
        if rel.get("Id") in removed_rids:
            rel_root.remove(rel)
    calc = wb.rel_by_type(_RT_CALC_CHAIN)
    for rel in calc:  # stale entries for removed sheets make Excel repair the file
        rel_root.remove(rel)
    for s in removed:
        s.el.getparent().remove(s.el)
    wb.sheets = [s for i, s in enumerate(wb.sheets) if i not in set(indexes)]

    # defined names: drop those scoped to removed sheets, renumber the others
    dn_parent = wb.root.find(_q(_MAIN, "definedNames"))
    for dn in wb.defined_names():
        if "localSheetId" not in dn.attrib:
            continue
        local = int(dn.get("localSheetId"))
        if local in indexes:
            dn.getparent().remove(dn)
        else:
            dn.set("localSheetId", str(_shift_index(local, indexes)))
    if dn_parent is not None and not len(dn_parent):
        wb.root.remove(dn_parent)

    # workbook views: keep pointing at the same sheet; -1 marks "was a removed sheet"
    for view in wb.root.iter(_q(_MAIN, "workbookView")):
        for attr in ("activeTab", "firstSheet"):
            if attr in view.attrib:
                value = int(view.get(attr))
                new = -1 if value in indexes else _shift_index(value, indexes)
                view.set(attr, str(new))
    remaining_ids = {s.sheet_id for s in wb.sheets}
    for view in wb.root.iter(_q(_MAIN, "customWorkbookView")):
        if (
            view.get("activeSheetId", "").isdigit()
            and int(view.get("activeSheetId")) not in remaining_ids
            and wb.sheets
        ):
            view.set("activeSheetId", str(wb.sheets[0].sheet_id))

    # parts only the removed sheets (or the dropped calc chain) used
    wb_targets = [p for p in (wb.part_of(r) for r in rel_root) if p is not None]
    keep = _reachable(pkg, pkg.internal_targets(""), {wb.part: wb_targets})
    starts = [s.part for s in removed if s.part] + [
        p for p in (wb.part_of(r) for r in calc) if p is not None
    ]
    dropped = _reachable(pkg, starts, {}) - keep
    drop = set(dropped)
    for part in dropped:
        rels = pkg.name(_rels_name(part))
        if rels is not None:
            drop.add(rels)
        ct.remove(part)
    return names, drop


def _vml_blocks(pkg: _Package, ct: _ContentTypes, parts: Iterable[str]) -> set[int]:
    used: set[int] = set()
    for part in parts:
        if not part.lower().endswith(".vml") and "vmlDrawing" not in (ct.type_of(part) or ""):
            continue
        for m in re.finditer(rb'idmap\b[^>]*?\bdata="([\d,\s]+)"', pkg.read(part)):
            used.update(int(x) for x in re.split(rb"[,\s]+", m.group(1)) if x)
    return used


def _renumber_vml(data: bytes, mapping: dict[int, int]) -> bytes:
    def idmap(m: re.Match) -> bytes:
        values = [int(x) for x in re.split(rb"[,\s]+", m.group(2)) if x]
        return m.group(1) + ",".join(str(mapping.get(v, v)) for v in values).encode() + b'"'

    def shape(m: re.Match) -> bytes:
        n = int(m.group(1))
        block, offset = divmod(n, 1024)
        return b"_x0000_s" + str(mapping.get(block, block) * 1024 + offset).encode()

    data = re.sub(rb'(idmap\b[^>]*?\bdata=")([\d,\s]+)"', idmap, data)
    return re.sub(rb"_x0000_s(\d+)", shape, data)


def _table_names(pkg: _Package, ct: _ContentTypes, parts: Iterable[str]) -> tuple[set[str], int]:
    names: set[str] = set()
    max_id = 0
    for part in parts:
        if ct.type_of(part) != _CT_TABLE:
            continue
        root = pkg.parse(part).getroot()
        names.add(root.get("name", "").lower())
        names.add(root.get("displayName", "").lower())
        if root.get("id", "").isdigit():
            max_id = max(max_id, int(root.get("id")))
    return names, max_id


def _plan(user: _Package, gen: _Package) -> _Plan:
    """Everything the output needs, computed before a byte is written."""
    wb = _load_workbook(user)
    ct = _ContentTypes(wb.ct_tree)
    try:
        gen_wb = _load_workbook(gen)
    except CannotMerge as exc:
        raise _Unexpected(f"generated workbook: {exc}") from exc
    gen_ct = _ContentTypes(gen_wb.ct_tree)

    replaced, drop = _remove_generated(wb, ct)
    active_removed = any(
        v.get("activeTab") == "-1" for v in wb.root.iter(_q(_MAIN, "workbookView"))
    )

    user_names = {s.name.lower(): s.name for s in wb.sheets}
    for s in gen_wb.sheets:
        if s.name.lower() in user_names:
            raise CannotMerge(
                f"the workbook already has a sheet named "
                f"{user_names[s.name.lower()]!r}: rename it and try again"
            )
        if s.part is None or s.rel_type not in (_RT_WORKSHEET, _RT_CHARTSHEET):
            raise _Unexpected(f"generated sheet {s.name!r} has no worksheet part")

    # styles
    replaced_parts: dict[str, bytes] = {}
    new_parts: list[_NewPart] = []
    names = _Names(n for n in user.by_lower.values() if n not in drop)
    style_rel = wb.rel_by_type(_RT_STYLES)
    gen_style_rel = gen_wb.rel_by_type(_RT_STYLES)
    gen_styles_part = gen_wb.part_of(gen_style_rel[0]) if gen_style_rel else None
    user_styles_part = wb.part_of(style_rel[0]) if style_rel else None
    if gen_styles_part is None:
        raise _Unexpected("generated workbook has no styles part")
    gen_styles = gen.parse(gen_styles_part).getroot()
    rel_root = wb.rels_tree.getroot()
    used_rids = {r.get("Id") for r in rel_root}

    def new_rid() -> str:
        k = 1 + max(
            [0] + [int(r[3:]) for r in used_rids if r and r.startswith("rId") and r[3:].isdigit()]
        )
        while f"rId{k}" in used_rids:
            k += 1
        used_rids.add(f"rId{k}")
        return f"rId{k}"

    if user_styles_part is not None:
        styles_tree = user.parse(user_styles_part)
        merger = _StyleMerger(styles_tree.getroot(), gen_styles)
        xf_map = merger.cell_xfs()
        dxf_map = merger.dxfs()
        merger.finish()
        replaced_parts[user_styles_part] = _serialize(styles_tree)
    else:  # no styles in the user's package: unstyled cells, so take the generated styles
        n_xf = len(gen_styles.findall(f"{_q(_MAIN, 'cellXfs')}/{_q(_MAIN, 'xf')}"))
        n_dxf = len(gen_styles.findall(f"{_q(_MAIN, 'dxfs')}/{_q(_MAIN, 'dxf')}"))
        xf_map, dxf_map = list(range(n_xf)), list(range(n_dxf))
        name = names.claim(posixpath.join(posixpath.dirname(wb.part), "styles.xml"), True)
        new_parts.append(_NewPart(name, gen_styles_part, "copy"))
        rel_root.append(
            rel_root.makeelement(
                _q(_PKG_REL, "Relationship"),
                {"Id": new_rid(), "Type": _RT_STYLES, "Target": _relative(wb.part, name)},
            )
        )
        ct.add(name, _CT_STYLES, True)

    strings = _shared_strings(gen, gen_wb)

    # every part the generated sheets reach gets a new, free name
    gen_sheet_parts = [s.part for s in gen_wb.sheets if s.part]
    reach = _reachable(gen, gen_sheet_parts, {})
    forbidden = {gen_wb.part, gen_styles_part}
    if reach & forbidden:
        raise _Unexpected("a generated sheet points back at the workbook or its styles")
    order = [i.filename for i in gen.infos if i.filename in reach]
    rename = {p: names.claim(p) for p in order}

    kept_user_parts = [n for n in user.by_lower.values() if n not in drop]
    vml_map: dict[int, int] = {}
    used_blocks = _vml_blocks(user, ct, kept_user_parts)
    gen_blocks = sorted(_vml_blocks(gen, gen_ct, order))
    next_block = max(used_blocks, default=0) + 1
    for b in gen_blocks:
        vml_map[b] = next_block
        next_block += 1
    user_tables, max_table = _table_names(user, ct, kept_user_parts)

    base = len(wb.sheets)
    keep_selected = active_removed or not wb.sheets
    for part in order:
        new_name = rename[part]
        ctype = gen_ct.type_of(part)
        if ctype is None:
            raise _Unexpected(f"generated part {part} has no content type")
        ext = posixpath.splitext(part)[1].lstrip(".").lower()
        by_override = part.lower() in gen_ct.overrides() or not ext
        ct.add(new_name, ctype, by_override)
        if part in gen_sheet_parts:
            first = part == gen_sheet_parts[0]
            edit = _SheetEdit(xf_map, dxf_map, strings, keep_selected and first)
            new_parts.append(_NewPart(new_name, part, "sheet", edit=edit))
        elif ctype == _CT_TABLE:
            tree = gen.parse(part)
            root = tree.getroot()
            for attr in ("name", "displayName"):
                if root.get(attr, "").lower() in user_tables:
                    raise CannotMerge(f"the workbook already has a table named {root.get(attr)!r}")
            max_table += 1
            root.set("id", str(max_table))
            for el in root.iter():
                for attr in _TABLE_DXF_ATTRS:
                    if attr in el.attrib:
                        el.set(attr, str(dxf_map[int(el.get(attr))]))
            new_parts.append(_NewPart(new_name, part, "table", data=_serialize(tree)))
        elif part.lower().endswith(".vml") and vml_map:
            new_parts.append(
                _NewPart(new_name, part, "vml", data=_renumber_vml(gen.read(part), vml_map))
            )
        else:
            new_parts.append(_NewPart(new_name, part, "copy"))
        rels = gen.name(_rels_name(part))
        if rels is not None:
            tree = gen.parse(rels)
            for rel in tree.getroot():
                if rel.get("TargetMode") == "External" or "Target" not in rel.attrib:
                    continue
                target = gen.name(_resolve(part, rel.get("Target")))
                if target is None or target not in rename:
                    raise _Unexpected(f"generated part {part} points at a missing part")
                rel.set("Target", _relative(new_name, rename[target]))
            new_parts.append(_NewPart(_rels_name(new_name), rels, "rels", data=_serialize(tree)))

    # register the sheets in the workbook
    sheets_el = wb.root.find(_q(_MAIN, "sheets"))
    # reusing the ids of removed sheets keeps re-runs identical; the one part that names
    # sheets by id, the calculation chain, is dropped whenever sheets are removed
    max_sheet_id = max([0] + [s.sheet_id for s in wb.sheets])
    for s in gen_wb.sheets:
        if s.part is None:  # refused above already
            raise _Unexpected(f"generated sheet {s.name} has no part")
        rid = new_rid()
        max_sheet_id += 1
        attrs = {"name": s.name, "sheetId": str(max_sheet_id)}
        if s.el.get("state"):
            attrs["state"] = s.el.get("state")
        el = sheets_el.makeelement(_q(_MAIN, "sheet"), attrs)
        el.set(_q(_DOC_REL, "id"), rid)
        sheets_el.append(el)
        rel_root.append(
            rel_root.makeelement(
                _q(_PKG_REL, "Relationship"),
                {"Id": rid, "Type": s.rel_type, "Target": _relative(wb.part, rename[s.part])},
            )
        )

    dn_parent = _insert_ordered(wb.root, _MAIN, "definedNames", _WORKBOOK_ORDER)
    user_globals = {
        dn.get("name", "").lower(): (dn.text or "")
        for dn in wb.defined_names()
        if "localSheetId" not in dn.attrib
    }
    for dn in gen_wb.defined_names():
        new = copy.deepcopy(dn)
        if "localSheetId" in dn.attrib:
            new.set("localSheetId", str(base + int(dn.get("localSheetId"))))
        else:
            existing = user_globals.get(dn.get("name", "").lower())
            if existing is not None:
                if existing == (dn.text or ""):
                    continue
                raise CannotMerge(f"the workbook already defines the name {dn.get('name')!r}")
        dn_parent.append(new)
    for i in range(len(gen_wb.sheets)):
        mark = dn_parent.makeelement(
            _q(_MAIN, "definedName"),
            {"name": GENERATED_MARK, "localSheetId": str(base + i), "hidden": "1"},
        )
        mark.text = _MARK_VALUE
        dn_parent.append(mark)

    for view in wb.root.iter(_q(_MAIN, "workbookView")):
        if view.get("activeTab") == "-1":
            view.set("activeTab", str(base))
        if view.get("firstSheet") == "-1":
            view.set("firstSheet", "0")

    replaced_parts[wb.part] = _serialize(wb.tree)
    ct_part = user.name("[Content_Types].xml")
    if ct_part is None:  # read at the start, so always there
        raise _Unexpected("part [Content_Types].xml is missing")
    replaced_parts[ct_part] = _serialize(wb.ct_tree)
    rels_bytes = _serialize(wb.rels_tree)
    if user.has(wb.rels_part):
        replaced_parts[wb.rels_part] = rels_bytes
    else:  # a workbook without relationships gets its first ones
        new_parts.insert(0, _NewPart(wb.rels_part, "", "rels", data=rels_bytes))
    return _Plan(replaced, drop, replaced_parts, new_parts, [s.name for s in gen_wb.sheets])


@dataclass
class _Plan:
    replaced: list[str]  # generated sheets of an earlier run, removed
    drop: set[str]  # user parts left out (exclusively owned by those sheets)
    replaced_parts: dict[str, bytes]  # user parts rewritten
    new_parts: list[_NewPart]  # parts added
    sheet_names: list[str]  # generated sheets added


#: Deflate level for the parts we write. Level 1 compresses sheet XML some four times
#: faster than the default 6 for files about 8 % larger (measured on a 100,000-item Policy
#: sheet); the big sheets are written in seconds rather than tens of seconds.
_GENERATED_LEVEL = 1


#: Deflate threads for the big generated sheets (zlib releases the interpreter lock).
_DEFLATE_THREADS = max(1, min(4, os.cpu_count() or 1))
#: Input per deflate job, and how many jobs may wait for their turn to be written.
_DEFLATE_PIECE = 1 << 22
_DEFLATE_AHEAD = 8
_WINDOW = 1 << 15  # deflate's window: the dictionary a piece is primed with (< a piece)


class _ParallelDeflate:
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
        for start in range(0, len(view), _DEFLATE_PIECE):
            # the 32 KB of input before the piece (a piece is longer than that)
            primer = bytes(view[start - _WINDOW : start]) if start else self._window
            self._pending.append(
                self._pool.submit(self._deflate, view[start : start + _DEFLATE_PIECE], primer)
            )
        self._window = (
            bytes(view[-_WINDOW:])
            if len(view) >= _WINDOW
            else (self._window + bytes(view))[-_WINDOW:]
        )
        done = []
        while self._pending and (len(self._pending) > _DEFLATE_AHEAD or self._pending[0].done()):
            done.append(self._pending.popleft().result())
        return b"".join(done)

    def flush(self) -> bytes:
        done = [f.result() for f in self._pending]
        self._pending.clear()
        return b"".join(done) + zlib.compressobj(self._level, zlib.DEFLATED, -15).flush()


def _deflate_in_threads(dst: IO[bytes], pool: concurrent.futures.Executor | None) -> None:
    """Give zip entry ``dst`` (being written, nothing yet) a :class:`_ParallelDeflate`.

    Python's zipfile has no public hook for it: its writer calls ``compress`` and
    ``flush`` of its ``_compressor``; when that is not as expected, nothing changes.
    """
    if pool is None or getattr(dst, "_file_size", None) != 0:
        return
    current = getattr(dst, "_compressor", None)
    if current is not None and type(current).__name__ == "Compress":
        # private zipfile attribute (checked just above), unknown to the type stubs
        dst._compressor = _ParallelDeflate(pool, _GENERATED_LEVEL)  # type: ignore[attr-defined]


def _zip_info(name: str, like: zipfile.ZipInfo | None) -> zipfile.ZipInfo:
    if like is None:
        info = zipfile.ZipInfo(name, date_time=(1980, 1, 1, 0, 0, 0))
        info.compress_type = zipfile.ZIP_DEFLATED
        # private, unknown to the type stubs; zipfile reads it when the part is opened
        info._compresslevel = _GENERATED_LEVEL  # type: ignore[attr-defined]
        return info
    info = zipfile.ZipInfo(name, date_time=like.date_time)
    info.compress_type = (
        zipfile.ZIP_STORED if like.compress_type == zipfile.ZIP_STORED else zipfile.ZIP_DEFLATED
    )
    info.external_attr = like.external_attr
    return info


_DAMAGED: tuple[type[BaseException], ...] = (
    OSError,
    zipfile.BadZipFile,
    *fastzlib.ERRORS,
    EOFError,
    ValueError,
    NotImplementedError,
)
#: What reading a local file header raises when it is damaged.
_DAMAGED_HEADER: tuple[type[BaseException], ...] = (*_DAMAGED, struct.error)
_LOCAL_HEADER = struct.Struct("<4s22xHH")  # signature, ..., name length, extra length


def _copy_user_part(
    user: _Package,
    info: zipfile.ZipInfo,
    zout: zipfile.ZipFile,
    target: zipfile.ZipInfo,
    checker: _Checker | None = None,
) -> None:
    """Copy one of the user's parts unchanged; a part that cannot be read is _Unexpected.

    Reading errors (a damaged entry: bad offsets, CRC, deflate data) are told apart from
    writing errors, which stay OSError (a full disk, a locked output). With ``checker``,
    a part copied as raw bytes is checked there (see _Checker), else here.
    """
    if _can_copy_raw(user.zf, info, zout):
        start = _copy_raw(user.zf, info, zout, target)
        if checker is not None:
            checker.check(info, start)
        else:
            _check_raw(user.zf.fp, info, start)
        return
    damaged = _DAMAGED
    try:
        src = user.zf.open(info)
    except damaged as exc:
        raise _Unexpected(f"its part {info.filename} cannot be read ({exc})") from exc
    with src, zout.open(target, "w") as dst:
        while True:
            try:
                chunk = src.read(_CHUNK)
            except damaged as exc:
                raise _Unexpected(f"its part {info.filename} cannot be read ({exc})") from exc
            if not chunk:
                break
            dst.write(chunk)


def _can_copy_raw(zin: zipfile.ZipFile, info: zipfile.ZipInfo, zout: zipfile.ZipFile) -> bool:
    """Whether the part's compressed bytes can be copied as they are (see _copy_raw)."""
    return (
        info.compress_type in (zipfile.ZIP_STORED, zipfile.ZIP_DEFLATED)
        and not info.flag_bits & 0x1  # not encrypted
        and all(
            hasattr(zout, a) for a in ("fp", "start_dir", "filelist", "NameToInfo", "_writecheck")
        )
        and hasattr(zin, "fp")
        and zin.fp is not None
        and zout.fp is not None
        and not getattr(zout, "_writing", False)
    )


def _copy_raw(
    zin: zipfile.ZipFile, info: zipfile.ZipInfo, zout: zipfile.ZipFile, target: zipfile.ZipInfo
) -> int:
    """Copy a part's compressed bytes into ``zout`` without inflating and deflating them.

    Re-compressing the user's parts was most of the time the splice took on a big workbook
    (the History sheet of 100,000 items is some 200 MB of XML). The bytes must still be
    inflated, only to check them against the part's CRC and size, so that a damaged part
    is found as before (_check_raw); this returns where the part's data starts in the
    user's file, for that check. Python's zipfile has no public call for this, so its
    writer's bookkeeping is done here as its own ``write`` does it.
    """
    fp, out_fp = zin.fp, zout.fp
    if fp is None or out_fp is None:  # _can_copy_raw saw both open
        raise _Unexpected(f"its part {info.filename} cannot be read (the file is closed)")
    try:
        fp.seek(info.header_offset)
        sig, n_name, n_extra = _LOCAL_HEADER.unpack(fp.read(_LOCAL_HEADER.size))
        if sig != b"PK\x03\x04":
            raise zipfile.BadZipFile("bad local file header")
        start = info.header_offset + _LOCAL_HEADER.size + n_name + n_extra
        fp.seek(start)
    except _DAMAGED_HEADER as exc:
        raise _Unexpected(f"its part {info.filename} cannot be read ({exc})") from exc
    out = zipfile.ZipInfo(target.filename, date_time=target.date_time)
    out.compress_type = info.compress_type
    out.external_attr = target.external_attr
    out.CRC, out.file_size, out.compress_size = info.CRC, info.file_size, info.compress_size
    zip64 = max(info.file_size, info.compress_size) > zipfile.ZIP64_LIMIT
    # private zipfile API, as ZipFile.write uses it (see _can_copy_raw); not in the stubs
    zout._writecheck(out)  # type: ignore[attr-defined]
    out_fp.seek(zout.start_dir)
    out.header_offset = out_fp.tell()
    zout._didModify = True  # type: ignore[attr-defined]
    out_fp.write(out.FileHeader(zip64))
    left = info.compress_size
    while left > 0:
        try:
            chunk = fp.read(min(_CHUNK, left))
            if not chunk:
                raise EOFError("the part ends early")
        except _DAMAGED as exc:
            raise _Unexpected(f"its part {info.filename} cannot be read ({exc})") from exc
        left -= len(chunk)
        out_fp.write(chunk)
    zout.start_dir = out_fp.tell()
    zout.filelist.append(out)
    zout.NameToInfo[out.filename] = out
    return start


def _check_raw(fp: IO[bytes] | None, info: zipfile.ZipInfo, start: int) -> None:
    """Inflate a part's data at ``start`` of ``fp``; _Unexpected unless its CRC and size hold."""
    if fp is None:  # the user's file was closed under us
        raise _Unexpected(f"its part {info.filename} cannot be read (the file is closed)")
    deflated = info.compress_type == zipfile.ZIP_DEFLATED
    inflate = fastzlib.decompressobj() if deflated else None  # ISA-L where installed
    crc, size, left = 0, 0, info.compress_size
    try:
        fp.seek(start)
        while left > 0:
            chunk = fp.read(min(_CHUNK, left))
            if not chunk:
                raise EOFError("the part ends early")
            plain = inflate.decompress(chunk) if inflate is not None else chunk
            crc, size, left = fastzlib.crc32(plain, crc), size + len(plain), left - len(chunk)
        if inflate is not None:
            rest = inflate.flush()
            crc, size = fastzlib.crc32(rest, crc), size + len(rest)
    except _DAMAGED as exc:
        raise _Unexpected(f"its part {info.filename} cannot be read ({exc})") from exc
    if inflate is not None and not inflate.eof:
        raise _Unexpected(f"its part {info.filename} cannot be read (truncated data)")
    if crc != info.CRC or size != info.file_size:
        raise _Unexpected(f"its part {info.filename} cannot be read (bad CRC or size)")


class _Checker:
    """Checks the user's raw-copied parts (_check_raw) in a thread of its own.

    Inflating the user's big sheets only to check their CRCs took half a second of the
    splice on a 100,000-item workbook; zlib releases the interpreter lock, so on two cores
    the check runs beside the rendering of the generated sheets. It reads the user's file
    through a handle of its own. :meth:`finish` waits for it and raises the first damaged
    part's _Unexpected, before the output is complete (atomic_output then drops it).
    """

    def __init__(self, path: str | Path) -> None:
        self._path = path
        self._queue: queue.Queue[tuple[zipfile.ZipInfo, int] | None] = queue.Queue()
        self._error: BaseException | None = None
        self._cancelled = False
        self._thread = threading.Thread(target=self._run, name="xlpolicy-check", daemon=True)

    def _run(self) -> None:
        try:
            with open(self._path, "rb") as fh:
                while True:
                    task = self._queue.get()
                    if task is None:
                        return
                    if not self._cancelled:
                        _check_raw(fh, *task)
        except BaseException as exc:  # handed to the caller, not lost in the thread
            self._error = exc
            while self._queue.get() is not None:  # let the caller's puts and stop go on
                pass

    def check(self, info: zipfile.ZipInfo, start: int) -> None:
        """Queue the check of a part whose data starts at ``start``."""
        if self._error is not None:
            raise self._error
        self._queue.put((info, start))

    def finish(self) -> None:
        """Wait for every queued check; raise the first failure."""
        self._stop()
        if self._error is not None:
            raise self._error

    def _stop(self) -> None:
        if self._thread.is_alive():
            self._queue.put(None)
            self._thread.join()

    def __enter__(self) -> _Checker:
        self._thread.start()
        return self

    def __exit__(self, *exc: object) -> None:
        if exc[0] is not None:  # the caller failed: skip what is queued
            self._cancelled = True
        self._stop()


def _write(
    out: Path, user: _Package, gen: _Package, plan: _Plan, blocks: Mapping[int, CellBlock]
) -> int:
    """Write the output package; return how many user parts were copied unchanged."""
    drop, replaced_parts, new_parts = plan.drop, plan.replaced_parts, plan.new_parts
    kept = 0
    path = getattr(user.zf, "filename", None)
    with (
        zipfile.ZipFile(out, "w", allowZip64=True) as zout,
        _Checker(path) if path else contextlib.nullcontext() as checker,
        concurrent.futures.ThreadPoolExecutor(_DEFLATE_THREADS, "xlpolicy-deflate") as pool,
    ):
        for info in user.infos:
            if info.filename in drop:
                continue
            target = _zip_info(info.filename, info)
            if info.filename in replaced_parts:
                zout.writestr(target, replaced_parts[info.filename])
                continue
            if info.is_dir():
                zout.writestr(target, b"")
                continue
            target.file_size = info.file_size
            _copy_user_part(user, info, zout, target, checker)
            kept += 1
        for part in new_parts:
            target = _zip_info(part.name, None)
            if part.data is not None:
                zout.writestr(target, part.data)
                continue
            source = gen.zf.getinfo(part.source)
            big = source.file_size * 3 > zipfile.ZIP64_LIMIT
            with gen.zf.open(source) as src, zout.open(target, "w", force_zip64=big) as dst:
                if part.kind == "sheet" and part.edit is not None:
                    _deflate_in_threads(dst, pool)
                    _copy_sheet(src, dst, part.edit, blocks)
                else:
                    shutil.copyfileobj(src, dst, _CHUNK)
        if checker is not None:
            checker.finish()
    return kept


def user_sheet_names(path: Path) -> list[str]:
    """Sheet names of the user's workbook, excluding sheets generated by an earlier xlpolicy run.

    Raises :class:`CannotMerge` when the file cannot take generated sheets at all.
    """
    path = Path(path)
    zf = _open_package(path, path.name)
    try:
        with zf:
            wb = _load_workbook(_Package(zf, path.name))
            generated = wb.generated_indexes()
            return [s.name for i, s in enumerate(wb.sheets) if i not in generated]
    except CannotMerge:
        raise
    except Exception as exc:
        raise CannotMerge(f"{path.name} cannot be read as a workbook package ({exc})") from exc


def merge_generated_sheets(
    user_path: Path,
    generated_path: Path,
    out_path: Path,
    blocks: Mapping[int, CellBlock] | None = None,
) -> MergeResult:
    """Write out_path = the user's package + the generated workbook's sheets appended after the
    user's sheets.

    ``blocks``: the deferred cell blocks of the generated sheets, by number
    (writing/bulk.py), rendered here in their markers' places.

    Generated sheets of an earlier run (recognised by :data:`GENERATED_MARK`) are replaced.
    ``user_path`` is only read. Raises :class:`CannotMerge` when the user's package cannot
    take the sheets intact, :class:`~xlpolicy.writing.atomic.OutputLocked` when ``out_path``
    cannot be replaced, and ValueError when ``out_path`` is the input itself.
    """
    user_path, generated_path, out_path = Path(user_path), Path(generated_path), Path(out_path)
    if out_path.exists() and out_path.resolve() == user_path.resolve():
        raise ValueError("the output file must not be the input workbook")
    user_zf = _open_package(user_path, user_path.name)
    with user_zf:
        try:
            gen_zf = zipfile.ZipFile(generated_path)
        except (zipfile.BadZipFile, OSError) as exc:
            raise CannotMerge(f"the generated sheets cannot be read ({exc})") from exc
        with gen_zf:
            try:
                user = _Package(user_zf, user_path.name)
                gen = _Package(gen_zf, "the generated workbook")
                plan = _plan(user, gen)
            except CannotMerge:
                raise
            except (_Unexpected, etree.XMLSyntaxError) as exc:
                raise CannotMerge(f"{user_path.name}: {exc}") from exc
            except Exception as exc:  # anything unexpected while reading: no traceback
                raise CannotMerge(
                    f"{user_path.name} has content this tool cannot handle "
                    f"({type(exc).__name__}: {exc})"
                ) from exc
            try:
                with atomic_output(out_path) as tmp:
                    kept = _write(tmp, user, gen, plan, blocks or {})
            except (OutputLocked, OSError):
                raise
            except (
                _Unexpected,
                etree.XMLSyntaxError,
                zipfile.BadZipFile,
                zlib.error,
                EOFError,
                KeyError,
                IndexError,
                ValueError,
            ) as exc:
                raise CannotMerge(f"{user_path.name}: {exc}") from exc
    return MergeResult(sheet_names=plan.sheet_names, replaced=plan.replaced, kept_parts=kept)
