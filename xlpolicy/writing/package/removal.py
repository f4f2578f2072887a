"""Taking the sheets of an earlier run out of the user's workbook before adding new ones.

A sheet this tool generated carries the hidden defined name ``GENERATED_MARK``. Removing
it means dropping its relationship and entry, the defined names scoped to it, and every
part only it used; the calculation chain goes too (it names sheets by id), and the other
sheets' indexes in defined names and workbook views are shifted to match.
"""

from __future__ import annotations

from lxml import etree

from .content_types import ContentTypes
from .opc import MAIN, RT_CALC_CHAIN, qn, rels_name
from .reader import reachable
from .workbook import Sheet, Workbook


def _shift_index(value: int, removed: list[int]) -> int:
    return value - sum(1 for r in removed if r < value)


def remove_generated(wb: Workbook, ct: ContentTypes) -> tuple[list[str], set[str]]:
    """Remove sheets of an earlier run from ``wb``; return (their names, parts to drop)."""
    indexes = sorted(wb.generated_indexes())
    if not indexes:
        return [], set()
    removed = [wb.sheets[i] for i in indexes]
    calc = _unlink_sheets(wb, removed, indexes)
    _renumber_defined_names(wb, indexes)
    _repoint_views(wb, indexes)
    return [s.name for s in removed], _orphaned_parts(wb, ct, removed, calc)


def _unlink_sheets(wb: Workbook, removed: list[Sheet], indexes: list[int]) -> list[etree._Element]:
    """Drop the sheets' entries and relationships, and the calculation chain's; return the
    calculation chain's relationships."""
    rel_root = wb.rels_tree.getroot()
    removed_rids = {s.rid for s in removed}
    for rel in list(rel_root):
        if rel.get("Id") in removed_rids:
            rel_root.remove(rel)
    calc = wb.rel_by_type(RT_CALC_CHAIN)
    for rel in calc:  # stale entries for removed sheets make Excel repair the file
        rel_root.remove(rel)
    for s in removed:
        s.el.getparent().remove(s.el)
    wb.sheets = [s for i, s in enumerate(wb.sheets) if i not in set(indexes)]
    return calc


def _renumber_defined_names(wb: Workbook, indexes: list[int]) -> None:
    """Drop the defined names scoped to removed sheets, renumber the others."""
    dn_parent = wb.root.find(qn(MAIN, "definedNames"))
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


def _repoint_views(wb: Workbook, indexes: list[int]) -> None:
    """Workbook views keep pointing at the same sheet; -1 marks "was a removed sheet"."""
    for view in wb.root.iter(qn(MAIN, "workbookView")):
        for attr in ("activeTab", "firstSheet"):
            if attr in view.attrib:
                value = int(view.get(attr))
                new = -1 if value in indexes else _shift_index(value, indexes)
                view.set(attr, str(new))
    remaining_ids = {s.sheet_id for s in wb.sheets}
    for view in wb.root.iter(qn(MAIN, "customWorkbookView")):
        if (
            view.get("activeSheetId", "").isdigit()
            and int(view.get("activeSheetId")) not in remaining_ids
            and wb.sheets
        ):
            view.set("activeSheetId", str(wb.sheets[0].sheet_id))


def _orphaned_parts(
    wb: Workbook, ct: ContentTypes, removed: list[Sheet], calc: list[etree._Element]
) -> set[str]:
    """Parts only the removed sheets (or the dropped calculation chain) used, with their
    relationship parts; their content types are unregistered."""
    pkg = wb.pkg
    rel_root = wb.rels_tree.getroot()
    wb_targets = [p for p in (wb.part_of(r) for r in rel_root) if p is not None]
    keep = reachable(pkg, pkg.internal_targets(""), {wb.part: wb_targets})
    starts = [s.part for s in removed if s.part] + [
        p for p in (wb.part_of(r) for r in calc) if p is not None
    ]
    dropped = reachable(pkg, starts, {}) - keep
    drop = set(dropped)
    for part in dropped:
        rels = pkg.name(rels_name(part))
        if rels is not None:
            drop.add(rels)
        ct.remove(part)
    return drop
