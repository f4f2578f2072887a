"""The vocabulary of the workbook package format, and small helpers over part names and XML.

An .xlsx/.xlsm file is a zip package of parts tied together by relationship parts, as the
Open Packaging Conventions say (ECMA-376 Part 2); the spreadsheet parts and their
namespaces are SpreadsheetML's (ECMA-376 Part 1). Here are the namespaces and relationship
types this subpackage needs, how a relationship target resolves to a part name and back,
how a parsed part is serialised again, and how a child element is put at its schema place.
"""

from __future__ import annotations

import posixpath
from urllib.parse import unquote

from lxml import etree

# --- namespaces and relationship types -------------------------------------------------
MAIN = "http://schemas.openxmlformats.org/spreadsheetml/2006/main"
STRICT_MAIN = "http://purl.oclc.org/ooxml/spreadsheetml/main"
PKG_REL = "http://schemas.openxmlformats.org/package/2006/relationships"
CT_NS = "http://schemas.openxmlformats.org/package/2006/content-types"
DOC_REL = "http://schemas.openxmlformats.org/officeDocument/2006/relationships"
STRICT_DOC_REL = "http://purl.oclc.org/ooxml/officeDocument/relationships"
RT_OFFICE = DOC_REL + "/officeDocument"
RT_STRICT_OFFICE = STRICT_DOC_REL + "/officeDocument"
RT_STYLES = DOC_REL + "/styles"
RT_SST = DOC_REL + "/sharedStrings"
RT_CALC_CHAIN = DOC_REL + "/calcChain"
RT_WORKSHEET = DOC_REL + "/worksheet"
RT_CHARTSHEET = DOC_REL + "/chartsheet"
CT_TABLE = "application/vnd.openxmlformats-officedocument.spreadsheetml.table+xml"
CT_STYLES = "application/vnd.openxmlformats-officedocument.spreadsheetml.styles+xml"

#: Bytes read or written at a time when a part is streamed.
CHUNK = 1 << 20

PARSER = etree.XMLParser(resolve_entities=False, no_network=True, huge_tree=True)


def qn(ns: str, name: str) -> str:
    return f"{{{ns}}}{name}"


def local_name(el: etree._Element) -> str:
    return etree.QName(el).localname if isinstance(el.tag, str) else ""


def rels_name(part: str) -> str:
    """Name of the relationships part of ``part`` ('' is the package itself)."""
    directory, base = posixpath.split(part)
    return posixpath.join(directory, "_rels", base + ".rels")


def resolve(source: str, target: str) -> str:
    """Absolute part name (no leading '/') of a relationship target seen from ``source``."""
    target = unquote(target.split("#", 1)[0])
    if target.startswith("/"):
        return posixpath.normpath(target[1:])
    return posixpath.normpath(posixpath.join(posixpath.dirname(source), target))


def relative(source: str, target: str) -> str:
    """Relationship target naming part ``target`` as seen from part ``source``."""
    return posixpath.relpath(target, posixpath.dirname(source) or ".")


def serialize(tree: etree._ElementTree) -> bytes:
    """XML bytes with a double-quoted declaration, prefixes and namespaces as parsed."""
    standalone = tree.docinfo.standalone
    decl = '<?xml version="1.0" encoding="UTF-8"'
    if standalone:  # absent and "no" mean the same (XML 1.0, 2.9)
        decl += ' standalone="yes"'
    decl += "?>\r\n"
    return decl.encode() + etree.tostring(tree.getroot(), encoding="UTF-8")


def insert_ordered(parent: etree._Element, ns: str, name: str, order: list[str]) -> etree._Element:
    """Return child ``name`` of ``parent``, creating it at its schema position if absent."""
    found = parent.find(qn(ns, name))
    if found is not None:
        return found
    new = parent.makeelement(qn(ns, name), {})
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


def set_count(container: etree._Element) -> None:
    if "count" in container.attrib or len(container):
        container.set("count", str(sum(1 for c in container if isinstance(c.tag, str))))
