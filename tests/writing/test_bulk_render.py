"""The template renderer of cell blocks (writing/bulk.py) writes exactly what the plain
per-cell renderer it replaced wrote, byte for byte.

``_reference_rows`` below is that per-cell renderer, kept as the oracle: one f-string a
cell, Python's ``repr`` for numbers (the shortest text that reads back as the same float),
XML 1.0 escaping of & < > and ECMA-376 Part 1, 22.9.2.19 escaping of a literal _xHHHH_.
The awkward values are the edges of float formatting (signed zero, subnormals, the switch
to an exponent at 1e16, integers past 2**53), text that needs escaping, a quote prefix or
kept spaces, text holding the ``%`` signs the templates use, and chunks whose rows take
different cell templates. The XML is also parsed back (lxml) and its numbers compared with
the floats given, to the last bit.
"""

from __future__ import annotations

import re

import numpy as np
import pytest
from lxml import etree
from xlsxwriter.format import Format

from xlpolicy.writing.bulk import ROW, CellBlock, _Column, _xml_text

_FORMULA_LEAD = ("=", "+", "-", "@")

NUMBERS = [
    -0.0,
    0.0,
    1e-300,
    5e-324,
    2.2250738585072014e-308,
    1e16,
    9999999999999998.0,
    1e15 + 0.5,
    float(2**53),
    float(2**53 + 2),
    1e300,
    -1e300,
    1.7976931348623157e308,
    np.nan,
    np.inf,
    -np.inf,
    0.1 + 0.2,
    1 / 3,
    -2.5,
    12.0,
    1e-5,
    0.0001,
    123456789.125,
    -7.0,
    1e22,
    4.35,
    None,
]
TEXTS = [
    "000123",
    "plain",
    "a & b < c > d",
    "=1+1",
    "-dash",
    "@at",
    "+plus",
    "  lead",
    "trail ",
    "two\nlines",
    "_x0041_ literal",
    "_X0041_ upper",
    "",
    None,
    "100%",
    "%s and %r and %%",
    "%.0s",
    "naïve – ünïcode",
    "tab\there",
    "x\u00a0",
]


def _reference_rows(block: CellBlock, xf_of, chunk_rows: int) -> list[str]:
    """The per-cell renderer the template renderer replaced (the oracle)."""
    from xlsxwriter.utility import xl_col_to_name

    def style(fmt):
        return '"' if fmt is None else f'" s="{xf_of(fmt)}"'

    def text_cell(start, plain, quoted, v):
        st = quoted if v.startswith(_FORMULA_LEAD) else plain
        space = ' xml:space="preserve"' if v[0].isspace() or v[-1].isspace() else ""
        return f'{start}{st} t="inlineStr"><is><t{space}>{_xml_text(v)}</t></is></c>'

    def render(c: _Column, letter, xf, a, b, rows):
        plain, quoted = xf
        open_ = f'<c r="{letter}'
        if c.kind == "text":
            return [
                text_cell(f"{open_}{r}", plain, quoted, v) if v else f"{open_}{r}{plain}/>"
                for r, v in zip(rows, c.values[a:b], strict=True)
            ]
        if c.kind == "mixed":
            return [
                f"{open_}{r}{plain}><v>{v!r}</v></c>"
                if isinstance(v, float)
                else text_cell(f"{open_}{r}", plain, plain, v)
                if v
                else f"{open_}{r}{plain}/>"
                for r, v in zip(rows, c.values[a:b], strict=True)
            ]
        values = c.values[a:b].tolist()
        if c.kind == "number":
            return [
                f"{open_}{r}{plain}><v>{v!r}</v></c>" if v == v else f"{open_}{r}{plain}/>"
                for r, v in zip(rows, values, strict=True)
            ]
        live = c.live[a:b].tolist()
        if c.each is not None:
            return [
                (
                    f"{open_}{r}{plain}><f>{f}</f><v>{v!r}</v></c>"
                    if on
                    else f"{open_}{r}{plain}><v>{v!r}</v></c>"
                    if v == v
                    else f"{open_}{r}{plain}/>"
                )
                for r, v, on, f in zip(rows, values, live, c.each[a:b], strict=True)
            ]
        return [
            (
                f"{open_}{r}{plain}><f>{r.join(c.pieces)}</f><v>{v!r}</v></c>"
                if on
                else f"{open_}{r}{plain}><v>{v!r}</v></c>"
                if v == v
                else f"{open_}{r}{plain}/>"
            )
            for r, v, on in zip(rows, values, live, strict=True)
        ]

    cols = [block._cols[c] for c in block.columns]
    letters = [xl_col_to_name(c.col) for c in cols]
    styles = [(style(c.fmt), style(c.quoted)) for c in cols]
    out = []
    for a in range(0, block.n_rows, chunk_rows):
        b = min(a + chunk_rows, block.n_rows)
        rows = [str(r) for r in range(block.first_row + a + 1, block.first_row + b + 1)]
        cells = [
            render(c, letter, xf, a, b, rows)
            for c, letter, xf in zip(cols, letters, styles, strict=True)
        ]
        out.append(
            "".join(
                [
                    f'<row r="{r}">' + "".join(parts) + "</row>"
                    for r, *parts in zip(rows, *cells, strict=True)
                ]
            )
        )
    return out


