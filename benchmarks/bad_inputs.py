"""Time `xlpolicy plan` on every bad input of tests/data/make_bad.py, each in a fresh process.

    python benchmarks/bad_inputs.py              # the table; exit 1 if a case is over the limit
    python benchmarks/bad_inputs.py --limit 10   # a tighter limit, in seconds

The tests check what each bad file does (exit status, messages, unchanged input, peak
memory) but never how long it takes, because a test that depends on the machine's speed
fails on a loaded machine while the code is fine. The time bound lives here instead: a
hostile file (an entity expansion, a zip bomb, a sheet claiming billions of cells) must be
refused or read in about the time a good workbook takes, never in minutes. Run it on an
otherwise idle machine; the good workbook's row is the yardstick.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
sys.path.insert(0, str(ROOT / "tests" / "data"))
import make_bad  # noqa: E402

LIMIT_S = 30.0  # generous: the slowest case takes a few seconds on an idle machine


def run(path: Path, out: Path) -> tuple[int, float, float]:
    """(exit status, wall seconds, peak RSS MB) of `python -m xlpolicy plan PATH -o OUT`."""
    env = dict(os.environ)
    env.pop("XLPOLICY_DEBUG", None)
    env.pop("XLPOLICY_ALLOW_LARGE", None)
    t0 = time.perf_counter()
    proc = subprocess.Popen(
        [sys.executable, "-m", "xlpolicy", "plan", str(path), "-q", "-o", str(out)],
        stdout=subprocess.DEVNULL,
        stderr=subprocess.DEVNULL,
        cwd=str(out.parent),
        env=env,
    )
    _, status, usage = os.wait4(proc.pid, 0)
    seconds = time.perf_counter() - t0
    return os.waitstatus_to_exitcode(status), seconds, usage.ru_maxrss / 1024


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--limit", type=float, default=LIMIT_S, help="seconds allowed per case")
    a = ap.parse_args(argv)
    over = []
    with tempfile.TemporaryDirectory(prefix="xlpolicy-bad-") as tmp:
        folder = Path(tmp)
        built = folder / "built"
        make_bad.build_all(built, committed=False)
        paths = {"(good workbook)": make_bad.good_workbook(folder / "good.xlsx")}
        paths.update(
            {c.name: (make_bad.BAD if c.committed else built) / c.name for c in make_bad.CASES}
        )
        print(f"python {sys.version.split()[0]}, {os.cpu_count()} cores; limit {a.limit:g} s")
        print("| file | exit | time | peak RSS MB |")
        print("|" + " --- |" * 4)
        for k, (name, path) in enumerate(paths.items()):
            code, seconds, rss = run(path, folder / f"out-{k}.xlsx")
            flag = " (over the limit)" if seconds > a.limit else ""
            print(f"| {name} | {code} | {seconds:.2f} s{flag} | {rss:.0f} |", flush=True)
            if seconds > a.limit:
                over.append(name)
    if over:
        print(f"over {a.limit:g} s: {', '.join(over)}", file=sys.stderr)
    return 1 if over else 0


if __name__ == "__main__":
    raise SystemExit(main())
