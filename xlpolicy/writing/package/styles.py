"""Merging the generated workbook's style records into the user's styles part.

The generated sheets refer to their formats by index into their own styles part. Each
record they use (number format, font, fill, border, cell style, cell format, differential
format) is looked up in the user's styles by its structure and appended when missing, and
:class:`StyleMerger` hands back, per generated index, the index to use in the output. The
user's records are never changed or renumbered, so the user's own cells look as before.
"""

from __future__ import annotations

import copy

from lxml import etree

from .errors import CannotMerge, Unexpected
from .opc import MAIN, insert_ordered, local_name, qn, set_count

#: Number format ids from here up are the workbook's own (ECMA-376 Part 1, 18.8.30).
_FIRST_CUSTOM_NUMFMT = 164
_MAX_CELL_XFS = 65490  # Excel's limit on cell formats per workbook


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

# Child order of <styleSheet> (ECMA-376 Part 1, CT_Stylesheet).
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


def _style_key(el: etree._Element) -> tuple:
    """Structural identity of a style record (attribute order and whitespace ignored)."""
    children = tuple(_style_key(c) for c in el if isinstance(c.tag, str))
    text = (el.text or "").strip()
    return (el.tag, tuple(sorted(el.attrib.items())), text, children)


class StyleMerger:
    """Append the generated workbook's style records to the user's and map indexes."""

    def __init__(self, user: etree._Element, gen: etree._Element):
        self.user = user
        self.gen = gen
        self._containers: dict[str, etree._Element] = {}
        self._keys: dict[str, dict[tuple, int]] = {}
        self._maps: dict[str, dict[int, int]] = {}
        self.gen_numfmts = {
            int(n.get("numFmtId", "0")): n.get("formatCode", "")
            for n in gen.iter(qn(MAIN, "numFmt"))
            if n.getparent() is not None and local_name(n.getparent()) == "numFmts"
        }
        numfmts = user.find(qn(MAIN, "numFmts"))
        self.user_numfmts: dict[int, str] = {}
        if numfmts is not None:
            for n in numfmts.findall(qn(MAIN, "numFmt")):
                self.user_numfmts[int(n.get("numFmtId", "0"))] = n.get("formatCode", "")
        self.code_to_id: dict[str, int] = {}
        for num_id, code in self.user_numfmts.items():
            self.code_to_id.setdefault(code, num_id)

    def _container(self, name: str) -> etree._Element:
        if name not in self._containers:
            self._containers[name] = insert_ordered(self.user, MAIN, name, _STYLE_ORDER)
        return self._containers[name]

    def _has(self, name: str) -> bool:
        """Whether the user's styles hold at least one record of kind ``name``."""
        el = self.user.find(qn(MAIN, name))
        return el is not None and any(isinstance(c.tag, str) for c in el)

    def _records(self, name: str) -> list[etree._Element]:
        return [c for c in self._container(name) if isinstance(c.tag, str)]

    def _gen_records(self, name: str) -> list[etree._Element]:
        el = self.gen.find(qn(MAIN, name))
        return [] if el is None else [c for c in el if isinstance(c.tag, str)]

    def _find_or_append(self, container: str, record: etree._Element) -> int:
        keys = self._keys.get(container)
        if keys is None:
            keys = {}
            for i, rec in enumerate(self._records(container)):
                keys.setdefault(_style_key(rec), i)
            self._keys[container] = keys
        key = _style_key(record)
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
            container.makeelement(qn(MAIN, "numFmt"), {"numFmtId": str(new_id), "formatCode": code})
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
                raise Unexpected(f"generated style refers to missing {kind} record {index}")
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
            raise Unexpected(f"generated style refers to missing cell style {index}")
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
            for nf in dxf.findall(qn(MAIN, "numFmt")):
                if nf.get("formatCode") is not None:
                    nf.set("numFmtId", str(self.code(nf.get("formatCode"))))
            out.append(self._find_or_append("dxfs", dxf))
        return out

    def finish(self) -> None:
        for name in list(self._containers):
            set_count(self._containers[name])
