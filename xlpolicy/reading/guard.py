"""Checks on an input file before any parser sees it: what it really is, and whether it is safe.

People run xlpolicy on whatever is on their desktop, so a file is looked at from the outside
first, cheaply and in bounded memory:

- **what it is**: an empty file, a lock file a spreadsheet program leaves beside an open
  workbook ("~$Shop.xlsx", ".~lock.Shop.xlsx#"), a zip cut short by a copy or a download, a
  password-protected workbook (saved by Excel as an encrypted compound file), an old .xls, a
  web page, an XML spreadsheet or a CSV file renamed .xlsx. Each gets a message naming the
  file, the likely cause and what to do.
- **whether it is safe to unpack** (a zip package: .xlsx, .xlsm, .ods): from the zip's own
  directory alone, without decompressing, the number of entries, each entry's declared
  uncompressed size, their total and, for large entries, the compression ratio (a "zip
  bomb" expands a few kilobytes into gigabytes). Entries are also checked for zip
  encryption, and the start of every XML part for a DTD: spreadsheet XML never declares
  one, and a DTD is how "billion laughs" entity expansion and external entities get in. The
  XML parsers refuse entities as well (openpyxl with defusedxml, our own reads through
  defusedxml); this check is the first of the two locks and gives the clearer message.

The limits (:data:`DEFAULT_LIMITS`) are far above any workbook a person keeps. A trusted
file that is genuinely larger can be read with ``--allow-large`` on the command line, the
``allow_large=True`` argument of the API, or the environment variable
``XLPOLICY_ALLOW_LARGE=1``; each multiplies every limit by :data:`LARGE_FACTOR`. The DTD
check is never lifted.
"""

from __future__ import annotations

import contextlib
import contextvars
import os
import re
import zipfile
from collections.abc import Iterator
from dataclasses import dataclass, replace
from pathlib import Path

from ..errors import Refused
from .filekind import sniff

__all__ = [
    "ALLOW_LARGE_ENV",
    "DEFAULT_LIMITS",
    "LARGE_FACTOR",
    "Limits",
    "Refused",
    "allow_large",
    "current_limits",
    "inspect_file",
    "refusal",
    "too_many_cells",
    "unreadable_message",
]

ALLOW_LARGE_ENV = "XLPOLICY_ALLOW_LARGE"
LARGE_FACTOR = 10
_MB = 1 << 20


@dataclass(frozen=True)
class Limits:
    """How big a zip package may unpack before it is refused."""

    max_entries: int = 20_000  # parts in the package
    max_part: int = 1 << 30  # declared uncompressed bytes of one part (1 GiB)
    max_total: int = 2 << 30  # all parts together (2 GiB)
    max_ratio: float = 200.0  # uncompressed / compressed, for parts over ratio_floor
    ratio_floor: int = 10 * _MB
    max_tree_part: int = 256 * _MB  # a part read whole into a tree (.ods content.xml)
    max_prolog: int = 64 * 1024  # bytes scanned for a DTD before an XML part's first element
    max_cells: int = 5_000_000  # cells of one sheet where a format repeats them (.ods)

    def scaled(self, factor: float) -> Limits:
        """Every limit times ``factor`` (the prolog scan stays as it is)."""
        return replace(
            self,
            max_entries=int(self.max_entries * factor),
            max_part=int(self.max_part * factor),
            max_total=int(self.max_total * factor),
            max_ratio=self.max_ratio * factor,
            ratio_floor=int(self.ratio_floor * factor),
            max_tree_part=int(self.max_tree_part * factor),
            max_cells=int(self.max_cells * factor),
        )


DEFAULT_LIMITS = Limits()
_allow_large: contextvars.ContextVar[bool] = contextvars.ContextVar(
    "xlpolicy_allow_large", default=False
)


