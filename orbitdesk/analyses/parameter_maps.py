"""Two-parameter maps: the period of the attractor over a grid of two parameters (the largest Lyapunov
exponent over such a grid is ``sweep.lyapunov_grid``).

The period is read off the samples the sweep ensemble takes of every grid point after a transient: the
iterates of a map, or the state once every forcing period of a forced flow (``SweepSettings`` with mode
``iterate`` or ``strobe``). It is the smallest k <= ``max_period`` with s[i + k] = s[i] for every sample
(to ``tol`` of the samples' spread); 0 means none up to ``max_period`` (quasi-periodic or chaotic), -1
that the orbit blew up.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from orbitdesk.engine.progress import Reporter
from orbitdesk.analyses.sweep import ITERATE, STROBE, SweepSettings, run_members
from orbitdesk.system.compiled_system import MAP

NONE, DIVERGED = 0, -1
CHUNK = 2048  # grid points per ensemble (memory, progress and cancel between chunks)


@dataclass
class PeriodGrid:
    x_name: str
    xs: np.ndarray  # (nx,)
    y_name: str
    ys: np.ndarray  # (ny,)
    period: np.ndarray  # (ny, nx) ints: 1, 2, ...; 0 none up to max_period; -1 blew up
    max_period: int
    unit: str  # "iterations" or "forcing periods"

    def to_dict(self) -> dict:
        return {"x": {"parameter": self.x_name, "values": self.xs.tolist()},
                "y": {"parameter": self.y_name, "values": self.ys.tolist()},
                "period": self.period.tolist(), "max_period": self.max_period, "unit": self.unit,
                "legend": {"0": f"no period up to {self.max_period}", "-1": "blew up"}}


def minimal_periods(samples: np.ndarray, max_period: int, tol: float = 1e-6) -> np.ndarray:
    """The smallest period k <= max_period of each row of ``samples`` (0: none, -1: a NaN in the row)."""
    samples = np.asarray(samples, dtype=float)
    out = np.zeros(samples.shape[0], dtype=int)
    bad = ~np.all(np.isfinite(samples), axis=1)
    out[bad] = DIVERGED
    scale = np.nanmax(np.abs(samples), axis=1, initial=0.0) if samples.size else np.zeros(0)
    limit = tol * np.maximum(1.0, scale)
    for k in range(1, max_period + 1):
        if samples.shape[1] <= k:
            break
        undecided = out == NONE
        if not undecided.any():
            break
        gap = np.max(np.abs(samples[:, k:] - samples[:, :-k]), axis=1)
        out[undecided & (gap <= limit)] = k
    return out


def period_grid(system, pname_x: str, xs, pname_y: str, ys, settings: SweepSettings | None = None,
                max_period: int = 32, tol: float = 1e-6, u0=None, p=None, cancel=None,
                progress=None) -> PeriodGrid:
    """The period of the attractor reached from ``u0`` at every point of the grid ``ys x xs`` (rows: y).

    Maps: periods in iterations. Forced flows: ``settings`` must sample once per forcing period (mode
    ``strobe``); periods in forcing periods. At least 2 * max_period + 1 samples are taken."""
    system.refuse_delays("the two-parameter map of periods")
    for name in (pname_x, pname_y):
        if name not in system.parameters:
            raise ValueError(f"unknown parameter '{name}' (parameters: {', '.join(system.parameters) or 'none'})")
    if pname_x == pname_y:
        raise ValueError("the grid needs two different parameters")
    if int(max_period) < 1:
        raise ValueError("the longest period looked for must be at least 1")
    settings = replace(settings or SweepSettings())
    if system.kind == MAP:
        settings.mode = ITERATE
    elif settings.mode != STROBE:
        raise ValueError("the period of a flow's attractor is counted in forcing periods: sample it once "
                         "per forcing period (a strobe period)")
    settings.samples = max(int(settings.samples), 2 * int(max_period) + 1)
    settings.lyapunov = False
    settings = settings.checked(system)
    xs = np.asarray(xs, dtype=float).ravel()
    ys = np.asarray(ys, dtype=float).ravel()
    if xs.size == 0 or ys.size == 0 or not (np.all(np.isfinite(xs)) and np.all(np.isfinite(ys))):
        raise ValueError("the grid values must be finite numbers")
    base_p = system.param_values.astype(float) if p is None else np.asarray(p, dtype=float)
    u0 = system.initial.astype(float) if u0 is None else np.asarray(u0, dtype=float)
    gx, gy = np.meshgrid(xs, ys)
    points = np.vstack([gx.ravel(), gy.ravel()])
    ix, iy = system.parameters.index(pname_x), system.parameters.index(pname_y)
    report = Reporter(progress, cancel)
    periods = np.empty(points.shape[1], dtype=int)
    total = points.shape[1]
    for start in range(0, total, CHUNK):
        stop = min(total, start + CHUNK)
        P = np.repeat(base_p[:, None], stop - start, axis=1)
        P[ix], P[iy] = points[0, start:stop], points[1, start:stop]
        U0 = np.repeat(u0[:, None], stop - start, axis=1)
        sampler, _exponents, _result = run_members(system, P, U0, settings, cancel,
                                                   report.part(start / total, (stop - start) / total))
        periods[start:stop] = minimal_periods(sampler.values, int(max_period), tol)
    report(1.0)
    unit = "iterations" if system.kind == MAP else "forcing periods"
    return PeriodGrid(pname_x, xs, pname_y, ys, periods.reshape(ys.size, xs.size), int(max_period), unit)


__all__ = ["PeriodGrid", "minimal_periods", "period_grid", "NONE", "DIVERGED"]
