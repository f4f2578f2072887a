"""The owner's page over HTTP (Starlette's TestClient): every route, the checks every
request passes, uploads good and bad, and the private folders' lifetimes.

The page must say what the command line says: each bad file's messages are compared with
what :func:`xlpolicy.check` (the function behind ``xlpolicy check``) returns for the same
file, and the CSV the page hands out with the one ``xlpolicy plan --csv`` writes. The
security checks follow common practice for a server on the loopback address: a secret in
the address, a SameSite=Strict cookie (RFC 6265bis), Host and Origin checked against DNS
rebinding (the Fetch standard's Origin and Sec-Fetch-Site headers).
"""

from __future__ import annotations

import asyncio
import io
import shutil
import time
import zipfile
from pathlib import Path
from typing import Any

import pytest

pytest.importorskip("starlette")
pytest.importorskip("httpx")

from builders import simple_workbook  # noqa: E402
from click.testing import CliRunner  # noqa: E402
from starlette.testclient import TestClient  # noqa: E402

import xlpolicy  # noqa: E402
from xlpolicy.cli import main  # noqa: E402
from xlpolicy.page.app import create_app  # noqa: E402
from xlpolicy.page.jobs import safe_name  # noqa: E402

REPO = Path(__file__).resolve().parents[2]
DEMO = REPO / "examples" / "demo-shop.xlsx"
BAD = REPO / "tests" / "data" / "bad"
KEY = "test-key-0123456789abcdef"
PORT = 8765
BASE = f"http://127.0.0.1:{PORT}"


def make_client(**kw: Any) -> TestClient:
    app = create_app(key=KEY, port=PORT, **kw)
    return TestClient(app, base_url=BASE)


def enter(client: TestClient) -> None:
    """What the browser does with the address the command opens: key in, cookie back."""
    r = client.get(f"/?key={KEY}", follow_redirects=False)
    assert r.status_code == 303 and r.headers["location"] == "/"
    cookie = r.headers["set-cookie"]
    assert f"xlpolicy_key_{PORT}={KEY}" in cookie
    assert "HttpOnly" in cookie and "samesite=strict" in cookie.lower()


def upload(client: TestClient, path: Path, name: str | None = None, **params: str) -> dict:
    r = client.post(
        "/api/jobs",
        content=path.read_bytes(),
        params=params,
        headers={"x-file-name": name or path.name},
    )
    assert r.status_code == 202, r.text
    return r.json()


def wait(client: TestClient, job: str, limit: int = 600) -> dict:
    """Poll a job until it ends (bounded by a count of polls, not by a clock)."""
    for _ in range(limit):
        status = client.get(f"/api/jobs/{job}").json()
        if status["state"] not in ("waiting", "running"):
            return status
        time.sleep(0.1)
    raise AssertionError(f"job {job} did not end: {status}")


def folders(client: TestClient) -> list[Path]:
    root = client.app.state.jobs.root  # type: ignore[attr-defined]
    return sorted(root.iterdir()) if root.exists() else []


@pytest.fixture(scope="module")
def demo_run(tmp_path_factory):
    """The demo through the page, and the command line's CSV of the same file."""
    tmp = tmp_path_factory.mktemp("page")
    cli_csv = tmp / "cli.csv"
    out = CliRunner().invoke(
        main, ["plan", str(DEMO), "-o", str(tmp / "cli.xlsx"), "--csv", str(cli_csv), "-q"]
    )
    assert out.exit_code == 0, out.output
    client = make_client()
    with client:
        enter(client)
        job = upload(client, DEMO)["job"]
        status = wait(client, job)
        yield client, job, status, cli_csv


# -- the page and its assets -------------------------------------------------------------


def test_page_and_assets_are_served_from_the_package():
    with make_client() as client:
        enter(client)
        page = client.get("/")
        assert page.status_code == 200 and "text/html" in page.headers["content-type"]
        assert 'id="picker"' in page.text and 'id="drop"' in page.text
        # nothing is loaded from elsewhere: every src/href is a path on this server
        assert "http://" not in page.text and "https://" not in page.text
        for name, kind in (("page.css", "text/css"), ("page.js", "text/javascript")):
            r = client.get(f"/assets/{name}")
            assert r.status_code == 200 and kind in r.headers["content-type"]
        assert client.get("/assets/../app.py").status_code == 404
        assert client.get("/assets/secret.txt").status_code == 404
        assert "default-src 'self'" in page.headers["content-security-policy"]
        assert page.headers["x-frame-options"] == "DENY"
        about = client.get("/api/about").json()
        assert about["max_upload"] == 200 * (1 << 20) and about["idle_minutes"] == 30


