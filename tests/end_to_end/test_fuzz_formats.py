"""Fuzzing the other readers: a folder of CSV files and an OpenDocument spreadsheet (.ods).

The same promise as tests/end_to_end/test_fuzz.py for .xlsx: whatever the bytes, xlpolicy plans or
reports (UnusableWorkbook), never raises anything else, never changes an input file, and
never puts an infinite or NaN total in the report. Runs are fixed in number and seeded
(no time budget), so a failure is reproducible: ``python tests/end_to_end/test_fuzz_formats.py csv
2000 7`` runs more and prints what it found.

Mutations aim at what these readers interpret: delimiters and quotes, decimal marks and
thousands separators (1.200, 4,50), yes/no words, signs and codes (-0), huge and
non-finite numbers, encodings (BOM, UTF-16, NUL), and in an .ods the value types, repeat
counts and formulas of cells.
"""

from __future__ import annotations

import io
import math
import random
import sys
import tempfile
import warnings
import zipfile
from pathlib import Path
from xml.etree import ElementTree as ET

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "data"))
sys.path.insert(1, str(Path(__file__).resolve().parents[2]))  # run as a script, too
import make_bad  # noqa: E402

import xlpolicy  # noqa: E402
from xlpolicy.problems import UnusableWorkbook  # noqa: E402

CSV_RUNS = 60
ODS_RUNS = 60
SEED = 20240607

_CSV_JUNK = [
    b",",
    b";",
    b"\t",
    b'"',
    b'""',
    b"\r",
    b"\n",
    b"\r\n",
    b"\xef\xbb\xbf",
    b"\x00",
    b"1.200",
    b"4,50",
    b"1.234,5",
    b"1,234.5",
    b"TRUE",
    b"false",
    b"-0",
    b"1e308",
    b"-1e308",
    b"NaN",
    b"inf",
    b"1e-9",
    b"10000",
    b"31/01/2024",
    b"03/04/2024",
    b"2024-13-45",
    b"=1+1",
    b"Caf\xc3\xa9-7",
    b"Cafe\xcc\x81-7",
    b"x" * 5000,
]

_NS = {
    "office": "urn:oasis:names:tc:opendocument:xmlns:office:1.0",
    "table": "urn:oasis:names:tc:opendocument:xmlns:table:1.0",
    "text": "urn:oasis:names:tc:opendocument:xmlns:text:1.0",
}
# (attribute, value) pairs a cell may be given: types, odd values, repeats and formulas
_ODS_ATTRS = [
    ("office:value-type", "boolean"),
    ("office:boolean-value", "true"),
    ("office:value-type", "float"),
    ("office:value-type", "percentage"),
    ("office:value-type", "currency"),
    ("office:value-type", "date"),
    ("office:value-type", "time"),
    ("office:value-type", "string"),
    ("office:value", "1e308"),
    ("office:value", "NaN"),
    ("office:value", "-0"),
    ("office:value", "1"),
    ("office:value", "abc"),
    ("office:date-value", "2024-02-30"),
    ("office:date-value", "2024-01-05T00:00:00"),
    ("office:time-value", "PT25H"),
    ("table:formula", "of:=TRUE()"),
    ("table:number-columns-repeated", "20000"),
    ("table:number-columns-repeated", "-3"),
]
_ODS_TEXTS = ["1.200", "4,50", "TRUE", "FALSE", "-0", "", "1e308", "Café-7", "03/04/2024"]


def _csv_seed(folder: Path) -> dict[str, bytes]:
    """Items.csv and History.csv of three invented items, as bytes."""
    items = (
        "Item,Description,Unit cost,Order cost,Holding rate,Lead time days,On hand\n"
        "BOLT-10,bolts,4.50,18,0.22,10,40\n"
        'CHAIN-7,"chains, 7 speed",5.50,18,22%,12,5\n'
        "LAMP-2,lamps,6.50,18,0.22,14,\n"
    )
    rng = random.Random(11)
    history = "Item,Period,Quantity\n" + "".join(
        f"{c},2024-{1 + w // 4:02d}-{1 + 7 * (w % 4):02d},{rng.randint(10, 40)}\n"
        for c in make_bad.CODES
        for w in range(30)
    )
    return {"Items.csv": items.encode(), "History.csv": history.encode()}


def _mutate(rng: random.Random, data: bytes, junk: list[bytes]) -> bytes:
    b = bytearray(data)
    for _ in range(rng.randint(1, 4)):
        i = rng.randrange(max(1, len(b)))
        op = rng.randrange(5)
        if op == 0:
            b[i : i + rng.randint(0, 6)] = rng.choice(junk)
        elif op == 1:
            del b[i : i + rng.randint(1, 80)]
        elif op == 2:
            j = rng.randrange(max(1, len(b)))
            b[i:i] = b[j : j + rng.randint(1, 200)]
        elif op == 3 and b:
            b[i % len(b)] ^= 1 << rng.randrange(8)
        else:
            b[i:i] = rng.choice(junk)
    return bytes(b)


def _check(path: Path, out: Path, inputs: dict[Path, bytes]) -> str:
    """Plan ``path``: 'planned' or 'unusable'; anything else raises (a finding)."""
    try:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            result = xlpolicy.plan(path, out, simulate=False)
        leaked = [str(w.message) for w in caught if issubclass(w.category, RuntimeWarning)]
        assert not leaked, f"numeric warnings would reach the terminal: {leaked[:2]}"
        outcome = "planned"
        totals = result.report.totals
        bad = {k: v for k, v in totals.items() if isinstance(v, float) and math.isinf(v)}
        assert not bad, f"infinite totals {bad}"
    except UnusableWorkbook as exc:
        assert exc.problems and all(p.message for p in exc.problems)
        outcome = "unusable"
    for p, data in inputs.items():
        assert p.read_bytes() == data, f"{p.name} was changed"
    return outcome


