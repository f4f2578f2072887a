"""Random workbooks and damaged bytes: xlpolicy plans or reports, and never raises otherwise.

Two kinds of test:

- **property** (hypothesis): workbooks shaped like the contract (an Items sheet, a History
  sheet, sometimes Settings) with header spellings, cell types and blanks drawn at random.
  ``xlpolicy.plan`` must either write a policy or raise :class:`UnusableWorkbook`, and the
  input file must be unchanged.
- **fuzz**: the bytes of valid workbooks mutated (bits flipped, pieces cut, repeated or
  overwritten), either in the zip as a whole or inside one XML part that is then zipped
  again (so the parsers, not only the zip checks, see the damage). A fixed count of
  mutations from a fixed seed, so every run tries the same inputs whatever the machine's
  speed; ``python tests/end_to_end/test_fuzz.py 5000`` runs longer and keeps every input that
  raises something unexpected in tests/data/fuzz/, which the last test here replays.
"""

from __future__ import annotations

import datetime as dt
import hashlib
import io
import random
import string
import sys
import tempfile
import zipfile
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from openpyxl import Workbook

# run as a script, too: the corpus builder and the package, from whichever tests folder
_TESTS = next(p for p in Path(__file__).resolve().parents if p.name == "tests")
sys.path.insert(0, str(_TESTS / "data"))
sys.path.insert(1, str(_TESTS.parent))
import make_bad  # noqa: E402

import xlpolicy  # noqa: E402
from xlpolicy.contract import ITEM_COLUMNS  # noqa: E402
from xlpolicy.problems import UnusableWorkbook  # noqa: E402

FUZZ_DIR = _TESTS / "data" / "fuzz"
CI_MUTATIONS = 120
CI_SEED = 20240101


def _spellings(name: str) -> st.SearchStrategy[str]:
    """Ways people write a header: case, underscores, extra spaces, a unit in brackets."""
    return st.sampled_from(
        [
            name,
            name.upper(),
            name.lower().replace(" ", "_"),
            f"  {name} ",
            name.title(),
            f"{name} (units)",
            name.replace(" ", ""),
        ]
    )


CELL = st.one_of(
    st.none(),
    st.integers(-(10**6), 10**9),
    st.floats(allow_nan=True, allow_infinity=False, width=32),
    st.text(
        alphabet=string.ascii_letters + string.digits + string.punctuation + " €£\u00a0",
        max_size=12,
    ),
    st.sampled_from(
        ["n/a", "#N/A", "#DIV/0!", "12%", "$4.50", "1.250,5", "(3)", "=1+1", "000123", "TRUE", ""]
    ),
    st.booleans(),
    st.dates(dt.date(1950, 1, 1), dt.date(2100, 1, 1)),
)


_TEXT = st.text(alphabet=string.ascii_letters + " ", max_size=10)
VALID = {  # a plausible value for columns whose range is narrower than "a positive number"
    "holding_rate": st.floats(0.01, 0.99),
    "service_target": st.floats(0.5, 0.999),
    "description": _TEXT,
    "category": _TEXT,
    "supplier": _TEXT,
    "demand_model": st.sampled_from(
        ["", "auto", "normal", "poisson", "gamma", "negative binomial"]
    ),
    "history_start": st.none(),
    "pack_size": st.integers(1, 24),
    "minimum_order": st.integers(0, 100),
    "on_hand": st.integers(0, 500),
}


