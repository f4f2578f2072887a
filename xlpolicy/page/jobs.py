"""Uploads and their runs: each in a private temporary folder of its own.

A :class:`JobStore` keeps one folder (``tempfile.mkdtemp``: readable by this user only)
under a root folder made at start. A job's folder holds the uploaded workbook under the
name the owner gave it (so every message names their file, as the console does) and the
policy workbook the run writes beside it. The folder is removed

- once the policy workbook has been downloaded,
- when the job has been idle for the stated time (:data:`IDLE_MINUTES`),
- when the page drops it (a new workbook dropped in the same window), and
- with the root folder when the server stops.

Runs call :func:`xlpolicy.api.plan`, the function behind ``xlpolicy plan``, so every check,
limit and message is the command line's. They run in worker threads; each job has its own
folder, its own state and its own lock, so two uploads at once never share a file.
"""

from __future__ import annotations

import re
import secrets
import shutil
import tempfile
import threading
import time
from concurrent.futures import Future, ThreadPoolExecutor
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from .. import api
from ..problems import UnusableWorkbook
from .results import problems_data, result_data

#: A job left untouched this long is removed with its folder.
IDLE_MINUTES = 30

#: The owner's choices the page offers, as api.plan's arguments.
CHOICE_KEYS = ("service_measure", "service_target", "holding_rate", "order_cost")

_UNSAFE = re.compile(r'[\x00-\x1f\x7f/\\:*?"<>|]')


def safe_name(name: str) -> str:
    """The uploaded file's own name, reduced to a plain file name that is safe to create.

    Folders and characters no file system accepts are dropped; a lock file's ``~$`` prefix
    is kept, so that the reader recognises it and says so, as it does on the command line.
    """
    base = name.replace("\\", "/").rsplit("/", 1)[-1]
    base = _UNSAFE.sub("_", base).strip(" .")
    if not base:
        base = "workbook.xlsx"
    if len(base) > 120:
        stem, dot, ext = base.rpartition(".")
        base = (stem[:110] + dot + ext[:9]) if dot and len(ext) <= 9 else base[:120]
    return base


@dataclass
class Job:
    """One uploaded workbook and what became of it."""

    id: str
    folder: Path
    source: Path
    state: str = "waiting"  # waiting, running, done, failed, removed
    stage: str = ""
    done: int = 0
    total: int | None = None
    result: dict[str, Any] | None = None
    failure: dict[str, Any] | None = None
    output: Path | None = None
    csv: bytes | None = None
    runs: int = 0
    last_used: float = field(default_factory=time.monotonic)
    lock: threading.Lock = field(default_factory=threading.Lock)

    def touch(self) -> None:
        self.last_used = time.monotonic()

    def status(self) -> dict[str, Any]:
        """What the page polls for: the state, progress, then the result or the failure."""
        out: dict[str, Any] = {"job": self.id, "state": self.state, "runs": self.runs}
        if self.state in ("waiting", "running"):
            out.update(stage=self.stage, done=self.done, total=self.total)
        elif self.state == "done":
            out["result"] = self.result
        elif self.state == "failed":
            out["failure"] = self.failure
        return out


