"""Single runs: integrate a flow or iterate a map, with sampling, events, bounds and cancel.

Flows step with scipy's ``OdeSolver`` classes (DOP853, RK45, Radau) one step at a time, so a run
can report progress, stop cleanly on blow-up or cancel and keep what it computed so far. Event
crossings are found on each step's dense output with a bracketing root finder, never by linear
interpolation between output samples.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field
from typing import Callable

import numpy as np
import scipy.integrate
from scipy.integrate import ode
from scipy.optimize import brentq

from .integrators.methods import NAMES
from .integrators.settings import RunSettings
from .integrators.status import CANCELLED, DIVERGED, OK, STEP_FAILED, UNDEFINED
from .progress import CancelToken, Cancelled, Reporter
from .system import MAP, CompiledSystem, UndefinedValue

# scipy's compiled DOP853 also warns about the failures it returns; the engine reports them itself
warnings.filterwarnings("ignore", message=r"dop853: ", category=UserWarning)

METHODS = NAMES


@dataclass
class Event:
    """A crossing of g(t, u) = 0; direction +1 (g rising), -1 (falling) or 0 (both).

    ``rate`` (optional) is dg/dt along the solution; with it a step is split where g turns, so a
    pair of crossings inside one step (a near-grazing pass) is found too.
    """

    g: Callable[[float, np.ndarray], float]
    direction: int = 0
    terminal: bool = False
    rate: Callable[[float, np.ndarray], float] | None = None


@dataclass
class Trajectory:
    kind: str
    time: np.ndarray
    states: np.ndarray  # (n_states, K)
    state_names: list[str]
    params: dict[str, float]
    status: str = OK
    message: str = ""
    derived: dict[str, np.ndarray] = field(default_factory=dict)
    event_times: list[np.ndarray] = field(default_factory=list)
    event_states: list[np.ndarray] = field(default_factory=list)  # each (n_states, M)
    steps_taken: int = 0

    @property
    def ok(self) -> bool:
        return self.status == OK

    @property
    def final_state(self) -> np.ndarray:
        return self.states[:, -1]

    def series(self, name: str) -> np.ndarray:
        """A state, a derived quantity or the time ('t' or 'n') by name."""
        if name in ("t", "n"):
            return self.time
        if name in self.state_names:
            return self.states[self.state_names.index(name)]
        if name in self.derived:
            return self.derived[name]
        raise KeyError(f"no series named '{name}'")


class _Stop(Exception):
    def __init__(self, status, message):
        super().__init__(message)
        self.status, self.message = status, message


def _describe_state(system: CompiledSystem, u) -> str:
    return ", ".join(f"{s} = {float(v):.6g}" for s, v in zip(system.states, u))


def _check_state(system, t, u, bound):
    bad = ~np.isfinite(u) | (np.abs(u) > bound)
    if bad.any():
        which = system.states[int(np.argmax(bad))]
        name = system.time_name
        if system.kind == MAP:
            raise _Stop(DIVERGED, f"the orbit escapes to infinity: {which} passes {bound:g} at {name} = {t:g}")
        raise _Stop(DIVERGED, f"the solution blows up: {which} passes {bound:g} in size at {name} = {t:.6g} "
                              f"({_describe_state(system, u)})")


def simulate(system: CompiledSystem, settings: RunSettings | None = None, u0=None, p=None,
             events: list[Event] | tuple = (), cancel: CancelToken | None = None,
             progress=None) -> Trajectory:
    """One run of a flow or a map from ``u0`` (default: the model's) with parameters ``p``."""
    settings = settings or RunSettings()
    u0 = system.initial.copy() if u0 is None else np.asarray(u0, dtype=float)
    p = system.param_values.copy() if p is None else np.asarray(p, dtype=float)
    report = Reporter(progress, cancel)
    if system.kind == MAP:
        return _iterate(system, settings, u0, p, report)
    if settings.method not in METHODS:
        raise ValueError(f"unknown method '{settings.method}'; choose one of {', '.join(METHODS)}")
    if settings.method == "dop853" and not events and system.smooth:
        if settings.samples > FILL_ABOVE:
            probe = settings.replace(samples=0, transient=0.0)
            steps = _integrate_compiled(system, probe, u0, p, report)
            if settings.samples > 2 * steps.time.size:
                return _fill_between_steps(system, settings, steps, p)
        return _integrate_compiled(system, settings, u0, p, report)
    return _integrate(system, settings, u0, p, list(events), report)


FILL_ABOVE = 2_000
FILL_SUBSTEPS = 16


def _fill_between_steps(system, settings, steps: Trajectory, p) -> Trajectory:
    """Output samples on a grid finer than the integrator's steps, from the exact step points.

    Stopping the compiled integrator at every sample costs far more than its own steps; instead each
    sample is reached from the step point before it by ``FILL_SUBSTEPS`` classical RK4 substeps, all
    samples at once through the vectorized evaluator. A substep is at most 1/16 of an accepted
    DOP853 step, so its error stays far below the step's own tolerance on smooth problems.
    """
    t0, t1 = float(settings.t_start), float(settings.t_end)
    ts, ys = steps.time, steps.states
    grid = np.linspace(t0, t1, settings.samples)
    sign = 1.0 if t1 > t0 else -1.0
    grid = grid[(grid - ts[-1]) * sign <= 0] if ts.size else grid[:0]
    k = np.clip(np.searchsorted(sign * ts, sign * grid, side="right") - 1, 0, max(ts.size - 1, 0))
    t = ts[k].copy()
    U = ys[:, k].copy()
    h = (grid - t) / FILL_SUBSTEPS
    with np.errstate(all="ignore"):
        for _ in range(FILL_SUBSTEPS):
            k1 = system.rhs_vec(t, U, p)
            k2 = system.rhs_vec(t + h / 2, U + h / 2 * k1, p)
            k3 = system.rhs_vec(t + h / 2, U + h / 2 * k2, p)
            k4 = system.rhs_vec(t + h, U + h * k3, p)
            U += h / 6 * (k1 + 2 * k2 + 2 * k3 + k4)
            t = t + h
    time, states = grid, U
    if settings.transient > 0:
        keep = (time - (t0 + sign * settings.transient)) * sign >= 0
        time, states = time[keep], states[:, keep]
    return Trajectory("flow", time, states, list(system.states), system.param_dict(p), steps.status,
                      steps.message, system.derived_values(time, states, p) if time.size else {},
                      steps_taken=steps.steps_taken)


def _iterate(system, settings, u0, p, report) -> Trajectory:
    steps = int(settings.steps)
    out = np.empty((system.n_states, steps + 1))
    out[:, 0] = u0
    f = system.rhs_function(p)
    u = [float(v) for v in u0]
    status, message, last = OK, "", steps
    try:
        _check_state(system, 0, u0, settings.bound)
        for n in range(steps):
            if n % 1000 == 0:
                report(n / max(steps, 1))
            try:
                u = f(n, u)
            except (ValueError, ZeroDivisionError, TypeError, OverflowError):
                raise _Stop(UNDEFINED, system.explain_undefined(n, u, p) or f"undefined value at n = {n}") from None
            out[:, n + 1] = u
            if not all(abs(v) <= settings.bound for v in u):
                _check_state(system, n + 1, out[:, n + 1], settings.bound)
    except _Stop as stop:
        status, message, last = stop.status, stop.message, n
    except Cancelled:
        status, message, last = CANCELLED, "cancelled", n
    n_time = np.arange(last + 1, dtype=float)
    states = out[:, :last + 1]
    return Trajectory(MAP, n_time, states, list(system.states), system.param_dict(p), status, message,
                      system.derived_values(n_time, states, p), steps_taken=last)


class _RK4Stepper:
    """Fixed-step classical Runge-Kutta with a cubic Hermite dense output per step."""

    def __init__(self, fun, t0, y0, t_bound, dt):
        self.fun, self.t, self.y, self.t_bound = fun, t0, np.asarray(y0, float), t_bound
        self.h = abs(dt) * (1 if t_bound >= t0 else -1)
        self.status = "running"
        self.f = np.asarray(fun(t0, self.y), float)
        self.t_old = None

    def step(self):
        h = self.h
        if (self.t + h - self.t_bound) * np.sign(h) > 0:
            h = self.t_bound - self.t
        t, y, fun = self.t, self.y, self.fun
        k1 = self.f
        k2 = np.asarray(fun(t + h / 2, y + h / 2 * k1), float)
        k3 = np.asarray(fun(t + h / 2, y + h / 2 * k2), float)
        k4 = np.asarray(fun(t + h, y + h * k3), float)
        self.y_old, self.f_old, self.t_old = y, k1, t
        self.y = y + h / 6 * (k1 + 2 * k2 + 2 * k3 + k4)
        self.t = t + h
        self.f = np.asarray(fun(self.t, self.y), float)
        if abs(self.t - self.t_bound) <= 1e-12 * max(1.0, abs(self.t_bound)):
            self.status = "finished"

    def dense_output(self):
        t0, h, y0, y1, f0, f1 = self.t_old, self.t - self.t_old, self.y_old, self.y, self.f_old, self.f

        def sol(tq):
            s = (np.asarray(tq, float) - t0) / h
            h00, h10, h01, h11 = 2 * s**3 - 3 * s**2 + 1, s**3 - 2 * s**2 + s, -2 * s**3 + 3 * s**2, s**3 - s**2
            if np.ndim(s) == 0:
                return h00 * y0 + h10 * h * f0 + h01 * y1 + h11 * h * f1
            return (np.outer(y0, h00) + np.outer(h * f0, h10) + np.outer(y1, h01) + np.outer(h * f1, h11))

        return sol


def _make_rhs(system, p):
    f = system.rhs_function(p)

    def fun(t, y):
        try:
            return f(t, y)
        except (ValueError, ZeroDivisionError, TypeError, OverflowError):
            raise _Stop(UNDEFINED, system.explain_undefined(t, y, p)
                        or f"an expression is undefined at {system.time_name} = {t:.6g}") from None

    return fun


def _root(fn, ta, tb):
    """A zero of fn between ta and tb, where the step's end values showed a sign change.

    On the dense output an end value can differ from the step's by round-off and lose the sign
    change (brentq would refuse); the zero then sits at that end.
    """
    fa, fb = fn(ta), fn(tb)
    if fa == 0 or fb == 0 or fa * fb > 0:
        return ta if abs(fa) <= abs(fb) else tb
    return brentq(fn, ta, tb, xtol=1e-14)


def _integrate(system, settings, u0, p, events, report) -> Trajectory:
    t0, t1 = float(settings.t_start), float(settings.t_end)
    if not t1 != t0 or not (math.isfinite(t0) and math.isfinite(t1)):
        raise ValueError("the end time must differ from the start time")
    fun = _make_rhs(system, p)
    direction = 1.0 if t1 > t0 else -1.0
    n = system.n_states
    sample_t = np.linspace(t0, t1, settings.samples) if settings.samples > 1 else None
    t_keep = t0 + direction * max(settings.transient, 0.0)
    ts, ys = [], []
    ev_t = [[] for _ in events]
    ev_y = [[] for _ in events]
    status, message, steps = OK, "", 0
    try:
        if settings.method == "rk4":
            solver = _RK4Stepper(fun, t0, u0, t1, settings.dt)
        else:
            kwargs = dict(rtol=settings.rtol, atol=settings.atol)
            if settings.max_step:
                kwargs["max_step"] = settings.max_step
            if settings.method_info.stiff:
                kwargs["jac"] = lambda t, y: system.jac(t, y, p)
            solver = getattr(scipy.integrate, settings.method_info.scipy_name)(fun, t0, u0, t1, **kwargs)
        if sample_t is None:
            ts.append(t0)
            ys.append(u0.copy())
        elif sample_t[0] == t0:
            ts.append(t0)
            ys.append(u0.copy())
        next_sample = 1 if sample_t is not None else None
        g_prev = [ev.g(t0, u0) for ev in events]
        r_prev = [ev.rate(t0, u0) if ev.rate else 0.0 for ev in events]
        while solver.status == "running":
            message_step = solver.step()
            steps += 1
            if solver.status == "failed":
                raise _Stop(STEP_FAILED, f"the step size collapsed at {system.time_name} = {solver.t:.6g} "
                                         f"({message_step}); the system may be stiff: try the stiff method")
            t_new, y_new = solver.t, solver.y
            _check_state(system, t_new, y_new, settings.bound)
            sol = None
            if sample_t is not None:
                j = next_sample
                while j < len(sample_t) and (sample_t[j] - t_new) * direction <= 0:
                    j += 1
                if j > next_sample:
                    sol = solver.dense_output()
                    block = sample_t[next_sample:j]
                    values = sol(block).reshape(n, -1)
                    ts.extend(block)
                    ys.extend(values.T)
                    next_sample = j
            else:
                ts.append(t_new)
                ys.append(y_new.copy())
            stop_here = False
            for k, ev in enumerate(events):
                g_new = ev.g(t_new, y_new)
                g_old = g_prev[k]
                g_prev[k] = g_new
                pieces = [(solver.t_old, g_old, t_new, g_new)]
                if ev.rate is not None:
                    r_new = ev.rate(t_new, y_new)
                    if r_prev[k] * r_new < 0:  # g turns inside the step: test both sides of the turn
                        sol = sol or solver.dense_output()
                        tm = _root(lambda tq: ev.rate(tq, sol(tq)), solver.t_old, t_new)
                        if tm != solver.t_old and tm != t_new:
                            gm = ev.g(tm, sol(tm))
                            pieces = [(solver.t_old, g_old, tm, gm), (tm, gm, t_new, g_new)]
                    r_prev[k] = r_new
                for ta, ga, tb, gb in pieces:
                    if not (ga * gb < 0 or (gb == 0 and ga != 0)):
                        continue
                    rising = gb > ga
                    if ev.direction and (ev.direction > 0) != rising:
                        continue
                    sol = sol or solver.dense_output()
                    te = tb if gb == 0 else _root(lambda tq: ev.g(tq, sol(tq)), ta, tb)
                    ev_t[k].append(te)
                    ev_y[k].append(np.asarray(sol(te), float).reshape(n))
                    stop_here = stop_here or ev.terminal
            if stop_here:
                break
            report((t_new - t0) / (t1 - t0))
    except _Stop as stop:
        status, message = stop.status, stop.message
    except Cancelled:
        status, message = CANCELLED, "cancelled"
    time = np.array(ts, dtype=float)
    states = np.array(ys, dtype=float).reshape(-1, n).T if ys else np.empty((n, 0))
    if settings.transient > 0:
        keep = (time - t_keep) * direction >= 0
        time, states = time[keep], states[:, keep]
    return Trajectory("flow", time, states, list(system.states), system.param_dict(p), status, message,
                      system.derived_values(time, states, p) if time.size else {},
                      [np.array(v) for v in ev_t],
                      [np.array(v).reshape(-1, n).T if v else np.empty((n, 0)) for v in ev_y],
                      steps_taken=steps)


_DOP_CODES = {-1: "the input is not consistent", -2: "too many steps were needed",
              -3: "the step size became too small", -4: "the problem is probably stiff"}


def _integrate_compiled(system, settings, u0, p, report) -> Trajectory:
    """DOP853 in compiled code (scipy's ``ode``: Hairer's Fortran) calling generated code with ``p`` bound.

    With ``samples`` > 1 the integrator is stopped exactly at each output time (no interpolation);
    with ``samples`` = 0 every accepted step is returned. The generated right-hand side unpacks
    ``y.tolist()`` and catches undefined values itself; the per-step check costs a ``sum`` of
    absolute values unless that sum passes the bound.
    """
    t0, t1 = float(settings.t_start), float(settings.t_end)
    if not t1 != t0 or not (math.isfinite(t0) and math.isfinite(t1)):
        raise ValueError("the end time must differ from the start time")
    u0 = np.asarray(u0, float)
    n = system.n_states
    failure: list = []
    nan_row = [math.nan] * n

    def on_error(t, y):
        if not failure:
            failure.append((t, np.array(y, dtype=float)))
        return nan_row

    fixed = system.rhs_for_params(p, on_error=on_error)
    bound = settings.bound
    span = t1 - t0
    every_step = settings.samples <= 1
    out_t: list[float] = [t0]
    out_y: list = [u0.tolist()]
    stop: list[_Stop] = []
    count = 0

    def solout(t, y):
        nonlocal count
        if failure:
            return -1
        yl = y.tolist()
        if not sum(map(abs, yl)) <= bound and not all(abs(v) <= bound for v in yl):
            try:
                _check_state(system, t, y, bound)
            except _Stop as reason:
                stop.append(reason)
                return -1
        count += 1
        if every_step and count > 1:  # the first call is at the start point
            out_t.append(t)
            out_y.append(yl)
        if count % 256 == 0:
            try:
                report((t - t0) / span)
            except Cancelled:
                stop.append(_Stop(CANCELLED, "cancelled"))
                return -1
        return 0

    solver = ode(fixed)
    kwargs = dict(rtol=settings.rtol, atol=settings.atol, nsteps=2**31 - 1)
    if settings.max_step:
        kwargs["max_step"] = settings.max_step
    solver.set_integrator("dop853", **kwargs)
    solver.set_solout(solout)
    solver.set_initial_value(u0, t0)
    targets = [t1] if every_step else np.linspace(t0, t1, settings.samples)[1:].tolist()
    sampled = None if every_step else np.empty((len(targets) + 1, n))  # rows filled as samples come
    reached = 0
    for target in targets:
        y = solver.integrate(target)
        if failure or stop or solver.get_return_code() < 0:
            break
        if not every_step:
            reached += 1
            sampled[reached] = y
    code = solver.get_return_code()
    status, message = OK, ""
    if failure:
        t_bad, y_bad = failure[0]
        status = UNDEFINED
        message = system.explain_undefined(t_bad, y_bad, p) or (
            f"an expression is undefined at {system.time_name} = {t_bad:.6g}")
    elif stop:
        status, message = stop[0].status, stop[0].message
    elif code < 0:
        status = STEP_FAILED
        message = (f"the integration stopped at {system.time_name} = {solver.t:.6g}: "
                   f"{_DOP_CODES.get(code, f'code {code}')}; try the stiff method")
    if every_step:
        time = np.array(out_t, dtype=float)
        states = np.array(out_y, dtype=float).reshape(-1, n).T
    else:
        sampled[0] = u0
        time = np.array([t0] + targets[:reached], dtype=float)
        states = sampled[:reached + 1].T
    finite = np.all(np.isfinite(states), axis=0) & np.all(np.abs(states) <= bound, axis=0)
    time, states = time[finite], states[:, finite]
    if settings.transient > 0:
        keep = (time - (t0 + np.sign(span) * settings.transient)) * np.sign(span) >= 0
        time, states = time[keep], states[:, keep]
    return Trajectory("flow", time, states, list(system.states), system.param_dict(p), status, message,
                      system.derived_values(time, states, p) if time.size else {},
                      steps_taken=count - 1 if every_step else count)
