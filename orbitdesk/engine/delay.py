"""Delay differential equations: x'(t) = f(t, x(t), x(t - tau_1), ..., x(t - tau_k)), constant delays.

Method of steps with a continuous Runge-Kutta method: Dormand-Prince 5(4) (Dormand & Prince 1980)
with its quartic continuous extension (the one of scipy's RK45, Shampine 1986), the tableau shared
with ``explicit_rk.py``. Every accepted step keeps its dense output; a delayed value
x(s), s = t + c h - tau, is read off the step that holds s (or the history when s is before the
start). Steps never exceed the shortest delay, so every delayed value a step needs is already
known (no iteration on overlapping steps).

Discontinuities: the solution's derivative (or, with x(0) written apart from the history, the value)
jumps at the start; the jump moves up one order of derivative each time it passes a delay, to
t0 + m_1 tau_1 + ... + m_k tau_k. Those points (up to order ``DISCONTINUITY_ORDER``, past which the
5th-order method does not see them) are stepped onto exactly, and the step after one starts with
a fresh slope. At a jump of the value itself the stage at the end of a step reads the value from the
left (the history), the stage at the start of the next from the right. The step size follows the
requested tolerances with the usual error-per-step control (Hairer, Norsett & Wanner, Solving ODEs I,
sec. II.4); the measured global order is 5 (tests/core/test_delays.py).

The right-hand side is the model's generated evaluator (``CompiledSystem.rhs_for_params``) of an
augmented system whose extra states are the delayed values; its Jacobian gives the matrices of the
linearisation (``linear_parts``), used for the stability of equilibria. The loop itself is plain
Python: a delay model is not run in the compiled loops.
"""

from __future__ import annotations

import math
from bisect import bisect_right
from dataclasses import dataclass

import numpy as np
import sympy as sp

from orbitdesk.engine.explicit_rk import A_ALL, B_ALL, C_ALL, E_ALL, KIND_DOPRI5, P5
from orbitdesk.engine.progress import Cancelled, Reporter
from orbitdesk.engine.settings import RunSettings
from orbitdesk.engine.status import CANCELLED, DIVERGED, OK, STEP_FAILED, UNDEFINED
from orbitdesk.language.symbolic import float_value
from orbitdesk.system.compiled_system import FLOW, UNDEFINED_ERRORS, CompiledSystem, lambdify

DISCONTINUITY_ORDER = 6  # jumps of the derivative up to this order are stepped onto
MAX_BREAKPOINTS = 20_000
MAX_STEPS = 50_000_000
METHOD_LABEL = "Dormand–Prince 5(4) with its continuous extension (method of steps)"

_A = A_ALL[KIND_DOPRI5, :7, :6]
_B = B_ALL[KIND_DOPRI5, :6]
_C = C_ALL[KIND_DOPRI5, :7].copy()
_C[6] = 1.0
_E = E_ALL[KIND_DOPRI5, :7]
_P = P5[:7]


class _Stop(Exception):
    def __init__(self, status, message):
        super().__init__(message)
        self.status, self.message = status, message


# ---------------------------------------------------------------- the model's pieces
def augmented(system: CompiledSystem) -> CompiledSystem:
    """The system whose states are the model's states then its delayed values, f = (f_delayed, 0):
    its evaluators take (t, u, delayed values, p); its Jacobian holds A0 = df/du and df/d(delayed)."""
    cached = system.__dict__.get("_delay_augmented")
    if cached is None:
        k = len(system.delays)
        cached = CompiledSystem(
            model=system.model, kind=FLOW, states=[*system.states, *(d.label for d in system.delays)],
            parameters=system.parameters, param_values=system.param_values, param_ranges=system.param_ranges,
            initial=np.concatenate([system.initial, np.zeros(k)]),
            f=[*system.f_delayed, *([sp.Integer(0)] * k)], derived_names=system.derived_names,
            derived_exprs=system.derived_delayed, t_symbol=system.t_symbol,
            state_symbols=[*system.state_symbols, *(d.symbol for d in system.delays)],
            param_symbols=system.param_symbols, nonsmooth=system.nonsmooth)
        system.__dict__["_delay_augmented"] = cached
    return cached


