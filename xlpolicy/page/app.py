"""The page's web application (Starlette): its routes and the checks every request passes.

Every request passes :class:`Gate` before any route sees it:

- **Host**: the Host header must be this server's own loopback address and port
  (``127.0.0.1:PORT`` or ``localhost:PORT``). A page elsewhere that points one of its own
  names at 127.0.0.1 (DNS rebinding) sends its own name as Host and is refused.
- **Origin**: a request that carries an Origin (or Sec-Fetch-Site) header must come from
  this page itself; another site open in the same browser is refused.
- **Key**: a secret made at each start (``secrets.token_urlsafe``) must come with every
  request. The command opens ``http://127.0.0.1:PORT/?key=SECRET``; that first request
  sets it in a cookie (HttpOnly, SameSite=Strict, named for the port) and sends the
  browser on to the page without it in the address. The page's own requests carry the
  cookie; a script may send the ``X-Page-Key`` header instead.

Uploads are the raw bytes of one file (the page's script sends the file as the body), so
the size cap is checked against Content-Length before a byte is read, and again as the
bytes arrive; a body past it is refused at that point, never read to its end.
"""

from __future__ import annotations

import asyncio
import contextlib
import secrets
import shutil
import urllib.parse
from collections.abc import AsyncIterator
from importlib import resources
from typing import Any

from starlette.applications import Starlette
from starlette.background import BackgroundTask
from starlette.datastructures import Headers, QueryParams
from starlette.requests import Request
from starlette.responses import FileResponse, JSONResponse, Response
from starlette.routing import Route
from starlette.types import ASGIApp, Message, Receive, Scope, Send

from ..reading import guard
from .jobs import CHOICE_KEYS, IDLE_MINUTES, JobStore, refusal
from .reorder_pdf import find_office, reorder_pdf

#: The largest upload taken, before --allow-large multiplies it by the reader's factor.
#: A workbook a person keeps is a few megabytes (the 10,000-item benchmark is under 4 MB).
MAX_UPLOAD = 200 * (1 << 20)

_ASSETS = {
    "page.css": "text/css; charset=utf-8",
    "page.js": "text/javascript; charset=utf-8",
}

_SECURITY_HEADERS = [
    (
        b"content-security-policy",
        b"default-src 'self'; img-src 'self' data:; frame-ancestors 'none'",
    ),
    (b"x-frame-options", b"DENY"),
    (b"x-content-type-options", b"nosniff"),
    (b"referrer-policy", b"no-referrer"),
    (b"cache-control", b"no-store"),
]


def size_text(n: int) -> str:
    """Bytes as the page states a limit: "200 MB"."""
    return f"{n / (1 << 20):,.0f} MB" if n >= 1 << 20 else f"{n / 1024:,.0f} KB"


class Gate:
    """ASGI middleware: the Host, Origin and key checks, and headers on every answer."""

    def __init__(self, app: ASGIApp, *, key: str, port: int, cookie: str) -> None:
        self.app = app
        self.key = key
        self.cookie = cookie
        self.hosts = {f"127.0.0.1:{port}", f"localhost:{port}"}
        self.origins = {f"http://{h}" for h in self.hosts}

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        if scope["type"] == "lifespan":
            await self.app(scope, receive, send)
            return
        if scope["type"] != "http":  # no websockets here
            return
        headers = Headers(scope=scope)
        why = self._refuse(scope, headers)

        async def send_with_headers(message: Message) -> None:
            if message["type"] == "http.response.start":
                message.setdefault("headers", [])
                message["headers"] = list(message["headers"]) + _SECURITY_HEADERS
            await send(message)

        if why is not None:
            await _refused(scope, why)(scope, receive, send_with_headers)
            return
        query = QueryParams(scope.get("query_string", b"").decode("latin-1"))
        if scope["path"] == "/" and "key" in query:  # the address the command opened
            response = Response(status_code=303, headers={"location": "/"})
            response.set_cookie(self.cookie, self.key, httponly=True, samesite="strict", path="/")
            await response(scope, receive, send_with_headers)
            return
        await self.app(scope, receive, send_with_headers)

    def _refuse(self, scope: Scope, headers: Headers) -> str | None:
        host = headers.get("host", "").lower()
        if host not in self.hosts:
            return "host"
        origin = headers.get("origin")
        if origin is not None and origin.lower() not in self.origins:
            return "origin"
        if headers.get("sec-fetch-site", "same-origin") not in ("same-origin", "none"):
            return "origin"
        query = QueryParams(scope.get("query_string", b"").decode("latin-1"))
        given = (
            query.get("key")
            if scope["path"] == "/" and "key" in query
            else headers.get("x-page-key") or _cookie(headers, self.cookie)
        )
        if not given or not secrets.compare_digest(given.encode(), self.key.encode()):
            return "key"
        return None


