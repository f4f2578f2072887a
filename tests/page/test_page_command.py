"""`xlpolicy open` as an owner starts it: its own process, the address it prints, and its
stop (a termination signal, as closing its window sends) removing every upload folder."""

from __future__ import annotations

import os
import re
import signal
import subprocess
import sys
from pathlib import Path

import pytest

httpx = pytest.importorskip("httpx")
pytest.importorskip("uvicorn")

REPO = Path(__file__).resolve().parents[2]


@pytest.mark.parametrize("stop", [signal.SIGTERM, signal.SIGINT])
def test_open_serves_the_printed_address_and_cleans_up_on_stop(tmp_path, stop):
    env = {**os.environ, "TMPDIR": str(tmp_path), "PYTHONUNBUFFERED": "1"}
    proc = subprocess.Popen(
        [sys.executable, "-m", "xlpolicy", "open", "--no-browser"],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
        env=env,
    )
    try:
        assert proc.stdout is not None
        line = proc.stdout.readline()
        m = re.search(r"http://127\.0\.0\.1:(\d+)/\?key=(\S+)", line)
        assert m, line
        port, key = m.groups()
        base = f"http://127.0.0.1:{port}"
        with httpx.Client(base_url=base) as client:
            assert client.get("/").status_code == 403  # no key
            r = client.post(
                "/api/jobs",
                content=(REPO / "tests" / "data" / "bad" / "random-bytes.xlsx").read_bytes(),
                headers={"x-page-key": key, "x-file-name": "random-bytes.xlsx"},
            )
            assert r.status_code == 202
        (root,) = list(tmp_path.glob("xlpolicy-page-*"))
        assert list(root.glob("upload-*"))
    finally:
        proc.send_signal(stop)
        out, err = proc.communicate(timeout=60)
    assert proc.returncode == 0, err
    assert "Stopped; the uploaded files are removed." in out
    assert "Traceback" not in err
    assert list(tmp_path.glob("xlpolicy-page-*")) == []


def test_open_on_a_taken_port_is_a_usage_error():
    import socket

    from click.testing import CliRunner

    from xlpolicy.cli import main

    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        s.listen(1)
        port = s.getsockname()[1]
        result = CliRunner().invoke(main, ["open", "--no-browser", "--port", str(port)])
    assert result.exit_code == 2
    assert f"cannot listen on 127.0.0.1 port {port}" in result.output
