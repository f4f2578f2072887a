"""Writing the output package from a :class:`~.plan.Plan`.

The user's parts come first, in their own order: each is copied unchanged (as compressed
bytes where :mod:`.zip_private` allows, checked by :class:`~.raw_check.Checker`), or
written as the plan rewrote it, or left out. The generated parts follow: sheets streamed
through :func:`~.sheet_stream.copy_sheet` and deflated in threads, the rest as planned.
"""

from __future__ import annotations

import concurrent.futures
import contextlib
import shutil
import zipfile
from collections.abc import Mapping
from pathlib import Path

from ..bulk import CellBlock
from . import zip_private
from .deflate import DEFLATE_THREADS, GENERATED_LEVEL, deflate_in_threads
from .errors import DAMAGED, Unexpected
from .opc import CHUNK
from .plan import Plan
from .raw_check import Checker, check_raw
from .reader import Package
from .sheet_stream import copy_sheet


def _zip_info(name: str, like: zipfile.ZipInfo | None) -> zipfile.ZipInfo:
    """The entry for part ``name``: like the user's entry ``like``, else a generated part's."""
    if like is None:
        info = zipfile.ZipInfo(name, date_time=(1980, 1, 1, 0, 0, 0))
        info.compress_type = zipfile.ZIP_DEFLATED
        zip_private.set_level(info, GENERATED_LEVEL)
        return info
    info = zipfile.ZipInfo(name, date_time=like.date_time)
    info.compress_type = (
        zipfile.ZIP_STORED if like.compress_type == zipfile.ZIP_STORED else zipfile.ZIP_DEFLATED
    )
    info.external_attr = like.external_attr
    return info


def _copy_user_part(
    user: Package,
    info: zipfile.ZipInfo,
    zout: zipfile.ZipFile,
    target: zipfile.ZipInfo,
    checker: Checker | None = None,
) -> None:
    """Copy one of the user's parts unchanged; a part that cannot be read is Unexpected.

    Reading errors (a damaged entry: bad offsets, CRC, deflate data) are told apart from
    writing errors, which stay OSError (a full disk, a locked output). With ``checker``,
    a part copied as raw bytes is checked there (see Checker), else here.
    """
    if zip_private.can_copy_raw(user.zf, info, zout):
        start = zip_private.copy_raw(user.zf, info, zout, target)
        if checker is not None:
            checker.check(info, start)
        else:
            check_raw(zip_private.raw_source(user.zf), info, start)
        return
    damaged = DAMAGED
    try:
        src = user.zf.open(info)
    except damaged as exc:
        raise Unexpected(f"its part {info.filename} cannot be read ({exc})") from exc
    with src, zout.open(target, "w") as dst:
        while True:
            try:
                chunk = src.read(CHUNK)
            except damaged as exc:
                raise Unexpected(f"its part {info.filename} cannot be read ({exc})") from exc
            if not chunk:
                break
            dst.write(chunk)


def write_package(
    out: Path, user: Package, gen: Package, plan: Plan, blocks: Mapping[int, CellBlock]
) -> int:
    """Write the output package; return how many user parts were copied unchanged."""
    drop, replaced_parts, new_parts = plan.drop, plan.replaced_parts, plan.new_parts
    kept = 0
    path = getattr(user.zf, "filename", None)
    with (
        zipfile.ZipFile(out, "w", allowZip64=True) as zout,
        Checker(path) if path else contextlib.nullcontext() as checker,
        concurrent.futures.ThreadPoolExecutor(DEFLATE_THREADS, "xlpolicy-deflate") as pool,
    ):
        for info in user.infos:
            if info.filename in drop:
                continue
            target = _zip_info(info.filename, info)
            if info.filename in replaced_parts:
                zout.writestr(target, replaced_parts[info.filename])
                continue
            if info.is_dir():
                zout.writestr(target, b"")
                continue
            target.file_size = info.file_size
            _copy_user_part(user, info, zout, target, checker)
            kept += 1
        for part in new_parts:
            target = _zip_info(part.name, None)
            if part.data is not None:
                zout.writestr(target, part.data)
                continue
            source = gen.zf.getinfo(part.source)
            big = source.file_size * 3 > zipfile.ZIP64_LIMIT
            with gen.zf.open(source) as src, zout.open(target, "w", force_zip64=big) as dst:
                if part.kind == "sheet" and part.edit is not None:
                    deflate_in_threads(dst, pool)
                    copy_sheet(src, dst, part.edit, blocks)
                else:
                    shutil.copyfileobj(src, dst, CHUNK)
        if checker is not None:
            checker.finish()
    return kept