def _cookie(headers: Headers, name: str) -> str | None:
    for part in headers.get("cookie", "").split(";"):
        k, _, v = part.strip().partition("=")
        if k == name:
            return v
    return None


_REFUSALS = {
    "host": "This page answers only at its own address on this computer (127.0.0.1).",
    "origin": "This page takes requests only from itself, not from other pages or sites.",
    "key": "This page needs the address that 'xlpolicy open' opened or printed, with its "
    "key. Start 'xlpolicy open' again if you closed it; each start makes a new key.",
}


def _refused(scope: Scope, why: str) -> Response:
    text = _REFUSALS[why]
    if scope["path"].startswith("/api/"):
        return JSONResponse(refusal("Refused", text), status_code=403)
    return Response(
        f"<!doctype html><meta charset=utf-8><title>xlpolicy</title><p>{text}</p>",
        status_code=403,
        media_type="text/html",
    )


def _asset(name: str) -> bytes:
    return (resources.files("xlpolicy.page") / "static" / name).read_bytes()


def create_app(
    *,
    key: str,
    port: int,
    allow_large: bool = False,
    idle_seconds: float = IDLE_MINUTES * 60,
    max_upload: int | None = None,
    store: JobStore | None = None,
) -> Starlette:
    """The page's application for a server on 127.0.0.1:``port`` with the secret ``key``."""
    jobs = store or JobStore(allow_large=allow_large, idle_seconds=idle_seconds)
    cap = max_upload if max_upload is not None else MAX_UPLOAD
    if allow_large and max_upload is None:
        cap *= guard.LARGE_FACTOR
    office = find_office()

    async def page(request: Request) -> Response:
        return Response(_asset("index.html"), media_type="text/html; charset=utf-8")

    async def asset(request: Request) -> Response:
        name = request.path_params["name"]
        if name not in _ASSETS:
            return Response("Not found", status_code=404)
        return Response(_asset(name), media_type=_ASSETS[name])

    async def about(request: Request) -> Response:
        return JSONResponse(
            {
                "idle_minutes": round(jobs.idle_seconds / 60, 1),
                "max_upload": cap,
                "max_upload_text": size_text(cap),
                "allow_large": allow_large,
                "pdf": office is not None,
                "choices": list(CHOICE_KEYS),
            }
        )

    async def upload(request: Request) -> Response:
        name = urllib.parse.unquote(request.headers.get("x-file-name", "")) or "workbook.xlsx"
        declared = request.headers.get("content-length")
        too_big = refusal(
            "This file is too large",
            f"{name} is larger than the {size_text(cap)} this page takes. A workbook "
            "a person keeps is far smaller; if you trust this one, start the page with "
            "'xlpolicy open --allow-large'.",
        )
        if declared is not None and declared.isdigit() and int(declared) > cap:
            return JSONResponse(too_big, status_code=413)
        job = jobs.new_job(name)
        size = 0
        try:
            with job.source.open("wb") as fh:
                async for chunk in request.stream():
                    size += len(chunk)
                    if size > cap:
                        break
                    fh.write(chunk)
        except Exception:  # the browser went away mid-upload
            jobs.remove(job)
            return JSONResponse(
                refusal("The upload stopped", "Drop the workbook again."), status_code=400
            )
        if size > cap:
            jobs.remove(job)
            return JSONResponse(too_big, status_code=413)
        replaces = request.query_params.get("replaces")
        old = jobs.get(replaces) if replaces else None
        if old is not None:
            jobs.remove(old)
        choices = {k: request.query_params.get(k) for k in CHOICE_KEYS}
        jobs.start(job, choices)
        return JSONResponse(job.status(), status_code=202)

    def _job_or_gone(request: Request) -> Any:
        job = jobs.get(request.path_params["job"])
        if job is None:
            return JSONResponse(
                refusal(
                    "This result is no longer here",
                    f"Results are removed after {IDLE_MINUTES} minutes unused, when the "
                    "page is closed and when the command stops. Drop the workbook again.",
                ),
                status_code=404,
            )
        return job

    async def status(request: Request) -> Response:
        job = _job_or_gone(request)
        if isinstance(job, Response):
            return job
        return JSONResponse(job.status())

    async def rerun(request: Request) -> Response:
        job = _job_or_gone(request)
        if isinstance(job, Response):
            return job
        try:
            body = await request.json()
        except ValueError:
            body = {}
        choices = {k: body.get(k) for k in CHOICE_KEYS} if isinstance(body, dict) else {}
        if job.state in ("waiting", "running"):
            return JSONResponse(job.status(), status_code=409)
        if not job.source.exists():
            return JSONResponse(
                refusal(
                    "Your workbook is no longer here",
                    "It was removed from this computer's temporary folder when the policy "
                    "workbook was downloaded. Drop it again to run with other choices.",
                ),
                status_code=410,
            )
        jobs.start(job, choices)
        return JSONResponse(job.status(), status_code=202)

    async def workbook(request: Request) -> Response:
        job = _job_or_gone(request)
        if isinstance(job, Response):
            return job
        if job.output is None or not job.output.exists():
            return JSONResponse(
                refusal(
                    "The policy workbook is not here",
                    "It was removed after it was downloaded. Drop your workbook again.",
                ),
                status_code=410,
            )
        return FileResponse(
            job.output,
            filename=job.output.name,
            media_type="application/vnd.openxmlformats-officedocument.spreadsheetml.sheet"
            if job.output.suffix.lower() == ".xlsx"
            else "application/vnd.ms-excel.sheet.macroEnabled.12",
            background=BackgroundTask(jobs.remove_files, job),
        )

    async def csv(request: Request) -> Response:
        job = _job_or_gone(request)
        if isinstance(job, Response):
            return job
        if job.csv is None:
            return JSONResponse(refusal("No table yet", "Run the workbook first."), 404)
        name = f"{job.source.stem}-policy.csv"
        return Response(
            job.csv,
            media_type="text/csv; charset=utf-8",
            headers={"content-disposition": _attachment(name)},
        )

    async def pdf(request: Request) -> Response:
        job = _job_or_gone(request)
        if isinstance(job, Response):
            return job
        if office is None:
            return JSONResponse(
                refusal(
                    "No printable list here",
                    "The printable reorder list needs LibreOffice on this computer.",
                ),
                status_code=404,
            )
        if job.output is None or not job.output.exists():
            return JSONResponse(
                refusal(
                    "The policy workbook is not here",
                    "The printable list is made from the policy workbook, which was removed "
                    "after its download. Drop your workbook again.",
                ),
                status_code=410,
            )
        made = await asyncio.to_thread(reorder_pdf, office, job.output, job.folder)
        if isinstance(made, str):
            return JSONResponse(refusal("Could not make the printable list", made), 500)
        data = made.read_bytes()
        shutil.rmtree(made.parent, ignore_errors=True)  # the copy, the profile, the PDF
        return Response(
            data,
            media_type="application/pdf",
            headers={"content-disposition": _attachment(f"{job.source.stem}-reorder.pdf")},
        )

    async def drop(request: Request) -> Response:
        job = jobs.get(request.path_params["job"])
        if job is not None:
            jobs.remove(job)
        return Response(status_code=204)

    @contextlib.asynccontextmanager
    async def lifespan(app: Starlette) -> AsyncIterator[None]:
        async def sweeper() -> None:
            while True:
                await asyncio.sleep(max(1.0, min(30.0, jobs.idle_seconds / 4)))
                jobs.sweep()

        task = asyncio.create_task(sweeper())
        try:
            yield
        finally:
            task.cancel()
            jobs.close()

    routes = [
        Route("/", page),
        Route("/assets/{name}", asset),
        Route("/api/about", about),
        Route("/api/jobs", upload, methods=["POST"]),
        Route("/api/jobs/{job}", status),
        Route("/api/jobs/{job}", drop, methods=["DELETE"]),
        Route("/api/jobs/{job}/run", rerun, methods=["POST"]),
        Route("/api/jobs/{job}/workbook", workbook),
        Route("/api/jobs/{job}/csv", csv),
        Route("/api/jobs/{job}/pdf", pdf),
    ]
    app = Starlette(routes=routes, lifespan=lifespan)
    app.state.jobs = jobs
    app.add_middleware(Gate, key=key, port=port, cookie=f"xlpolicy_key_{port}")
    return app


def _attachment(name: str) -> str:
    quoted = urllib.parse.quote(name)
    plain = name.encode("ascii", "replace").decode().replace('"', "_")
    return f"attachment; filename=\"{plain}\"; filename*=UTF-8''{quoted}"
