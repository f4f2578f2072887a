"""The page run inside this process, in a thread: for the tests, the screenshot script and
the measurements, which drive it with a headless browser.

The server is the one ``xlpolicy open`` starts (uvicorn on 127.0.0.1, a port chosen by the
system, a new key); only the browser is not opened.
"""

from __future__ import annotations

import secrets
import shutil
import threading
import time
from dataclasses import dataclass
from typing import Any

from .app import create_app
from .server import HOST, bind

#: Flags for a headless Chromium in a container or CI: no sandbox (running as root), no
#: GPU, and none of the browser's own traffic (updates, sync, QUIC probes).
CHROMIUM_ARGS = [
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-quic",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
]


def find_chromium() -> str | None:
    """The system's Chromium, or None."""
    for name in ("chromium", "chromium-browser", "google-chrome"):
        found = shutil.which(name)
        if found:
            return found
    return None


@dataclass
class Running:
    """A page served from a thread of this process."""

    url: str
    base: str
    key: str
    app: Any
    server: Any
    thread: threading.Thread

    def stop(self) -> None:
        """Stop the server (its shutdown removes every upload folder) and wait for it."""
        self.server.should_exit = True
        self.thread.join(timeout=30)


def start_in_thread(**app_options: Any) -> Running:
    """Serve the page on a free loopback port from a daemon thread; wait until it listens."""
    import uvicorn

    sock = bind(0)
    port = sock.getsockname()[1]
    key = secrets.token_urlsafe(24)
    app = create_app(key=key, port=port, **app_options)
    config = uvicorn.Config(app, log_level="warning", access_log=False, lifespan="on")
    server = uvicorn.Server(config)
    thread = threading.Thread(target=server.run, kwargs={"sockets": [sock]}, daemon=True)
    thread.start()
    for _ in range(500):  # up to about 25 s of a loaded machine, counted in polls
        if server.started:
            break
        time.sleep(0.05)
    else:
        server.should_exit = True
        raise RuntimeError("the page's server did not start")
    base = f"http://{HOST}:{port}"
    return Running(f"{base}/?key={key}", base, key, app, server, thread)
