"""Sweeps (orbit diagrams) one value at a time through the single-run engine: flows with events, and
sweeps with a stiff method.

The ensemble engine of ``sweep.py`` runs all values together in explicit loops that do not stop at the
model's events (``when ... then ...``). Here each value runs on its own through ``sections``, which
follow the runs through their events and take any method of engine/methods.py: strobe mode is the
stroboscopic section, plane mode the plane section, maxima of a state ``x`` whose rate ``x'`` is a
state are the downward crossings of ``x' = 0`` (a peak cut off by an event, where ``x'`` jumps, is not
a maximum of the equation). The result is the same ``SweepResult``. Lyapunov exponents of models with
events are refused (a perturbation jumps by the saltation matrix at each event).
"""

from __future__ import annotations

import math

import numpy as np

from orbitdesk.analyses.sections import plane_section, strobe_section
from orbitdesk.engine.model_events import describe_events, saltation_refusal
from orbitdesk.engine.progress import Reporter
from orbitdesk.engine.settings import RunSettings

_DIRECTIONS = {1: "up", -1: "down", 0: "both"}


def refuse_exponents(system) -> None:
    """ValueError for exponents of a model with events (a perturbation jumps at each event)."""
    if system.model.events:
        raise ValueError(saltation_refusal(system, "Lyapunov exponents"))


def sweep_value_by_value(system, parameter, values, settings, u0, base_p, cancel=None, progress=None):
    """(samples (M, K), times (M, K), None, status (M,)) as ``sweep._sweep_arrays`` gives them."""
    from orbitdesk.analyses.sweep import MAXIMA, PLANE, STROBE

    s = settings
    if s.lyapunov:
        refuse_exponents(system)
        raise ValueError("exponents of a sweep value by value are taken by the lyapunov command's path")
    if s.mode == MAXIMA and s.observe + "'" not in system.states:
        where = f"in a model with events ({describe_events(system)})" if system.model.events else \
            f"with the method {s.method}"
        raise ValueError(f"{where} maxima are found where the rate crosses zero, so {s.observe}' must be a state "
                         f"(write {s.observe}'' = ...); or sample with a plane or a strobe period")
    run = RunSettings(method=(s.method or "dop853") if s.dt is None else "rk4", rtol=s.rtol, atol=s.atol,
                      dt=s.dt or 0.01, t_start=s.t_start, t_end=s.t_start + max(s.duration, 1.0), bound=s.bound)
    report = Reporter(progress, cancel)
    M, K = len(values), int(s.samples)
    samples, times = np.full((M, K), np.nan), np.full((M, K), np.nan)
    status = []
    for i, value in enumerate(values):
        p = np.array(base_p, dtype=float)
        p[system.parameters.index(parameter)] = value
        start = u0 if np.ndim(u0) == 1 else u0[:, i]
        if s.mode == STROBE:
            section = strobe_section(system, p, start, period=float(s.period), count=K, transient=s.transient,
                                     settings=run, cancel=cancel)
        else:
            name, level, direction = (*s.plane, _DIRECTIONS[s.direction]) if s.mode == PLANE else \
                (s.observe + "'", 0.0, "down")
            section = plane_section(system, p, start, coordinate=name, value=level, direction=direction, count=K,
                                    transient=s.transient, settings=run, cancel=cancel,
                                    t_max=s.t_start + s.transient + s.duration)
        observed = _observed(system, s.observe, section, p)
        k = min(K, observed.size)
        samples[i, :k], times[i, :k] = observed[:k], section.times[:k]
        status.append(section.status)
        report((i + 1) / M)
    return samples, times, None, np.array(status)


def _observed(system, name, section, p) -> np.ndarray:
    if name in system.states:
        return np.asarray(section.points[system.states.index(name)], dtype=float)
    if section.points.shape[1] == 0:
        return np.empty(0)
    return np.asarray(system.derived_values(section.times, section.points, p)[name], dtype=float)


__all__ = ["sweep_value_by_value", "refuse_exponents"]