def delay_values(system: CompiledSystem, p) -> np.ndarray:
    """Each delay at the parameter values ``p``; ValueError in plain words if one is not positive."""
    values = {s: sp.Float(float(v)) for s, v in zip(system.param_symbols, p)}
    out = []
    for d in system.delays:
        try:
            tau = float_value(d.amount.xreplace(values)) if d.amount.free_symbols else float(d.amount)
        except (ValueError, ArithmeticError, TypeError):
            tau = math.nan
        if not (math.isfinite(tau) and tau > 0):
            raise ValueError(f"the delay of {d.label} is {tau:g} at these parameter values; a delay must be "
                             "a positive number")
        out.append(tau)
    return np.array(out, dtype=float)


def history_functions(system: CompiledSystem, p, u0):
    """For each state, its value before the start as a function of t: the history written in the
    model, or the initial value held."""
    model = system.model
    out = []
    for i, name in enumerate(system.states):
        expr = model.history.get(name)
        if expr is None:
            value = float(u0[i])
            out.append(lambda t, v=value: v)
            continue
        fn = lambdify([system.t_symbol, *system.param_symbols], expr)
        pv = [float(v) for v in p]
        out.append(lambda t, fn=fn, pv=pv: float(fn(t, *pv)))
    return out


def uses_history(system: CompiledSystem) -> str:
    """Plain words for the history a run of this model uses (the run bar and the command line show it)."""
    model = system.model
    if not system.delays:
        return ""
    written = [f"{name}(t) = {sp.sstr(model.history[name])}" for name in system.states
               if name in model.history_lines]
    held = [name for name in system.states if name not in model.history]
    parts = []
    if written:
        parts.append("history " + ", ".join(written) + " for t <= 0")
    if held:
        parts.append(("initial value" + ("s" if len(held) > 1 else "") + " of " + ", ".join(held)
                      + " held before the start"))
    return "; ".join(parts)


def breakpoints(t0: float, t1: float, taus) -> list[float]:
    """t0 + m_1 tau_1 + ... + m_k tau_k in (t0, t1] with 1 <= sum m_j <= DISCONTINUITY_ORDER, sorted
    (at most MAX_BREAKPOINTS of them, the earliest)."""
    taus = sorted(set(float(x) for x in taus))
    span = t1 - t0
    level = {0.0}
    found: set[float] = set()
    for _order in range(DISCONTINUITY_ORDER):
        level = {round(a + tau, 12) for a in level for tau in taus if a + tau <= span * (1 + 1e-12)}
        found |= level
        if not level or len(found) > MAX_BREAKPOINTS:
            break
    points = sorted(t0 + x for x in found)
    merged = []
    for x in points:  # points closer than round-off are one
        if not merged or x - merged[-1] > 1e-12 * max(1.0, abs(x)):
            merged.append(x)
    return merged[:MAX_BREAKPOINTS]


