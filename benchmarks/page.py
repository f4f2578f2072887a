"""Time the owner's page against the command line, and watch the server's memory.

    python benchmarks/page.py                     # the demo and a 10,000-item workbook
    python benchmarks/page.py --items 1000 --repeat 3

For each workbook:

- cli: ``python -m xlpolicy plan FILE -o OUT --csv OUT.csv -q`` in a fresh process, wall
  time (Python's start included) and the in-process time of the same call, read from the
  same run as the page does it (api.plan with a CSV), so the page's own cost shows;
- page: ``xlpolicy open --no-browser`` in its own process, driven by the system's headless
  Chromium through Playwright: the time from handing the file to the page's file input to
  the result being on screen (upload, run, polling and drawing included).

Then ten uploads in a row of the larger workbook through the same page, each downloaded
(which removes its folder), with the server's resident memory (VmRSS) and peak (VmHWM,
from /proc) after the first and after the tenth. Needs the test extra and Chromium.
"""

from __future__ import annotations

import argparse
import os
import re
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))

from xlpolicy.page.harness import CHROMIUM_ARGS, find_chromium  # noqa: E402

DEMO = HERE.parent / "examples" / "demo-shop.xlsx"


def memory(pid: int) -> tuple[float, float]:
    """(resident, peak resident) of a process in MB, from /proc."""
    text = Path(f"/proc/{pid}/status").read_text()
    rss = int(re.search(r"VmRSS:\s+(\d+)", text).group(1)) / 1024  # type: ignore[union-attr]
    hwm = int(re.search(r"VmHWM:\s+(\d+)", text).group(1)) / 1024  # type: ignore[union-attr]
    return rss, hwm


def cli_time(book: Path, tmp: Path) -> tuple[float, float]:
    """(wall seconds of the command, seconds of api.plan inside a process)."""
    t0 = time.perf_counter()
    subprocess.run(
        [sys.executable, "-m", "xlpolicy", "plan", str(book), "-o", str(tmp / "o.xlsx"), "-q"]
        + ["--csv", str(tmp / "o.csv")],
        check=True,
        capture_output=True,
    )
    wall = time.perf_counter() - t0
    # a first call in the same process imports the planner; time the second, as the page
    # server has everything imported after its first run
    warm = (
        "import time, xlpolicy\n"
        f"xlpolicy.plan({str(book)!r}, {str(tmp / 'w.xlsx')!r}, csv={str(tmp / 'w.csv')!r})\n"
        "t = time.perf_counter()\n"
        f"xlpolicy.plan({str(book)!r}, {str(tmp / 'p.xlsx')!r}, csv={str(tmp / 'p.csv')!r})\n"
        "print(time.perf_counter() - t)\n"
    )
    out = subprocess.run([sys.executable, "-c", warm], check=True, capture_output=True, text=True)
    return wall, float(out.stdout.strip().splitlines()[-1])


def drop(page, book: Path) -> tuple[float, float]:
    """(seconds from handing the file to the page until its result is drawn, seconds of
    the planning itself inside the server, as the server timed it)."""
    page.evaluate("() => { document.body.dataset.state = 'ready'; }")
    t0 = time.perf_counter()
    page.set_input_files("#picker", str(book))
    page.wait_for_selector("body[data-state=done]")
    total = time.perf_counter() - t0
    return total, float(page.get_attribute("body", "data-run-seconds") or "nan")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--items", type=int, default=10_000)
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--uploads", type=int, default=10)
    args = ap.parse_args()
    from playwright.sync_api import sync_playwright

    tmp = Path(tempfile.mkdtemp(prefix="xlpolicy-page-bench-"))
    big = tmp / f"bench-{args.items}.xlsx"
    subprocess.run(
        [sys.executable, str(HERE / "make_workbook.py"), str(args.items), "-o", str(big)],
        check=True,
        capture_output=True,
    )
    server = subprocess.Popen(
        [sys.executable, "-m", "xlpolicy", "open", "--no-browser"],
        stdout=subprocess.PIPE,
        text=True,
        env={**os.environ, "PYTHONUNBUFFERED": "1"},
    )
    try:
        assert server.stdout is not None
        url = ""
        for line in server.stdout:
            m = re.search(r"(http://127\.0\.0\.1:\d+/\?key=\S+)", line)
            if m:
                url = m.group(1)
                break
        print(f"server pid {server.pid}, memory at start {memory(server.pid)[0]:.0f} MB")
        with sync_playwright() as p:
            browser = p.chromium.launch(executable_path=find_chromium(), args=CHROMIUM_ARGS)
            page = browser.new_page(accept_downloads=True)
            page.set_default_timeout(600_000)
            page.goto(url)
            page.wait_for_selector("body[data-state=ready]")
            drop(page, DEMO)  # the server's first run imports the planner: not timed
            print(
                f"{'workbook':<20}{'cli wall':>10}{'api.plan':>10}{'page':>10}"
                f"{'in page':>10}{'page own':>10}"
            )
            for book in (DEMO, big):
                cli_wall, api_s = min(cli_time(book, tmp) for _ in range(args.repeat))
                page_s, run_s = min(drop(page, book) for _ in range(args.repeat))
                # page own: upload, polling, the result's JSON and drawing it
                print(
                    f"{book.name:<20}{cli_wall:>9.2f}s{api_s:>9.2f}s{page_s:>9.2f}s"
                    f"{run_s:>9.2f}s{page_s - run_s:>9.2f}s"
                )
            print("server memory after each upload of the larger workbook (MB):")
            for k in range(args.uploads):
                drop(page, big)
                with page.expect_download() as info:
                    page.click("#get-workbook")
                info.value.path()
                time.sleep(1.0)
                rss, hwm = memory(server.pid)
                print(f"  upload {k + 1:>2}: resident {rss:5.0f}, peak so far {hwm:5.0f}")
            folders = sum(1 for _ in Path(tempfile.gettempdir()).glob("xlpolicy-page-*/upload-*"))
            print(f"upload folders left after the downloads: {folders}")
            browser.close()
    finally:
        server.terminate()
        server.wait(timeout=60)


if __name__ == "__main__":
    main()
