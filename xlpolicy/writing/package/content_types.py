"""The package's content types part: which part is of which type, by default or override.

``[Content_Types].xml`` gives a type per file extension (Default) and per part
(Override) (ECMA-376 Part 2, 10.1.2); a part added here is registered the way its
source package registered it.
"""

from __future__ import annotations

import posixpath

from lxml import etree

from .opc import CT_NS, qn


class ContentTypes:
    def __init__(self, tree: etree._ElementTree):
        self.tree = tree
        self.root = tree.getroot()

    def defaults(self) -> dict[str, str]:
        return {
            d.get("Extension", "").lower(): d.get("ContentType", "")
            for d in self.root.findall(qn(CT_NS, "Default"))
        }

    def overrides(self) -> dict[str, etree._Element]:
        return {
            o.get("PartName", "").lstrip("/").lower(): o
            for o in self.root.findall(qn(CT_NS, "Override"))
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
                qn(CT_NS, "Default"), {"Extension": ext, "ContentType": content_type}
            )
            last = self.root.findall(qn(CT_NS, "Default"))
            if last:
                last[-1].addnext(new)
            else:
                self.root.insert(0, new)
            return
        self.remove(part)
        self.root.append(
            self.root.makeelement(
                qn(CT_NS, "Override"), {"PartName": "/" + part, "ContentType": content_type}
            )
        )
