"""What the output package will hold, decided in full before a byte of it is written.

:func:`make_plan` reads both packages (the user's and the generated one) and returns a
:class:`Plan`: which user parts are left out or rewritten, and which parts are added under
which names. It runs in named stages over one :class:`_Draft`, in this order (the order
is part of the result: it fixes the relationship ids, part names and the order of the
content-type entries):

1. open both workbooks and take out the sheets of an earlier run (:func:`_open`);
2. merge the generated styles into the user's (:func:`_merge_styles`);
3. give every part the generated sheets reach a free name (:func:`_rename_parts`);
4. plan each of those parts, rewritten where it must be (:func:`_add_parts`);
5. list the new sheets in the workbook (:func:`_register_sheets`), add their defined
   names and marks (:func:`_add_defined_names`), and point the views (:func:`_fix_views`);
6. serialise the rewritten workbook, content types and relationships (:func:`_finish`).
"""

from __future__ import annotations

import copy
import posixpath
from dataclasses import dataclass, field

from lxml import etree

from .content_types import ContentTypes
from .errors import CannotMerge, Unexpected
from .opc import (
    CT_STYLES,
    CT_TABLE,
    DOC_REL,
    MAIN,
    PKG_REL,
    RT_CHARTSHEET,
    RT_STYLES,
    RT_WORKSHEET,
    insert_ordered,
    qn,
    relative,
    rels_name,
    resolve,
    serialize,
)
from .reader import Package, reachable
from .removal import remove_generated
from .renaming import Names, renumber_vml, table_names, vml_blocks
from .sheet_stream import SheetEdit, shared_strings
from .styles import StyleMerger
from .workbook import GENERATED_MARK, MARK_VALUE, WORKBOOK_ORDER, Workbook, load_workbook

# Attributes of a table part that name a differential format (ECMA-376 Part 1, CT_Table).
_TABLE_DXF_ATTRS = (
    "headerRowDxfId",
    "dataDxfId",
    "totalsRowDxfId",
    "headerRowBorderDxfId",
    "tableBorderDxfId",
    "totalsRowBorderDxfId",
)


@dataclass
class NewPart:
    """A part the output gains: copied from the generated package, or written as given."""

    name: str  # in the output package
    source: str  # in the generated package
    kind: str  # "sheet", "rels", "table", "vml", "copy"
    data: bytes | None = None  # rewritten content (None: stream from source)
    edit: SheetEdit | None = None


@dataclass
class Plan:
    """What :func:`make_plan` decided; the writer follows it to the letter."""

    replaced: list[str]  # generated sheets of an earlier run, removed
    drop: set[str]  # user parts left out (exclusively owned by those sheets)
    replaced_parts: dict[str, bytes]  # user parts rewritten
    new_parts: list[NewPart]  # parts added
    sheet_names: list[str]  # generated sheets added


@dataclass
class _Draft:
    """The plan being made: both workbooks as parsed and changed, and what is decided."""

    user: Package
    gen: Package
    wb: Workbook  # the user's, changed in place
    ct: ContentTypes  # the user's, changed in place
    gen_wb: Workbook
    gen_ct: ContentTypes
    drop: set[str]  # user parts left out
    names: Names  # part names taken in the output
    used_rids: set[str | None]  # relationship ids taken in the workbook's relationships
    replaced_parts: dict[str, bytes] = field(default_factory=dict)
    new_parts: list[NewPart] = field(default_factory=list)

    @property
    def rel_root(self) -> etree._Element:
        return self.wb.rels_tree.getroot()

    def new_rid(self) -> str:
        """A free relationship id of the workbook, rId<n> above the highest taken."""
        used = self.used_rids
        k = 1 + max(
            [0] + [int(r[3:]) for r in used if r and r.startswith("rId") and r[3:].isdigit()]
        )
        while f"rId{k}" in used:
            k += 1
        used.add(f"rId{k}")
        return f"rId{k}"

    def add_relationship(self, rid: str, rel_type: str, part: str) -> None:
        """Relate the workbook to ``part`` (a part name in the output)."""
        self.rel_root.append(
            self.rel_root.makeelement(
                qn(PKG_REL, "Relationship"),
                {"Id": rid, "Type": rel_type, "Target": relative(self.wb.part, part)},
            )
        )


