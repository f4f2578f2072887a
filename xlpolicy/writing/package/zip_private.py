"""Every use of Python's zipfile internals, in one place, with a fallback on public API only.

Python's zipfile has no public call for three things the writer does for speed:

- copy an entry's compressed bytes into another zip without inflating and deflating them
  (:func:`copy_raw`: the ``ZipFile`` attributes ``fp``, ``start_dir``, ``filelist``,
  ``NameToInfo``, ``_writecheck``, ``_didModify`` and ``_writing``, and
  ``ZipInfo.FileHeader``, used as zipfile's own ``write`` uses them);
- deflate an entry being written in several threads (:func:`swap_compressor`: the entry
  writer's ``_compressor``, which its ``write`` and ``close`` call, and ``_file_size``);
- choose the deflate level of an entry opened for writing (:func:`set_level`:
  ``ZipInfo._compresslevel``, public as ``ZipInfo.compress_level`` from Python 3.13).

:func:`internals_problems` tries each of these once on small zips in memory and names
every attribute that is missing or no longer behaves as expected. When it names any,
:func:`active` is False and the writer keeps to public zipfile API: the user's parts are
inflated and deflated again, one thread deflates, and zipfile picks the level. The parts'
contents are the same either way; only the speed and the compressed sizes differ.
"""

from __future__ import annotations

import io
import struct
import zipfile
from typing import IO, Any

from .errors import DAMAGED, Unexpected
from .opc import CHUNK

__all__ = [
    "active",
    "can_copy_raw",
    "copy_raw",
    "internals_problems",
    "raw_source",
    "set_level",
    "swap_compressor",
]

#: Set by tests (and by anyone who distrusts the internals) to keep to public API.
force_public = False
_problems: list[str] | None = None

_LOCAL_HEADER = struct.Struct("<4s22xHH")  # signature, ..., name length, extra length
_DAMAGED_HEADER: tuple[type[Exception], ...] = (*DAMAGED, struct.error)
_ZIPFILE_ATTRS = ("fp", "start_dir", "filelist", "NameToInfo", "_didModify", "_writing")


def active() -> bool:
    """Whether the zipfile internals may be used (checked once per process)."""
    global _problems
    if force_public:
        return False
    if _problems is None:
        _problems = internals_problems()
    return not _problems


def set_level(info: zipfile.ZipInfo, level: int) -> None:
    """Have an entry deflated at ``level`` when it is written (left to zipfile if unsure)."""
    any_info: Any = info
    if hasattr(zipfile.ZipInfo, "compress_level"):  # public from Python 3.13
        any_info.compress_level = level
    elif active():
        any_info._compresslevel = level  # zipfile reads it when the entry is opened


def swap_compressor(dst: IO[bytes], compressor: Any) -> bool:
    """Have the zip entry ``dst`` (opened for writing, nothing written yet) compressed by
    ``compressor`` (an object with ``compress`` and ``flush``). False when not done."""
    if not active() or getattr(dst, "_file_size", None) != 0:
        return False
    writer: Any = dst
    current = getattr(dst, "_compressor", None)
    if current is None or type(current).__name__ != "Compress":
        return False
    writer._compressor = compressor
    return True


def raw_source(zin: zipfile.ZipFile) -> IO[bytes]:
    """The open file a zip is read from (for :func:`copy_raw`'s check of what it copied)."""
    reader: Any = zin
    return reader.fp


def can_copy_raw(zin: zipfile.ZipFile, info: zipfile.ZipInfo, zout: zipfile.ZipFile) -> bool:
    """Whether the part's compressed bytes can be copied as they are (see copy_raw)."""
    return (
        active()
        and info.compress_type in (zipfile.ZIP_STORED, zipfile.ZIP_DEFLATED)
        and not info.flag_bits & 0x1  # not encrypted
        and all(
            hasattr(zout, a) for a in ("fp", "start_dir", "filelist", "NameToInfo", "_writecheck")
        )
        and hasattr(zin, "fp")
        and zin.fp is not None
        and zout.fp is not None
        and not getattr(zout, "_writing", False)
    )