class JobStore:
    """Every job of one server, each in a folder under one private root folder."""

    def __init__(
        self,
        *,
        allow_large: bool = False,
        idle_seconds: float = IDLE_MINUTES * 60,
        workers: int = 2,
    ) -> None:
        self.root = Path(tempfile.mkdtemp(prefix="xlpolicy-page-"))
        self.allow_large = allow_large
        self.idle_seconds = idle_seconds
        self.jobs: dict[str, Job] = {}
        self._lock = threading.Lock()
        self._pool = ThreadPoolExecutor(max_workers=workers, thread_name_prefix="xlpolicy-run")
        self.closed = False

    # -- jobs ---------------------------------------------------------------------------

    def new_job(self, name: str) -> Job:
        """A job with a fresh private folder; the upload is to be written to ``job.source``."""
        folder = Path(tempfile.mkdtemp(prefix="upload-", dir=self.root))
        job = Job(id=secrets.token_urlsafe(12), folder=folder, source=folder / safe_name(name))
        with self._lock:
            self.jobs[job.id] = job
        return job

    def get(self, job_id: str) -> Job | None:
        with self._lock:
            job = self.jobs.get(job_id)
        if job is not None:
            job.touch()
        return job

    def remove(self, job: Job) -> None:
        """Forget the job and remove its folder (and so the uploaded workbook)."""
        with self._lock:
            self.jobs.pop(job.id, None)
        job.state = "removed"
        job.result = job.csv = None
        shutil.rmtree(job.folder, ignore_errors=True)

    def remove_files(self, job: Job) -> None:
        """Remove the job's folder but keep what the page still shows (after a download)."""
        shutil.rmtree(job.folder, ignore_errors=True)
        job.output = None

    def sweep(self, now: float | None = None) -> list[str]:
        """Remove the jobs idle longer than the stated time; return their ids."""
        now = time.monotonic() if now is None else now
        with self._lock:
            stale = [
                j
                for j in self.jobs.values()
                if j.state not in ("waiting", "running") and now - j.last_used > self.idle_seconds
            ]
        for job in stale:
            self.remove(job)
        return [j.id for j in stale]

    def close(self) -> None:
        """Stop taking runs and remove every folder (the server is stopping)."""
        self.closed = True
        self._pool.shutdown(wait=False, cancel_futures=True)
        with self._lock:
            jobs = list(self.jobs.values())
            self.jobs.clear()
        for job in jobs:
            job.state = "removed"
        shutil.rmtree(self.root, ignore_errors=True)

    # -- runs ---------------------------------------------------------------------------

    def start(self, job: Job, choices: dict[str, Any]) -> Future[None]:
        """Queue a run of the job's workbook with the owner's choices."""
        job.state, job.stage, job.done, job.total = "waiting", "Waiting for a free worker", 0, None
        job.touch()
        return self._pool.submit(self.run, job, choices)

    def run(self, job: Job, choices: dict[str, Any]) -> None:
        """Plan the job's workbook as ``xlpolicy plan`` does; record a result or a failure."""
        with job.lock:
            if job.state == "removed" or not job.source.exists():
                job.state = "failed"
                job.failure = _failure(
                    "Your workbook is no longer here",
                    "It was removed after its download or after a long idle time. Drop it again.",
                )
                return
            job.state, job.stage = "running", "Starting"

            def progress(stage: str, done: int, total: int | None) -> None:
                job.stage, job.done, job.total = stage, done, total

            out = api.default_output_path(job.source)
            csv = job.folder / f"{job.source.stem}-policy.csv"
            try:
                given = {k: _blank_none(choices.get(k)) for k in CHOICE_KEYS}
                started = time.perf_counter()
                plan = api.plan(
                    job.source,
                    out,
                    csv=csv,
                    progress=progress,
                    allow_large=self.allow_large,
                    **given,
                )
                job.csv = csv.read_bytes()
                csv.unlink()
                job.output = plan.output
                name = plan.output.name if plan.output is not None else ""
                job.result = result_data(plan.report, name, plan.standalone)
                # how long the planning itself took, so the page's own cost can be told apart
                job.result["run_seconds"] = round(time.perf_counter() - started, 3)
                job.failure = None
                job.state = "done"
            except api.UsageError as exc:
                job.failure = _failure("One of your choices cannot be used", str(exc))
                job.state = "failed"
            except UnusableWorkbook as exc:
                job.failure = {
                    "title": "Cannot use this workbook",
                    "problems": problems_data(exc.problems),
                }
                if any("--allow-large" in p.message for p in exc.problems):
                    job.failure["message"] = (
                        "On this page, --allow-large means starting the page with "
                        "'xlpolicy open --allow-large'."
                    )
                job.state = "failed"
            except OSError as exc:
                msg = getattr(exc, "user_message", None) or (
                    f"{exc.strerror or exc}. The computer may be short of disk space."
                )
                job.failure = _failure("Could not write the results", msg)
                job.state = "failed"
            except Exception as exc:  # a bug of ours: said plainly, as the console says it
                job.failure = _failure(
                    "xlpolicy hit an internal error",
                    f"({type(exc).__name__}: {exc}). Your workbook was not changed. Please "
                    "report this with the workbook if you can.",
                )
                job.state = "failed"
            finally:
                job.runs += 1
                job.touch()
                if self.closed:
                    shutil.rmtree(job.folder, ignore_errors=True)


def _blank_none(value: Any) -> Any:
    if value is None or (isinstance(value, str) and not value.strip()):
        return None
    return value.strip() if isinstance(value, str) else value


def _failure(title: str, message: str) -> dict[str, Any]:
    return {"title": title, "message": message}


def refusal(title: str, message: str) -> dict[str, Any]:
    """A failure the server states before any run (an upload refused)."""
    return {"state": "failed", "failure": _failure(title, message)}


__all__ = [
    "CHOICE_KEYS",
    "IDLE_MINUTES",
    "Job",
    "JobStore",
    "refusal",
    "safe_name",
]