def make_plan(user: Package, gen: Package) -> Plan:
    """Everything the output needs, computed before a byte is written."""
    d, replaced, active_removed = _open(user, gen)
    xf_map, dxf_map, gen_styles_part = _merge_styles(d)
    strings = shared_strings(gen, d.gen_wb)
    order, rename, sheet_parts = _rename_parts(d, gen_styles_part)
    base = len(d.wb.sheets)
    first_edit = SheetEdit(xf_map, dxf_map, strings, active_removed or not d.wb.sheets)
    _add_parts(d, order, rename, sheet_parts, first_edit)
    _register_sheets(d, rename)
    _add_defined_names(d, base)
    _fix_views(d, base)
    return _finish(d, replaced)


def _open(user: Package, gen: Package) -> tuple[_Draft, list[str], bool]:
    """Both workbooks, the sheets of an earlier run taken out of the user's; also their
    names and whether the active sheet was one of them."""
    wb = load_workbook(user)
    ct = ContentTypes(wb.ct_tree)
    try:
        gen_wb = load_workbook(gen)
    except CannotMerge as exc:
        raise Unexpected(f"generated workbook: {exc}") from exc
    gen_ct = ContentTypes(gen_wb.ct_tree)

    replaced, drop = remove_generated(wb, ct)
    active_removed = any(v.get("activeTab") == "-1" for v in wb.root.iter(qn(MAIN, "workbookView")))
    user_names = {s.name.lower(): s.name for s in wb.sheets}
    for s in gen_wb.sheets:
        if s.name.lower() in user_names:
            raise CannotMerge(
                f"the workbook already has a sheet named "
                f"{user_names[s.name.lower()]!r}: rename it and try again"
            )
        if s.part is None or s.rel_type not in (RT_WORKSHEET, RT_CHARTSHEET):
            raise Unexpected(f"generated sheet {s.name!r} has no worksheet part")
    names = Names(n for n in user.by_lower.values() if n not in drop)
    used_rids = {r.get("Id") for r in wb.rels_tree.getroot()}
    draft = _Draft(user, gen, wb, ct, gen_wb, gen_ct, drop, names, used_rids)
    return draft, replaced, active_removed


def _merge_styles(d: _Draft) -> tuple[list[int], list[int], str]:
    """Map the generated cell formats and differential formats to the output's; return the
    two maps and the generated styles part."""
    style_rel = d.wb.rel_by_type(RT_STYLES)
    gen_style_rel = d.gen_wb.rel_by_type(RT_STYLES)
    gen_styles_part = d.gen_wb.part_of(gen_style_rel[0]) if gen_style_rel else None
    user_styles_part = d.wb.part_of(style_rel[0]) if style_rel else None
    if gen_styles_part is None:
        raise Unexpected("generated workbook has no styles part")
    gen_styles = d.gen.parse(gen_styles_part).getroot()
    if user_styles_part is not None:
        styles_tree = d.user.parse(user_styles_part)
        merger = StyleMerger(styles_tree.getroot(), gen_styles)
        xf_map = merger.cell_xfs()
        dxf_map = merger.dxfs()
        merger.finish()
        d.replaced_parts[user_styles_part] = serialize(styles_tree)
    else:  # no styles in the user's package: unstyled cells, so take the generated styles
        n_xf = len(gen_styles.findall(f"{qn(MAIN, 'cellXfs')}/{qn(MAIN, 'xf')}"))
        n_dxf = len(gen_styles.findall(f"{qn(MAIN, 'dxfs')}/{qn(MAIN, 'dxf')}"))
        xf_map, dxf_map = list(range(n_xf)), list(range(n_dxf))
        name = d.names.claim(posixpath.join(posixpath.dirname(d.wb.part), "styles.xml"), True)
        d.new_parts.append(NewPart(name, gen_styles_part, "copy"))
        d.add_relationship(d.new_rid(), RT_STYLES, name)
        d.ct.add(name, CT_STYLES, True)
    return xf_map, dxf_map, gen_styles_part