def copy_raw(
    zin: zipfile.ZipFile, info: zipfile.ZipInfo, zout: zipfile.ZipFile, target: zipfile.ZipInfo
) -> int:
    """Copy a part's compressed bytes into ``zout`` without inflating and deflating them.

    Re-compressing the user's parts was most of the time the splice took on a big workbook
    (the History sheet of 100,000 items is some 200 MB of XML). The bytes must still be
    inflated, only to check them against the part's CRC and size, so that a damaged part
    is found as before (raw_check.check_raw); this returns where the part's data starts in
    the user's file, for that check. Python's zipfile has no public call for this, so its
    writer's bookkeeping is done here as its own ``write`` does it.
    """
    fp = raw_source(zin)
    try:
        fp.seek(info.header_offset)
        sig, n_name, n_extra = _LOCAL_HEADER.unpack(fp.read(_LOCAL_HEADER.size))
        if sig != b"PK\x03\x04":
            raise zipfile.BadZipFile("bad local file header")
        start = info.header_offset + _LOCAL_HEADER.size + n_name + n_extra
        fp.seek(start)
    except _DAMAGED_HEADER as exc:
        raise Unexpected(f"its part {info.filename} cannot be read ({exc})") from exc
    out = zipfile.ZipInfo(target.filename, date_time=target.date_time)
    out.compress_type = info.compress_type
    out.external_attr = target.external_attr
    out.CRC, out.file_size, out.compress_size = info.CRC, info.file_size, info.compress_size
    zip64 = max(info.file_size, info.compress_size) > zipfile.ZIP64_LIMIT
    z: Any = zout  # its private attributes, as internals_problems() found them
    z._writecheck(out)
    z.fp.seek(z.start_dir)
    out.header_offset = z.fp.tell()
    z._didModify = True
    z.fp.write(out.FileHeader(zip64))
    left = info.compress_size
    while left > 0:
        try:
            chunk = fp.read(min(CHUNK, left))
            if not chunk:
                raise EOFError("the part ends early")
        except DAMAGED as exc:
            raise Unexpected(f"its part {info.filename} cannot be read ({exc})") from exc
        left -= len(chunk)
        z.fp.write(chunk)
    z.start_dir = z.fp.tell()
    z.filelist.append(out)
    z.NameToInfo[out.filename] = out
    return start


# --- the check ---------------------------------------------------------------------------
class _Counting:
    """Passes a compressor's calls on and counts them."""

    def __init__(self, inner: Any) -> None:
        self.inner = inner
        self.calls = 0

    def compress(self, data: Any) -> bytes:
        self.calls += 1
        return self.inner.compress(data)

    def flush(self) -> bytes:
        self.calls += 1
        return self.inner.flush()


_PROBE = b"<row><c><v>1</v></c></row>" * 200


def internals_problems() -> list[str]:
    """What in zipfile is not as this module expects, each naming the attribute; [] if all is.

    Tried on zips in memory: the attributes exist, an entry's level is read from
    ``_compresslevel``, a swapped ``_compressor`` is what writes the entry, and a raw copy
    reads back with its CRC.
    """
    found: list[str] = []
    try:
        src = io.BytesIO()
        with zipfile.ZipFile(src, "w", zipfile.ZIP_DEFLATED) as zsrc:
            zsrc.writestr("probe.xml", _PROBE)
        out = io.BytesIO()
        with zipfile.ZipFile(out, "w") as zout:
            found += [f"ZipFile.{a}" for a in _ZIPFILE_ATTRS if not hasattr(zout, a)]
            if not callable(getattr(zout, "_writecheck", None)):
                found.append("ZipFile._writecheck")
            found += _probe_level(zout) + _probe_compressor(zout)
            if not found:
                with zipfile.ZipFile(src) as zin:
                    info = zin.getinfo("probe.xml")
                    copy_raw(zin, info, zout, zipfile.ZipInfo("raw.xml", info.date_time))
        with zipfile.ZipFile(out) as check:
            for name, want in (("level.xml", _PROBE), ("swap.xml", _PROBE), ("raw.xml", _PROBE)):
                if name in check.NameToInfo and check.read(name) != want:
                    found.append(f"zipfile entry {name} reads back wrong")
            if not found and "raw.xml" not in check.namelist():
                found.append("ZipFile.filelist (a raw copy is not listed)")
    except Exception as exc:  # anything at all: the internals are not as expected
        found.append(f"zipfile ({type(exc).__name__}: {exc})")
    return found


def _probe_level(zout: zipfile.ZipFile) -> list[str]:
    """Level 0 stores: an entry set to it must not come out smaller than it went in."""
    info = zipfile.ZipInfo("level.xml")
    info.compress_type = zipfile.ZIP_DEFLATED
    if not hasattr(info, "_compresslevel"):
        return ["ZipInfo._compresslevel"]
    if not callable(getattr(info, "FileHeader", None)):
        return ["ZipInfo.FileHeader"]
    any_info: Any = info
    any_info._compresslevel = 0
    with zout.open(info, "w") as dst:
        dst.write(_PROBE)
    if info.compress_size < len(_PROBE):
        return ["ZipInfo._compresslevel (not read when an entry is opened)"]
    return []


def _probe_compressor(zout: zipfile.ZipFile) -> list[str]:
    """A swapped ``_compressor`` must be what compresses and flushes the entry."""
    info = zipfile.ZipInfo("swap.xml")
    info.compress_type = zipfile.ZIP_DEFLATED
    with zout.open(info, "w") as dst:
        if getattr(dst, "_file_size", None) != 0:
            return ["zipfile._ZipWriteFile._file_size"]
        current = getattr(dst, "_compressor", None)
        if current is None or type(current).__name__ != "Compress":
            return ["zipfile._ZipWriteFile._compressor"]
        counting = _Counting(current)
        writer: Any = dst
        writer._compressor = counting
        dst.write(_PROBE)
    if counting.calls < 2:
        return ["zipfile._ZipWriteFile._compressor (not called when writing)"]
    return []