# ---------------------------------------------------------------- the integrator
class DelayIntegrator:
    """x' = fun(t, x, L) with L[k] = x[lag_state[k]](t - lag_tau[k]); dense output of every step kept.

    ``fun(t, y, L)`` returns an array; ``history[i](t)`` gives state i before ``t0``."""

    def __init__(self, fun, t0, y0, lag_state, lag_tau, history, rtol, atol, max_step=None, t_bound=math.inf):
        self.fun = fun
        self.t0 = self.t = float(t0)
        self.y = np.asarray(y0, dtype=float).copy()
        self.n = self.y.size
        self.lag_state = [int(i) for i in lag_state]
        self.lag_tau = [float(x) for x in lag_tau]
        self.history = history
        self.rtol, self.atol = float(rtol), float(atol)
        self.h_cap = min(self.lag_tau) if self.lag_tau else math.inf
        if max_step:
            self.h_cap = min(self.h_cap, float(max_step))
        self.starts: list[float] = []  # the step records: start time, and (h, y, Q) of its dense output
        self.records: list[tuple] = []
        self.breaks = breakpoints(self.t0, t_bound, self.lag_tau) if math.isfinite(t_bound) and self.lag_tau else []
        self.next_break = 0
        self.steps = 0
        self.K0 = None
        self.h = None

    # ------------------------------------------------------------ values of the past
    def value(self, i: int, s: float, left: bool = False) -> float:
        """State i at time s (``left``: the limit from the left, at a jump of the value at t0)."""
        t0 = self.t0
        if s < t0 or (left and s <= t0 + 1e-13 * max(1.0, abs(t0))):
            return self.history[i](s)
        if not self.records:
            return float(self.y[i])  # the start itself, before the first step
        k = bisect_right(self.starts, s) - 1
        if k < 0:
            k = 0
        start, h, y, Q = self.records[k]
        x = (s - start) / h
        q = Q[i]
        return y[i] + h * x * (q[0] + x * (q[1] + x * (q[2] + x * q[3])))

    def _lags(self, t: float, left: bool) -> list[float]:
        if left:
            return [self.value(i, t - tau, True) for i, tau in zip(self.lag_state, self.lag_tau)]
        t0 = self.t0
        out = []
        for i, tau in zip(self.lag_state, self.lag_tau):
            s = t - tau
            if abs(s - t0) <= 1e-13 * max(1.0, abs(t0)):
                s = t0  # a step starting at t0 + tau reads the value at t0 from the right
            out.append(self.value(i, s))
        return out

    def _f(self, t, y, left=False):
        return np.asarray(self.fun(t, y, self._lags(t, left)), dtype=float)

    # ------------------------------------------------------------ stepping
    def _scale(self, y, y_new=None):
        big = np.abs(y) if y_new is None else np.maximum(np.abs(y), np.abs(y_new))
        return self.atol + self.rtol * big

    def _first_step(self) -> float:
        f0 = self.K0
        scale = self._scale(self.y)
        d0 = math.sqrt(np.mean((self.y / scale) ** 2))
        d1 = math.sqrt(np.mean((f0 / scale) ** 2))
        h0 = 1e-6 if d0 < 1e-5 or d1 < 1e-5 else 0.01 * d0 / d1
        h0 = min(h0, self.h_cap)
        f1 = self._f(self.t + h0, self.y + h0 * f0)
        # h0 = 0 when the slope is beyond the float range (d1 = inf): the smallest start, as explicit_rk's
        d2 = math.sqrt(np.mean(((f1 - f0) / scale) ** 2)) / h0 if h0 > 0 else math.inf
        h1 = max(1e-6, h0 * 1e-3) if max(d1, d2) <= 1e-15 else (0.01 / max(d1, d2)) ** 0.2
        h = min(100 * h0, h1, self.h_cap)
        return h if h > 0 and math.isfinite(h) else min(1e-6, self.h_cap)

    def step(self, t_limit: float) -> None:
        """One accepted step, not beyond ``t_limit``, a discontinuity or the shortest delay."""
        if self.K0 is None:
            self.K0 = self._f(self.t, self.y)
        if self.h is None:
            self.h = self._first_step()
        t, y = self.t, self.y
        while self.next_break < len(self.breaks) and self.breaks[self.next_break] <= t + 1e-13 * max(1.0, abs(t)):
            self.next_break += 1
        target = t_limit
        at_break = False
        if self.next_break < len(self.breaks) and self.breaks[self.next_break] <= target:
            target, at_break = self.breaks[self.next_break], True
        rejected = False
        K = np.empty((7, self.n))
        K[0] = self.K0
        while True:
            h = min(self.h, self.h_cap)
            last = t + h >= target - 1e-12 * max(1.0, abs(target))
            if last:
                h = target - t
            if h <= 1e-14 * max(1.0, abs(t)) or not math.isfinite(h):
                raise _Stop(STEP_FAILED, f"the step size collapsed at t = {t:.6g}; the delay model may be stiff "
                                         "or undefined just ahead")
            for s in range(1, 6):
                ys = y + h * (_A[s, :s] @ K[:s])
                K[s] = self._f(t + _C[s] * h, ys, left=_C[s] == 1.0)  # the step's end: from the left
            y_new = y + h * (_B @ K[:6])
            t_new = target if last else t + h
            K[6] = self._f(t_new, y_new, left=True)
            if not (np.all(np.isfinite(K)) and np.all(np.isfinite(y_new))):
                err = math.inf
            else:
                err = h * math.sqrt(np.mean(((_E @ K) / self._scale(y, y_new)) ** 2))
            if err <= 1.0:
                factor = 10.0 if err == 0 else min(10.0, max(0.2, 0.9 * err ** -0.2))
                if rejected:
                    factor = min(1.0, factor)
                self.h = max(h * factor, self.h) if last and not rejected else h * factor  # a cut step keeps the pace
                break
            if not math.isfinite(err) and h < 1e-10 * max(1.0, abs(t)):
                raise _Stop(UNDEFINED, "")
            self.h = h * (0.2 if not math.isfinite(err) else max(0.2, 0.9 * err ** -0.2))
            rejected = True
        Q = (K.T @ _P).tolist()
        self.starts.append(t)
        self.records.append((t, h, y.tolist(), Q))
        self.t, self.y = t_new, y_new
        self.steps += 1
        if at_break and last:
            self.next_break += 1
            self.K0 = self._f(t_new, y_new)  # a fresh slope after a discontinuity
        else:
            self.K0 = K[6].copy()

    def dense(self, times) -> np.ndarray:
        """The states at ``times`` inside the last step taken: shape (n, len(times))."""
        start, h, y, Q = self.records[-1]
        x = (np.asarray(times, dtype=float) - start) / h
        Q = np.asarray(Q)
        powers = np.vstack([x, x ** 2, x ** 3, x ** 4])
        return np.asarray(y)[:, None] + h * (Q @ powers)

    def forget_before(self, s: float) -> None:
        """Drop the step records that end before ``s`` (a long run needs only the last delay's worth)."""
        k = bisect_right(self.starts, s) - 2
        if k > 1000:
            del self.starts[:k]
            del self.records[:k]


