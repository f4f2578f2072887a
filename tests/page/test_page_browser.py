"""The owner's page in a real browser: headless Chromium (the system's package) driven by
Playwright, against the page served by uvicorn on 127.0.0.1.

What the page shows is checked against the command line on the same file: the headline and
a reorder line against ``xlpolicy plan --csv``, the downloaded workbook part for part
against ``xlpolicy plan``'s (the package's timestamps aside), a bad file's message against
``xlpolicy check``. Skipped, with the reason, where Chromium or Playwright is missing;
with XLPOLICY_REQUIRE_BROWSER=1 (as .ci/run sets) their absence fails instead.
"""

from __future__ import annotations

import base64
import os
import re
import zipfile
from pathlib import Path

import pytest

REQUIRE = bool(os.environ.get("XLPOLICY_REQUIRE_BROWSER"))

try:
    from playwright.sync_api import sync_playwright

    from xlpolicy.page.harness import CHROMIUM_ARGS, find_chromium, start_in_thread
except ImportError as exc:  # pragma: no cover - depends on the machine
    if REQUIRE:
        raise
    pytest.skip(f"the page or Playwright is not installed ({exc})", allow_module_level=True)

CHROMIUM = find_chromium()
if CHROMIUM is None:  # pragma: no cover - depends on the machine
    if REQUIRE:
        raise RuntimeError("XLPOLICY_REQUIRE_BROWSER is set but Chromium is not installed")
    pytest.skip(
        "Chromium is not installed (.ci/run installs it: apt-get install chromium)",
        allow_module_level=True,
    )

import pandas as pd  # noqa: E402
from click.testing import CliRunner  # noqa: E402

import xlpolicy  # noqa: E402
from xlpolicy.cli import main  # noqa: E402

REPO = Path(__file__).resolve().parents[2]
DEMO = REPO / "examples" / "demo-shop.xlsx"
BAD = REPO / "tests" / "data" / "bad"
#: Parts a spreadsheet package stamps with the time it was written (ECMA-376 Part 2,
#: core properties: dcterms:created / dcterms:modified; from memory).
TIMESTAMPED = {"docProps/core.xml"}
WAIT_MS = 120_000  # Playwright's own limit on one wait; generous for a loaded machine


@pytest.fixture(scope="module")
def cli(tmp_path_factory):
    """The command line's outputs for the demo: the workbook and the CSV."""
    tmp = tmp_path_factory.mktemp("cli")
    out = CliRunner().invoke(
        main,
        ["plan", str(DEMO), "-o", str(tmp / "demo-shop-policy.xlsx"), "--csv", str(tmp / "c.csv")],
    )
    assert out.exit_code == 0, out.output
    return tmp / "demo-shop-policy.xlsx", pd.read_csv(tmp / "c.csv", dtype={"item": str})


@pytest.fixture(scope="module")
def served():
    running = start_in_thread()
    yield running
    running.stop()
    assert not running.app.state.jobs.root.exists()


@pytest.fixture(scope="module")
def browser():
    with sync_playwright() as p:
        b = p.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_ARGS)
        yield b
        b.close()


@pytest.fixture
def page(browser, served):
    context = browser.new_context(accept_downloads=True, viewport={"width": 1280, "height": 900})
    pg = context.new_page()
    pg.set_default_timeout(WAIT_MS)
    pg.goto(served.url)
    pg.wait_for_selector("body[data-state=ready]")
    yield pg
    context.close()


def wait_done(page) -> None:
    page.wait_for_selector("#result:not([hidden]), #failed:not([hidden])")


def check_against_cli(page, csv: pd.DataFrame) -> None:
    """The headline and the first reorder line are the command line's."""
    assert page.is_visible("#result") and not page.is_visible("#failed")
    due = csv[csv["order_now_qty"] > 0]
    assert page.text_content("#h-order-figure") == f"{len(due)} items"
    value = float((due["order_now_qty"] * due["unit_price"].fillna(due["unit_cost"])).sum())
    assert page.text_content("#h-order-note") == f"worth ${value:,.2f}"
    assert page.text_content("#h-cost-figure") == f"${csv['annual_total_cost'].sum():,.2f}"
    # the first line of the list: the first supplier in order, its first item
    first = due.sort_values(["supplier", "item"]).iloc[0]
    row = page.locator("#reorder tbody").first.locator("tr").nth(1)
    cells = row.locator("td").all_text_contents()
    titles = page.locator("#reorder thead th").all_text_contents()
    assert cells[titles.index("Item")] == first["item"]
    assert cells[titles.index("Order now")] == f"{first['order_now_qty']:,.0f}"
    assert page.locator("#reorder tbody th").first.text_content().startswith(first["supplier"])
    assert "licensed staff" in page.text_content("#caution")


