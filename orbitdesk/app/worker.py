"""Background jobs: run ``fn(cancel, reporter)`` on a thread pool, deliver results on the GUI thread.

A job has a key; submitting a new job under a key cancels the older one. Each job also carries an
``is_current()`` check evaluated on the GUI thread when it finishes: results of jobs that are no longer
current (cancelled, superseded, or started for an older generation of the document) are dropped.
Exceptions become plain messages for the user; the full traceback goes to the error log only.
"""

from __future__ import annotations

import functools
import gc
import itertools
import logging
import traceback
import weakref
from dataclasses import dataclass, field
from typing import Any, Callable

import shiboken6
from PySide6.QtCore import QCoreApplication, QObject, QRunnable, QThreadPool, QTimer, Signal, Slot

from orbitdesk.engine.progress import CancelToken, Cancelled, Reporter

log = logging.getLogger("orbitdesk.app.worker")


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
    label: str = ""
    fraction: float = 0.0


# What the status bar calls a job whose owner gave it no words of its own (by key, or key prefix)
JOB_LABELS = {"run": "Running the model", "compile": "Compiling the model", "equilibria": "Finding equilibria",
              "cycles": "Looking for the cycle", "sections": "Collecting the section", "sweep": "Sweeping",
              "lyapunov": "Lyapunov exponents", "phase_plane.seed": "Clicked trajectory",
              "phase_plane.seeds": "Clicked trajectories", "phase_plane.nullclines": "Nullclines",
              "phase_space_3d.added": "Added trajectories", "phase_space_3d.spread": "Nearby starts",
              "export_report": "Preparing the report"}


def job_label(key: str) -> str:
    """Words for a job key: the longest known prefix of it, else the key itself."""
    parts = key.split(".")
    for n in range(len(parts), 0, -1):
        label = JOB_LABELS.get(".".join(parts[:n]))
        if label:
            return label
    return key.replace("_", " ")


class _Relay(QObject):
    """Carries results from worker threads to the GUI thread. Lives as long as the program, so a task
    never holds a Qt object that could be destroyed under it; closures and results are released on the
    GUI thread (the worker hands them over in a list that the GUI side empties)."""

    finished = Signal(object)        # [runner_ref, job_id, result, error, fn]
    progress = Signal(object, int, float)

    @Slot(object)
    def on_finished(self, box) -> None:
        runner_ref, job_id, result, error, _fn = box
        box.clear()
        runner = runner_ref()
        if runner is not None and shiboken6.isValid(runner):
            runner._on_finished(job_id, result, error)

    @Slot(object, int, float)
    def on_progress(self, runner_ref, job_id, fraction) -> None:
        runner = runner_ref()
        if runner is not None and shiboken6.isValid(runner):
            runner._on_progress(job_id, fraction)


_relay: _Relay | None = None


class GuiThreadCollector(QObject):
    """Python's cycle collector may run in whatever thread allocates; if it frees a Qt object in a
    worker thread, Qt crashes. So automatic collection is switched off and done here, on the GUI
    thread, on a timer (only when the allocation counters say it is due)."""

    def __init__(self, parent=None, interval_ms: int = 500):
        super().__init__(parent)
        self.threshold = gc.get_threshold() if gc.isenabled() else (700, 10, 10)
        gc.disable()
        self.timer = QTimer(self)
        self.timer.timeout.connect(self.check)
        self.timer.start(interval_ms)

    def check(self) -> None:
        l0, l1, l2 = gc.get_count()
        if l0 > self.threshold[0]:
            gen = 0
            if l1 > self.threshold[1]:
                gen = 1
                if l2 > self.threshold[2]:
                    gen = 2
            gc.collect(gen)


_collector: GuiThreadCollector | None = None


def _get_relay() -> _Relay:
    """The relay (created on first use, on the GUI thread), with GUI-thread garbage collection."""
    global _relay, _collector
    if _relay is None:
        _relay = _Relay()
        _relay.finished.connect(_relay.on_finished)
        _relay.progress.connect(_relay.on_progress)
    if _collector is None and QCoreApplication.instance() is not None:
        _collector = GuiThreadCollector(QCoreApplication.instance())
    return _relay


def _cancel_tokens(jobs: dict, *_args) -> None:
    for job in list(jobs.values()):
        job.token.cancel()