# ---------------------------------------------------------------- one run
@dataclass
class DelayModel:
    """A delay model at one parameter vector: its right-hand side and delays, ready to integrate."""

    system: CompiledSystem
    p: np.ndarray

    def __post_init__(self):
        self.p = np.asarray(self.p, dtype=float)
        self.taus = delay_values(self.system, self.p)
        self.lag_state = [self.system.states.index(d.state) for d in self.system.delays]
        self.n = self.system.n_states
        rhs = augmented(self.system).rhs_for_params(self.p)
        n = self.n

        def fun(t, y, lags):
            return rhs(t, np.concatenate([y, lags]))[:n]

        self.fun = fun

    def integrator(self, t0, u0, rtol, atol, max_step=None, t_bound=math.inf, history=None) -> DelayIntegrator:
        history = history or history_functions(self.system, self.p, u0)
        return DelayIntegrator(self.fun, t0, u0, self.lag_state, self.taus, history, rtol, atol, max_step, t_bound)

    def pair(self, t0, u0, v0, history_v, rtol, atol, max_step=None, t_bound=math.inf) -> DelayIntegrator:
        """Two copies side by side (states u then v, each with its own history): one step control for
        both, so the difference of their dense outputs is itself a smooth piecewise polynomial."""
        n, k = self.n, len(self.lag_state)
        fun = self.fun

        def both(t, y, lags):
            return np.concatenate([fun(t, y[:n], lags[:k]), fun(t, y[n:], lags[k:])])

        history = history_functions(self.system, self.p, u0) + list(history_v)
        return DelayIntegrator(both, t0, np.concatenate([u0, v0]), self.lag_state + [i + n for i in self.lag_state],
                               list(self.taus) * 2, history, rtol, atol, max_step, t_bound)


