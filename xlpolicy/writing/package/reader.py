"""Read access to a zip package: its parts by name, their relationships, what they reach.

Part names in a package compare case-insensitively (ECMA-376 Part 2, 9.1.1.1), so every
lookup here goes through a lower-cased index; a package holding one name twice is refused.
"""

from __future__ import annotations

import zipfile
from collections.abc import Iterable
from pathlib import Path

from lxml import etree

from .errors import CannotMerge, Unexpected
from .opc import PARSER, PKG_REL, qn, rels_name, resolve

#: The first bytes of a compound file (an encrypted package or an old .xls).
_CFB_SIGNATURE = b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1"


class Package:
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
            raise Unexpected(f"part {part} is missing")
        return self.zf.read(real)

    def parse(self, part: str) -> etree._ElementTree:
        return etree.ElementTree(etree.fromstring(self.read(part), PARSER))

    def rels(self, part: str) -> list[dict[str, str]]:
        """Relationships of ``part`` as dicts (Id, Type, Target, TargetMode)."""
        if part not in self._rels_cache:
            rels_part = rels_name(part)
            out: list[dict[str, str]] = []
            if self.has(rels_part):
                root = self.parse(rels_part).getroot()
                for rel in root.iter(qn(PKG_REL, "Relationship")):
                    out.append(dict(rel.attrib))
            self._rels_cache[part] = out
        return self._rels_cache[part]

    def internal_targets(self, part: str) -> list[str]:
        """Existing parts that ``part`` points at (external targets and dangling ones left out)."""
        out = []
        for rel in self.rels(part):
            if rel.get("TargetMode") == "External" or "Target" not in rel:
                continue
            target = self.name(resolve(part, rel["Target"]))
            if target is not None:
                out.append(target)
        return out


def open_package(path: Path, label: str) -> zipfile.ZipFile:
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


def reachable(pkg: Package, starts: Iterable[str], rels_override: dict[str, list[str]]) -> set[str]:
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
