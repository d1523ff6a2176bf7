"""Cancellation and progress shared by every long computation in the core."""

from __future__ import annotations

import threading
from typing import Callable


class Cancelled(Exception):
    """Raised inside a computation when its CancelToken was cancelled."""


class CancelToken:
    """A flag another thread can raise; computations poll it between steps."""

    def __init__(self):
        self._event = threading.Event()

    def cancel(self) -> None:
        self._event.set()

    @property
    def cancelled(self) -> bool:
        return self._event.is_set()

    def check(self) -> None:
        if self._event.is_set():
            raise Cancelled("cancelled")


ProgressCallback = Callable[[float], None]


class Reporter:
    """Calls ``progress(fraction)`` at most about every 1% and checks a cancel token."""

    def __init__(self, progress: ProgressCallback | None = None, cancel: CancelToken | None = None,
                 start: float = 0.0, span: float = 1.0):
        self.progress = progress
        self.cancel = cancel
        self.start = start
        self.span = span
        self._last = -1.0

    def __call__(self, fraction: float) -> None:
        if self.cancel is not None:
            self.cancel.check()
        if self.progress is not None and fraction - self._last >= 0.01:
            self._last = fraction
            self.progress(self.start + self.span * min(max(fraction, 0.0), 1.0))

    def part(self, start: float, span: float) -> "Reporter":
        """A reporter for a sub-task covering [start, start+span] of this one."""
        return Reporter(self.progress, self.cancel, self.start + self.span * start, self.span * span)