def current_limits() -> Limits:
    """The limits in force: the defaults, raised by --allow-large or XLPOLICY_ALLOW_LARGE."""
    env = os.environ.get(ALLOW_LARGE_ENV, "").strip().lower()
    if _allow_large.get() or env in ("1", "yes", "true", "on"):
        return DEFAULT_LIMITS.scaled(LARGE_FACTOR)
    return DEFAULT_LIMITS


@contextlib.contextmanager
def allow_large(enabled: bool = True) -> Iterator[None]:
    """Within the block, raise the limits (see the module's docstring)."""
    token = _allow_large.set(bool(enabled) or _allow_large.get())
    try:
        yield
    finally:
        _allow_large.reset(token)


_RAISE = (
    f"If you trust the file, run again with --allow-large (or set {ALLOW_LARGE_ENV}=1)"
    " to raise the limits tenfold."
)
_OLE2_MAGIC = b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1"
_ENCRYPTED_STREAM = "EncryptedPackage".encode("utf-16-le")
_XLS_STREAM = "Workbook".encode("utf-16-le")
_XLS_STREAM_OLD = "Book".encode("utf-16-le")


def _size(n: float) -> str:
    if n >= 1 << 30:
        return f"{n / (1 << 30):.1f} GB"
    if n >= _MB:
        return f"{n / _MB:.0f} MB"
    return f"{n / 1024:.0f} KB"


def inspect_file(path: Path, kind: str = "xlsx", limits: Limits | None = None) -> None:
    """Raise :class:`Refused` if ``path`` should not be handed to a parser.

    ``kind`` is what the name promises: "xlsx" (also .xlsm) or "ods". The file must exist
    and be a file (the callers say so themselves when it is not).
    """
    limits = limits or current_limits()
    p = Path(path)
    lock = _lock_file_message(p)
    if lock:
        raise Refused(lock, "file-lock")
    if kind == "xlsx" and p.suffix.lower() not in (".xlsx", ".xlsm"):
        return  # the caller says what the name should end in
    try:
        size = p.stat().st_size
        with open(p, "rb") as f:
            head = f.read(4096)
    except OSError as exc:
        raise Refused(
            f"{p.name} could not be opened ({exc.strerror or exc}). If it is open in "
            "another program, close it and try again.",
            "file-unreadable",
        ) from exc
    if size == 0:
        raise Refused(
            f"{p.name} is empty (0 bytes): it was probably not saved completely, or "
            "a copy or download was cut off. Open the original in your spreadsheet "
            "program, save it again and use that file.",
            "file-empty",
        )
    if not head.startswith(b"PK"):
        raise Refused(_not_a_package(p, head, kind), "file-not-zip")
    try:
        zf = zipfile.ZipFile(p)
    except (zipfile.BadZipFile, OSError, ValueError, EOFError, NotImplementedError) as exc:
        ext = ".ods" if kind == "ods" else ".xlsx"
        raise Refused(
            f"{p.name} is not a readable {ext} workbook: it starts like one but its end is "
            f"missing or broken ({exc}), which is what a copy, download or e-mail attachment "
            "that was cut off looks like. Get the file again, or open it in your spreadsheet "
            "program (it may offer to repair it) and save it again.",
            "file-truncated",
        ) from exc
    with zf:
        _check_entries(p, zf, limits, kind)
        _check_kind(p, zf, kind)
        _check_prologs(p, zf, limits)


def refusal(path: Path, kind: str = "xlsx") -> Refused | None:
    """:func:`inspect_file` as a value: the refusal, or None when the file may be read."""
    try:
        inspect_file(path, kind)
    except Refused as exc:
        return exc
    return None


def too_many_cells(file: str, sheet: str, limit: int) -> Refused:
    """The refusal for a sheet that expands into more cells than any stock list holds."""
    return Refused(
        f"The sheet '{sheet}' in {file} holds more cells than {limit:,}, far more "
        "than a stock list needs (a row or cell repeated down the whole sheet, or a "
        "damaged file), so it was not read. Delete the unused rows and columns and "
        f"save again. {_RAISE}",
        "file-too-large",
    )


