"""Chunks on executors: order, retry once, failures named, cancellation of the remaining chunks."""

import math
import threading
import time
from concurrent.futures import ThreadPoolExecutor

import pytest

from orbitdesk.engine.chunks import ChunkError, run_chunks, split
from orbitdesk.engine.progress import CancelToken, Cancelled


class Flaky:
    """Fails the first attempt at the chosen chunks, then succeeds; counts attempts per chunk."""

    def __init__(self, failing, always=False):
        self.failing, self.always = set(failing), always
        self.attempts = {}
        self.lock = threading.Lock()

    def __call__(self, index, value):
        with self.lock:
            self.attempts[index] = self.attempts.get(index, 0) + 1
            attempt = self.attempts[index]
        if index in self.failing and (self.always or attempt == 1):
            raise ValueError(f"bad luck in chunk {index}")
        return value * value


def test_results_come_back_in_chunk_order():
    fn = Flaky([])
    with ThreadPoolExecutor(3) as pool:
        results = run_chunks(fn, [(i, i + 0.5) for i in range(10)], executor=pool)
    assert results == [(i + 0.5) ** 2 for i in range(10)]


def test_a_chunk_that_fails_once_is_retried():
    fn = Flaky([2, 5])
    with ThreadPoolExecutor(2) as pool:
        results = run_chunks(fn, [(i, float(i)) for i in range(8)], executor=pool)
    assert results == [float(i * i) for i in range(8)]
    assert fn.attempts[2] == 2 and fn.attempts[5] == 2 and fn.attempts[0] == 1


def test_a_chunk_that_always_fails_is_reported_by_position():
    fn = Flaky([3], always=True)
    with ThreadPoolExecutor(2) as pool:
        with pytest.raises(ChunkError) as info:
            run_chunks(fn, [(i, float(i)) for i in range(40)], executor=pool)
    error = info.value
    assert error.index == 3 and error.attempts == 2 and isinstance(error.cause, ValueError)
    assert "chunk 4 of 40 failed 2 times" in str(error) and "bad luck in chunk 3" in str(error)
    assert fn.attempts[3] == 2
    assert len(fn.attempts) < 40  # the queue was not run to its end


def test_retries_zero_reports_the_first_failure():
    fn = Flaky([0])
    with pytest.raises(ChunkError, match="failed once"):
        with ThreadPoolExecutor(1) as pool:
            run_chunks(fn, [(0, 1.0), (1, 2.0)], executor=pool, retries=0)


def test_cancel_stops_the_remaining_chunks():
    token = CancelToken()
    ran = []

    def chunk(index):
        ran.append(index)
        if index == 1:
            token.cancel()
            time.sleep(0.5)  # long enough for the caller to notice and cancel what is queued
        return index

    with ThreadPoolExecutor(1) as pool:
        with pytest.raises(Cancelled):
            run_chunks(chunk, [(i,) for i in range(20)], executor=pool, cancel=token)
    assert ran == [0, 1]


def test_progress_counts_finished_chunks():
    seen = []
    with ThreadPoolExecutor(2) as pool:
        run_chunks(math.sqrt, [(float(i),) for i in range(50)], executor=pool, progress=seen.append)
    assert seen[0] == 0.0 and seen[-1] == 1.0 and seen == sorted(seen)


def test_default_executor_equals_threads_exactly():
    # the local process pool runs the same picklable chunk function (here math.fsum of a chunk) and
    # returns exactly what a thread pool returns
    chunks = [([0.1 * k + j for k in range(100)],) for j in range(4)]
    with ThreadPoolExecutor(2) as pool:
        threads = run_chunks(math.fsum, chunks, executor=pool)
    assert run_chunks(math.fsum, chunks) == threads
    assert threads == [math.fsum(c[0]) for c in chunks]


def test_single_chunk_without_executor_runs_here_and_is_retried():
    fn = Flaky([0])
    assert run_chunks(fn, [(0, 3.0)]) == [9.0]
    assert fn.attempts[0] == 2
    with pytest.raises(ChunkError, match="chunk 1 of 1"):
        run_chunks(Flaky([0], always=True), [(0, 3.0)])


def test_split_covers_every_item_once():
    pieces = split(10, 4)
    assert [(p.start, p.stop) for p in pieces] == [(0, 4), (4, 8), (8, 10)]
    assert split(0, 4) == []