def _rename_parts(d: _Draft, gen_styles_part: str) -> tuple[list[str], dict[str, str], list[str]]:
    """Every part the generated sheets reach, in the generated package's order, with the
    free name each takes in the output; and the sheet parts among them."""
    sheet_parts = [s.part for s in d.gen_wb.sheets if s.part]
    reach = reachable(d.gen, sheet_parts, {})
    if reach & {d.gen_wb.part, gen_styles_part}:
        raise Unexpected("a generated sheet points back at the workbook or its styles")
    order = [i.filename for i in d.gen.infos if i.filename in reach]
    rename = {p: d.names.claim(p) for p in order}
    return order, rename, sheet_parts


def _add_parts(
    d: _Draft,
    order: list[str],
    rename: dict[str, str],
    sheet_parts: list[str],
    first_edit: SheetEdit,
) -> None:
    """Plan each part the generated sheets reach, and its relationships, under its new name.

    ``first_edit`` is the sheets' edit; only the first sheet keeps its tab selection, and
    only when ``first_edit`` says so.
    """
    kept_user_parts = [n for n in d.user.by_lower.values() if n not in d.drop]
    vml_map = _vml_map(d, kept_user_parts, order)
    user_tables, max_table = table_names(d.user, d.ct, kept_user_parts)
    for part in order:
        new_name = rename[part]
        ctype = d.gen_ct.type_of(part)
        if ctype is None:
            raise Unexpected(f"generated part {part} has no content type")
        ext = posixpath.splitext(part)[1].lstrip(".").lower()
        d.ct.add(new_name, ctype, part.lower() in d.gen_ct.overrides() or not ext)
        if part in sheet_parts:
            keep = first_edit.keep_selected and part == sheet_parts[0]
            edit = SheetEdit(first_edit.xf_map, first_edit.dxf_map, first_edit.strings, keep)
            d.new_parts.append(NewPart(new_name, part, "sheet", edit=edit))
        elif ctype == CT_TABLE:
            max_table += 1
            data = _table(d.gen, part, user_tables, max_table, first_edit.dxf_map)
            d.new_parts.append(NewPart(new_name, part, "table", data=data))
        elif part.lower().endswith(".vml") and vml_map:
            data = renumber_vml(d.gen.read(part), vml_map)
            d.new_parts.append(NewPart(new_name, part, "vml", data=data))
        else:
            d.new_parts.append(NewPart(new_name, part, "copy"))
        rels = d.gen.name(rels_name(part))
        if rels is not None:
            data = _retarget(d.gen, part, rels, new_name, rename)
            d.new_parts.append(NewPart(rels_name(new_name), rels, "rels", data=data))


def _vml_map(d: _Draft, kept_user_parts: list[str], order: list[str]) -> dict[int, int]:
    """New shape-id blocks for the generated drawings, above every block the user's use."""
    vml_map: dict[int, int] = {}
    used_blocks = vml_blocks(d.user, d.ct, kept_user_parts)
    next_block = max(used_blocks, default=0) + 1
    for b in sorted(vml_blocks(d.gen, d.gen_ct, order)):
        vml_map[b] = next_block
        next_block += 1
    return vml_map


def _table(
    gen: Package, part: str, user_tables: set[str], table_id: int, dxf_map: list[int]
) -> bytes:
    """A generated table part with a new id and the output's differential formats."""
    tree = gen.parse(part)
    root = tree.getroot()
    for attr in ("name", "displayName"):
        if root.get(attr, "").lower() in user_tables:
            raise CannotMerge(f"the workbook already has a table named {root.get(attr)!r}")
    root.set("id", str(table_id))
    for el in root.iter():
        for attr in _TABLE_DXF_ATTRS:
            if attr in el.attrib:
                el.set(attr, str(dxf_map[int(el.get(attr))]))
    return serialize(tree)