def unreadable_message(file: str, exc: BaseException, sheet: str | None = None) -> tuple[str, str]:
    """(message, problem code) for a parser's failure on a file that passed the checks above.

    Entities found by the parser (a DTD the first check did not see) are refused as unsafe;
    anything else means the file is damaged.
    """
    from defusedxml import DefusedXmlException

    cause: BaseException | None = exc
    for _ in range(5):  # openpyxl wraps the parser's error in its own
        if cause is None or isinstance(cause, DefusedXmlException):
            break
        cause = cause.__cause__ or cause.__context__
    if isinstance(cause, DefusedXmlException):
        exc = cause
    why = f"{type(exc).__name__}: {exc}"
    why = why if len(why) <= 160 else why[:160] + "..."
    where = f"The sheet '{sheet}' in {file}" if sheet else file
    if isinstance(exc, DefusedXmlException):
        return (
            f"{where} declares XML entities, which spreadsheet programs never write and "
            "which can make a file expand without end or reach other files, so it was not "
            f"read ({type(exc).__name__}). Check where the file came from; if you trust "
            "it, open it in your spreadsheet program and save it again as .xlsx.",
            "file-unsafe-xml",
        )
    return (
        f"{where} could not be read: the file is damaged ({why}). Open it in your "
        "spreadsheet program (it may offer to repair it) and save it again as .xlsx, or "
        "get a fresh copy, and run again.",
        "file-unreadable",
    )


def _lock_file_message(p: Path) -> str | None:
    name = p.name
    if name.startswith("~$"):
        real = name[2:]
        return (
            f"{name} is not a workbook but the lock file a spreadsheet program leaves "
            f"beside a workbook while it is open (the workbook is probably {real} or a "
            f"name ending in '{real}'). Give xlpolicy the workbook itself; close it "
            "first if it is open."
        )
    m = re.match(r"^\.~lock\.(.+)#$", name)
    if m:
        return (
            f"{name} is not a workbook but the lock file LibreOffice leaves beside "
            f"{m.group(1)} while it is open. Give xlpolicy {m.group(1)} itself."
        )
    return None


def _not_a_package(p: Path, head: bytes, kind: str) -> str:
    """Why a file named .xlsx/.ods is not a zip package, as far as its bytes tell."""
    name = p.name
    ext = ".ods" if kind == "ods" else ".xlsx"
    resave = (
        "Open it in your spreadsheet program and save it as "
        + ("'OpenDocument Spreadsheet (.ods)' or " if kind == "ods" else "")
        + "'Excel Workbook (.xlsx)'."
    )
    found = sniff(head)
    if found == "ole2":
        stream = _ole2_kind(p)
        if stream == "encrypted":
            return (
                f"{name} is protected by a password (it is saved encrypted), so it cannot "
                "be read. Open it, remove the password (in Excel: File > Info > Protect "
                "Workbook > Encrypt with Password, clear it) and save it, or save an "
                "unprotected copy, and run again on that."
            )
        if stream == "xls":
            return (
                f"{name} is really an old-style Excel file (.xls) saved with an {ext} name. "
                "Rename it to end in .xls and run again, or open it and save it as "
                "'Excel Workbook (.xlsx)'."
            )
        return (
            f"{name} is an old Office file (a compound file), not an {ext} workbook; it may "
            f"be password-protected or another kind of document renamed. {resave}"
        )
    if found == "biff":
        return (
            f"{name} is a very old Excel file (Excel 4 or earlier) with an {ext} name, which "
            f"xlpolicy has no reader for. {resave}"
        )
    foreign = foreign_file_message(name, f"an {ext}", found, resave)
    if foreign is not None:
        return foreign
    return (
        f"{name} is not a readable {ext} workbook: it is neither a workbook nor a kind of "
        "file xlpolicy recognises (it may be damaged, or another kind of file renamed). "
        f"{resave}"
    )


