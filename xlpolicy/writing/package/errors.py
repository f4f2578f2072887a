"""What can go wrong while grafting sheets onto a package, as exceptions.

:class:`CannotMerge` is the one a caller sees: the user's workbook cannot take the
generated sheets intact, and ``str()`` says why in plain words. :class:`Unexpected` is
raised inside the subpackage when a part is not as expected; the entry points in
:mod:`.merge` turn it into :class:`CannotMerge`. :data:`DAMAGED` lists what reading a
damaged zip entry raises, so a damaged input part is told apart from a failed write.
"""

from __future__ import annotations

import zipfile

from ... import fastzlib
from ...errors import InputError


class CannotMerge(InputError):
    """The user's workbook cannot take the generated sheets intact; ``str()`` says why.

    The caller then writes the generated sheets to a workbook of their own.
    """


class Unexpected(Exception):
    """Internal: something in a package is not as expected (turned into CannotMerge)."""


#: What reading a damaged zip entry can raise (bad offsets, CRC, deflate data), as told
#: apart from a failure to write, which stays OSError.
DAMAGED: tuple[type[Exception], ...] = (
    OSError,
    zipfile.BadZipFile,
    *fastzlib.ERRORS,
    EOFError,
    ValueError,
    NotImplementedError,
)
