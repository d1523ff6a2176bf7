"""Background jobs: run ``fn(cancel, reporter)`` on a thread pool, deliver results on the GUI thread.

A job has a key; submitting a new job under a key cancels the older one. Each job also carries an
``is_current()`` check evaluated on the GUI thread when it finishes: results of jobs that are no longer
current (cancelled, superseded, or started for an older generation of the document) are dropped.
Exceptions become plain messages for the user; the full traceback goes to the error log only.
"""

from __future__ import annotations

import itertools
import logging
import traceback
from dataclasses import dataclass, field
from typing import Any, Callable

from PySide6.QtCore import QObject, QRunnable, QThreadPool, Signal, Slot

from orbitdesk.core.progress import CancelToken, Cancelled, Reporter

log = logging.getLogger("orbitdesk.ui.worker")


def plain_message(exc: BaseException) -> str:
    """A one-line message for the user (no traceback)."""
    text = str(exc).strip()
    known = ("ModelError", "UndefinedValue", "ValueError", "ProjectError", "ArithmeticError")
    if type(exc).__name__ in known and text:
        return text
    if isinstance(exc, MemoryError):
        return "not enough memory for this computation"
    return f"{type(exc).__name__}: {text}" if text else type(exc).__name__


@dataclass
class Job:
    id: int
    key: str
    token: CancelToken
    on_done: Callable[[Any], None]
    on_progress: Callable[[float], None] | None = None
    on_error: Callable[[str], None] | None = None
    is_current: Callable[[], bool] = lambda: True
    runnable: QRunnable | None = field(default=None, repr=False)


class _Task(QRunnable):
    def __init__(self, runner: "JobRunner", job_id: int, fn, token: CancelToken):
        super().__init__()
        self.setAutoDelete(False)  # the runner keeps a reference until the job is finished
        self._runner, self._id, self._fn, self._token = runner, job_id, fn, token

    def run(self):
        runner, job_id, token = self._runner, self._id, self._token
        result, error = None, None
        try:
            if token.cancelled:
                raise Cancelled("cancelled")
            reporter = Reporter(lambda f: runner._progress.emit(job_id, float(f)), token)
            result = self._fn(token, reporter)
        except Cancelled:
            token.cancel()
        except BaseException as exc:  # noqa: BLE001 - reported to the user as a message
            error = plain_message(exc)
            detail = "".join(traceback.format_exception(type(exc), exc, exc.__traceback__))
            runner._log_error(detail)
        finally:
            self._fn = None
        runner._finished.emit(job_id, result, error)


class JobRunner(QObject):
    """A small keyed job queue over a private QThreadPool."""

    busyChanged = Signal(bool)
    jobProgress = Signal(str, float)  # key, fraction

    _progress = Signal(int, float)
    _finished = Signal(int, object, object)

    def __init__(self, parent=None, max_threads: int | None = None):
        super().__init__(parent)
        self.pool = QThreadPool(self)
        ideal = QThreadPool.globalInstance().maxThreadCount()
        self.pool.setMaxThreadCount(max_threads or max(2, min(4, ideal)))
        self.pool.setExpiryTimeout(10_000)
        self._jobs: dict[int, Job] = {}
        self._by_key: dict[str, int] = {}
        self._ids = itertools.count(1)
        self._was_busy = False
        self._progress.connect(self._on_progress)
        self._finished.connect(self._on_finished)
        self.error_log: Callable[[str], None] | None = None

    # ------------------------------------------------------------ public
    def submit(self, key: str, fn, on_done, on_progress=None, on_error=None,
               is_current: Callable[[], bool] | None = None) -> CancelToken:
        """Start ``fn(cancel_token, reporter)``; a running or queued job with the same key is cancelled."""
        self._cancel_key(key)
        token = CancelToken()
        job = Job(next(self._ids), key, token, on_done, on_progress, on_error, is_current or (lambda: True))
        task = _Task(self, job.id, fn, token)
        job.runnable = task
        self._jobs[job.id] = job
        self._by_key[key] = job.id
        self.pool.start(task)
        self._update_busy()
        return token

    def cancel(self, key: str) -> None:
        self._cancel_key(key)
        self._update_busy()

    def _cancel_key(self, key: str) -> None:
        job_id = self._by_key.pop(key, None)
        if job_id is not None and job_id in self._jobs:
            self._cancel_job(self._jobs[job_id])

    def cancel_all(self) -> None:
        for job in list(self._jobs.values()):
            self._cancel_job(job)
        self._by_key.clear()
        self._update_busy()

    def running(self, key: str) -> bool:
        job_id = self._by_key.get(key)
        return job_id is not None and job_id in self._jobs and not self._jobs[job_id].token.cancelled

    @property
    def busy(self) -> bool:
        return any(not j.token.cancelled for j in self._jobs.values())

    def active_keys(self) -> list[str]:
        return [j.key for j in self._jobs.values() if not j.token.cancelled]

    def wait(self, msecs: int = 30_000) -> bool:
        """Block until every started task has returned (used on shutdown and in tests)."""
        return self.pool.waitForDone(msecs)

    def shutdown(self, msecs: int = 5_000) -> bool:
        self.cancel_all()
        return self.wait(msecs)

    # ------------------------------------------------------------ internals
    def _cancel_job(self, job: Job) -> None:
        job.token.cancel()
        if job.runnable is not None and self.pool.tryTake(job.runnable):
            # never started: finish it now so nothing waits on it
            self._jobs.pop(job.id, None)
            job.runnable = None

    def _update_busy(self) -> None:
        busy = self.busy
        if busy != self._was_busy:
            self._was_busy = busy
            self.busyChanged.emit(busy)

    def _log_error(self, detail: str) -> None:
        log.error("background job failed:\n%s", detail)
        if self.error_log is not None:
            try:
                self.error_log(detail)
            except Exception:  # noqa: BLE001 - logging must never raise
                pass

    @Slot(int, float)
    def _on_progress(self, job_id: int, fraction: float) -> None:
        job = self._jobs.get(job_id)
        if job is None or job.token.cancelled:
            return
        self.jobProgress.emit(job.key, fraction)
        if job.on_progress is not None:
            job.on_progress(fraction)

    @Slot(int, object, object)
    def _on_finished(self, job_id: int, result, error) -> None:
        job = self._jobs.pop(job_id, None)
        if job is None:
            return
        job.runnable = None
        if self._by_key.get(job.key) == job_id:
            del self._by_key[job.key]
        try:
            if job.token.cancelled or not job.is_current():
                return
            if error is not None:
                if job.on_error is not None:
                    job.on_error(error)
            else:
                job.on_done(result)
        finally:
            self._update_busy()