def test_allow_large_raises_the_upload_cap_like_the_reader_limits():
    from xlpolicy.reading.guard import LARGE_FACTOR

    with make_client(allow_large=True) as client:
        enter(client)
        assert client.get("/api/about").json()["max_upload"] == 200 * (1 << 20) * LARGE_FACTOR


# -- the key, Host and Origin ---------------------------------------------------------------


@pytest.mark.parametrize(
    "method,path",
    [
        ("GET", "/"),
        ("GET", "/assets/page.js"),
        ("GET", "/api/about"),
        ("POST", "/api/jobs"),
        ("GET", "/api/jobs/x"),
        ("DELETE", "/api/jobs/x"),
        ("POST", "/api/jobs/x/run"),
        ("GET", "/api/jobs/x/workbook"),
        ("GET", "/api/jobs/x/csv"),
        ("GET", "/api/jobs/x/pdf"),
    ],
)
def test_every_route_refuses_a_request_without_the_key(method, path):
    with make_client() as client:
        r = client.request(method, path, content=b"PK")
        assert r.status_code == 403
        r = client.request(method, path, content=b"PK", headers={"x-page-key": "wrong"})
        assert r.status_code == 403
        client.cookies.set(f"xlpolicy_key_{PORT}", "wrong" * 5)
        assert client.request(method, path, content=b"PK").status_code == 403
        assert folders(client) == []  # nothing was written


def test_a_wrong_key_in_the_address_sets_no_cookie():
    with make_client() as client:
        r = client.get("/?key=guess", follow_redirects=False)
        assert r.status_code == 403 and "set-cookie" not in r.headers
        assert "xlpolicy open" in r.text


def test_the_key_in_a_header_is_taken_too():
    with make_client() as client:
        assert client.get("/api/about", headers={"x-page-key": KEY}).status_code == 200


@pytest.mark.parametrize(
    "headers",
    [
        {"host": "attacker.example"},  # DNS rebinding: a foreign name pointed at 127.0.0.1
        {"host": "attacker.example:8765"},
        {"host": "127.0.0.1:9999"},  # another port
        {"origin": "http://attacker.example"},
        {"origin": "http://127.0.0.1:9999"},
        {"origin": "null"},
        {"sec-fetch-site": "cross-site"},
        {"sec-fetch-site": "same-site"},
    ],
)
def test_foreign_host_or_origin_is_refused_even_with_the_key(headers):
    with make_client() as client:
        enter(client)
        assert client.get("/api/about").status_code == 200
        r = client.get("/api/about", headers=headers)
        assert r.status_code == 403
        r = client.post("/api/jobs", content=DEMO.read_bytes(), headers=headers)
        assert r.status_code == 403
        assert folders(client) == []


def test_own_origin_and_localhost_are_taken():
    with make_client() as client:
        enter(client)
        ok = {"origin": BASE, "sec-fetch-site": "same-origin"}
        assert client.get("/api/about", headers=ok).status_code == 200
        local = {"host": f"localhost:{PORT}", "origin": f"http://localhost:{PORT}"}
        assert client.get("/api/about", headers=local).status_code == 200


# -- a good workbook ---------------------------------------------------------------------


def test_demo_result_is_the_command_lines(demo_run):
    client, job, status, cli_csv = demo_run
    assert status["state"] == "done"
    result = status["result"]
    report = xlpolicy.analyse(DEMO)
    t = report.totals
    h = result["headline"]
    assert h["items_to_order"] == int(t["items_to_reorder"]) == len(report.reorder)
    assert h["order_value"] == pytest.approx(t["reorder_value"])
    assert h["yearly_cost"] == pytest.approx(t["annual_total_cost"])
    assert h["saving"] == pytest.approx(t["annual_saving"])
    assert result["items_read"] == report.input_summary["items_read"]
    lines = [row["item"] for g in result["reorder"]["groups"] for row in g["rows"]]
    assert lines == [str(i) for i in report.reorder["item"]]
    # the problems in the console's words and order
    shown = [(p["severity"], p["where"], p["message"]) for p in result["problems"]["list"]]
    assert shown == [(p.severity.value, p.where(), p.message) for p in report.problems]
    assert "licensed" in result["caution"]
    # the CSV is the one `xlpolicy plan --csv` wrote
    r = client.get(f"/api/jobs/{job}/csv")
    assert r.status_code == 200 and r.content == cli_csv.read_bytes()
    assert "demo-shop-policy.csv" in r.headers["content-disposition"]