def parts(path: Path) -> dict[str, bytes]:
    with zipfile.ZipFile(path) as z:
        return {n: z.read(n) for n in z.namelist() if n not in TIMESTAMPED}


def download_workbook(page, tmp_path: Path, keyboard: bool = False) -> Path:
    with page.expect_download() as info:
        if keyboard:
            page.keyboard.press("Enter")
        else:
            page.click("#get-workbook")
    target = tmp_path / info.value.suggested_filename
    info.value.save_as(target)
    return target


def test_upload_through_the_file_input(page, cli, tmp_path, served):
    cli_book, csv = cli
    page.set_input_files("#picker", str(DEMO))
    wait_done(page)
    check_against_cli(page, csv)
    got = download_workbook(page, tmp_path)
    assert got.name == "demo-shop-policy.xlsx"
    assert parts(got) == parts(cli_book)  # part for part the command line's workbook
    # (waits by selector: the page's Content-Security-Policy forbids evaluated strings)
    page.wait_for_selector("#download-note:has-text('was removed')")


def test_upload_by_a_drop_event(page, cli):
    _, csv = cli
    data = base64.b64encode(DEMO.read_bytes()).decode()
    transfer = page.evaluate_handle(
        """(b64) => {
            const bytes = Uint8Array.from(atob(b64), (c) => c.charCodeAt(0));
            const dt = new DataTransfer();
            dt.items.add(new File([bytes], "demo-shop.xlsx"));
            return dt;
        }""",
        data,
    )
    page.dispatch_event("#drop", "dragover", {"dataTransfer": transfer})
    page.dispatch_event("#drop", "drop", {"dataTransfer": transfer})
    wait_done(page)
    check_against_cli(page, csv)


def test_a_bad_file_shows_the_command_lines_message(page):
    bad = BAD / "random-bytes.xlsx"
    expected = xlpolicy.check(bad)[0]
    page.set_input_files("#picker", str(bad))
    wait_done(page)
    assert page.is_visible("#failed")
    assert page.text_content("#failed-title") == "Cannot use this workbook"
    first = page.locator("#failed-problems tbody tr").first.locator("td")
    assert first.nth(1).text_content() == expected.where()
    assert first.nth(3).text_content() == expected.message
    assert "Traceback" not in page.content()


def tab_to(page, selector: str, limit: int = 40) -> None:
    """Press Tab until the element matching ``selector`` has the focus."""
    for _ in range(limit):
        page.keyboard.press("Tab")
        if page.evaluate("(s) => document.activeElement.matches(s)", selector):
            return
    raise AssertionError(f"Tab never reached {selector}")


def test_keyboard_only_choose_run_download(page, cli, tmp_path):
    _, csv = cli
    # the page settles (its start-up requests answered) before the first key, as a person's
    # first key comes well after the page appears; without it Chromium was seen to drop
    # the file chooser of a key pressed while the page was still loading
    page.wait_for_load_state("networkidle")
    tab_to(page, "#choose")
    with page.expect_file_chooser() as chooser:
        page.keyboard.press("Enter")
    chooser.value.set_files(str(DEMO))
    wait_done(page)
    check_against_cli(page, csv)
    # open the choices, give a target, run again, all by keyboard
    tab_to(page, "#choices > summary")
    page.keyboard.press("Enter")
    tab_to(page, "#service_target")
    page.keyboard.type("99%")
    tab_to(page, "#rerun")
    page.keyboard.press("Enter")
    page.wait_for_selector("#service_target-used:has-text('99%')")
    assert re.search(r"command line", page.text_content("#service_target-used"))
    tab_to(page, "#get-workbook")
    got = download_workbook(page, tmp_path, keyboard=True)
    with zipfile.ZipFile(got) as z:
        assert z.testzip() is None


def test_a_page_elsewhere_cannot_use_it(browser, served):
    """Another origin in the same browser: its requests carry no key and a foreign Origin."""
    context = browser.new_context()
    pg = context.new_page()
    pg.goto(served.url)  # the owner's tab holds the cookie in this context
    pg.wait_for_selector("body[data-state=ready]")
    other = context.new_page()
    other.goto("about:blank")
    status = other.evaluate(
        """async (base) => {
            try {
                const r = await fetch(base + "/api/about", {credentials: "include"});
                return r.status;
            } catch (e) { return "blocked"; }
        }""",
        served.base,
    )
    assert status in (403, "blocked")
    context.close()
