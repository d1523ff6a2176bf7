"""Two-parameter maps: the period of the attractor over a grid of two parameters (the largest Lyapunov
exponent over such a grid is ``sweep.lyapunov_grid``).

The period is read off the samples the sweep ensemble takes of every grid point after a transient: the
iterates of a map, or the state once every forcing period of a forced flow (``SweepSettings`` with mode
``iterate`` or ``strobe``). It is the smallest k <= ``max_period`` with s[i + k] = s[i] for every sample
(to ``tol`` of the samples' spread); 0 means none up to ``max_period`` (quasi-periodic or chaotic), -1
that the orbit blew up.

An autonomous flow (mode ``maxima``) is sampled at the local maxima of a state: k is then the number of
maxima per turn of the cycle (1 for a simple limit cycle, 2 after a period doubling, ...) and
``time_period`` the cycle's period in time (the mean time over k maxima); -2 marks an orbit that settled at
an equilibrium (the vector field vanishes where it ended).
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from orbitdesk.engine.model_events import refuse_ensembles
from orbitdesk.engine.progress import Reporter
from orbitdesk.analyses.grids import GridAxes
from orbitdesk.analyses.sweep import ITERATE, MAXIMA, STROBE, SweepSettings, run_members
from orbitdesk.system.compiled_system import MAP

NONE, DIVERGED, STEADY = 0, -1, -2
MAXIMA_TOL = 1e-5  # maxima are located on the step's cubic interpolant: compared to this (relative)
STILL = 1e-7       # |f| at the end, relative to the state's size, below which an orbit has settled
CHUNK = 2048  # grid points per ensemble (memory, progress and cancel between chunks)


@dataclass
class PeriodGrid(GridAxes):  # x_name, xs, y_name, ys: the two parameters
    period: np.ndarray  # (ny, nx) ints: 1, 2, ...; 0 none up to max_period; -1 blew up
    max_period: int
    unit: str  # "iterations", "forcing periods" or "maxima per cycle"
    time_period: np.ndarray | None = None  # (ny, nx) autonomous flows: the cycle's period in time, NaN if none

    def to_dict(self) -> dict:
        data = {**self.axes_dict("parameter"), "period": self.period.tolist(), "max_period": self.max_period,
                "unit": self.unit, "legend": {"0": f"no period up to {self.max_period}", "-1": "blew up"}}
        if self.time_period is not None:
            data["time_period"] = [[v if np.isfinite(v) else None for v in row] for row in self.time_period.tolist()]
            data["legend"]["-2"] = "settles at an equilibrium"
        return data


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


def cycle_periods(values: np.ndarray, times: np.ndarray, max_period: int, tol: float = MAXIMA_TOL):
    """(k, T) per row of the maxima ``values`` found at ``times`` (NaN-padded on the right): k the smallest
    number of maxima after which they repeat (0: none up to max_period, or too few maxima to tell), T the
    period in time (NaN without k)."""
    values, times = np.asarray(values, dtype=float), np.asarray(times, dtype=float)
    k_out = np.zeros(values.shape[0], dtype=int)
    t_out = np.full(values.shape[0], np.nan)
    for row in range(values.shape[0]):
        v, t = values[row], times[row]
        have = np.isfinite(v) & np.isfinite(t)
        v, t = v[have], t[have]
        limit = tol * max(1.0, float(np.max(np.abs(v), initial=0.0)))
        for k in range(1, max_period + 1):
            if v.size < 2 * k + 1:
                break
            if np.max(np.abs(v[k:] - v[:-k])) <= limit:
                k_out[row], t_out[row] = k, float(np.mean(t[k:] - t[:-k]))
                break
    return k_out, t_out


def period_grid(system, pname_x: str, xs, pname_y: str, ys, settings: SweepSettings | None = None,
                max_period: int = 32, tol: float = 1e-6, u0=None, p=None, cancel=None,
                progress=None) -> PeriodGrid:
    """The period of the attractor reached from ``u0`` at every point of the grid ``ys x xs`` (rows: y).

    Maps: periods in iterations. Forced flows: ``settings`` samples once per forcing period (mode
    ``strobe``); periods in forcing periods. Autonomous flows (mode ``maxima``, the default for a flow):
    maxima per cycle and the period in time (see the module notes). At least 2 * max_period + 1 samples
    are taken."""
    system.refuse_delays("the two-parameter map of periods")
    refuse_ensembles(system, "Maps of the period over two parameters")
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
    elif settings.mode is None:
        settings.mode = MAXIMA
    if system.kind != MAP and settings.mode not in (STROBE, MAXIMA):
        raise ValueError("the period of a flow's attractor is counted in forcing periods (sample once per "
                         "forcing period) or, for an autonomous flow, from the maxima of a state")
    maxima = settings.mode == MAXIMA
    if maxima and (settings.observe is None or settings.observe not in system.states):
        settings.observe = system.states[0]
    settings.samples = max(int(settings.samples), 2 * int(max_period) + (2 if maxima else 1))
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
    time_periods = np.full(points.shape[1], np.nan) if maxima else None
    total = points.shape[1]
    for start in range(0, total, CHUNK):
        stop = min(total, start + CHUNK)
        P = np.repeat(base_p[:, None], stop - start, axis=1)
        P[ix], P[iy] = points[0, start:stop], points[1, start:stop]
        U0 = np.repeat(u0[:, None], stop - start, axis=1)
        sampler, _exponents, result = run_members(system, P, U0, settings, cancel,
                                                  report.part(start / total, (stop - start) / total))
        if maxima:
            k, T = cycle_periods(sampler.values, sampler.times, int(max_period), max(tol, MAXIMA_TOL))
            speed = np.linalg.norm(system.rhs_vec(result.time, result.states, P), axis=0)
            size = np.maximum(1.0, np.max(np.abs(result.states), axis=0))
            ok = result.status == "ok"
            settled = ok & (speed <= STILL * size)
            k[settled], T[settled] = STEADY, np.nan
            k[~ok], T[~ok] = DIVERGED, np.nan
            periods[start:stop], time_periods[start:stop] = k, T
        else:
            periods[start:stop] = minimal_periods(sampler.values, int(max_period), tol)
    report(1.0)
    unit = "iterations" if system.kind == MAP else "maxima per cycle" if maxima else "forcing periods"
    return PeriodGrid(pname_x, xs, pname_y, ys, periods.reshape(ys.size, xs.size), int(max_period), unit,
                      None if time_periods is None else time_periods.reshape(ys.size, xs.size))


__all__ = ["PeriodGrid", "minimal_periods", "cycle_periods", "period_grid", "NONE", "DIVERGED", "STEADY"]
