"""The column-at-a-time readers of codes and text equal the cell-at-a-time ones.

``item_codes`` and ``texts`` take a quick pass for plain text; these property tests
(hypothesis) give them every kind of awkward value and require exactly the result of
``item_code`` and ``text`` on each value.
"""

from __future__ import annotations

import datetime as dt

from hypothesis import given
from hypothesis import strategies as st

from xlpolicy.reading.cells import item_code, item_codes, text, texts

_AWKWARD = st.sampled_from(
    [
        " ",
        "  ",
        "\t",
        "\n",
        "\u00a0",
        "\u2007",
        "\u202f",
        "\u3000",
        "_x0009_",
        "_x005F_",
        "_x",
        "0",
        "A",
        "é",
        "-",
        ".",
    ]
)
_TEXT = st.lists(st.one_of(_AWKWARD, st.text(max_size=3)), max_size=6).map("".join)
_VALUES = st.one_of(
    _TEXT,
    st.none(),
    st.integers(-(10**6), 10**16),
    st.floats(allow_nan=False, allow_infinity=False),
    st.booleans(),
    st.just(dt.datetime(2024, 5, 1, 12, 30)),
    st.just(dt.date(2024, 5, 1)),
)


@given(
    st.lists(st.tuples(_VALUES, st.sampled_from(["", "General", "000000", "0.0%"])), max_size=30)
)
def test_item_codes_equal_item_code_of_each(pairs: list) -> None:
    values = [v for v, _ in pairs]
    formats = [f for _, f in pairs]
    assert item_codes(values, formats) == [item_code(v, f) for v, f in pairs]


@given(st.lists(_VALUES, max_size=30))
def test_texts_equal_text_of_each(values: list) -> None:
    assert texts(values) == [text(v) for v in values]