class _Task(QRunnable):
    def __init__(self, runner: "JobRunner", job_id: int, fn, token: CancelToken):
        super().__init__()
        self.setAutoDelete(False)  # the runner keeps a reference until the job is finished
        self._runner_ref = weakref.ref(runner)
        self._relay = _get_relay()
        self._id, self._fn, self._token = job_id, fn, token

    def run(self):
        job_id, token, relay, ref = self._id, self._token, self._relay, self._runner_ref
        box = [ref, job_id, None, None, self._fn]
        self._fn = None
        try:
            if token.cancelled:
                raise Cancelled("cancelled")
            reporter = Reporter(lambda f: relay.progress.emit(ref, job_id, float(f)), token)
            box[2] = box[4](token, reporter)
        except Cancelled:
            token.cancel()
        except BaseException as exc:  # noqa: BLE001 - reported to the user as a message
            box[3] = plain_message(exc)
            detail = "".join(traceback.format_exception(type(exc), exc, exc.__traceback__))
            log.error("background job failed:\n%s", detail)  # the traceback goes to the log only
            del exc
        relay.finished.emit(box)


class JobRunner(QObject):
    """A small keyed job queue over the shared QThreadPool."""

    busyChanged = Signal(bool)
    jobProgress = Signal(str, float)  # key, fraction
    jobsChanged = Signal()            # a job started, ended or was cancelled

    def __init__(self, parent=None):
        super().__init__(parent)
        _get_relay()
        self.pool = QThreadPool.globalInstance()
        self._jobs: dict[int, Job] = {}
        self._by_key: dict[str, int] = {}
        self._ids = itertools.count(1)
        self._was_busy = False
        self.destroyed.connect(functools.partial(_cancel_tokens, self._jobs))

    # ------------------------------------------------------------ public
    def submit(self, key: str, fn, on_done, on_progress=None, on_error=None,
               is_current: Callable[[], bool] | None = None, label: str | None = None) -> CancelToken:
        """Start ``fn(cancel_token, reporter)``; a running or queued job with the same key is cancelled.
        ``label`` says in words what it does (default: from the key)."""
        self._cancel_key(key)
        token = CancelToken()
        job = Job(next(self._ids), key, token, on_done, on_progress, on_error, is_current or (lambda: True),
                  label=label or job_label(key))
        task = _Task(self, job.id, fn, token)
        job.runnable = task
        self._jobs[job.id] = job
        self._by_key[key] = job.id
        self.pool.start(task)
        self._update_busy()
        self.jobsChanged.emit()
        return token

    def cancel(self, key: str) -> None:
        self._cancel_key(key)
        self._update_busy()
        self.jobsChanged.emit()

    def _cancel_key(self, key: str) -> None:
        job_id = self._by_key.pop(key, None)
        if job_id is not None and job_id in self._jobs:
            self._cancel_job(self._jobs[job_id])

    def cancel_all(self) -> None:
        for job in list(self._jobs.values()):
            self._cancel_job(job)
        self._by_key.clear()
        self._update_busy()
        self.jobsChanged.emit()

    def running(self, key: str) -> bool:
        job_id = self._by_key.get(key)
        return job_id is not None and job_id in self._jobs and not self._jobs[job_id].token.cancelled

    @property
    def busy(self) -> bool:
        return any(not j.token.cancelled for j in self._jobs.values())

    def active_keys(self) -> list[str]:
        return [j.key for j in self._jobs.values() if not j.token.cancelled]

    def active_jobs(self) -> list[tuple[str, str, float]]:
        """(key, label, fraction done) of every job running or queued, oldest first."""
        return [(j.key, j.label, j.fraction) for j in self._jobs.values() if not j.token.cancelled]

    def wait(self, msecs: int = 30_000) -> bool:
        """Block until every started task of the pool has returned (used on shutdown and in tests)."""
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

    def _on_progress(self, job_id: int, fraction: float) -> None:
        job = self._jobs.get(job_id)
        if job is None or job.token.cancelled:
            return
        job.fraction = fraction
        self.jobProgress.emit(job.key, fraction)
        if job.on_progress is not None:
            job.on_progress(fraction)

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
            self.jobsChanged.emit()
