"""Names and numbers the generated parts take so they clash with nothing of the user's.

Each part the generated sheets bring gets a free part name (:class:`Names`); their legacy
drawing shapes get free shape-id blocks (:func:`renumber_vml`); their tables get ids
above the user's, and a table whose name the user already has is refused
(:func:`table_names` collects the user's).
"""

from __future__ import annotations

import posixpath
import re
from collections.abc import Iterable

from .content_types import ContentTypes
from .opc import CT_TABLE, rels_name
from .reader import Package

_NUMBERED = re.compile(r"^(.*?)(\d*)(\.[^.]*)?$")


class Names:
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
            if name.lower() not in self.taken and rels_name(name).lower() not in self.taken:
                self.taken.add(name.lower())
                return name
            k += 1


def vml_blocks(pkg: Package, ct: ContentTypes, parts: Iterable[str]) -> set[int]:
    used: set[int] = set()
    for part in parts:
        if not part.lower().endswith(".vml") and "vmlDrawing" not in (ct.type_of(part) or ""):
            continue
        for m in re.finditer(rb'idmap\b[^>]*?\bdata="([\d,\s]+)"', pkg.read(part)):
            used.update(int(x) for x in re.split(rb"[,\s]+", m.group(1)) if x)
    return used


def renumber_vml(data: bytes, mapping: dict[int, int]) -> bytes:
    def idmap(m: re.Match) -> bytes:
        values = [int(x) for x in re.split(rb"[,\s]+", m.group(2)) if x]
        return m.group(1) + ",".join(str(mapping.get(v, v)) for v in values).encode() + b'"'

    def shape(m: re.Match) -> bytes:
        n = int(m.group(1))
        block, offset = divmod(n, 1024)
        return b"_x0000_s" + str(mapping.get(block, block) * 1024 + offset).encode()

    data = re.sub(rb'(idmap\b[^>]*?\bdata=")([\d,\s]+)"', idmap, data)
    return re.sub(rb"_x0000_s(\d+)", shape, data)


def table_names(pkg: Package, ct: ContentTypes, parts: Iterable[str]) -> tuple[set[str], int]:
    names: set[str] = set()
    max_id = 0
    for part in parts:
        if ct.type_of(part) != CT_TABLE:
            continue
        root = pkg.parse(part).getroot()
        names.add(root.get("name", "").lower())
        names.add(root.get("displayName", "").lower())
        if root.get("id", "").isdigit():
            max_id = max(max_id, int(root.get("id")))
    return names, max_id