def _retarget(gen: Package, part: str, rels: str, new_name: str, rename: dict[str, str]) -> bytes:
    """The relationships part of a generated part, its targets renamed as in the output."""
    tree = gen.parse(rels)
    for rel in tree.getroot():
        if rel.get("TargetMode") == "External" or "Target" not in rel.attrib:
            continue
        target = gen.name(resolve(part, rel.get("Target")))
        if target is None or target not in rename:
            raise Unexpected(f"generated part {part} points at a missing part")
        rel.set("Target", relative(new_name, rename[target]))
    return serialize(tree)


def _register_sheets(d: _Draft, rename: dict[str, str]) -> None:
    """List the generated sheets after the user's, each with a relationship of its own."""
    sheets_el = d.wb.root.find(qn(MAIN, "sheets"))
    # reusing the ids of removed sheets keeps re-runs identical; the one part that names
    # sheets by id, the calculation chain, is dropped whenever sheets are removed
    max_sheet_id = max([0] + [s.sheet_id for s in d.wb.sheets])
    for s in d.gen_wb.sheets:
        rid = d.new_rid()
        max_sheet_id += 1
        attrs = {"name": s.name, "sheetId": str(max_sheet_id)}
        if s.el.get("state"):
            attrs["state"] = s.el.get("state")
        el = sheets_el.makeelement(qn(MAIN, "sheet"), attrs)
        el.set(qn(DOC_REL, "id"), rid)
        sheets_el.append(el)
        if s.part is None:  # _open refused such a sheet already
            raise Unexpected(f"generated sheet {s.name!r} has no worksheet part")
        d.add_relationship(rid, s.rel_type, rename[s.part])


def _add_defined_names(d: _Draft, base: int) -> None:
    """The generated workbook's defined names (sheet-scoped ones shifted by ``base``), and
    the hidden mark on each generated sheet."""
    dn_parent = insert_ordered(d.wb.root, MAIN, "definedNames", WORKBOOK_ORDER)
    user_globals = {
        dn.get("name", "").lower(): (dn.text or "")
        for dn in d.wb.defined_names()
        if "localSheetId" not in dn.attrib
    }
    for dn in d.gen_wb.defined_names():
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
    for i in range(len(d.gen_wb.sheets)):
        mark = dn_parent.makeelement(
            qn(MAIN, "definedName"),
            {"name": GENERATED_MARK, "localSheetId": str(base + i), "hidden": "1"},
        )
        mark.text = MARK_VALUE
        dn_parent.append(mark)


def _fix_views(d: _Draft, base: int) -> None:
    """A view whose active or first sheet was removed shows the first generated sheet."""
    for view in d.wb.root.iter(qn(MAIN, "workbookView")):
        if view.get("activeTab") == "-1":
            view.set("activeTab", str(base))
        if view.get("firstSheet") == "-1":
            view.set("firstSheet", "0")


def _finish(d: _Draft, replaced: list[str]) -> Plan:
    """Serialise the changed workbook, content types and relationships into the plan."""
    d.replaced_parts[d.wb.part] = serialize(d.wb.tree)
    ct_part = d.user.name("[Content_Types].xml")
    if ct_part is None:  # load_workbook found it: never so
        raise Unexpected("the package has no [Content_Types].xml part")
    d.replaced_parts[ct_part] = serialize(d.wb.ct_tree)
    rels_bytes = serialize(d.wb.rels_tree)
    if d.user.has(d.wb.rels_part):
        d.replaced_parts[d.wb.rels_part] = rels_bytes
    else:  # a workbook without relationships gets its first ones
        d.new_parts.insert(0, NewPart(d.wb.rels_part, "", "rels", data=rels_bytes))
    return Plan(replaced, d.drop, d.replaced_parts, d.new_parts, [s.name for s in d.gen_wb.sheets])