def simulate_delay(system: CompiledSystem, settings: RunSettings, u0, p, events=(), report: Reporter | None = None,
                   on_start=None):
    """One run of a delay model (``runs.simulate`` sends delay models here): a ``runs.Trajectory``.

    ``on_start(solver)``, if given, receives the integrator before the first step (events whose function
    reads delayed values look them up there: ``delayed_quantity``)."""
    from orbitdesk.engine.runs import Trajectory, _check_state, _root
    from orbitdesk.engine.runs import _Stop as RunStop

    report = report or Reporter()
    t0, t1 = float(settings.t_start), float(settings.t_end)
    if not t1 > t0:
        raise ValueError("a model with delays runs forward in time only: the end must come after the start")
    model = DelayModel(system, p)
    if (t1 - t0) / min(model.taus) > MAX_STEPS:
        raise ValueError(f"the shortest delay ({min(model.taus):g}) is too short for a run of {t1 - t0:g} time "
                         f"units: every step is at most one delay long")
    n = system.n_states
    solver = model.integrator(t0, u0, settings.rtol, settings.atol, settings.max_step, t1)
    if on_start is not None:
        on_start(solver)
    sample_t = np.linspace(t0, t1, settings.samples) if settings.samples > 1 else None
    ts, ys = [t0], [np.asarray(u0, float).copy()]
    next_sample = 1
    ev_t = [[] for _ in events]
    ev_y = [[] for _ in events]
    status, message = OK, ""
    g_prev = [ev.g(t0, solver.y) for ev in events]
    try:
        _check_state(system, t0, solver.y, settings.bound)
        while solver.t < t1:
            if solver.steps >= MAX_STEPS:
                raise _Stop(STEP_FAILED, f"the run needs more than {MAX_STEPS:,} steps")
            t_old = solver.t
            try:
                solver.step(t1)
            except _Stop as stop:
                raise _Stop(stop.status, stop.message or system.explain_undefined(
                    solver.t, solver.y, p) or f"an expression is undefined near t = {solver.t:.6g}") from None
            except UNDEFINED_ERRORS:
                raise _Stop(UNDEFINED, system.explain_undefined(solver.t, solver.y, p)
                            or f"an expression is undefined near t = {solver.t:.6g}") from None
            t_new = solver.t
            if sample_t is None:
                ts.append(t_new)
                ys.append(solver.y.copy())
            else:
                j = next_sample
                while j < len(sample_t) and sample_t[j] <= t_new:
                    j += 1
                if j > next_sample:
                    block = sample_t[next_sample:j]
                    ts.extend(block)
                    ys.extend(solver.dense(block).T)
                    next_sample = j
            stop_here = False
            for k, ev in enumerate(events):
                g_new = ev.g(t_new, solver.y)
                ga, g_prev[k] = g_prev[k], g_new
                if not (ga * g_new < 0 or (g_new == 0 and ga != 0)):
                    continue
                if ev.direction and (ev.direction > 0) != (g_new > ga):
                    continue
                te = t_new if g_new == 0 else _root(lambda tq: ev.g(tq, solver.dense([tq])[:, 0]), t_old, t_new)
                ev_t[k].append(te)
                ev_y[k].append(solver.dense([te])[:, 0])
                stop_here = stop_here or ev.terminal
            _check_state(system, t_new, solver.y, settings.bound)
            if stop_here:
                break
            if solver.steps % 64 == 0:
                report((t_new - t0) / (t1 - t0))
    except (_Stop, RunStop) as stop:
        status, message = stop.status, stop.message
    except Cancelled:
        status, message = CANCELLED, "cancelled"
    time = np.array(ts, dtype=float)
    states = np.array(ys, dtype=float).reshape(-1, n).T
    derived = _derived_along(system, solver, model, time, states) if time.size else {}
    if settings.transient > 0:
        keep = time >= t0 + settings.transient
        time, states = time[keep], states[:, keep]
        derived = {k: v[keep] for k, v in derived.items()}
    return Trajectory(FLOW, time, states, list(system.states), system.param_dict(p), status, message, derived,
                      [np.array(v) for v in ev_t],
                      [np.array(v).reshape(-1, n).T if v else np.empty((n, 0)) for v in ev_y],
                      steps_taken=solver.steps)


def delayed_quantity(system, name: str, p):
    """(g, attach): ``g(t, u)`` is the derived quantity ``name`` with its delayed values read off the run
    that ``attach(solver)`` (``simulate_delay``'s ``on_start``) names."""
    aug = augmented(system)
    taus = delay_values(system, p)
    lag_state = [system.states.index(d.state) for d in system.delays]
    holder = []

    def g(t, u):
        solver = holder[-1]
        lags = [solver.value(i, float(t) - tau) for i, tau in zip(lag_state, taus)]
        column = np.concatenate([np.asarray(u, dtype=float), lags])[:, None]
        return float(aug.derived_values(np.array([float(t)]), column, p)[name][0])

    return g, holder.append


def _derived_along(system, solver, model, time, states) -> dict:
    """Derived quantities along the run, with their delayed values read off the dense output."""
    if not system.derived_exprs:
        return {}
    lagged = np.array([[solver.value(i, float(s) - tau) if s - tau <= solver.t else math.nan for s in time]
                       for i, tau in zip(model.lag_state, model.taus)]).reshape(len(model.taus), time.size)
    return augmented(system).derived_values(time, np.vstack([states, lagged]), model.p)


__all__ = ["DelayIntegrator", "DelayModel", "METHOD_LABEL", "augmented", "breakpoints", "delay_values",
           "history_functions", "simulate_delay", "uses_history"]