def foreign_file_message(name: str, kind: str, found: str, resave: str) -> str | None:
    """The message for a web page, XML or text file saved under a spreadsheet's name.

    ``kind`` is the extension as said ("an .xlsx", "an .ods", "an .xls"); None when
    ``found`` is none of those three. Shared by every reader, so they speak alike.
    """
    if found == "html":
        return (
            f"{name} is a web page (HTML) with {kind} name, not a real spreadsheet file; "
            f"some programs and websites export tables this way. {resave}"
        )
    if found == "xml":
        return (
            f"{name} is an XML file with {kind} name (perhaps an 'XML Spreadsheet 2003'), "
            f"not a real spreadsheet file. {resave}"
        )
    if found == "text":
        return (
            f"{name} is a text (CSV) file with {kind} name, not a real spreadsheet file. "
            f"{resave} Or name it Items.csv, put it in a folder of its own with "
            "History.csv, and give xlpolicy the folder."
        )
    return None


def _ole2_kind(p: Path, max_scan: int = 64 * _MB) -> str:
    """ "encrypted" (an encrypted OOXML package), "xls" (a legacy workbook) or "other".

    The compound file's directory names its streams in UTF-16; the names are searched for in
    the first ``max_scan`` bytes, read in chunks.
    """
    found_xls = False
    tail = b""
    with contextlib.suppress(OSError), open(p, "rb") as f:
        read = 0
        while read < max_scan:
            chunk = f.read(_MB)
            if not chunk:
                break
            read += len(chunk)
            buf = tail + chunk
            if _ENCRYPTED_STREAM in buf:
                return "encrypted"
            found_xls = found_xls or _XLS_STREAM in buf or _XLS_STREAM_OLD in buf
            tail = buf[-64:]
    return "xls" if found_xls else "other"


def _check_entries(p: Path, zf: zipfile.ZipFile, limits: Limits, kind: str) -> None:
    """Refuse a package whose directory promises more than any workbook needs."""
    infos = zf.infolist()
    bomb = (
        f"{p.name} would unpack to far more than any workbook needs, so it was not "
        "opened: it is either damaged or made to exhaust memory (a 'zip bomb'). Check "
        "where it came from. "
    )
    if len(infos) > limits.max_entries:
        raise Refused(
            bomb + f"It holds {len(infos):,} parts (the limit is {limits.max_entries:,}). {_RAISE}",
            "file-too-large",
        )
    total = 0
    for info in infos:
        if info.flag_bits & 0x1:
            raise Refused(
                f"{p.name} holds encrypted parts ({info.filename}), so it cannot be "
                "read. Save an unprotected copy from your spreadsheet program and run "
                "again on that.",
                "file-encrypted",
            )
        usize, csize = info.file_size, info.compress_size
        total += usize
        if usize > limits.max_part:
            raise Refused(
                bomb + f"Its part {info.filename} would unpack to {_size(usize)} "
                f"(the limit is {_size(limits.max_part)}). {_RAISE}",
                "file-too-large",
            )
        if usize > limits.ratio_floor and usize > limits.max_ratio * max(csize, 1):
            ratio = usize / max(csize, 1)
            raise Refused(
                bomb + f"Its part {info.filename} is compressed {ratio:,.0f} "
                f"to 1 ({_size(csize)} unpacking to {_size(usize)}; ordinary "
                f"workbooks stay below {limits.max_ratio:,.0f} to 1). {_RAISE}",
                "file-too-large",
            )
        if kind == "ods" and info.filename == "content.xml" and usize > limits.max_tree_part:
            raise Refused(
                f"{p.name} holds {_size(usize)} of cells, more than xlpolicy reads "
                f"from an .ods file (the limit is {_size(limits.max_tree_part)}). Save "
                f"it as .xlsx, which is read row by row, and run again. {_RAISE}",
                "file-too-large",
            )
    if total > limits.max_total:
        raise Refused(
            bomb + f"Its parts would unpack to {_size(total)} in all (the limit is "
            f"{_size(limits.max_total)}). {_RAISE}",
            "file-too-large",
        )


