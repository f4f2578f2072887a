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

The modules, in the order the work happens:

- :mod:`.merge`: the entry points, :func:`merge_generated_sheets` and
  :func:`user_sheet_names`; :mod:`.errors`: :class:`CannotMerge` and the internal error;
- :mod:`.opc`: namespaces, relationship types and part-name helpers of the format;
- :mod:`.reader`: reading a package's parts and relationships; :mod:`.workbook`: its
  workbook part and sheets; :mod:`.content_types`: its content types part;
- :mod:`.plan`: what the output holds, decided before writing, using :mod:`.removal`
  (sheets of an earlier run), :mod:`.styles` (style merging) and :mod:`.renaming`
  (free part names, drawing shape ids, table ids);
- :mod:`.writer`: writing the output, with :mod:`.sheet_stream` (generated sheets
  rewritten as they stream), :mod:`.pipe` (a writer thread), :mod:`.deflate` (deflate in
  threads), :mod:`.raw_check` (the CRC check of raw-copied parts, in a thread) and
  :mod:`.zip_private` (the only module that touches zipfile's internals, with its
  public-API fallback).
"""

from __future__ import annotations

from .errors import CannotMerge
from .merge import MergeResult, merge_generated_sheets, user_sheet_names
from .workbook import GENERATED_MARK

__all__ = [
    "GENERATED_MARK",
    "CannotMerge",
    "MergeResult",
    "merge_generated_sheets",
    "user_sheet_names",
]
