"""The numpy tally of a sheet's XML equals plain regular expressions on the same bytes.

The scan that runs beside the parse counts text cells and looks for TRUE/FALSE cells,
error cells, formulas, hidden rows and merged cells. It does so with numpy (outside the
interpreter lock); these property tests (hypothesis) build pieces of sheet XML from the
forms ECMA-376 allows and require the same answers as straightforward regular
expressions.
"""

from __future__ import annotations

import re

from hypothesis import given, settings
from hypothesis import strategies as st

from xlpolicy.reading.workbook import _tally

PARTS = [
    '<c r="A1" t="s"><v>0</v></c>',
    '<c r="B1" t="str"><f>X</f><v>a</v></c>',
    '<c r="C1" t="inlineStr"><is><t>text</t></is></c>',
    '<c r="D1" t="b"><v>1</v></c>',
    '<c r="E1" t="e"><v>#N/A</v></c>',
    '<c r="F1" s="2"><v>4.5</v></c>',
    '<c r="G1" t="n"><v>3</v></c>',
    "<c r='H1' t='s'><v>1</v></c>",
    '<c r="I1"><f>SUM(A1:A2)</f><v>3</v></c>',
    '<c r="J1"><f t="shared" si="0"/></c>',
    '<row r="2" ht="15" hidden="1">',
    "</row>",
    '<mergeCell ref="A1:B2"/>',
    '<c r="K1" t="inlineStr"><is><t>hid den f> <f t</t></is></c>',
    "<x:f>1</x:f>",
    '<c r="L1" t="d"><v>2024-01-01</v></c>',
    '<c\nr="M1"\nt="s"><v>2</v></c>',
    '<sheetView workbookViewId="0"/>',
    '<c r="N1" t="inlineStr"><is><t>merge Cell</t></is></c>',
    '<col min="1" max="1" width="9"/>',
]


def _reference(piece: bytes) -> tuple:
    types = re.findall(rb'\st=["\'](\w+)["\']', piece)
    return (
        sum(t in (b"s", b"str", b"inlineStr") for t in types),
        b"b" in types,
        b"e" in types,
        bool(re.search(rb"[<:]f[\s>/]", piece)),
        b"hidden" in piece or b"mergeCell" in piece,
    )


@settings(max_examples=200, deadline=None)
@given(st.lists(st.sampled_from(PARTS), max_size=30))
def test_the_tally_equals_regular_expressions(parts: list[str]) -> None:
    piece = "".join(parts).encode()
    got = _tally(piece)
    assert (got.text_cells, got.bools, got.errors, got.formulas, got.layout_words) == _reference(
        piece
    )


def test_types_written_with_spaces_make_the_count_unknown() -> None:
    got = _tally(b'<c r="A1" t = "b"><v>1</v></c>')
    assert got.text_cells < 0 and got.bools  # unknown, and on the safe side


def test_a_part_reads_the_same_through_either_inflater(tmp_path) -> None:
    """The scan's own inflating reader (ISA-L where installed) gives the member's bytes
    exactly as zipfile does, deflated or stored."""
    import zipfile

    from xlpolicy.reading.workbook import _Inflating, _open_part, _ZipMember

    rng_text = b"".join(
        b'<row r="%d"><c r="A%d"><v>%d</v></c></row>' % (k, k, k * 7919 % 1000)
        for k in range(1, 60000)
    )
    path = tmp_path / "p.zip"
    with zipfile.ZipFile(path, "w") as zf:
        zf.writestr("deflated.xml", rng_text, compress_type=zipfile.ZIP_DEFLATED)
        zf.writestr("stored.xml", rng_text, compress_type=zipfile.ZIP_STORED)

    def whole(stream) -> bytes:
        out = b""
        with stream as fh:
            while chunk := fh.read(1 << 16):
                out += chunk
        return out

    with zipfile.ZipFile(path) as zf:
        info = zf.getinfo("deflated.xml")
    assert whole(_Inflating(path, info)) == rng_text
    import contextlib

    assert whole(contextlib.closing(_ZipMember(path, "stored.xml"))) == rng_text
    for part in ("deflated.xml", "stored.xml"):
        assert whole(_open_part(path, part)) == rng_text


def test_fast_deflate_pieces_inflate_with_zlib() -> None:
    """fastzlib's raw deflate (ISA-L or zlib), primed and sync-flushed piece by piece as the
    writer does, is one stream that zlib itself (RFC 1951) inflates back exactly."""
    import zlib

    from xlpolicy import fastzlib

    data = b"".join(b'<c r="B%d" s="3"><v>%d.25</v></c>' % (k, k) for k in range(200000))
    piece, window = 1 << 18, 1 << 15
    out = (
        b"".join(
            (lambda c: c.compress(data[s : s + piece]) + c.flush(fastzlib.Z_SYNC_FLUSH))(
                fastzlib.compressobj(1, data[s - window : s] if s else b"")
            )
            for s in range(0, len(data), piece)
        )
        + zlib.compressobj(1, zlib.DEFLATED, -15).flush()
    )
    assert zlib.decompress(out, -15) == data
    assert fastzlib.crc32(data) == zlib.crc32(data)


def test_without_isal_fastzlib_is_zlib() -> None:
    """python-isal is optional: in a fresh interpreter where it cannot be imported, the
    same functions are zlib's and still round-trip."""
    import subprocess
    import sys

    code = (
        "import sys; sys.modules['isal'] = None\n"
        "from xlpolicy import fastzlib; import zlib\n"
        "assert not fastzlib.FAST and fastzlib.ERRORS == (zlib.error,)\n"
        "c = fastzlib.compressobj(1); d = c.compress(b'ab' * 999) + c.flush()\n"
        "assert fastzlib.decompressobj().decompress(d) == b'ab' * 999\n"
        "assert fastzlib.crc32(b'abc') == zlib.crc32(b'abc')\n"
    )
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    assert done.returncode == 0, done.stderr
