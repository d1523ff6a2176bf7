"""Forward sensitivities: a run together with the derivatives of its states by parameters and start.

For a flow u' = f(t, u, p) the stacked state is ``(u, S, Phi)`` with ``S = du/dp`` (n x P, every
parameter, zero at the start) and ``Phi = du/du(t_a)`` (n x n, the identity at the start), integrated
together:

    S' = J S + df/dp,      Phi' = J Phi.

For a map the same recursion is applied step by step (the chain rule through the map):
``S[k+1] = J S[k] + df/dp``, ``Phi[k+1] = J Phi[k]``. Both come from the model's sensitivity kernel
(``codegen.sensitivity_source``: the model's kernel with its sparse Jacobian, forced by the sparse
df/dp), run by the engine's compiled loops like any run with tangent vectors (``drivers.flow_run``:
the same Runge-Kutta family, statuses, pauses for cancel), or for a stiff method by the checked
stiff stepper (``engine/stiff.py``). The selected parameters' columns of S are returned.

Observed quantities may be states or derived quantities h(t, u, p); ``Observer`` gives h and its
gradients by u and p at many samples at once.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np
import sympy as sp

from orbitdesk.engine import compiled, drivers
from orbitdesk.engine.methods import METHODS
from orbitdesk.engine.progress import CancelToken, Cancelled, Reporter
from orbitdesk.engine.status import C_CANCELLED, MEANING, word
from orbitdesk.system.compiled_system import MAP, CompiledSystem, UndefinedValue, lambdify

CANCEL_EVERY = 2000  # map steps between cancel checks
BOUND = 1e150  # a state or sensitivity beyond this has overflowed
RUNS = 1e6  # right-hand-side evaluations a fit's many runs are estimated at: worth waiting for the compiler


def _method(name: str):
    """The registry's entry for ``name``; fixed-step and unknown methods run as Dormand-Prince 8(5,3)."""
    entry = METHODS.get(name)
    return entry if entry is not None and entry.adaptive else METHODS["dop853"]


class SensitivityFailure(Exception):
    """The run could not be completed (blow-up, undefined value, step failure); a plain-words message."""


@dataclass
class SensitivityRun:
    time: np.ndarray        # (T,) the requested output times
    states: np.ndarray      # (n, T)
    dparams: np.ndarray     # (n, m, T) d u / d p_sel
    dstart: np.ndarray      # (n, n, T) d u / d u(t_a)


