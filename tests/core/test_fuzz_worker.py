"""The fuzz harness's worker process (fuzz_worker.py): a hanging example is a failure naming its input, a
failing one carries the worker's traceback, a crash is reported, and the next example runs in a fresh worker."""

import os

import pytest

from .fuzz_worker import ExampleFailed, ExampleWorker


def spin():
    while True:
        pass


def check_one(x):
    assert x == 1, "x is not 1"


def crash():
    os._exit(3)


def test_hangs_failures_and_crashes_are_reported_with_the_input_and_the_worker_goes_on():
    worker = ExampleWorker(limit=0.5)
    try:
        worker.run(check_one, 1)
        with pytest.raises(ExampleFailed, match=r"of CPU time.*\('looping input',\)"):
            worker.run(spin_on, "looping input")
        assert worker.restarts == 1
        with pytest.raises(ExampleFailed, match=r"(?s)x is not 1.*on the input \(2,\).*in the worker"):
            worker.run(check_one, 2)
        with pytest.raises(ExampleFailed, match=r"died.*exit code 3"):
            worker.run(crash)
        worker.run(check_one, 1)  # a fresh worker after the crash
    finally:
        worker.stop()


def spin_on(_text):
    spin()
