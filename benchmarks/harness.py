"""Shared timing and table printing for the benchmark modules."""

from __future__ import annotations

import statistics
import time
from dataclasses import dataclass


@dataclass
class Row:
    case: str
    ours: float | None  # seconds (median)
    baseline: float | None  # seconds (median), measured in the same run
    check: str  # the accuracy check that shows both computed the same thing
    baseline_name: str = ""
    goal: str = ""

    @property
    def ratio(self) -> float | None:
        if self.ours and self.baseline:
            return self.baseline / self.ours
        return None


def timed(fn):
    """(wall seconds, value) of one call ``fn()``."""
    start = time.perf_counter()
    value = fn()
    return time.perf_counter() - start, value


def median_time(fn, repeats: int = 5, warmup: int = 1) -> float:
    """Median wall time of ``fn()`` over ``repeats`` runs after ``warmup`` runs."""
    for _ in range(warmup):
        fn()
    return statistics.median(timed(fn)[0] for _ in range(repeats))


def alternate(ours, baseline, repeats: int = 5) -> tuple[list[float], list[float]]:
    """Wall times of two callables timed alternately (after one untimed call of each), so machine
    noise hits both alike."""
    ours(), baseline()
    a, b = [], []
    for _ in range(repeats):
        for fn, times in ((ours, a), (baseline, b)):
            times.append(timed(fn)[0])
    return a, b


def interleaved(ours, baseline, repeats: int = 5) -> tuple[float, float]:
    """Medians of two callables timed alternately."""
    a, b = alternate(ours, baseline, repeats)
    return statistics.median(a), statistics.median(b)


def interleaved_best(ours, baseline, repeats: int = 21) -> tuple[float, float]:
    """Fastest of each of two callables timed alternately: for runs of a few milliseconds on a loaded
    machine, where the median measures how often the process was preempted."""
    a, b = alternate(ours, baseline, repeats)
    return min(a), min(b)


def child_command(argv, env=None):
    """A callable that runs ``argv`` in a child process (output discarded) and raises if it fails."""
    import subprocess

    def run():
        subprocess.run(argv, check=True, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, env=env)

    return run


def fmt_seconds(value: float | None) -> str:
    if value is None:
        return "—"
    if value < 1e-3:
        return f"{value * 1e6:.1f} µs"
    if value < 1:
        return f"{value * 1e3:.1f} ms"
    return f"{value:.2f} s"


def print_table(rows: list[Row]) -> str:
    header = "| case | ours | baseline | ratio | goal | check |\n|---|---|---|---|---|---|"
    lines = [header]
    for row in rows:
        ratio = f"{row.ratio:.1f}x" if row.ratio else "—"
        base = fmt_seconds(row.baseline) + (f" ({row.baseline_name})" if row.baseline_name else "")
        lines.append(f"| {row.case} | {fmt_seconds(row.ours)} | {base} | {ratio} | {row.goal} | {row.check} |")
    text = "\n".join(lines)
    print(text)
    return text