class Sensitivities:
    """Runs of the stacked system for the parameters ``selected`` (indices into system.parameters).
    ``kinks``: a model with kinks is taken with its almost-everywhere derivatives (continuation's
    Newton steps); a fit refuses it."""

    def __init__(self, system: CompiledSystem, selected: list[int], kinks: bool = False):
        system.refuse_delays("sensitivities")
        if system.nonsmooth and not kinks:
            raise ValueError(f"the model is not smooth where {', '.join(system.nonsmooth)}() switches, so its "
                             "sensitivities are undefined there; fitting needs a smooth model")
        self.system = system
        self.selected = list(selected)
        self.n = system.n_states
        self.m = len(self.selected)
        self.P = len(system.parameters)
        self.which = self.P + self.n  # tangent vectors: one per parameter, then one per start value

    @cached_property
    def _engine(self):
        engine = compiled.engine_for_work(self.system, RUNS)
        return engine, compiled.sensitivity_kernel(engine, self.system)

    def start(self, u0) -> np.ndarray:
        n = self.n
        V = np.zeros((n, self.which))
        V[:, self.P:] = np.eye(n)
        return np.concatenate([np.asarray(u0, dtype=float), V.ravel()])

    def _split(self, Z: np.ndarray, times) -> SensitivityRun:
        n, T = self.n, Z.shape[1]
        V = Z[n:].reshape(n, self.which, T)
        return SensitivityRun(np.asarray(times, dtype=float), Z[:n], V[:, self.selected, :], V[:, self.P:, :])

    def run(self, u0, p, t_start: float, times, *, rtol: float = 1e-8, atol: float = 1e-10,
            method: str = "dop853", cancel: CancelToken | None = None) -> SensitivityRun:
        """States and sensitivities at ``times`` (increasing, >= t_start) from ``u0`` at ``t_start``."""
        times = np.asarray(times, dtype=float)
        z0 = self.start(u0)
        p = np.ascontiguousarray(p, dtype=float)
        if self.system.kind == MAP:
            return self._split(self._iterate(z0, p, int(round(t_start)), times, cancel), times)
        if times.size == 0:
            return self._split(np.empty((z0.size, 0)), times)
        # the samples after the start, each once (a record may repeat a time); those at the start are z0
        later, back = np.unique(times, return_inverse=True)
        first = int(np.searchsorted(later, t_start, side="right"))
        Z = np.repeat(z0[:, None], later.size, axis=1)
        if first < later.size:
            Z[:, first:] = self._flow(z0, p, float(t_start), later[first:], rtol, atol, _method(method), cancel)
        return self._split(Z[:, back.ravel()], times)

    def _flow(self, z0, p, t_start, grid, rtol, atol, info, cancel) -> np.ndarray:
        name, t_end = self.system.time_name, float(grid[-1])
        if info.stiff:
            return self._stiff(z0, p, t_start, grid, rtol, atol, info, cancel)
        engine, kernel = self._engine
        with np.errstate(all="ignore"):
            out = drivers.flow_run(engine, info.name, t_start, t_end, z0, p, rtol, atol, grid=grid, which=self.which,
                                   kernel=kernel, bound=BOUND, report=Reporter(None, cancel))
        if out.code == C_CANCELLED:
            raise Cancelled("cancelled")
        if out.code != 0 or out.time.size != grid.size:
            why = out.note or (f"{MEANING[word(out.code)]}" if out.code else "stopped early")
            raise SensitivityFailure(f"the model could not be integrated to {name} = {t_end:.6g} ({why} near "
                                     f"{name} = {out.t:.6g})")
        return out.states

    def _stiff(self, z0, p, t_start, grid, rtol, atol, info, cancel) -> np.ndarray:
        from orbitdesk.engine.stiff import model_functions, solve_at

        name, t_end = self.system.time_name, float(grid[-1])
        fun, jac = model_functions(self.system, p, self.which, sensitivity=True)
        report = Reporter(None, cancel)
        try:
            with np.errstate(all="ignore"):
                states, _, failure = solve_at(info.scipy_name, fun, jac, t_start, z0, t_end, rtol, atol, grid, report)
        except UndefinedValue as err:
            raise SensitivityFailure(f"the model could not be integrated to {name} = {t_end:.6g} ({err})") from None
        if failure is not None or states.shape[1] != grid.size or not np.all(np.isfinite(states)):
            raise SensitivityFailure(f"the model could not be integrated to {name} = {t_end:.6g} "
                                     f"({failure or 'not a number'})")
        return states

    def _iterate(self, z0, p, n0: int, times, cancel) -> np.ndarray:
        engine, kernel = self._engine
        evaluate = engine.entry("evaluate")
        steps = np.round(times).astype(int)
        out = np.empty((z0.size, steps.size))
        z, nxt = z0.copy(), np.empty(z0.size)
        n, which = self.n, self.which
        k, j = n0, 0
        while j < steps.size and steps[j] == k:
            out[:, j] = z
            j += 1
        while j < steps.size:
            if cancel is not None and k % CANCEL_EVERY == 0:
                cancel.check()
            with np.errstate(all="ignore"):
                evaluate(kernel, which, float(k), z, p, nxt)
            k += 1
            if np.isnan(nxt[:n]).any():
                raise SensitivityFailure(f"an expression of the map is undefined at n = {k - 1}")
            if not np.all(np.abs(nxt[:n]) < BOUND):
                raise SensitivityFailure(f"the orbit escapes to infinity at n = {k}")
            z, nxt = nxt, z
            while j < steps.size and steps[j] == k:
                out[:, j] = z
                j += 1
        if not np.all(np.isfinite(out)):
            raise SensitivityFailure("the sensitivities overflow: the orbit is too unstable over this record")
        return out


class Observer:
    """Values of observed quantities (states or derived quantities) and their gradients by u and p."""

    def __init__(self, system: CompiledSystem, quantities: list[str]):
        self.system = system
        self.quantities = list(quantities)
        for q in self.quantities:
            if q not in system.states and q not in system.derived_names:
                raise KeyError(q)

    @cached_property
    def _derived(self):
        system = self.system
        t, u, p, _ = system._plain
        out = {}
        for q in self.quantities:
            if q in system.states:
                continue
            expr = system.plain([system.derived_exprs[system.derived_names.index(q)]])[0]
            exprs = [expr] + [sp.diff(expr, s) for s in u] + [sp.diff(expr, s) for s in p]
            out[q] = lambdify([t, *u, *p], exprs, modules="numpy")
        return out

    def observe(self, q: str, run: SensitivityRun, p) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(values (T,), d/du (n, T), d/dp (n_params, T)) of quantity ``q`` along ``run``."""
        system, T = self.system, run.time.size
        n, P = system.n_states, len(system.parameters)
        if q in system.states:
            i = system.states.index(q)
            du = np.zeros((n, T))
            du[i] = 1.0
            return run.states[i], du, np.zeros((P, T))
        with np.errstate(all="ignore"):
            values = self._derived[q](run.time, *run.states, *np.asarray(p, dtype=float))  # numpy's numbers
        arr = np.array([np.broadcast_to(np.asarray(v, dtype=float), (T,)) for v in values])
        return arr[0], arr[1:1 + n], arr[1 + n:]
