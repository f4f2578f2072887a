"""Every constant of the method is documented, with the value the code uses.

docs/reports.md holds a table of the method's constants (value, where in the code,
source). Each row is read here and its value compared with the code's: a constant changed
in one place and not the other fails. Constants given as a function's default parameter
(the Croston/SBA smoothing constant) are read from the signature.
"""

from __future__ import annotations

import ast
import importlib
import inspect
import math
import re
from pathlib import Path

import pytest

DOC = Path(__file__).resolve().parents[2] / "docs" / "reports.md"


def _rows() -> list[tuple[str, object, str]]:
    text = DOC.read_text(encoding="utf-8")
    table = text.split("<!-- constants -->", 1)[1].split("<!-- end constants -->", 1)[0]
    out = []
    for line in table.strip().splitlines()[2:]:  # past the header and its rule
        cells = [c.strip() for c in line.strip().strip("|").split("|")]
        name, value, where = cells[0], ast.literal_eval(cells[1]), cells[2].strip("`")
        out.append((name, value, where))
    return out


def _from_code(where: str) -> object:
    m = re.fullmatch(r"([\w.]+)\((\w+)=\)", where)
    if m:  # a function's default parameter
        module, _, func = m.group(1).rpartition(".")
        fn = getattr(importlib.import_module(module), func)
        return inspect.signature(fn).parameters[m.group(2)].default
    module, _, name = where.rpartition(".")
    return getattr(importlib.import_module(module), name)


ROWS = _rows()


def test_the_table_is_there_and_names_the_smoothing_constant():
    names = [r[0] for r in ROWS]
    assert len(ROWS) >= 30
    assert "Croston/SBA smoothing constant" in names
    assert len(set(names)) == len(names)


@pytest.mark.parametrize("name,value,where", ROWS, ids=[r[0] for r in ROWS])
def test_documented_value_is_the_codes(name, value, where):
    got = _from_code(where)
    if isinstance(value, tuple):
        assert tuple(got) == pytest.approx(value, rel=1e-12), name
    else:
        assert math.isclose(float(got), float(value), rel_tol=1e-12), (name, got, value)


def test_every_public_constant_of_the_back_test_is_documented():
    import xlpolicy.backtest as bt

    documented = {r[2] for r in ROWS}
    numeric = [
        k
        for k, v in vars(bt).items()
        if k.isupper() and isinstance(v, (int, float)) and not isinstance(v, bool)
    ]
    missing = [k for k in numeric if f"xlpolicy.backtest.{k}" not in documented]
    assert not missing, missing