@pytest.fixture
def formats():
    fmts = [
        Format({"num_format": "0.00"}),
        Format({"bold": True}),
        Format({"num_format": "@"}),
        Format({"num_format": "@", "quote_prefix": True}),
    ]
    xf = {id(f): 3 + k for k, f in enumerate(fmts)}
    return fmts, (lambda f: xf[id(f)])


def _awkward_block(fmts, first_row: int) -> CellBlock:
    n = len(NUMBERS)
    texts = (TEXTS * 2)[:n]
    rng = np.random.default_rng(7)
    nums = np.array([np.nan if v is None else v for v in NUMBERS], dtype=float)
    block = CellBlock(first_row, n)
    block.numbers(0, NUMBERS, fmts[0])
    block.texts(1, texts, fmts[2], fmts[3])
    block.texts(
        2,
        [
            t
            if t
            and t[0] not in "=+-@ "
            and not t.endswith(" ")
            and "&" not in t
            and "<" not in t
            and "_x" not in t
            else "ok"
            for t in texts
        ],
        fmts[2],
        fmts[3],
    )  # a column with no awkward text
    live = rng.random(n) < 0.5
    with np.errstate(over="ignore"):  # the largest float doubled: infinite, so blank
        doubled = nums * 2
    block.formulas(
        4, f'=A{ROW}*2+IF(B{ROW}="",0,1)/100%', live, doubled, fmts[1], otherwise=nums[::-1].copy()
    )
    block.formulas(5, [f"='Other sheet'!$C${k + 9}&\"<&>\"" for k in range(n)], ~live, nums, None)
    block.formulas(7, f"=A{ROW}", np.ones(n, dtype=bool), nums, None)  # no otherwise
    block.numbers(
        8, [v if k % 3 else "text among numbers" for k, v in enumerate(NUMBERS)], None
    )  # a mixed column
    block.numbers(9, np.full(n, np.nan), fmts[0])  # all blank
    return block


@pytest.mark.parametrize("chunk_rows", [1, 4, 7, 1000])
@pytest.mark.parametrize("first_row", [0, 5, 1_048_000])
def test_template_renderer_equals_per_cell_renderer(formats, chunk_rows, first_row):
    fmts, xf_of = formats
    block = _awkward_block(fmts, first_row)
    got = list(block.rows_xml(xf_of, chunk_rows))
    assert got == _reference_rows(block, xf_of, chunk_rows)


def test_rendered_numbers_read_back_to_the_same_floats(formats):
    fmts, xf_of = formats
    block = _awkward_block(fmts, 0)
    xml = "".join(block.rows_xml(xf_of, 5))
    root = etree.fromstring(f'<sheetData xmlns="x">{xml}</sheetData>')
    got = {c.get("r"): c for c in root.iter("{x}c")}
    for k, v in enumerate(NUMBERS):
        cell = got[f"A{k + 1}"]
        value = cell.findtext("{x}v")
        if v is None or not np.isfinite(v):
            assert value is None and cell.get("s") == "3"  # a blank keeping its format
        else:
            assert float(value) == v and np.signbit(float(value)) == np.signbit(v)
    assert got["A1"].findtext("{x}v") == "-0.0"
    # text with % signs is the text itself, not formatting
    texts = {c.get("r"): "".join(c.itertext()) for c in got.values() if c.get("t")}
    assert "%s and %r and %%" in texts.values() and "%.0s" in texts.values()
    # the formula pattern's % sign and every row number in it
    assert got["E2"].findtext("{x}f") in (None, 'A2*2+IF(B2="",0,1)/100%')
    assert (
        any(c.findtext("{x}f") == 'A3*2+IF(B3="",0,1)/100%' for c in got.values())
        or not block._cols[4].live[2]
    )


