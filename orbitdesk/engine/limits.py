"""Bounds on the work and memory one request may ask for: one table for the engine, the analyses,
the command line, projects and the app.

Every request is sized before anything is allocated or started: the number of steps it implies
(integration steps, map iterations, strobe periods, Newton starts times their iterations, ...) and
the bytes its results hold. A request beyond a limit is refused with ``LimitExceeded``, whose
message states the size asked for, the limit and the command-line option that raises it.

The limits in force are process-wide; the command line raises them for one command with
``--max-steps N`` and ``--max-memory MB`` (``using_limits``). Engines that cannot size a request
in advance (adaptive step sizes) stop at ``current().steps`` steps with a status that says so.
"""

from __future__ import annotations

import contextlib
import math
from dataclasses import dataclass, replace


@dataclass(frozen=True)
class Limits:
    steps: float = 5e7  # steps of one request: integration steps, iterations, periods, Newton iterations
    memory: float = 1e9  # bytes of results one request may hold
    span: float = 1e15  # |time| of a start, end or transient (beyond, a double cannot resolve a step)


DEFAULTS = Limits()

# name -> (what is counted, the option that raises it)
TABLE = {
    "steps": ("steps", "--max-steps N"),
    "memory": ("bytes of results", "--max-memory MB"),
    "span": ("time units", None),
}

_current = DEFAULTS


class LimitExceeded(ValueError):
    """A request larger than a limit; the message names the limit and how to raise it."""


def current() -> Limits:
    return _current


@contextlib.contextmanager
def using_limits(steps: float | None = None, memory: float | None = None):
    """Use other limits inside the block (the command line's --max-steps / --max-memory)."""
    global _current
    previous = _current
    changes = {k: float(v) for k, v in (("steps", steps), ("memory", memory)) if v is not None}
    _current = replace(previous, **changes)
    try:
        yield _current
    finally:
        _current = previous


PLAIN_PYTHON_SHARE = 25  # the loops as plain Python run tens of times slower: there runs get 1/25 of the steps


def step_limit(compiled: bool = True) -> float:
    """The steps a run may take: the limit, or for loops running as plain Python (the compiler off, or a
    model's kernels not compiled yet) 1/PLAIN_PYTHON_SHARE of it, so a run judged by its pace
    (drivers._Pace) ends in minutes there too; --max-steps raises both."""
    return _current.steps if compiled else _current.steps / PLAIN_PYTHON_SHARE


def step_limit_words(compiled: bool = True) -> str:
    """The limit as a message states it, with the option that raises it."""
    limit = step_limit(compiled)
    where = "" if compiled else f" in plain Python, 1/{PLAIN_PYTHON_SHARE} of the compiled loops' limit"
    return f"the limit is {_shown(limit)}{where}; {TABLE['steps'][1]} raises it"


def _shown(value: float) -> str:
    if not math.isfinite(value):
        return "an unbounded number"
    return f"{value:,.0f}" if value < 1e12 else f"{value:.3g}"


def check_steps(count: float, what: str) -> int:
    """Refuse a request of ``count`` steps beyond the limit; returns the count as an int."""
    limit = _current.steps
    if not count <= limit:  # also NaN and infinity
        raise LimitExceeded(f"{what} asks for {_shown(count)} steps; the limit is {_shown(limit)} "
                            f"(ask for less, or raise it with {TABLE['steps'][1]})")
    return int(count)


def check_memory(nbytes: float, what: str) -> None:
    """Refuse a result that would hold more than the memory limit, before it is allocated."""
    limit = _current.memory
    if not nbytes <= limit:
        raise LimitExceeded(f"{what} would hold about {_megabytes(nbytes)} of results; the limit is "
                            f"{_megabytes(limit)} (ask for fewer points, or raise it with {TABLE['memory'][1]})")


def _megabytes(nbytes: float) -> str:
    if not math.isfinite(nbytes):
        return "an unbounded amount"
    return f"{nbytes / 1e6:,.0f} MB" if nbytes < 1e15 else f"{nbytes / 1e6:.3g} MB"


def check_span(value: float, what: str) -> float:
    """Refuse a time (start, end, transient, period) that is not finite or beyond the span limit."""
    if not (math.isfinite(value) and abs(value) <= _current.span):
        raise LimitExceeded(f"{what} must be a finite time within \u00b1{_current.span:g}, got {value:g}")
    return value


def steps_of(span: float, step: float) -> float:
    """How many steps of size ``step`` cover ``span`` (infinite for a zero or non-finite step)."""
    span, step = abs(float(span)), abs(float(step))
    if not (math.isfinite(span) and math.isfinite(step)) or step == 0:
        return math.inf
    return span / step


def check_run_settings(settings, is_map: bool | None = None) -> None:
    """Refuse run settings (``engine.settings.RunSettings`` or a project's) whose run would never end:
    times beyond the span limit, a fixed step or largest step that needs more steps than the limit,
    more map iterations than the limit. ``is_map`` None (a project, whose model may be either): both."""
    if is_map is not False:
        check_steps(float(settings.steps), f"a run of {settings.steps:,} iterations")
    if is_map is True:
        return
    for name in ("t_start", "t_end", "transient"):
        check_span(float(getattr(settings, name)), name.replace("_", " "))
    span = abs(float(settings.t_end) - float(settings.t_start))
    for name, what in (("dt", "the fixed step dt"), ("max_step", "the largest step")):
        step = getattr(settings, name)
        if step is not None and (name == "dt" or step < span):
            check_steps(steps_of(span, step), f"a run over {span:g} time units with {what} = {step:g}")


__all__ = ["DEFAULTS", "LimitExceeded", "Limits", "TABLE", "check_memory", "check_run_settings", "check_span",
           "check_steps", "current", "using_limits", "steps_of", "step_limit", "step_limit_words",
           "PLAIN_PYTHON_SHARE"]
