"""Start the page: a uvicorn server on the loopback address, and the browser opened on it.

The socket is bound here first (port 0: any free port), so the address, and with it the
Host the page accepts, is known before the first request. The key is made here, once per
start. Stopping the command (Ctrl-C, or closing its window) stops the server, whose
shutdown removes every upload folder; the folders' root is removed once more on the way
out, whatever stopped it.
"""

from __future__ import annotations

import contextlib
import secrets
import shutil
import signal
import socket
import threading
import warnings
import webbrowser
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

from .app import create_app
from .jobs import IDLE_MINUTES, JobStore

HOST = "127.0.0.1"


@dataclass
class Started:
    """What a caller needs to know of a running page."""

    url: str
    port: int
    key: str


def bind(port: int = 0) -> socket.socket:
    """A listening socket on the loopback address (port 0: a free one)."""
    sock = socket.socket(socket.AF_INET, socket.SOCK_STREAM)
    sock.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
    sock.bind((HOST, port))
    sock.listen(64)
    sock.set_inheritable(True)
    return sock


def serve(
    *,
    port: int = 0,
    open_browser: bool = True,
    allow_large: bool = False,
    idle_minutes: float = IDLE_MINUTES,
    announce: Callable[[Started], None] | None = None,
) -> None:
    """Serve the page until stopped; ``announce`` is told the address once it is known."""
    import uvicorn

    sock = bind(port)
    port = sock.getsockname()[1]
    key = secrets.token_urlsafe(24)
    store = JobStore(allow_large=allow_large, idle_seconds=idle_minutes * 60)
    app = create_app(key=key, port=port, allow_large=allow_large, store=store)
    started = Started(url=f"http://{HOST}:{port}/?key={key}", port=port, key=key)
    # openpyxl warns about parts of a file it skips on stderr; what matters reaches the
    # owner as problems on the page (the command line filters the same warnings)
    warnings.filterwarnings("ignore", module=r"openpyxl(\.|$)")
    config = uvicorn.Config(app, log_level="warning", access_log=False, lifespan="on")
    server = uvicorn.Server(config)
    if announce is not None:
        announce(started)
    if open_browser:
        threading.Timer(0.5, webbrowser.open, args=(started.url,)).start()
    # uvicorn shuts down cleanly on a termination signal, then raises it again to the
    # handler found before; this one makes it a KeyboardInterrupt (as Ctrl-C), so the
    # command ends with its message and status 0 instead of being killed by the signal
    previous = _stop_on_sigterm()
    try:
        server.run(sockets=[sock])
    finally:
        store.close()
        shutil.rmtree(store.root, ignore_errors=True)
        sock.close()
        if previous is not None:
            with contextlib.suppress(ValueError, OSError):
                signal.signal(signal.SIGTERM, previous)


def _stop_on_sigterm() -> Any:
    def stop(signum: int, frame: Any) -> None:
        raise KeyboardInterrupt

    try:
        return signal.signal(signal.SIGTERM, stop)
    except (ValueError, OSError):  # not the main thread: leave signals alone
        return None
