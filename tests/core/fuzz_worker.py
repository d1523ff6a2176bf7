"""Fuzz examples that could hang run in a child process, never in the test process itself.

An alarm raised inside the test process can cut into sympy (or any library) in the middle of an update
of its caches and leave them broken for every later example. Here each example runs in one long-lived
worker process fed over a pipe (forked from the test process, so everything already imported and
compiled is there at once); the parent only waits. An example that uses more than ``limit`` seconds of
the worker's CPU time (or, waiting without using any, WALL_FACTOR times that in wall time: on a loaded
machine, with the run niced, a worker gets a small share and wall time says little) is
reported as a failure naming its input, the worker is killed and a fresh one forked for the next
example; a worker that dies (a crash in compiled code) is reported the same way. Nothing the example
does can change the parent.

    WORKER.run(check, text)    # check(text) in the worker; its failure is raised here with its traceback
"""

from __future__ import annotations

import atexit
import multiprocessing
import time
import traceback

from orbitdesk.analyses.equilibria import _cpu_seconds  # the one reader of a process's CPU time

HANG_LIMIT = 20.0  # seconds of CPU time for one example: a hang detector, not a speed test
WALL_FACTOR = 60  # a worker blocked without using CPU time: it hangs after WALL_FACTOR * HANG_LIMIT seconds


class ExampleFailed(AssertionError):
    """An example failed, hung or crashed in the worker; the message has the worker's traceback and the input."""


def _serve(conn) -> None:
    while True:
        try:
            job = conn.recv()
        except EOFError:
            return
        fn, args = job
        try:
            fn(*args)
        except BaseException as exc:  # noqa: BLE001 - everything is reported to the parent
            conn.send(("failed", f"{type(exc).__name__}: {exc}", traceback.format_exc()))
        else:
            conn.send(("ok", "", ""))


class ExampleWorker:
    def __init__(self, limit: float = HANG_LIMIT):
        self.limit = limit
        self.process = None
        self.conn = None
        self.restarts = 0

    def _start(self) -> None:
        context = multiprocessing.get_context("fork")
        parent, child = context.Pipe()
        self.process = context.Process(target=_serve, args=(child,), daemon=True, name="fuzz-example-worker")
        self.process.start()
        child.close()
        self.conn = parent

    def stop(self) -> None:
        if self.process is not None:
            self.process.kill()
            self.process.join(5)
            self.conn.close()
            self.process = self.conn = None

    def run(self, fn, *args) -> None:
        """fn(*args) in the worker; raises ExampleFailed (with the input) if it raised, hung or crashed."""
        if self.process is None or not self.process.is_alive():
            self._start()
        self.conn.send((fn, args))
        pid = self.process.pid
        cpu0, wall0 = _cpu_seconds(pid), time.monotonic()
        while not self.conn.poll(0.2):
            cpu = _cpu_seconds(pid)
            used = cpu - cpu0 if cpu is not None and cpu0 is not None else None
            wall = time.monotonic() - wall0
            if not self.process.is_alive():
                code = self.process.exitcode
                self.stop()
                raise ExampleFailed(f"the worker died (exit code {code}) on the input {args!r}")
            over_cpu = used is not None and used > self.limit
            if over_cpu or wall > (self.limit if used is None else WALL_FACTOR * self.limit):
                self.stop()
                self.restarts += 1
                spent = f"{used:.0f} s of CPU time" if used is not None else "an unknown CPU time"
                raise ExampleFailed(f"one example ran for {wall:.0f} s ({spent}; the limit is {self.limit:g} s of "
                                    f"CPU time, or {WALL_FACTOR * self.limit:g} s waiting): {args!r}")
        try:
            status, summary, trace = self.conn.recv()
        except EOFError:
            self.process.join(5)
            code = self.process.exitcode
            self.stop()
            raise ExampleFailed(f"the worker died (exit code {code}) on the input {args!r}") from None
        if status != "ok":
            raise ExampleFailed(f"{summary}\non the input {args!r}\n--- in the worker:\n{trace}")


WORKER = ExampleWorker()
atexit.register(WORKER.stop)
