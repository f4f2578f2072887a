"""Take the picture of the owner's page for docs/page.md.

    python examples/make_page_picture.py        # rewrites docs/pictures/page.png

Serves the page as ``xlpolicy open`` does (127.0.0.1, a new key), opens it in the system's
headless Chromium through Playwright, drops examples/demo-shop.xlsx on it through the file
input, waits for the result and saves a screenshot of the whole page. Needs the test extra
(Playwright) and Debian's chromium package; the same browser and flags as the tests.
"""

from __future__ import annotations

import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent))

from xlpolicy.page.harness import CHROMIUM_ARGS, find_chromium, start_in_thread  # noqa: E402

DEMO = HERE / "demo-shop.xlsx"
OUT = HERE.parent / "docs" / "pictures" / "page.png"
WIDTH = 1280
HEIGHT = 1900


def take(out: Path = OUT, width: int = WIDTH) -> Path:
    from playwright.sync_api import sync_playwright

    chromium = find_chromium()
    if chromium is None:
        raise SystemExit("Chromium is not installed (Debian: apt-get install chromium)")
    running = start_in_thread()
    try:
        with sync_playwright() as p:
            browser = p.chromium.launch(executable_path=chromium, args=CHROMIUM_ARGS)
            page = browser.new_page(viewport={"width": width, "height": 900})
            page.set_default_timeout(120_000)
            page.goto(running.url)
            page.wait_for_selector("body[data-state=ready]")
            page.set_input_files("#picker", str(DEMO))
            page.wait_for_selector("#result:not([hidden]), #failed:not([hidden])")
            page.evaluate("() => document.getElementById('choices').open = true")
            out.parent.mkdir(parents=True, exist_ok=True)
            # the top of the page: choices, headlines, the reorder list, the first problems
            height = page.evaluate("() => document.documentElement.scrollHeight")
            clip = {"x": 0, "y": 0, "width": width, "height": min(height, HEIGHT)}
            page.screenshot(path=str(out), full_page=True, clip=clip)
            browser.close()
    finally:
        running.stop()
    return out


if __name__ == "__main__":
    print(take())