def test_workbook_download_then_its_folder_is_gone(demo_run):
    client, job, status, _ = demo_run
    assert len(folders(client)) == 1
    r = client.get(f"/api/jobs/{job}/workbook")
    assert r.status_code == 200
    assert 'filename="demo-shop-policy.xlsx"' in r.headers["content-disposition"]
    with zipfile.ZipFile(io.BytesIO(r.content)) as z:
        assert z.testzip() is None
        assert "xl/workbook.xml" in z.namelist()
    assert folders(client) == []  # removed once the download was sent
    again = client.get(f"/api/jobs/{job}/workbook")
    assert again.status_code == 410
    assert "removed after it was downloaded" in again.json()["failure"]["message"]
    rerun = client.post(f"/api/jobs/{job}/run", json={})
    assert rerun.status_code == 410
    # the table stays with the page (held in memory) until the job is dropped
    assert client.get(f"/api/jobs/{job}/csv").status_code == 200
    assert client.delete(f"/api/jobs/{job}").status_code == 204
    assert client.get(f"/api/jobs/{job}").status_code == 404


def test_choices_run_again_and_bad_choices_get_the_apis_words(tmp_path):
    book = simple_workbook(tmp_path / "three.xlsx")
    with make_client() as client:
        enter(client)
        job = upload(client, book, service_target="99%")["job"]
        first = wait(client, job)
        assert first["state"] == "done"
        used = first["result"]["choices"]["service_target"]
        assert used["value"] == pytest.approx(0.99) and used["source"] == "command line"
        r = client.post(f"/api/jobs/{job}/run", json={"service_target": "", "order_cost": "45"})
        assert r.status_code == 202
        second = wait(client, job)
        assert second["state"] == "done" and second["runs"] == 2
        assert second["result"]["choices"]["order_cost"]["value"] == pytest.approx(45)
        client.post(f"/api/jobs/{job}/run", json={"service_target": "lots"})
        bad = wait(client, job)
        assert bad["state"] == "failed"
        with pytest.raises(xlpolicy.UsageError) as exc:
            xlpolicy.analyse(book, service_target="lots")
        assert bad["failure"]["message"] == str(exc.value)


# -- bad files: the command line's messages, never a traceback ---------------------------------


@pytest.mark.parametrize(
    "name",
    ["random-bytes.xlsx", "~$shop.xlsx", "bomb-ratio.xlsx", "word-renamed.xlsx", "empty.xlsx"],
)
def test_bad_files_get_the_command_lines_messages(name):
    path = BAD / name
    expected = [(p.severity.value, p.where(), p.message) for p in xlpolicy.check(path)]
    with make_client() as client:
        enter(client)
        status = wait(client, upload(client, path)["job"])
        assert status["state"] == "failed"
        failure = status["failure"]
        assert failure["title"] == "Cannot use this workbook"
        shown = [(p["severity"], p["where"], p["message"]) for p in failure["problems"]["list"]]
        assert shown == expected and expected
        if name.startswith("bomb"):  # the console's advice, said the page's way too
            assert "xlpolicy open --allow-large" in failure["message"]
        assert "Traceback" not in str(status) and "internal error" not in str(status)


def test_upload_names_are_made_safe_but_keep_what_the_reader_needs():
    assert safe_name("../../etc/passwd") == "passwd"
    assert safe_name("C:\\Users\\me\\Shop.xlsx") == "Shop.xlsx"
    assert safe_name("~$shop.xlsx") == "~$shop.xlsx"
    assert safe_name("") == "workbook.xlsx" and safe_name("..") == "workbook.xlsx"
    assert safe_name("a\x00b?.xlsx") == "a_b_.xlsx"
    long = safe_name("x" * 300 + ".xlsx")
    assert len(long) <= 120 and long.endswith(".xlsx")


# -- size cap --------------------------------------------------------------------------------


def test_oversized_upload_is_refused_by_its_declared_length():
    with make_client(max_upload=1000) as client:
        enter(client)
        r = client.post("/api/jobs", content=b"x" * 5000, headers={"x-file-name": "big.xlsx"})
        assert r.status_code == 413
        assert "larger than the 1 KB" in r.json()["failure"]["message"]
        assert "--allow-large" in r.json()["failure"]["message"]
        assert folders(client) == []


def test_oversized_upload_is_refused_before_it_is_all_read():
    """A body with no declared length is cut off at the cap: the rest is never received."""
    app = create_app(key=KEY, port=PORT, max_upload=10_000)
    chunk = b"x" * 4096
    total_chunks = 1000
    pulled = 0
    sent: list[dict] = []

    async def receive() -> dict:
        nonlocal pulled
        pulled += 1
        return {"type": "http.request", "body": chunk, "more_body": pulled < total_chunks}

    async def send(message: dict) -> None:
        sent.append(message)

    scope = {
        "type": "http",
        "asgi": {"version": "3.0"},
        "http_version": "1.1",
        "method": "POST",
        "scheme": "http",
        "path": "/api/jobs",
        "raw_path": b"/api/jobs",
        "query_string": b"",
        "root_path": "",
        "headers": [
            (b"host", f"127.0.0.1:{PORT}".encode()),
            (b"x-page-key", KEY.encode()),
            (b"x-file-name", b"endless.xlsx"),
        ],
        "client": ("127.0.0.1", 5000),
        "server": ("127.0.0.1", PORT),
    }
    asyncio.run(app(scope, receive, send))
    assert sent[0]["status"] == 413
    assert pulled <= 4  # 10,000 bytes is three chunks; the other 996 were never pulled
    assert list(app.state.jobs.root.iterdir()) == []
    app.state.jobs.close()