def test_large_random_block_equals_per_cell_renderer(formats):
    """Many rows with random blanks: chunks mixing several row templates."""
    fmts, xf_of = formats
    rng = np.random.default_rng(11)
    n = 5000
    values = rng.standard_normal(n) * 10.0 ** rng.integers(-8, 20, n)
    values[rng.random(n) < 0.2] = np.nan
    whole = rng.random(n) < 0.3
    values[whole] = np.round(values[whole])  # integer-valued floats
    words = np.array(["", "alpha", "b & c", " sp", "=x", "x_x00A0_y", "%d"], dtype=object)
    block = CellBlock(1, n)
    block.numbers(0, values, fmts[0])
    block.texts(1, words[rng.integers(0, len(words), n)].tolist(), fmts[2], fmts[3])
    block.formulas(
        2, f"=A{ROW}+{ROW}", rng.random(n) < 0.7, values + 1, fmts[1], otherwise=values * 3
    )
    got = list(block.rows_xml(xf_of, 512))
    assert got == _reference_rows(block, xf_of, 512)
    assert len(re.findall(r"<row ", "".join(got))) == n


def _old_plain(values: list) -> bool:
    """The per-value check the column-wide search replaced (the oracle)."""
    plain = not any(v and (v[0] in "=+-@" or v[-1].isspace() or v[0].isspace()) for v in values)
    return plain and not re.search(r"[&<>]|_x[0-9A-Fa-f]{4}_", "\n".join(v or "" for v in values))


@pytest.mark.parametrize(
    "extra",
    [
        *TEXTS,
        "ends=",
        "ends-",
        "mid = dle",
        "x_x12",
        "_x12G_",
        "\u2003em space",
        "em space\u2003",
        "a\nb ",
        "\tx",
        "x_",
    ],
)
def test_plain_column_check_equals_per_value_check(formats, extra):
    fmts, _ = formats
    for values in ([extra], ["ok", extra, "fine"], ["ok", None, extra], [extra, ""]):
        block = CellBlock(0, len(values))
        block.texts(0, values, fmts[2], fmts[3])
        assert block._cols[0].plain == _old_plain(values), values


@pytest.mark.parametrize(
    "formula", ["='Policy'!$Y${k}", '=A{k}&"<b>"', '="_x0041_"&A{k}', "B{k}*2"]
)
def test_each_row_formulas_equal_per_cell_renderer(formats, formula):
    """Formulas given row by row: escaped only when one of them needs it, as before."""
    fmts, xf_of = formats
    n = 9
    live = np.arange(n) % 4 != 1
    block = CellBlock(2, n)
    block.formulas(
        0,
        [formula.format(k=k + 3) for k in range(n)],
        live,
        np.arange(n) * 1.5,
        fmts[0],
        otherwise=np.where(np.arange(n) % 3, 7.0, np.nan),
    )
    assert list(block.rows_xml(xf_of, 4)) == _reference_rows(block, xf_of, 4)


def test_arrow_shortest_texts_equal_repr():
    """Arrow's shortest formatting, where used, gives repr's text to the byte.

    Both are shortest round-trip formatters (David Gay's dtoa in CPython, double-conversion
    in Arrow); values over the whole range of magnitudes, short decimals, whole numbers,
    signed zeros, subnormals and NaN, compared with repr itself.
    """
    pytest.importorskip("pyarrow")
    from xlpolicy.writing import bulk

    assert bulk._check_shortest_texts()
    rng = np.random.default_rng(17)
    n = 200_000
    values = np.concatenate(
        [
            10.0 ** rng.uniform(-8, 20, n) * rng.choice([-1.0, 1.0], n),
            np.round(rng.uniform(-1e7, 1e7, n), 3),
            rng.integers(-(10**13), 10**13, n) / 1000.0,
            rng.integers(1, 10**6, n) / rng.integers(1, 1000, n),
            np.array(NUMBERS[:-1]),
        ]
    )
    assert bulk._shortest_texts(values) == list(map(repr, values.tolist()))


@pytest.mark.parametrize("arrow", [True, False])
def test_renderer_with_and_without_arrow_equals_per_cell_renderer(formats, monkeypatch, arrow):
    from xlpolicy.writing import bulk

    if arrow:
        pytest.importorskip("pyarrow")
    monkeypatch.setattr(bulk, "_SHORTEST_MIN_ROWS", 0)
    monkeypatch.setattr(bulk, "_shortest_ok", None if arrow else False)
    fmts, xf_of = formats
    block = _awkward_block(fmts, 3)
    rng = np.random.default_rng(2)
    block.numbers(10, 10.0 ** rng.uniform(-6, 18, block.n_rows), fmts[0])
    slots = [bulk._slot(block._cols[c], xf_of) for c in block.columns]
    assert any("%r" not in "".join(s.cells) for s in slots if s.cells[0].count("<v>")) == arrow
    assert list(block.rows_xml(xf_of, 5)) == _reference_rows(block, xf_of, 5)
