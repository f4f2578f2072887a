"""Whether a workbook package is declared macro-enabled, whatever its name ends in.

A spreadsheet program decides how to open a package by its name and checks the name
against the workbook's declared content type: a package declared macro-enabled
(``application/vnd.ms-excel.sheet.macroEnabled.main+xml``, ECMA-376 Part 2 content types
as Excel writes them) but named .xlsx is refused as damaged. The output of such an input
is therefore named .xlsm, with a note, so that it opens with the macros kept.
"""

from __future__ import annotations

import zipfile
from pathlib import Path

__all__ = ["MACRO_CONTENT_TYPE", "declared_macro_enabled"]

MACRO_CONTENT_TYPE = b"application/vnd.ms-excel.sheet.macroEnabled.main+xml"
_MAX_TYPES_PART = 4 << 20  # a content-types part is a few KB; more is not read here


def declared_macro_enabled(path: Path) -> bool:
    """True when the package at ``path`` declares a macro-enabled workbook part.

    False for anything unreadable: the readers report a damaged file in their own words.
    """
    if not Path(path).is_file():  # (a named pipe would wait forever)
        return False
    try:
        with zipfile.ZipFile(path) as zf:
            info = zf.getinfo("[Content_Types].xml")
            if info.file_size > _MAX_TYPES_PART:
                return False
            return MACRO_CONTENT_TYPE.lower() in zf.read(info).lower()
    except (OSError, KeyError, zipfile.BadZipFile, ValueError, EOFError, NotImplementedError):
        return False
