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

PARTS = ['<c r="A1" t="s"><v>0</v></c>', '<c r="B1" t="str"><f>X</f><v>a</v></c>',
         '<c r="C1" t="inlineStr"><is><t>text</t></is></c>', '<c r="D1" t="b"><v>1</v></c>',
         '<c r="E1" t="e"><v>#N/A</v></c>', '<c r="F1" s="2"><v>4.5</v></c>',
         '<c r="G1" t="n"><v>3</v></c>', "<c r='H1' t='s'><v>1</v></c>",
         '<c r="I1"><f>SUM(A1:A2)</f><v>3</v></c>', '<c r="J1"><f t="shared" si="0"/></c>',
         '<row r="2" ht="15" hidden="1">', "</row>", '<mergeCell ref="A1:B2"/>',
         '<c r="K1" t="inlineStr"><is><t>hid den f> <f t</t></is></c>', "<x:f>1</x:f>",
         '<c r="L1" t="d"><v>2024-01-01</v></c>', '<c\nr="M1"\nt="s"><v>2</v></c>',
         '<sheetView workbookViewId="0"/>', '<c r="N1" t="inlineStr"><is><t>merge Cell'
         '</t></is></c>', '<col min="1" max="1" width="9"/>']


def _reference(piece: bytes) -> tuple:
    types = re.findall(rb'\st=["\'](\w+)["\']', piece)
    return (sum(t in (b"s", b"str", b"inlineStr") for t in types), b"b" in types,
            b"e" in types, bool(re.search(rb"[<:]f[\s>/]", piece)),
            b"hidden" in piece or b"mergeCell" in piece)


@settings(max_examples=200, deadline=None)
@given(st.lists(st.sampled_from(PARTS), max_size=30))
def test_the_tally_equals_regular_expressions(parts: list[str]) -> None:
    piece = "".join(parts).encode()
    got = _tally(piece)
    assert (got.text_cells, got.bools, got.errors, got.formulas,
            got.layout_words) == _reference(piece)


def test_types_written_with_spaces_make_the_count_unknown() -> None:
    got = _tally(b'<c r="A1" t = "b"><v>1</v></c>')
    assert got.text_cells < 0 and got.bools  # unknown, and on the safe side