# -- two at once, idle time, shutdown ---------------------------------------------------------


def test_two_uploads_at_once_never_mix(tmp_path):
    one = simple_workbook(tmp_path / "one.xlsx", codes=("A1", "B2", "C3"))
    two = simple_workbook(tmp_path / "two.xlsx", codes=("X1", "Y2", "Z3", "W4", "V5"))
    with make_client() as client:
        enter(client)
        a = upload(client, one)["job"]
        b = upload(client, two)["job"]
        assert a != b
        ra, rb = wait(client, a), wait(client, b)
        assert ra["result"]["file"] == "one.xlsx" and ra["result"]["items_read"] == 3
        assert rb["result"]["file"] == "two.xlsx" and rb["result"]["items_read"] == 5
        assert len(folders(client)) == 2
        wa = client.get(f"/api/jobs/{a}/workbook").content
        wb = client.get(f"/api/jobs/{b}/workbook").content
        import openpyxl

        items_a = [r[0] for r in openpyxl.load_workbook(io.BytesIO(wa))["Items"].values][1:]
        items_b = [r[0] for r in openpyxl.load_workbook(io.BytesIO(wb))["Items"].values][1:]
        assert items_a == ["A1", "B2", "C3"] and items_b == ["X1", "Y2", "Z3", "W4", "V5"]


def test_a_new_upload_replaces_the_pages_previous_one(tmp_path):
    book = simple_workbook(tmp_path / "one.xlsx")
    with make_client() as client:
        enter(client)
        first = upload(client, book)["job"]
        wait(client, first)
        second = upload(client, book, replaces=first)["job"]
        wait(client, second)
        assert client.get(f"/api/jobs/{first}").status_code == 404
        assert len(folders(client)) == 1


def test_idle_jobs_are_removed_after_the_stated_time(tmp_path):
    book = simple_workbook(tmp_path / "one.xlsx")
    with make_client(idle_seconds=60) as client:
        enter(client)
        job = upload(client, book)["job"]
        wait(client, job)
        store = client.app.state.jobs  # type: ignore[attr-defined]
        assert store.sweep() == []  # just used
        assert store.sweep(now=time.monotonic() + 61) == [job]
        assert folders(client) == []
        assert client.get(f"/api/jobs/{job}").status_code == 404


def test_shutdown_removes_every_folder(tmp_path):
    book = simple_workbook(tmp_path / "one.xlsx")
    client = make_client()
    with client:
        enter(client)
        wait(client, upload(client, book)["job"])
        root = client.app.state.jobs.root  # type: ignore[attr-defined]
        assert len(list(root.iterdir())) == 1
    assert not root.exists()


def test_pdf_route_says_why_when_there_is_no_libreoffice(monkeypatch, tmp_path):
    from xlpolicy.page import app as page_app

    monkeypatch.setattr(page_app, "find_office", lambda: None)
    book = simple_workbook(tmp_path / "one.xlsx")
    with make_client() as client:
        enter(client)
        assert client.get("/api/about").json()["pdf"] is False
        job = upload(client, book)["job"]
        wait(client, job)
        r = client.get(f"/api/jobs/{job}/pdf")
        assert r.status_code == 404 and "LibreOffice" in r.json()["failure"]["message"]


@pytest.mark.skipif(
    shutil.which("soffice") is None and shutil.which("libreoffice") is None,
    reason="LibreOffice is not installed (.ci/run installs it)",
)
def test_pdf_route_prints_the_reorder_list_with_libreoffice(tmp_path):
    book = simple_workbook(tmp_path / "one.xlsx")
    with make_client() as client:
        enter(client)
        assert client.get("/api/about").json()["pdf"] is True
        job = upload(client, book)["job"]
        wait(client, job)
        r = client.get(f"/api/jobs/{job}/pdf")
        assert r.status_code == 200 and r.content.startswith(b"%PDF")
        assert "one-reorder.pdf" in r.headers["content-disposition"]
        # the folder still holds the policy workbook and nothing of the print run
        (folder,) = folders(client)
        assert sorted(p.name for p in folder.iterdir()) == ["one-policy.xlsx", "one.xlsx"]