_OTHER_DOCUMENTS = (
    ("word/document.xml", "a Word document (.docx)"),
    ("ppt/presentation.xml", "a PowerPoint presentation (.pptx)"),
    ("xl/workbook.bin", "an Excel binary workbook (.xlsb)"),
)


def _check_kind(p: Path, zf: zipfile.ZipFile, kind: str) -> None:
    """Refuse a zip that is plainly another kind of document than its name says."""
    names = set(zf.namelist())
    ext = ".ods" if kind == "ods" else ".xlsx"
    for part, what in _OTHER_DOCUMENTS:
        if part in names:
            raise Refused(
                f"{p.name} is {what} with an {ext} name, not a workbook. Give xlpolicy "
                "the workbook with your items, or open the file and save it as "
                "'Excel Workbook (.xlsx)'.",
                "file-not-workbook",
            )
    if kind == "xlsx" and "content.xml" in names and "[Content_Types].xml" not in names:
        raise Refused(
            f"{p.name} is an OpenDocument file (.ods) with an .xlsx name. Rename it "
            "to end in .ods and run again.",
            "file-not-workbook",
        )
    if (
        kind == "xlsx"
        and "[Content_Types].xml" not in names
        and not any(n.startswith("xl/") for n in names)
    ):
        shown = ", ".join(sorted(names)[:3]) + (", ..." if len(names) > 3 else "")
        raise Refused(
            f"{p.name} is a zip archive of other files ({shown}), not a workbook. "
            "If the workbook is inside it, unpack it first and give xlpolicy the "
            ".xlsx file.",
            "file-not-workbook",
        )


_DTD = re.compile(rb"<!DOCTYPE|<!ENTITY", re.IGNORECASE)
_FIRST_ELEMENT = re.compile(rb"<[A-Za-z_]")
_PROLOG_JUNK = re.compile(rb"<!--.*?-->|<\?.*?\?>", re.DOTALL)


def _check_prologs(p: Path, zf: zipfile.ZipFile, limits: Limits) -> None:
    """Refuse a package with a DTD in any XML part: the way entity attacks get in."""
    for info in zf.infolist():
        name = info.filename.lower()
        if not name.endswith((".xml", ".rels", ".vml")) or info.file_size == 0:
            continue
        try:
            with zf.open(info) as f:
                head = f.read(min(info.file_size, 2048))
                prolog = _before_root(head)
                if len(prolog) == len(_PROLOG_JUNK.sub(b"", head)) and len(head) == 2048:
                    head += f.read(limits.max_prolog - len(head))  # no root element yet
                    prolog = _before_root(head)
        except Exception:  # damaged (zlib.error, CRC, ...): the reader will say so itself
            continue
        if not _FIRST_ELEMENT.search(_PROLOG_JUNK.sub(b"", head)) and len(head) >= 2048:
            # No element within the scanned bytes: a padded preamble, which spreadsheet
            # programs never write, can hide a DTD from a check of the first bytes (and
            # not every reader used afterwards refuses DTDs itself).
            raise Refused(
                f"{p.name} has an XML part ({info.filename}) whose content does not begin "
                f"within its first {limits.max_prolog // 1024} KB; that padding can hide a "
                "document type declaration, so the workbook was not read. Open it in your "
                "spreadsheet program and save it again as .xlsx.",
                "file-unsafe-xml",
            )
        if _DTD.search(prolog):
            raise Refused(
                f"{p.name} contains a document type declaration (in its part "
                f"{info.filename}). Spreadsheet programs never write one; it is how files are "
                "made to expand into huge amounts of text or to reach other files, so the "
                "workbook was not read. Check where it came from; if you trust it, open it in "
                "your spreadsheet program and save it again as .xlsx.",
                "file-unsafe-xml",
            )


def _before_root(head: bytes) -> bytes:
    """The prolog of an XML part: everything before its first element, comments removed."""
    text = _PROLOG_JUNK.sub(b"", head)
    m = _FIRST_ELEMENT.search(text)
    return text[: m.start()] if m else text
