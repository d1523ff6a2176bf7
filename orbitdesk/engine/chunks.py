"""Independent chunks of work on any ``concurrent.futures.Executor``, results in order.

A chunk that raises is submitted again (``retries`` times); when it still fails, ``ChunkError``
names it and the remaining chunks are cancelled. Cancelling the token cancels every chunk not yet
started and raises ``Cancelled``; chunks already running in a worker finish and are discarded.
Chunks are submitted a few at a time (a window of about twice the worker count), so a cancel or a
failure leaves most of the queue unrun.

The chunk function and its arguments must be picklable for process pools: pass model text and
plain settings, not compiled systems (see ``compiled_system``).
"""

from __future__ import annotations

import functools
import multiprocessing
import os
from concurrent.futures import FIRST_COMPLETED, Executor, ProcessPoolExecutor, wait

from orbitdesk.engine.progress import Reporter

POLL_SECONDS = 0.05


class ChunkError(RuntimeError):
    """A chunk kept failing; ``index`` is its position in the chunk list, ``cause`` the last error."""

    def __init__(self, index: int, count: int, attempts: int, cause: BaseException):
        self.index, self.count, self.attempts, self.cause = index, count, attempts, cause
        tries = "once" if attempts == 1 else f"{attempts} times"
        super().__init__(f"chunk {index + 1} of {count} failed {tries}: {type(cause).__name__}: {cause}")


def worker_count() -> int:
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except (AttributeError, OSError):
        return max(1, os.cpu_count() or 1)


def default_executor(n_chunks: int) -> Executor:
    """A local process pool over the machine's cores (fresh interpreters: safe from threaded hosts)."""
    return ProcessPoolExecutor(max_workers=max(1, min(worker_count(), n_chunks)),
                               mp_context=multiprocessing.get_context("spawn"))


@functools.lru_cache(maxsize=8)
def compiled_system(text: str):
    """Compile model text once per process (compilation is deterministic)."""
    from orbitdesk.system.compiled_system import compile_model

    return compile_model(text)


def run_chunks(fn, chunk_args, executor: Executor | None = None, retries: int = 1, cancel=None,
               progress=None, window: int | None = None) -> list:
    """``[fn(*args) for args in chunk_args]`` computed on ``executor`` (default: a local process pool).

    With no executor and a single chunk, the chunk runs in this thread."""
    chunk_args = [tuple(args) for args in chunk_args]
    count = len(chunk_args)
    report = Reporter(progress, cancel)
    report(0.0)
    if count == 0:
        return []
    if executor is None and count == 1:
        return [_run_inline(fn, chunk_args[0], retries, count)]
    own = executor is None
    if own:
        executor = default_executor(count)
    if window is None:
        window = 2 * int(getattr(executor, "_max_workers", 0) or worker_count())
    window = max(1, window)
    results = [None] * count
    running = {}  # future -> (chunk index, attempt)
    next_chunk, finished_count = 0, 0
    ok = False
    try:
        while finished_count < count:
            while next_chunk < count and len(running) < window:
                running[executor.submit(fn, *chunk_args[next_chunk])] = (next_chunk, 1)
                next_chunk += 1
            done, _ = wait(list(running), timeout=POLL_SECONDS, return_when=FIRST_COMPLETED)
            for future in done:
                index, attempt = running.pop(future)
                error = future.exception()
                if error is None:
                    results[index] = future.result()
                    finished_count += 1
                elif attempt <= retries:
                    running[executor.submit(fn, *chunk_args[index])] = (index, attempt + 1)
                else:
                    raise ChunkError(index, count, attempt, error) from error
            report(finished_count / count)
        ok = True
        return results
    finally:
        for future in running:
            future.cancel()
        if own:
            executor.shutdown(wait=ok, cancel_futures=True)


def _run_inline(fn, args, retries, count):
    attempt = 1
    while True:
        try:
            return fn(*args)
        except Exception as error:  # noqa: BLE001 - retried, then reported as ChunkError
            if attempt > retries:
                raise ChunkError(0, count, attempt, error) from error
            attempt += 1


def split(n_items: int, chunk_size: int) -> list[slice]:
    """Consecutive slices of at most ``chunk_size`` items covering ``range(n_items)``."""
    chunk_size = max(1, int(chunk_size))
    return [slice(start, min(start + chunk_size, n_items)) for start in range(0, n_items, chunk_size)]