@st.composite
def contract_workbook(draw: st.DrawFn) -> bytes:
    """An Items sheet with required and some optional columns, a History, maybe Settings."""
    required = [c for c in ITEM_COLUMNS if c.required != "no"]  # "yes" or "unless ..."
    optional = draw(
        st.lists(
            st.sampled_from([c for c in ITEM_COLUMNS if c.required == "no"]),
            max_size=5,
            unique_by=lambda c: c.key,
        )
    )
    cols = required + optional
    headers = [
        draw(st.one_of(_spellings(c.title), st.sampled_from(sorted(c.names()) or [c.title])))
        for c in cols
    ]
    n_items = draw(st.integers(0, 6))
    codes = [f"P{k}" for k in range(n_items)]
    wb = Workbook()
    ws = wb.active
    ws.title = draw(st.sampled_from(["Items", "items", "Item list", "SKUs"]))
    if draw(st.booleans()):
        ws.append([draw(st.text(alphabet=string.ascii_letters + " ", max_size=20))])  # title
    ws.append(headers)
    for code in codes:
        row = []
        for c in cols:
            if c.key == "item":
                row.append(draw(st.one_of(st.just(code), CELL)))
            elif draw(st.integers(0, 12)) == 0:
                row.append(draw(CELL))
            else:
                row.append(draw(VALID.get(c.key, st.floats(0.01, 500))))
        ws.append(row)
    if draw(st.booleans()):
        hs = wb.create_sheet(draw(st.sampled_from(["History", "Sales", "demand history"])))
        hs.append(
            [draw(_spellings("Item")), draw(_spellings("Period")), draw(_spellings("Quantity"))]
        )
        weeks = draw(st.integers(0, 40))
        for code in codes:
            for w in range(weeks):
                period: object = dt.datetime(2024, 1, 1) + dt.timedelta(weeks=w)
                qty: object = draw(st.integers(0, 50))
                if draw(st.integers(0, 9)) == 0:
                    period = draw(CELL)
                if draw(st.integers(0, 9)) == 0:
                    qty = draw(CELL)
                hs.append([code, period, qty])
    if draw(st.booleans()):
        ss = wb.create_sheet("Settings")
        ss.append(["Setting", "Value"])
        for name in draw(
            st.lists(
                st.sampled_from(
                    [
                        "Period",
                        "Service target",
                        "Holding rate",
                        "Order cost",
                        "Service measure",
                        "Currency",
                        "Nonsense",
                    ]
                ),
                max_size=4,
            )
        ):
            ss.append([name, draw(CELL)])
    buf = io.BytesIO()
    wb.save(buf)
    return buf.getvalue()


def _digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def plan_or_report(path: Path, out: Path) -> str:
    """Run the whole tool on ``path``; 'planned' or 'unusable'. Anything else propagates."""
    try:
        xlpolicy.plan(path, out)
        return "planned"
    except UnusableWorkbook as exc:
        assert exc.problems and all(p.message for p in exc.problems)
        return "unusable"


@pytest.mark.slow  # 40 whole plans
@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(data=contract_workbook())
def test_random_contract_shaped_workbooks_plan_or_report(data):
    with tempfile.TemporaryDirectory() as tmp:
        src = Path(tmp) / "random.xlsx"
        src.write_bytes(data)
        before = _digest(src)
        outcome = plan_or_report(src, Path(tmp) / "random-policy.xlsx")
        assert outcome in ("planned", "unusable")
        assert _digest(src) == before
        written = sorted(p.name for p in Path(tmp).iterdir())
        assert written == (
            ["random-policy.xlsx", "random.xlsx"] if outcome == "planned" else ["random.xlsx"]
        )


# --- byte-level fuzzing -------------------------------------------------------------------


def seeds() -> list[bytes]:
    """Valid workbooks to mutate: the corpus's good workbook and two of its odd-but-valid
    relatives (typed numbers, merged cells)."""
    out = []
    with tempfile.TemporaryDirectory() as tmp:
        for build in (make_bad.good_workbook, make_bad.typed_numbers, make_bad.merged_in_data):
            p = Path(tmp) / "seed.xlsx"
            build(p)
            out.append(p.read_bytes())
    return out


def _mutate_bytes(rng: random.Random, data: bytes) -> bytes:
    b = bytearray(data)
    for _ in range(rng.randint(1, 4)):
        op = rng.randrange(5)
        i = rng.randrange(len(b))
        if op == 0:
            b[i] ^= 1 << rng.randrange(8)
        elif op == 1:
            b[i] = rng.randrange(256)
        elif op == 2:
            del b[i : i + rng.randint(1, 64)]
        elif op == 3:
            j = rng.randrange(len(b))
            b[i:i] = b[j : j + rng.randint(1, 64)]
        else:
            b = b[: max(1, i)]
    return bytes(b)