def fuzz_csv(n: int, seed: int = SEED) -> tuple[dict[str, int], list[tuple[int, str]]]:
    """``n`` mutated CSV folders; (outcomes counted, failures)."""
    rng = random.Random(seed)
    outcomes: dict[str, int] = {}
    failures: list[tuple[int, str]] = []
    with tempfile.TemporaryDirectory() as tmp:
        base = _csv_seed(Path(tmp))
        for k in range(n):
            folder = Path(tmp) / f"shop{k}"
            folder.mkdir()
            files = dict(base)
            name = rng.choice(sorted(files))
            files[name] = _mutate(rng, files[name], _CSV_JUNK)
            if rng.random() < 0.1:  # now and then, both files
                other = "History.csv" if name == "Items.csv" else "Items.csv"
                files[other] = _mutate(rng, files[other], _CSV_JUNK)
            inputs = {folder / n_: d for n_, d in files.items()}
            for p, d in inputs.items():
                p.write_bytes(d)
            try:
                o = _check(folder, Path(tmp) / f"out{k}.xlsx", inputs)
                outcomes[o] = outcomes.get(o, 0) + 1
            except Exception as exc:  # anything else is a finding
                failures.append((k, f"{type(exc).__name__}: {exc}"[:300]))
    return outcomes, failures


def _q(name: str) -> str:
    prefix, local = name.split(":")
    return f"{{{_NS[prefix]}}}{local}"


def _mutate_cells(rng: random.Random, content: bytes) -> bytes:
    """content.xml with a few cells or rows changed, still well-formed XML."""
    root = ET.fromstring(content)
    rows = list(root.iter(_q("table:table-row")))
    for _ in range(rng.randint(1, 4)):
        row = rng.choice(rows)
        cells = list(row)
        op = rng.randrange(4)
        if op == 0 and cells:  # an attribute
            attr, value = rng.choice(_ODS_ATTRS)
            rng.choice(cells).set(_q(attr), value)
        elif op == 1 and cells:  # the text shown
            cell = rng.choice(cells)
            for child in list(cell):
                cell.remove(child)
            para = ET.SubElement(cell, _q("text:p"))
            para.text = rng.choice(_ODS_TEXTS)
        elif op == 2:  # a row repeated
            row.set(_q("table:number-rows-repeated"), str(rng.choice([2, 1000, 2_000_000])))
        elif cells:  # a cell dropped, shifting the row's values left
            row.remove(rng.choice(cells))
    return ET.tostring(root)


def _ods_seed(tmp: Path) -> bytes:
    p = tmp / "seed.ods"
    make_bad.ods_yes_no(p)
    return p.read_bytes()


def fuzz_ods(n: int, seed: int = SEED) -> tuple[dict[str, int], list[tuple[int, str]]]:
    """``n`` mutated .ods files (content.xml mutated, or the zip's bytes); as fuzz_csv."""
    rng = random.Random(seed)
    outcomes: dict[str, int] = {}
    failures: list[tuple[int, str]] = []
    with tempfile.TemporaryDirectory() as tmp:
        base = _ods_seed(Path(tmp))
        with zipfile.ZipFile(io.BytesIO(base)) as zf:
            parts = {name: zf.read(name) for name in zf.namelist()}
        for k in range(n):
            if rng.random() < 0.8:  # well-formed XML, odd cells: the reader's own logic
                changed = dict(parts)
                changed["content.xml"] = _mutate_cells(rng, parts["content.xml"])
                buf = io.BytesIO()
                with zipfile.ZipFile(buf, "w", zipfile.ZIP_DEFLATED) as zo:
                    for name, part in changed.items():
                        zo.writestr(name, part)
                data = buf.getvalue()
            else:  # damaged bytes: the zip and XML checks
                data = _mutate(rng, base, [b"PK", b"\x00" * 8, b"\xff" * 4, b"<", b"&"])
            src = Path(tmp) / f"shop{k}.ods"
            src.write_bytes(data)
            try:
                o = _check(src, Path(tmp) / f"out{k}.xlsx", {src: data})
                outcomes[o] = outcomes.get(o, 0) + 1
            except Exception as exc:
                failures.append((k, f"{type(exc).__name__}: {exc}"[:300]))
    return outcomes, failures


def test_mutated_csv_folders_plan_or_report():
    outcomes, failures = fuzz_csv(CSV_RUNS)
    assert not failures, failures[:5]
    assert sum(outcomes.values()) == CSV_RUNS
    assert outcomes.get("planned", 0) > 0  # the mutations leave many folders usable


def test_mutated_ods_files_plan_or_report():
    outcomes, failures = fuzz_ods(ODS_RUNS)
    assert not failures, failures[:5]
    assert sum(outcomes.values()) == ODS_RUNS
    assert outcomes.get("planned", 0) > 0 and outcomes.get("unusable", 0) > 0


if __name__ == "__main__":
    kind = sys.argv[1] if len(sys.argv) > 1 else "csv"
    runs = int(sys.argv[2]) if len(sys.argv) > 2 else 500
    seed = int(sys.argv[3]) if len(sys.argv) > 3 else SEED
    outcomes, found = (fuzz_csv if kind == "csv" else fuzz_ods)(runs, seed)
    print(f"{runs} {kind} mutations (seed {seed}): {outcomes}, {len(found)} unexpected")
    for k, why in found[:30]:
        print(k, why)