_JUNK = [
    b"<",
    b">",
    b"&",
    b"&amp;",
    b'"',
    b"\x00",
    b"-1",
    b"1e308",
    b"999999999",
    b"</c>",
    b'<c r="A1" t="s"><v>99</v></c>',
    b'<row r="0">',
    b't="e"',
    b"\xff\xfe",
    b"<v></v>",
    b"NaN",
    b'r="XFD1048576"',
    b's="9999"',
]


def _mutate_part(rng: random.Random, data: bytes) -> bytes:
    with zipfile.ZipFile(io.BytesIO(data)) as zf:
        parts = {n: zf.read(n) for n in zf.namelist()}
    name = rng.choice([n for n in parts if n.endswith((".xml", ".rels"))])
    b = bytearray(parts[name])
    for _ in range(rng.randint(1, 3)):
        i = rng.randrange(max(1, len(b)))
        op = rng.randrange(4)
        if op == 0:
            b[i : i + rng.randint(0, 8)] = rng.choice(_JUNK)
        elif op == 1:
            del b[i : i + rng.randint(1, 200)]
        elif op == 2:
            j = rng.randrange(max(1, len(b)))
            b[i:i] = b[j : j + rng.randint(1, 400)]
        else:
            if b:
                b[i % len(b)] = rng.randrange(32, 127)
    parts[name] = bytes(b)
    out = io.BytesIO()
    with zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED) as zf:
        for n, content in parts.items():
            zf.writestr(n, content)
    return out.getvalue()


def fuzz(
    n: int, seed: int = CI_SEED, keep: Path | None = None
) -> tuple[int, list[tuple[int, str]]]:
    """Run ``n`` mutations drawn from ``seed``; (runs done, failures).

    A failure is any exception other than UnusableWorkbook, or a changed input file. With
    ``keep``, each failing input is saved there as fuzz-<seed>-<k>.xlsx.
    """
    rng = random.Random(seed)
    base = seeds()
    failures: list[tuple[int, str]] = []
    done = 0
    with tempfile.TemporaryDirectory() as tmp:
        src, out = Path(tmp) / "fuzzed.xlsx", Path(tmp) / "fuzzed-policy.xlsx"
        for k in range(n):
            data = rng.choice(base)
            data = _mutate_part(rng, data) if rng.random() < 0.6 else _mutate_bytes(rng, data)
            src.write_bytes(data)
            out.unlink(missing_ok=True)
            try:
                plan_or_report(src, out)
                if src.read_bytes() != data:
                    raise AssertionError("the input file was changed")
            except Exception as exc:  # anything else is a finding
                failures.append((k, f"{type(exc).__name__}: {exc}"[:300]))
                if keep is not None:
                    keep.mkdir(parents=True, exist_ok=True)
                    (keep / f"fuzz-{seed}-{k}.xlsx").write_bytes(data)
            done += 1
    return done, failures


@pytest.mark.slow  # 120 whole plans
def test_mutated_workbooks_plan_or_report():
    done, failures = fuzz(CI_MUTATIONS, seed=CI_SEED)
    assert not failures, failures[:5]
    assert done == CI_MUTATIONS  # every mutation ran, however slow the machine


@pytest.mark.parametrize(
    "path", sorted(FUZZ_DIR.glob("*.xlsx")) or [None], ids=lambda p: p.name if p else "none-kept"
)
def test_inputs_kept_from_earlier_fuzzing_plan_or_report(path, tmp_path):
    if path is None:
        pytest.skip("no fuzz findings kept")
    src = tmp_path / "kept.xlsx"
    src.write_bytes(path.read_bytes())
    plan_or_report(src, tmp_path / "kept-policy.xlsx")
    assert src.read_bytes() == path.read_bytes()


if __name__ == "__main__":
    total = int(sys.argv[1]) if len(sys.argv) > 1 else 1000
    seed = int(sys.argv[2]) if len(sys.argv) > 2 else 1
    runs, found = fuzz(total, seed=seed, keep=FUZZ_DIR)
    print(f"{runs} mutations, {len(found)} unexpected")
    for k, why in found[:30]:
        print(k, why)
